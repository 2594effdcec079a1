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
    waiting for a car).
immediate allocation (a policy)
    Each passenger, as they register, is given a car by the policy from the
    view of every car's first trip with room: the open trip at the lobby, the
    car's next trip, or, when that is full, the trip after it (whose opening is
    then known, because a full trip's boarding and flight are determined).
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
# out.counters columns
N_TRIPS, N_ROUNDS, ERROR, N_COUNTERS = 0, 1, 2, 3
NO_ERROR, ERROR_RULE_PLACED_NOBODY, ERROR_POLICY_NO_CAR = 0, 1, 2
_MAX_IDLE_ROUNDS = 1000


class PeakSetup(NamedTuple):
    """What the loop needs besides the trip timing."""

    n_cars: int
    departure_load: int        # persons
    lobby_dwell_s: float
    door_close_s: float
    start_delay_s: float
    mode: int                  # CONVENTIONAL, DELAYED, IMMEDIATE
    window_s: float            # delayed allocation window


class Arrivals(NamedTuple):
    """The passengers of one run, in arrival order (all board at the lobby)."""

    time_s: np.ndarray         # float64, ascending
    destination: np.ndarray    # int64, floors 1 ... N


class PeakOut(NamedTuple):
    """One row per passenger and one per trip (see :func:`new_out`)."""

    car: np.ndarray            # int64, per passenger
    trip: np.ndarray           # int64
    alloc_s: np.ndarray        # float64: committed to their trip
    ready_s: np.ndarray        # float64: their car at the lobby, doors open for them
    board_s: np.ndarray        # float64: starts to board
    alight_s: np.ndarray       # float64: out at their floor
    trip_car: np.ndarray       # int64, per trip
    trip_load: np.ndarray      # int64: passengers at departure
    trip_stops: np.ndarray     # int64: stops above the lobby
    trip_open_s: np.ndarray    # float64: doors open at the lobby
    trip_first_board_s: np.ndarray  # float64: first boarding (inf: nobody)
    trip_depart_s: np.ndarray  # float64: leaves the lobby (nan: never left)
    trip_return_s: np.ndarray  # float64: back at the lobby (nan: never left)
    counters: np.ndarray       # int64, N_COUNTERS


def new_out(passengers: int, cars: int) -> PeakOut:
    """Output arrays for a run of ``passengers`` passengers and ``cars`` cars."""
    n = max(passengers, 1)
    m = passengers + cars + 1           # every trip but each car's last carries someone
    f = np.full
    return PeakOut(f(n, -1, np.int64), f(n, -1, np.int64), f(n, np.nan), f(n, np.nan),
                   f(n, np.nan), f(n, np.nan), f(m, -1, np.int64), np.zeros(m, np.int64),
                   np.zeros(m, np.int64), f(m, np.nan), f(m, np.inf), f(m, np.nan),
                   f(m, np.nan), np.zeros(N_COUNTERS, np.int64))


class _Trips(NamedTuple):
    state: np.ndarray          # FUTURE, OPEN, CLOSED
    load: np.ndarray           # committed passengers
    mask: np.ndarray           # uint64 destinations committed
    head: np.ndarray           # first committed passenger (-1)
    tail: np.ndarray           # last committed passenger (-1)
    board_free: np.ndarray     # end of the last boarding
    next_trip: np.ndarray      # the car's trip after this one (-1)
    next_open: np.ndarray      # when the doors open for that trip (inf: unknown)


class _Calendar(NamedTuple):
    """The scheduled events: per car its next door opening and its dwell timer, and the
    allocation window; each entry with its sequence number (ties go by it)."""

    open_t: np.ndarray         # float64, per car (inf: none)
    open_seq: np.ndarray       # int64
    timer_t: np.ndarray        # float64, per car (inf: none)
    timer_seq: np.ndarray      # int64
    timer_trip: np.ndarray     # int64: the trip the timer belongs to
    window: np.ndarray         # float64 [time, sequence number]
    seq: np.ndarray            # int64 [the next sequence number]


