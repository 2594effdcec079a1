"""Compiled event loop of the peak simulation (numba, ``cache=True``).

Arrays in, arrays out: the plain Python API (:mod:`peak.simulation`) draws the
arrivals, owns the random streams and turns the per-passenger and per-trip
rows into statistics; :mod:`tests.reference_peak` is the slow, obviously
correct twin that this loop must equal exactly on the same arrivals.

The model (``docs/peak_model.md`` writes it out):

* One owner of the clock: the loop takes, in turn, the earliest of the next
  arrival and the next scheduled event (a car's doors open at the lobby, a
  car's lobby dwell runs out, an allocation window closes). Events are a small
  calendar of (time, sequence number) entries, one per car and kind; equal
  times go by sequence number, and an event goes before an arrival at the
  same time, so a seed fixes the order of everything.
* A car's visits to the lobby are **trips**. A trip is *future* (the car is
  away, or has yet to open for it), *open* (doors open at the lobby, taking
  passengers) or *closed* (leaving). Every car starts parked at the lobby with
  its doors open, an open trip with nobody in it.
* Passengers are **committed** to a trip (conventional control: when they step
  into an open car; destination control: when they are allocated). At an open
  trip a committed passenger boards at once, one after another: boarding
  starts at max(the moment they are ready, the end of the previous boarding)
  and takes t_in. They are ready at max(allocation, doors open) - the end of
  their waiting time.
* A trip closes when it holds the departure load (the design load rounded
  up), at the end of the last boarding, or when the lobby dwell has run since
  its first boarding (then at the end of any boarding in progress). The doors
  close and the car starts: it leaves at close + t_c + t_sd and flies its trip
  (:func:`roundtrip.schedule.trip_schedule`: stops, doors, transfers, the real
  floor levels and jerk-limited flights); each passenger is out at the
  schedule's moment, and the car is back at the lobby at the end of the
  schedule; its doors are open t_o later, for its next trip.

Controls
--------
conventional
    Passengers queue at the lobby in arrival order; each steps into the open
    car that opened first (the lower car number on a tie) while it has room.
delayed allocation (a batch rule)
    Registrations are collected for a window; when it closes, the batch (the
    earliest registrations, up to the cars' room) is shared by the rule among
    the cars open to allocation: those at the lobby with their doors open, and
    those due to open within the next window, each with its remaining room.
    Those not placed wait for the next window (rounds repeat while anyone is
    waiting for a car). At most ``cars_open`` cars are open to one round: the
    earliest to open (ties by car).
immediate allocation (a policy)
    Each passenger, as they register, is given a car by the policy from the
    view of every car's first trip with room: the open trip at the lobby, the
    car's next trip, or, when that is full, the trip after it (whose opening is
    then known, because a full trip's boarding and flight are determined).
    With ``cars_open`` K below the cars, only the K of those trips that leave
    the lobby soonest (ties by car) are offered: the others show no room.
"""
from __future__ import annotations

from typing import NamedTuple

import numpy as np
from numba import njit, prange

from allocation.contract import CAR_VIEW, RULE_SCRATCH_FIXED, RuleBatches
from roundtrip.compile_options import WITHOUT_RUNTIME
from roundtrip.schedule import new_schedule, new_scratch, trip_schedule

CONVENTIONAL, DELAYED, IMMEDIATE = 0, 1, 2
FUTURE, OPEN, CLOSED = 0, 1, 2
# counters: the next sequence number, trips made, allocation rounds, an error code, the
# sequence number of the window
SEQ, N_TRIPS, N_ROUNDS, ERROR, WINDOW_SEQ, N_COUNTERS = range(6)
NO_ERROR, ERROR_RULE_PLACED_NOBODY, ERROR_POLICY_NO_CAR = 0, 1, 2
_MAX_IDLE_ROUNDS = 1000

i8, u8, f8 = np.int64, np.uint64, np.float64
#: One row per passenger.
PASSENGER = np.dtype([("car", i8), ("trip", i8), ("alloc_s", f8), ("ready_s", f8),
                      ("board_s", f8), ("alight_s", f8), ("next", i8)], align=True)
