"""A slow, obviously correct plain-Python twin of the peak simulation (docs/peak_model.md).

It follows the written model literally, with Python objects: a heap of events
(the standard library's heapq), cars with their trips, a lobby queue, and its
own stop-by-stop trip timing written from docs/trip_model.md. It imports
nothing from ``peak`` or ``roundtrip``'s kernels: it is given the flight-time
table, the times and the plain rule or policy function. The compiled loop in
peak/_kernel.py must give exactly the same rows on the same arrivals.
"""
from __future__ import annotations

import heapq
import math
from dataclasses import dataclass, field

import numpy as np

OPEN_EVENT, TIMER_EVENT, WINDOW_EVENT = 0, 1, 2
CAR_VIEW_FIELDS = ("room", "load", "up_stops", "down_stops", "leaves_in_s", "opens_in_s")


@dataclass
class Trip:
    number: int
    car: int
    open_s: float
    state: str                         # "future", "open", "closed"
    passengers: list = field(default_factory=list)
    board_free: float = 0.0
    first_board: float = math.inf
    depart_s: float = math.nan
    return_s: float = math.nan
    next_open: float = math.inf
    successor: "Trip | None" = None
    stops: int = 0


@dataclass
class Times:
    """What the twin needs to know of the group (seconds, persons)."""

    flight_s: list                     # flight table, floors 0 ... N
    door_open_s: float
    door_close_s: float
    start_delay_s: float
    transfer_in_s: float
    transfer_out_s: float
    departure_load: int
    lobby_dwell_s: float

    @property
    def stop_overhead_s(self) -> float:
        return self.door_open_s + self.door_close_s + self.start_delay_s


def flight_of_up_trip(destinations, times: Times):
    """The up-peak trip from docs/trip_model.md, stop by stop: every passenger boards at
    the lobby; stops ascending; back to the lobby. Returns (leave lobby, [(floor, arrive)],
    back at lobby, moment out of each passenger) with time 0 the start of the lobby stop."""
    o, t_in, t_out = times.stop_overhead_s, times.transfer_in_s, times.transfer_out_s
    n = len(destinations)
    floors = sorted(set(destinations))
    leave = 0.0 + 1 * o + n * t_in + 0 * t_out
    arrive = {}
    flown = 0.0
    pos = 0
    alighted = 0
    for s, f in enumerate(floors, start=1):
        flown += times.flight_s[pos][f]
        pos = f
        arrive[f] = flown + s * o + n * t_in + alighted * t_out
        alighted += destinations.count(f)
    flown += times.flight_s[pos][0]
    back = flown + (len(floors) + 1) * o + n * t_in + alighted * t_out
    out_at, seen = [], {}
    for f in destinations:
        seen[f] = seen.get(f, 0) + 1
        out_at.append(arrive[f] + times.door_open_s + seen[f] * t_out)
    return leave, back, out_at, len(floors)