class _Work(NamedTuple):
    """What the helpers of the loop share (one record, so their signatures stay short)."""

    trips: _Trips
    cal: _Calendar
    pax_next: np.ndarray       # the next passenger committed to the same trip (-1)
    car_head: np.ndarray       # per car: the trip at the lobby, or the next to open
    car_tail: np.ndarray       # per car: the last trip of its chain
    buf_orig: np.ndarray       # a trip's passengers for the schedule
    buf_dest: np.ndarray
    scratch: object            # roundtrip.schedule.TripScratch
    sched: object              # roundtrip.schedule.ScheduleOut


@njit(cache=True, inline="always")
def _next_seq(cal):
    s = cal.seq[0]
    cal.seq[0] = s + 1
    return s


@njit(cache=True, inline="always")
def _new_trip(w, out, car, open_s, state):
    tr = out.counters[N_TRIPS]
    out.counters[N_TRIPS] += 1
    out.trip_car[tr] = car
    out.trip_open_s[tr] = open_s
    w.trips.state[tr] = state
    w.trips.board_free[tr] = open_s
    return tr


@njit(cache=True, inline="always")
def _fly(tr, dep, w, out, arrivals, timing):
    """The closed trip ``tr`` leaves at ``dep``: each passenger's moment out, the return."""
    trips = w.trips
    n = 0
    i = trips.head[tr]
    while i >= 0:
        w.buf_dest[n] = arrivals.destination[i]
        n += 1
        i = w.pax_next[i]
    entries, _ = trip_schedule(w.buf_orig[:n], w.buf_dest[:n], n, timing, w.scratch, w.sched)
    depart0 = w.sched.depart_s[0]
    j = 0
    i = trips.head[tr]
    while i >= 0:
        out.alight_s[i] = dep + (w.sched.alight_s[j] - depart0)
        j += 1
        i = w.pax_next[i]
    ret = dep + (w.sched.arrive_s[entries - 1] - depart0)
    out.trip_depart_s[tr] = dep
    out.trip_return_s[tr] = ret
    out.trip_load[tr] = n
    out.trip_stops[tr] = entries - 2
    trips.next_open[tr] = ret + timing.door_open_s


@njit(cache=True, inline="always")
def _successor(tr, w, out):
    """The car's trip after ``tr`` (made when first needed; its opening is known)."""
    nxt = w.trips.next_trip[tr]
    if nxt < 0:
        car = out.trip_car[tr]
        nxt = _new_trip(w, out, car, w.trips.next_open[tr], FUTURE)
        w.trips.next_trip[tr] = nxt
        if w.car_tail[car] == tr:
            w.car_tail[car] = nxt
    return nxt


@njit(cache=True, inline="always")
def _board(i, tr, w, out, setup, t_in):
    """Committed passenger ``i`` boards the open trip ``tr``: ready at max(allocation, doors
    open), boards from max(ready, end of the previous boarding). The trip's first boarding
    starts its dwell timer, unless it is already full."""
    trips = w.trips
    ready = max(out.alloc_s[i], out.trip_open_s[tr])
    b = max(ready, trips.board_free[tr])
    trips.board_free[tr] = b + t_in
    out.ready_s[i] = ready
    out.board_s[i] = b
    if out.trip_first_board_s[tr] == np.inf:
        out.trip_first_board_s[tr] = b
        if trips.load[tr] < setup.departure_load:
            car = out.trip_car[tr]
            w.cal.timer_t[car] = b + setup.lobby_dwell_s
            w.cal.timer_seq[car] = _next_seq(w.cal)
            w.cal.timer_trip[car] = tr


@njit(cache=True, inline="always")
def _close(tr, t_close, w, out, arrivals, timing, setup):
    """The open trip ``tr`` takes no one more from ``t_close``: the doors close, the car
    starts and flies; its next trip becomes the car's trip at the lobby, its opening is
    scheduled and the trip's dwell timer, if any, is cancelled."""
    w.trips.state[tr] = CLOSED
    dep = (t_close + setup.door_close_s) + setup.start_delay_s
    _fly(tr, dep, w, out, arrivals, timing)
    car = out.trip_car[tr]
    nxt = _successor(tr, w, out)
    w.car_head[car] = nxt
    if w.cal.timer_trip[car] == tr:
        w.cal.timer_t[car] = np.inf
        w.cal.timer_trip[car] = -1
    w.cal.open_t[car] = out.trip_open_s[nxt]
    w.cal.open_seq[car] = _next_seq(w.cal)