#: One row per trip (a car's visit to the lobby and the flight after it).
TRIP = np.dtype([("car", i8), ("state", i8), ("load", i8), ("stops", i8), ("mask", u8),
                 ("head", i8), ("tail", i8), ("next_trip", i8), ("open_s", f8),
                 ("first_board_s", f8), ("board_free_s", f8), ("depart_s", f8),
                 ("return_s", f8), ("next_open_s", f8)], align=True)
#: One row per car: its trips at the lobby and last, its door opening and dwell timer.
CAR = np.dtype([("head", i8), ("tail", i8), ("open_t", f8), ("open_seq", i8), ("timer_t", f8),
                ("timer_seq", i8), ("timer_trip", i8)], align=True)
_FIELDS_DOC = """
Passenger rows: ``car``, ``trip``; ``alloc_s`` committed to their trip; ``ready_s``
their car at the lobby, doors open for them; ``board_s`` starts to board;
``alight_s`` out at their floor (``next`` links the passengers of a trip).
Trip rows: ``car``; ``state`` (future, open, closed); ``load`` passengers committed
(at departure: aboard); ``stops`` above the lobby; ``mask`` their floors; ``open_s``
doors open at the lobby; ``first_board_s`` (inf: nobody); ``depart_s`` and
``return_s`` (nan: never left); the rest is the loop's bookkeeping.
"""


class PeakSetup(NamedTuple):
    """What the loop needs besides the trip timing."""

    n_cars: int
    departure_load: int        # persons
    lobby_dwell_s: float
    door_close_s: float
    start_delay_s: float
    mode: int                  # CONVENTIONAL, DELAYED, IMMEDIATE
    window_s: float            # delayed allocation window
    cars_open: int             # at most this many cars offered to one allocation


class Arrivals(NamedTuple):
    """The passengers of one run, in arrival order (all board at the lobby)."""

    time_s: np.ndarray         # float64, ascending
    destination: np.ndarray    # int64, floors 1 ... N


class PeakOut(NamedTuple):
    """One run's rows (see the field notes of :data:`PASSENGER` and :data:`TRIP`)."""

    passengers: np.ndarray     # PASSENGER, one per arrival
    trips: np.ndarray          # TRIP, at most passengers + cars
    counters: np.ndarray       # int64, N_COUNTERS


def new_out(passengers: int, cars: int) -> PeakOut:
    """Output rows for a run of ``passengers`` passengers and ``cars`` cars."""
    return PeakOut(empty_passengers(passengers), empty_trips(passengers + cars + 1),
                   np.zeros(N_COUNTERS, np.int64))


def empty_passengers(n: int) -> np.ndarray:
    rows = np.zeros(max(n, 1), dtype=PASSENGER)
    rows["car"] = rows["trip"] = rows["next"] = -1
    for f in ("alloc_s", "ready_s", "board_s", "alight_s"):
        rows[f] = np.nan
    return rows


def empty_trips(m: int) -> np.ndarray:
    rows = np.zeros(max(m, 1), dtype=TRIP)
    rows["car"] = rows["head"] = rows["tail"] = rows["next_trip"] = -1
    rows["open_s"] = rows["depart_s"] = rows["return_s"] = np.nan
    rows["first_board_s"] = rows["next_open_s"] = np.inf
    return rows


class _Buffers(NamedTuple):
    """Working arrays of one trip's flight."""

    orig: np.ndarray           # int64, departure load: zeros (everyone boards at the lobby)
    dest: np.ndarray           # int64
    scratch: object            # roundtrip.schedule.TripScratch
    sched: object              # roundtrip.schedule.ScheduleOut


@njit(cache=True, inline="always")
def _next_seq(counters):
    s = counters[SEQ]
    counters[SEQ] = s + 1
    return s


@njit(cache=True, inline="always")
def _new_trip(trips, counters, car, open_s, state):
    tr = counters[N_TRIPS]
    counters[N_TRIPS] += 1
    t = trips[tr]
    t["car"] = car
    t["state"] = state
    t["open_s"] = open_s
    t["board_free_s"] = open_s
    return tr