class ReferencePeak:
    """One run of the model. ``kind`` is "conventional", "delayed" (with ``rule``, the plain
    batch-rule function, and ``rule_table``) or "immediate" (``policy``, ``policy_table``)."""

    def __init__(self, arrival_s, destinations, cars: int, times: Times, kind: str, *,
                 rule=None, rule_table=None, policy=None, policy_table=None, timing=None,
                 window_s: float = 5.0, cars_open: int | None = None):
        self.arrival_s = [float(x) for x in arrival_s]
        self.dest = [int(x) for x in destinations]
        self.L, self.times, self.kind = cars, times, kind
        self.rule, self.rule_table = rule, rule_table
        self.policy, self.policy_table, self.timing = policy, policy_table, timing
        self.window_s = window_s
        self.cars_open = cars if cars_open is None else cars_open
        n = len(self.arrival_s)
        self.alloc = [math.nan] * n
        self.ready = [math.nan] * n
        self.board = [math.nan] * n
        self.alight = [math.nan] * n
        self.car_of = [-1] * n
        self.trip_of = [-1] * n
        self.trips: list[Trip] = []
        self.events = []
        self.seq = 0
        self.timer_token = [None] * cars
        self.head = []                 # each car's trip at the lobby, or its next to open
        self.tail = []                 # each car's last trip

    # ------------------------------------------------------------ bookkeeping
    def _next_seq(self):
        s = self.seq
        self.seq += 1
        return s

    def _new_trip(self, car, open_s, state):
        trip = Trip(len(self.trips), car, open_s, state, board_free=open_s)
        self.trips.append(trip)
        return trip

    def _successor(self, trip):
        if trip.successor is None:
            trip.successor = self._new_trip(trip.car, trip.next_open, "future")
            if self.tail[trip.car] is trip:
                self.tail[trip.car] = trip.successor
        return trip.successor

    def _fly(self, trip, depart):
        dests = [self.dest[i] for i in trip.passengers]
        leave, back, out_at, stops = flight_of_up_trip(dests, self.times)
        for i, t in zip(trip.passengers, out_at):
            self.alight[i] = depart + (t - leave)
        trip.depart_s = depart
        trip.return_s = depart + (back - leave)
        trip.next_open = trip.return_s + self.times.door_open_s
        trip.stops = stops

    def _board(self, i, trip):
        ready = max(self.alloc[i], trip.open_s)
        b = max(ready, trip.board_free)
        trip.board_free = b + self.times.transfer_in_s
        self.ready[i], self.board[i] = ready, b
        if trip.first_board == math.inf:
            trip.first_board = b
            if len(trip.passengers) < self.times.departure_load:
                token = object()
                self.timer_token[trip.car] = (token, trip)
                heapq.heappush(self.events, (b + self.times.lobby_dwell_s, self._next_seq(),
                                             TIMER_EVENT, trip.car, token))

    def _close(self, trip, t_close):
        trip.state = "closed"
        self._fly(trip, (t_close + self.times.door_close_s) + self.times.start_delay_s)
        nxt = self._successor(trip)
        self.head[trip.car] = nxt
        if self.timer_token[trip.car] is not None and self.timer_token[trip.car][1] is trip:
            self.timer_token[trip.car] = None
        heapq.heappush(self.events, (nxt.open_s, self._next_seq(), OPEN_EVENT, trip.car, None))

    def _commit(self, i, trip, t):
        self.alloc[i], self.car_of[i], self.trip_of[i] = t, trip.car, trip.number
        trip.passengers.append(i)
        full = len(trip.passengers) >= self.times.departure_load
        if trip.state == "open":
            self._board(i, trip)
            if full:
                self._close(trip, trip.board_free)
        elif full:                     # its boarding and flight are now fixed
            bf = trip.open_s
            for j in trip.passengers:
                bf = max(max(self.alloc[j], trip.open_s), bf) + self.times.transfer_in_s
            self._fly(trip, (bf + self.times.door_close_s) + self.times.start_delay_s)

    def _view(self, trip, t):
        tm = self.times
        mask = 0
        for i in trip.passengers:
            mask |= 1 << self.dest[i]
        if trip.state == "open":
            leaves = (trip.first_board + tm.lobby_dwell_s - t) if trip.first_board < math.inf \
                else tm.lobby_dwell_s
        else:
            leaves = (trip.open_s - t) + tm.lobby_dwell_s
        return (tm.departure_load - len(trip.passengers), len(trip.passengers), mask, 0, leaves,
                trip.open_s - t)

    @staticmethod
    def _car_views(rows):
        from allocation.contract import CAR_VIEW
        v = np.zeros(len(rows), dtype=CAR_VIEW)
        for k, row in enumerate(rows):
            for name, x in zip(CAR_VIEW_FIELDS, row):
                v[k][name] = x
        return v

    # ------------------------------------------------------------ the run
    def run(self):
        D = self.times.departure_load
        for c in range(self.L):
            trip = self._new_trip(c, 0.0, "open")
            self.head.append(trip)
            self.tail.append(trip)
        queue = []                     # conventional: arrivals waiting, in order
        pending = []                   # delayed: registrations waiting for a car
        window_open = False
        a = 0
        n = len(self.arrival_s)
        while True:
            while self.events and self.events[0][2] == TIMER_EVENT and (
                    self.timer_token[self.events[0][3]] is None
                    or self.timer_token[self.events[0][3]][0] is not self.events[0][4]):
                heapq.heappop(self.events)          # a cancelled dwell timer
            next_event = self.events[0][0] if self.events else math.inf
            if a < n and self.arrival_s[a] < next_event:
                i, t = a, self.arrival_s[a]
                a += 1
                if self.kind == "conventional":
                    queue.append(i)
                elif self.kind == "delayed":
                    pending.append(i)
                    if not window_open:
                        window_open = True
                        heapq.heappush(self.events, (t + self.window_s, self._next_seq(),
                                                     WINDOW_EVENT, -1, None))
                    continue
                else:
                    rows = []
                    for c in range(self.L):
                        tr = self.tail[c]
                        if len(tr.passengers) < D:
                            rows.append(self._view(tr, t))
                        else:
                            rows.append((D, 0, 0, 0, (tr.next_open - t) + self.times.lobby_dwell_s,
                                         tr.next_open - t))
                    if self.cars_open < self.L:      # the K soonest-leaving, ties by car
                        soonest = sorted(range(self.L), key=lambda c: (rows[c][4], c))
                        for c in soonest[self.cars_open:]:
                            rows[c] = (0,) + tuple(rows[c][1:])
                    c = int(self.policy(0, self.dest[i], self._car_views(rows), self.timing,
                                        self.policy_table))
                    tr = self.tail[c]
                    if len(tr.passengers) >= D:
                        tr = self._successor(tr)
                    self._commit(i, tr, t)
                    continue
            elif self.events:
                t, _, kind, c, token = heapq.heappop(self.events)
                if kind == OPEN_EVENT:
                    trip = self.head[c]
                    trip.state = "open"
                    trip.board_free = t
                    for i in trip.passengers:
                        self._board(i, trip)
                    if len(trip.passengers) >= D:
                        self._close(trip, trip.board_free)
                elif kind == TIMER_EVENT:
                    trip = self.timer_token[c][1]
                    self.timer_token[c] = None
                    if trip.state == "open":
                        self._close(trip, max(t, trip.board_free))
                    continue
                else:
                    window_open = False
                    self._allocation_round(t, pending)
                    if pending:
                        window_open = True
                        heapq.heappush(self.events, (t + self.window_s, self._next_seq(),
                                                     WINDOW_EVENT, -1, None))
                    continue
            else:
                break
            if self.kind == "conventional":         # into the open car that opened first
                while queue:
                    open_trips = [self.head[c] for c in range(self.L)
                                  if self.head[c].state == "open"]
                    if not open_trips:
                        break
                    best = min(open_trips, key=lambda tr: (tr.open_s, tr.car))
                    self._commit(queue.pop(0), best, t)
        return self

    def _allocation_round(self, t, pending):
        D = self.times.departure_load
        cands = [self.head[c] for c in range(self.L)
                 if len(self.head[c].passengers) < D and (
                     self.head[c].state == "open" or self.head[c].open_s <= t + self.window_s)]
        cands.sort(key=lambda tr: (tr.open_s, tr.car))
        cands = cands[:self.cars_open]
        room = [D - len(tr.passengers) for tr in cands]
        batch = pending[:min(len(pending), sum(room))]
        if not batch:
            return
        views = self._car_views([self._view(tr, t) for tr in cands])
        car_out = np.full(len(batch), -1, dtype=np.int64)
        from allocation.contract import scratch_size
        scratch = np.zeros(scratch_size(len(batch), len(cands)), dtype=np.int64)
        self.rule(np.zeros(len(batch), dtype=np.int64),
                  np.array([self.dest[i] for i in batch], dtype=np.int64), views, self.timing,
                  self.rule_table, scratch, car_out)
        placed = set()
        for j, i in enumerate(batch):
            c = int(car_out[j])
            if 0 <= c < len(cands) and room[c] > 0:
                room[c] -= 1
                self._commit(i, cands[c], t)
                placed.add(i)
        pending[:] = [i for i in pending if i not in placed]