@njit(cache=True, inline="always")
def _commit(i, tr, t, w, out, arrivals, timing, setup):
    """Passenger ``i`` is committed to trip ``tr`` at ``t``: boards at once if it is open;
    a trip made full closes (open) or has its departure fixed (future: its committed
    passengers board from its opening one after another, as :func:`_board` will board
    them, and the car leaves at the end)."""
    trips = w.trips
    out.alloc_s[i] = t
    out.car[i] = out.trip_car[tr]
    out.trip[i] = tr
    if trips.tail[tr] >= 0:
        w.pax_next[trips.tail[tr]] = i
    else:
        trips.head[tr] = i
    trips.tail[tr] = i
    trips.load[tr] += 1
    trips.mask[tr] |= np.uint64(1) << np.uint64(arrivals.destination[i])
    if trips.state[tr] == OPEN:
        _board(i, tr, w, out, setup, timing.transfer_in_s)
        if trips.load[tr] >= setup.departure_load:
            _close(tr, trips.board_free[tr], w, out, arrivals, timing, setup)
    elif trips.load[tr] >= setup.departure_load:
        bf = out.trip_open_s[tr]
        j = trips.head[tr]
        while j >= 0:
            bf = max(max(out.alloc_s[j], out.trip_open_s[tr]), bf) + timing.transfer_in_s
            j = w.pax_next[j]
        _fly(tr, (bf + setup.door_close_s) + setup.start_delay_s, w, out, arrivals, timing)


@njit(cache=True, inline="always")
def _open(c, t, w, out, arrivals, timing, setup):
    """Car ``c``'s doors open at the lobby at ``t`` for its next trip: its committed
    passengers board, one after another; a full trip closes at the end."""
    w.cal.open_t[c] = np.inf
    tr = w.car_head[c]
    w.trips.state[tr] = OPEN
    w.trips.board_free[tr] = t
    i = w.trips.head[tr]
    while i >= 0:
        _board(i, tr, w, out, setup, timing.transfer_in_s)
        i = w.pax_next[i]
    if w.trips.load[tr] >= setup.departure_load:
        _close(tr, w.trips.board_free[tr], w, out, arrivals, timing, setup)


@njit(cache=True, inline="always")
def _view(v, tr, t, w, out, setup):
    """The car view (allocation.contract.CAR_VIEW) of trip ``tr`` at ``t``."""
    trips = w.trips
    v["room"] = setup.departure_load - trips.load[tr]
    v["load"] = trips.load[tr]
    v["up_stops"] = trips.mask[tr]
    v["down_stops"] = np.uint64(0)
    v["opens_in_s"] = out.trip_open_s[tr] - t
    first = out.trip_first_board_s[tr]
    if trips.state[tr] == OPEN:
        v["leaves_in_s"] = (first + setup.lobby_dwell_s - t) if first < np.inf else setup.lobby_dwell_s
    else:
        v["leaves_in_s"] = (out.trip_open_s[tr] - t) + setup.lobby_dwell_s


class _Lobby(NamedTuple):
    """Working arrays of destination control (made by :func:`_run`)."""

    views: np.ndarray          # CAR_VIEW, one per car
    cand: np.ndarray           # int64: the trips open to one allocation
    room_left: np.ndarray      # int64
    pend: np.ndarray           # int64: registrations waiting for a car
    b_orig: np.ndarray         # int64: a batch for the rule
    b_dest: np.ndarray
    b_car: np.ndarray
    b_off: np.ndarray          # int64 [0, n]
    c_start: np.ndarray        # int64 [0]
    c_stop: np.ndarray         # int64 [k]
    rule_scratch: np.ndarray   # int64