@njit(cache=True, **WITHOUT_RUNTIME)
def _fly(tr, dep, pax, trips, arrivals, timing, buf):
    """The closed trip ``tr`` leaves at ``dep``: each passenger's moment out, the return."""
    n = 0
    i = trips[tr]["head"]
    while i >= 0:
        buf.dest[n] = arrivals.destination[i]
        n += 1
        i = pax[i]["next"]
    entries, _ = trip_schedule(buf.orig[:n], buf.dest[:n], n, timing, buf.scratch, buf.sched)
    depart0 = buf.sched.depart_s[0]
    j = 0
    i = trips[tr]["head"]
    while i >= 0:
        pax[i]["alight_s"] = dep + (buf.sched.alight_s[j] - depart0)
        j += 1
        i = pax[i]["next"]
    ret = dep + (buf.sched.arrive_s[entries - 1] - depart0)
    t = trips[tr]
    t["depart_s"] = dep
    t["return_s"] = ret
    t["stops"] = entries - 2
    t["next_open_s"] = ret + timing.door_open_s


@njit(cache=True, inline="always")
def _successor(tr, trips, cars, counters):
    """The car's trip after ``tr`` (made when first needed; its opening is known)."""
    nxt = trips[tr]["next_trip"]
    if nxt < 0:
        car = trips[tr]["car"]
        nxt = _new_trip(trips, counters, car, trips[tr]["next_open_s"], FUTURE)
        trips[tr]["next_trip"] = nxt
        if cars[car]["tail"] == tr:
            cars[car]["tail"] = nxt
    return nxt


@njit(cache=True, inline="always")
def _board(i, tr, pax, trips, cars, counters, setup, t_in):
    """Committed passenger ``i`` boards the open trip ``tr``: ready at max(allocation, doors
    open), boards from max(ready, end of the previous boarding). The trip's first boarding
    starts its dwell timer, unless it is already full."""
    t = trips[tr]
    ready = max(pax[i]["alloc_s"], t["open_s"])
    b = max(ready, t["board_free_s"])
    t["board_free_s"] = b + t_in
    pax[i]["ready_s"] = ready
    pax[i]["board_s"] = b
    if t["first_board_s"] == np.inf:
        t["first_board_s"] = b
        if t["load"] < setup.departure_load:
            c = cars[t["car"]]
            c["timer_t"] = b + setup.lobby_dwell_s
            c["timer_seq"] = _next_seq(counters)
            c["timer_trip"] = tr


@njit(cache=True, **WITHOUT_RUNTIME)
def _close(tr, t_close, pax, trips, cars, counters, arrivals, timing, setup, buf):
    """The open trip ``tr`` takes no one more from ``t_close``: the doors close, the car
    starts and flies; its next trip becomes the car's trip at the lobby, its opening is
    scheduled and the trip's dwell timer, if any, is cancelled."""
    trips[tr]["state"] = CLOSED
    dep = (t_close + setup.door_close_s) + setup.start_delay_s
    _fly(tr, dep, pax, trips, arrivals, timing, buf)
    car = trips[tr]["car"]
    nxt = _successor(tr, trips, cars, counters)
    c = cars[car]
    c["head"] = nxt
    if c["timer_trip"] == tr:
        c["timer_t"] = np.inf
        c["timer_trip"] = -1
    c["open_t"] = trips[nxt]["open_s"]
    c["open_seq"] = _next_seq(counters)


@njit(cache=True, **WITHOUT_RUNTIME)
def _commit(i, tr, t, pax, trips, cars, counters, arrivals, timing, setup, buf):
    """Passenger ``i`` is committed to trip ``tr`` at ``t``: boards at once if it is open;
    a trip made full closes (open) or has its departure fixed (future: its committed
    passengers board from its opening one after another, as :func:`_board` will board
    them, and the car leaves at the end)."""
    row = trips[tr]
    p = pax[i]
    p["alloc_s"] = t
    p["car"] = row["car"]
    p["trip"] = tr
    if row["tail"] >= 0:
        pax[row["tail"]]["next"] = i
    else:
        row["head"] = i
    row["tail"] = i
    row["load"] += 1
    row["mask"] |= np.uint64(1) << np.uint64(arrivals.destination[i])
    if row["state"] == OPEN:
        _board(i, tr, pax, trips, cars, counters, setup, timing.transfer_in_s)
        if row["load"] >= setup.departure_load:
            _close(tr, row["board_free_s"], pax, trips, cars, counters, arrivals, timing,
                   setup, buf)
    elif row["load"] >= setup.departure_load:
        bf = row["open_s"]
        j = row["head"]
        while j >= 0:
            bf = max(max(pax[j]["alloc_s"], row["open_s"]), bf) + timing.transfer_in_s
            j = pax[j]["next"]
        _fly(tr, (bf + setup.door_close_s) + setup.start_delay_s, pax, trips, arrivals,
             timing, buf)