@njit(cache=True)
def _run(arrivals, timing, setup, rule, rule_table, policy, policy_table, out):
    """One run: makes the working arrays, then runs :func:`_loop` over them."""
    N = arrivals.time_s.shape[0]
    L = setup.n_cars
    D = setup.departure_load
    M = out.trip_car.shape[0]
    n_levels = timing.flight_s.shape[0]
    trips = _Trips(np.zeros(M, np.int64), np.zeros(M, np.int64), np.zeros(M, np.uint64),
                   np.full(M, -1, np.int64), np.full(M, -1, np.int64), np.zeros(M),
                   np.full(M, -1, np.int64), np.full(M, np.inf))
    cal = _Calendar(np.full(L, np.inf), np.zeros(L, np.int64), np.full(L, np.inf),
                    np.zeros(L, np.int64), np.full(L, -1, np.int64), np.array([np.inf, 0.0]),
                    np.zeros(1, np.int64))
    w = _Work(trips, cal, np.full(max(N, 1), -1, np.int64), np.empty(L, np.int64),
              np.empty(L, np.int64), np.zeros(max(D, 1), np.int64), np.zeros(max(D, 1), np.int64),
              new_scratch(D, n_levels), new_schedule(D, n_levels))
    n1 = max(N, 1)
    lobby = _Lobby(np.zeros(L, dtype=CAR_VIEW), np.empty(L, np.int64), np.empty(L, np.int64),
                   np.empty(n1, np.int64), np.zeros(n1, np.int64), np.empty(n1, np.int64),
                   np.empty(n1, np.int64), np.zeros(2, np.int64), np.zeros(1, np.int64),
                   np.zeros(1, np.int64), np.empty(4 * n1 + 5 * L + RULE_SCRATCH_FIXED, np.int64))
    _loop(arrivals, timing, setup, rule, rule_table, policy, policy_table, out, w, lobby)


@njit(cache=True, **WITHOUT_RUNTIME)
def _loop(arrivals, timing, setup, rule, rule_table, policy, policy_table, out, w, lobby):
    """The event loop (allocates nothing; compiled without the reference-counting runtime,
    see :mod:`roundtrip.compile_options`)."""
    N = arrivals.time_s.shape[0]
    L = setup.n_cars
    D = setup.departure_load
    W = setup.window_s
    trips = w.trips
    cal = w.cal
    out.counters[:] = 0
    for c in range(L):                        # every car parked at the lobby, doors open
        tr = _new_trip(w, out, c, 0.0, OPEN)
        w.car_head[c] = tr
        w.car_tail[c] = tr
    # destination control: the view of the cars, the registrations waiting for a car
    views = lobby.views
    cand = lobby.cand
    room_left = lobby.room_left
    pend = lobby.pend
    n_pend = 0
    b_orig = lobby.b_orig
    b_dest = lobby.b_dest
    b_car = lobby.b_car
    b_off = lobby.b_off
    c_start = lobby.c_start
    c_stop = lobby.c_stop
    rule_scratch = lobby.rule_scratch
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
            if cal.open_t[c] < ev_t or (cal.open_t[c] == ev_t and cal.open_seq[c] < ev_seq):
                ev_t, ev_seq, kind, ev_car = cal.open_t[c], cal.open_seq[c], 0, c
            if cal.timer_t[c] < ev_t or (cal.timer_t[c] == ev_t and cal.timer_seq[c] < ev_seq):
                ev_t, ev_seq, kind, ev_car = cal.timer_t[c], cal.timer_seq[c], 1, c
        win_seq = int(cal.window[1])
        if cal.window[0] < ev_t or (cal.window[0] == ev_t and win_seq < ev_seq):
            ev_t, ev_seq, kind = cal.window[0], win_seq, 2
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
                if cal.window[0] == np.inf:
                    cal.window[0] = t + W
                    cal.window[1] = _next_seq(cal)
                continue
            else:
                # immediate: each car's first trip with room (its trip after a full one)
                for c in range(L):
                    tr = w.car_tail[c]
                    if trips.load[tr] < D:
                        _view(views[c], tr, t, w, out, setup)
                    else:
                        v = views[c]
                        v["room"] = D
                        v["load"] = 0
                        v["up_stops"] = np.uint64(0)
                        v["down_stops"] = np.uint64(0)
                        v["opens_in_s"] = trips.next_open[tr] - t
                        v["leaves_in_s"] = (trips.next_open[tr] - t) + setup.lobby_dwell_s
                c = policy(0, arrivals.destination[i], views, timing, policy_table)
                if c < 0 or c >= L:
                    out.counters[ERROR] = ERROR_POLICY_NO_CAR
                    break
                tr = w.car_tail[c]
                if trips.load[tr] >= D:
                    tr = _successor(tr, w, out)
                _commit(i, tr, t, w, out, arrivals, timing, setup)
                continue
        elif kind == 0:
            # ------------------------------------------------ a car's doors open at the lobby
            t = ev_t
            _open(ev_car, t, w, out, arrivals, timing, setup)
        elif kind == 1:
            # ------------------------------------------------ a lobby dwell runs out
            t = ev_t
            tr = cal.timer_trip[ev_car]
            cal.timer_t[ev_car] = np.inf
            cal.timer_trip[ev_car] = -1
            if trips.state[tr] == OPEN:
                _close(tr, max(t, trips.board_free[tr]), w, out, arrivals, timing, setup)
            continue
        else:
            # ------------------------------------------------ an allocation window closes
            t = ev_t
            cal.window[0] = np.inf
            out.counters[N_ROUNDS] += 1
            k = 0
            for c in range(L):                # the cars open to allocation, by opening
                tr = w.car_head[c]
                if trips.load[tr] < D and (trips.state[tr] == OPEN
                                           or out.trip_open_s[tr] <= t + W):
                    pos = k
                    while pos > 0 and out.trip_open_s[cand[pos - 1]] > out.trip_open_s[tr]:
                        cand[pos] = cand[pos - 1]
                        pos -= 1
                    cand[pos] = tr
                    k += 1
            total_room = 0
            for j in range(k):
                _view(views[j], cand[j], t, w, out, setup)
                room_left[j] = D - trips.load[cand[j]]
                total_room += room_left[j]
            n = min(n_pend, total_room)
            placed = 0
            if n > 0:
                for j in range(n):
                    b_dest[j] = arrivals.destination[pend[j]]
                    b_car[j] = -1
                b_off[1] = n
                c_stop[0] = k
                rule(RuleBatches(b_orig[:n], b_dest[:n], b_off, views[:k], c_start, c_stop),
                     timing, rule_table, rule_scratch, b_car[:n])
                for j in range(n):
                    cj = b_car[j]
                    if 0 <= cj < k and room_left[cj] > 0:
                        room_left[cj] -= 1
                        _commit(pend[j], cand[cj], t, w, out, arrivals, timing, setup)
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
                out.counters[ERROR] = ERROR_RULE_PLACED_NOBODY
                break
            if n_pend > 0:
                cal.window[0] = t + W
                cal.window[1] = _next_seq(cal)
            continue
        # ------------------------------------------------ conventional: fill the open cars
        if setup.mode == CONVENTIONAL:
            while q_head < q_tail:
                best = -1
                for c in range(L):            # the open car that opened first
                    tr = w.car_head[c]
                    if trips.state[tr] == OPEN and (
                            best < 0 or out.trip_open_s[tr] < out.trip_open_s[best]):
                        best = tr
                if best < 0:
                    break
                _commit(q_head, best, t, w, out, arrivals, timing, setup)
                q_head += 1


@njit(cache=True, parallel=True)
def run_replications(times, destinations, offsets, timing, setup, rule, rule_table, policy,
                     policy_table, out_offsets, trip_offsets, out):
    """Replication r's passengers are times/destinations[offsets[r]:offsets[r+1]]; its rows
    go to out[...][out_offsets[r]:...] and its trips to [trip_offsets[r]:...]. Each
    replication depends on its own arrivals only: the same numbers on any thread count."""
    R = offsets.shape[0] - 1
    for r in prange(R):
        s, e = offsets[r], offsets[r + 1]
        ts, te = trip_offsets[r], trip_offsets[r + 1]
        sub = PeakOut(out.car[s:e], out.trip[s:e], out.alloc_s[s:e], out.ready_s[s:e],
                      out.board_s[s:e], out.alight_s[s:e], out.trip_car[ts:te],
                      out.trip_load[ts:te], out.trip_stops[ts:te], out.trip_open_s[ts:te],
                      out.trip_first_board_s[ts:te], out.trip_depart_s[ts:te],
                      out.trip_return_s[ts:te], out.counters[r])
        _run(Arrivals(times[s:e], destinations[s:e]), timing, setup, rule, rule_table, policy,
             policy_table, sub)