@njit(cache=True, **WITHOUT_RUNTIME)
def _open(c, t, pax, trips, cars, counters, arrivals, timing, setup, buf):
    """Car ``c``'s doors open at the lobby at ``t`` for its next trip: its committed
    passengers board, one after another; a full trip closes at the end."""
    cars[c]["open_t"] = np.inf
    tr = cars[c]["head"]
    row = trips[tr]
    row["state"] = OPEN
    row["board_free_s"] = t
    i = row["head"]
    while i >= 0:
        _board(i, tr, pax, trips, cars, counters, setup, timing.transfer_in_s)
        i = pax[i]["next"]
    if row["load"] >= setup.departure_load:
        _close(tr, row["board_free_s"], pax, trips, cars, counters, arrivals, timing, setup, buf)


@njit(cache=True, inline="always")
def _view(v, row, t, setup):
    """The car view (allocation.contract.CAR_VIEW) of the trip ``row`` at ``t``."""
    v["room"] = setup.departure_load - row["load"]
    v["load"] = row["load"]
    v["up_stops"] = row["mask"]
    v["down_stops"] = np.uint64(0)
    v["opens_in_s"] = row["open_s"] - t
    first = row["first_board_s"]
    if row["state"] == OPEN:
        v["leaves_in_s"] = (first + setup.lobby_dwell_s - t) if first < np.inf else setup.lobby_dwell_s
    else:
        v["leaves_in_s"] = (row["open_s"] - t) + setup.lobby_dwell_s


class _Lobby(NamedTuple):
    """Working arrays of destination control (made by :func:`run`)."""

    views: np.ndarray          # CAR_VIEW, one per car
    ints: np.ndarray           # int64 [2, cars]: the trips open to one allocation, their room
    pend: np.ndarray           # int64: registrations waiting for a car
    batch: np.ndarray          # int64 [3, n]: a batch's origins (0), destinations, cars
    b_off: np.ndarray          # int64 [0, n]
    c_range: np.ndarray        # int64 [0, k]
    rule_scratch: np.ndarray   # int64
    window: np.ndarray         # float64 [time the window closes]


@njit(cache=True)
def run(arrivals, timing, setup, rule, rule_table, policy, policy_table, out):
    """One run: makes the working arrays, then runs :func:`_loop` over them."""
    N = arrivals.time_s.shape[0]
    L = setup.n_cars
    D = setup.departure_load
    n_levels = timing.flight_s.shape[0]
    cars = np.zeros(L, dtype=CAR)
    for c in range(L):
        cars[c]["open_t"] = np.inf
        cars[c]["timer_t"] = np.inf
        cars[c]["timer_trip"] = -1
    buf = _Buffers(np.zeros(max(D, 1), np.int64), np.zeros(max(D, 1), np.int64),
                   new_scratch(D, n_levels), new_schedule(D, n_levels))
    n1 = max(N, 1)
    lobby = _Lobby(np.zeros(L, dtype=CAR_VIEW), np.zeros((2, L), np.int64),
                   np.empty(n1, np.int64), np.zeros((3, n1), np.int64), np.zeros(2, np.int64),
                   np.zeros(2, np.int64), np.empty(4 * n1 + 5 * L + RULE_SCRATCH_FIXED, np.int64),
                   np.full(1, np.inf))
    _loop(arrivals, timing, setup, rule, rule_table, policy, policy_table, out.passengers,
          out.trips, cars, out.counters, buf, lobby)


@njit(cache=True, **WITHOUT_RUNTIME)
def _loop(arrivals, timing, setup, rule, rule_table, policy, policy_table, pax, trips, cars,
          counters, buf, lobby):
    """The event loop (allocates nothing; compiled without the reference-counting runtime,
    see :mod:`roundtrip.compile_options`)."""
    N = arrivals.time_s.shape[0]
    L = setup.n_cars
    D = setup.departure_load
    W = setup.window_s
    counters[:] = 0
    for c in range(L):                        # every car parked at the lobby, doors open
        tr = _new_trip(trips, counters, c, 0.0, OPEN)
        cars[c]["head"] = tr
        cars[c]["tail"] = tr
    views = lobby.views
    cand = lobby.ints[0]
    room_left = lobby.ints[1]
    pend = lobby.pend
    n_pend = 0
    b_orig = lobby.batch[0]
    b_dest = lobby.batch[1]
    b_car = lobby.batch[2]
    window = lobby.window
    idle_rounds = 0
    q_head = 0                                # conventional: the lobby queue is the
    q_tail = 0                                # arrivals q_head ... q_tail - 1
    a = 0
    while True:
        # ------------------------------------------------ the next event
        ev_t = np.inf
        ev_seq = 0
        kind = -1
        ev_car = -1
        for c in range(L):
            row = cars[c]
            if row["open_t"] < ev_t or (row["open_t"] == ev_t and row["open_seq"] < ev_seq):
                ev_t, ev_seq, kind, ev_car = row["open_t"], row["open_seq"], 0, c
            if row["timer_t"] < ev_t or (row["timer_t"] == ev_t and row["timer_seq"] < ev_seq):
                ev_t, ev_seq, kind, ev_car = row["timer_t"], row["timer_seq"], 1, c
        if window[0] < ev_t or (window[0] == ev_t and counters[WINDOW_SEQ] < ev_seq):
            ev_t, ev_seq, kind = window[0], counters[WINDOW_SEQ], 2
        if a < N and arrivals.time_s[a] < ev_t:
            kind = 3
        if kind < 0:
            break
        if kind == 3:
            # ------------------------------------------------ a passenger arrives
            i = a
            a += 1
            t = arrivals.time_s[i]
            if setup.mode == CONVENTIONAL:
                q_tail = i + 1
            elif setup.mode == DELAYED:
                pend[n_pend] = i
                n_pend += 1
                if window[0] == np.inf:
                    window[0] = t + W
                    counters[WINDOW_SEQ] = _next_seq(counters)
                continue
            else:
                # immediate: each car's first trip with room (its trip after a full one)
                for c in range(L):
                    row = trips[cars[c]["tail"]]
                    if row["load"] < D:
                        _view(views[c], row, t, setup)
                    else:
                        v = views[c]
                        v["room"] = D
                        v["load"] = 0
                        v["up_stops"] = np.uint64(0)
                        v["down_stops"] = np.uint64(0)
                        v["opens_in_s"] = row["next_open_s"] - t
                        v["leaves_in_s"] = (row["next_open_s"] - t) + setup.lobby_dwell_s
                if setup.cars_open < L:       # only the K soonest-leaving are offered
                    rank = cand                   # (free here: cand serves delayed rounds)
                    for c in range(L):
                        rank[c] = 0
                        for d in range(L):
                            if views[d]["leaves_in_s"] < views[c]["leaves_in_s"] or (
                                    views[d]["leaves_in_s"] == views[c]["leaves_in_s"] and d < c):
                                rank[c] += 1
                    for c in range(L):
                        if rank[c] >= setup.cars_open:
                            views[c]["room"] = 0
                c = policy(0, arrivals.destination[i], views, timing, policy_table)
                if c < 0 or c >= L:
                    counters[ERROR] = ERROR_POLICY_NO_CAR
                    break
                tr = cars[c]["tail"]
                if trips[tr]["load"] >= D:
                    tr = _successor(tr, trips, cars, counters)
                _commit(i, tr, t, pax, trips, cars, counters, arrivals, timing, setup, buf)
                continue
        elif kind == 0:
            # ------------------------------------------------ a car's doors open at the lobby
            t = ev_t
            _open(ev_car, t, pax, trips, cars, counters, arrivals, timing, setup, buf)
        elif kind == 1:
            # ------------------------------------------------ a lobby dwell runs out
            t = ev_t
            tr = cars[ev_car]["timer_trip"]
            cars[ev_car]["timer_t"] = np.inf
            cars[ev_car]["timer_trip"] = -1
            if trips[tr]["state"] == OPEN:
                _close(tr, max(t, trips[tr]["board_free_s"]), pax, trips, cars, counters,
                       arrivals, timing, setup, buf)
            continue
        else:
            # ------------------------------------------------ an allocation window closes
            t = ev_t
            window[0] = np.inf
            counters[N_ROUNDS] += 1
            k = 0
            for c in range(L):                # the cars open to allocation, by opening
                tr = cars[c]["head"]
                if trips[tr]["load"] < D and (trips[tr]["state"] == OPEN
                                              or trips[tr]["open_s"] <= t + W):
                    pos = k
                    while pos > 0 and trips[cand[pos - 1]]["open_s"] > trips[tr]["open_s"]:
                        cand[pos] = cand[pos - 1]
                        pos -= 1
                    cand[pos] = tr
                    k += 1
            k = min(k, setup.cars_open)       # the earliest to open, at most cars_open
            total_room = 0
            for j in range(k):
                _view(views[j], trips[cand[j]], t, setup)
                room_left[j] = D - trips[cand[j]]["load"]
                total_room += room_left[j]
            n = min(n_pend, total_room)
            placed = 0
            if n > 0:
                for j in range(n):
                    b_dest[j] = arrivals.destination[pend[j]]
                    b_car[j] = -1
                lobby.b_off[1] = n
                lobby.c_range[1] = k
                rule(RuleBatches(b_orig[:n], b_dest[:n], lobby.b_off, views[:k],
                                 lobby.c_range[:1], lobby.c_range[1:]),
                     timing, rule_table, lobby.rule_scratch, b_car[:n])
                for j in range(n):
                    cj = b_car[j]
                    if 0 <= cj < k and room_left[cj] > 0:
                        room_left[cj] -= 1
                        _commit(pend[j], cand[cj], t, pax, trips, cars, counters, arrivals,
                                timing, setup, buf)
                        pend[j] = -1
                        placed += 1
                m = 0                         # the rest wait, in order of registration
                for j in range(n_pend):
                    if pend[j] >= 0:
                        pend[m] = pend[j]
                        m += 1
                n_pend = m
            idle_rounds = idle_rounds + 1 if (placed == 0 and total_room > 0) else 0
            if idle_rounds > _MAX_IDLE_ROUNDS:
                counters[ERROR] = ERROR_RULE_PLACED_NOBODY
                break
            if n_pend > 0:
                window[0] = t + W
                counters[WINDOW_SEQ] = _next_seq(counters)
            continue
        # ------------------------------------------------ conventional: fill the open cars
        if setup.mode == CONVENTIONAL:
            while q_head < q_tail:
                best = -1
                for c in range(L):            # the open car that opened first
                    tr = cars[c]["head"]
                    if trips[tr]["state"] == OPEN and (
                            best < 0 or trips[tr]["open_s"] < trips[best]["open_s"]):
                        best = tr
                if best < 0:
                    break
                _commit(q_head, best, t, pax, trips, cars, counters, arrivals, timing, setup,
                        buf)
                q_head += 1


@njit(cache=True, nogil=True)
def run_range(times, destinations, offsets, timing, setup, rule, rule_table, policy,
              policy_table, trip_offsets, passengers, trip_rows, counters, first, last):
    """Replications ``first`` ... ``last - 1``: replication r's passengers are
    times/destinations[offsets[r]:offsets[r+1]], its rows passengers[offsets[r]:...] and
    trip_rows[trip_offsets[r]:...], its counters counters[r]. Each replication depends on
    its own arrivals only, so a pool of threads may run ranges side by side (the GIL is
    released) and the numbers are the same on any thread count."""
    for r in range(first, last):
        s, e = offsets[r], offsets[r + 1]
        ts, te = trip_offsets[r], trip_offsets[r + 1]
        run(Arrivals(times[s:e], destinations[s:e]), timing, setup, rule, rule_table, policy,
            policy_table, PeakOut(passengers[s:e], trip_rows[ts:te], counters[r]))
