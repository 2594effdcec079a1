"""Compiled kernels of the trip model (numba, ``cache=True``).

Arrays in, arrays out: no policy, no random state. The plain Python API
(:mod:`roundtrip.schedule` for one trip, :mod:`roundtrip.montecarlo` for the
one-car Monte Carlo) validates inputs, owns the random stream and chooses what
to run; :mod:`tests.reference_trip` holds the slow, obviously correct twin that
these kernels must equal exactly.

The trip model of one car (documented with a worked trip in
``docs/trip_model.md``):

* it stops in ascending order at every origin and destination of its
  up-travelling passengers, reverses at the highest call, stops in
  descending order at every origin and destination of its down-travelling
  passengers; a trip with lobby traffic (or with nobody) starts and ends at
  the lobby (floor 0), any other at its lowest stop;
* at each stop passengers alight first, then board in arrival order while the
  load is below the rated load; a passenger who would take the car above it
  is left behind, and a full car answers no landing call (a floor is a stop
  only for those who board or alight there);
* time = flights between consecutive stops (in trip order, from the
  flight-time table) + stops x (door open + door close + start delay), the
  terminal stop counted once + boardings x t_in + alightings x t_out, summed
  in that order (:func:`trip_time_s`, the one place the sum is written).

Inputs arrive as small records (named tuples, see :mod:`roundtrip.schedule`
and :mod:`roundtrip.passengers`): ``timing`` (flight table, stop overhead,
door opening, transfer times, rated load), ``alias`` (the origin-destination
alias table), ``stream`` (uniforms and per-trip offsets) and ``out`` (round-trip
times and the integer counts).

Stops are held in 64-bit masks (bit f for floor f), hence at most 63 served
floors above the lobby.
"""
from __future__ import annotations

from typing import NamedTuple

import numpy as np
from numba import njit

# Columns of the integer result array of a trip.
STOPS, HIGHEST, LOWEST, BOARDED, PEAK_LOAD, LEFT_BEHIND, OFFERED = range(7)
N_COUNTS = 7


class TripScratch(NamedTuple):
    """Working arrays of one trip (made once per block by :func:`new_scratch`)."""

    order: np.ndarray       # int64, one entry per passenger: a direction's boarding order
    alight: np.ndarray      # int64, one entry per floor: passengers due to alight there
    boarded: np.ndarray     # int64, one entry per passenger: 1 when they board
    mask: np.ndarray        # uint64, one entry: the stop mask a sweep builds


class ScheduleOut(NamedTuple):
    """Where :func:`trip_schedule` writes a trip's schedule (see :func:`new_schedule`).

    Entry 0 is the start at the terminal floor (the lobby, or for a trip without
    lobby traffic its lowest stop), the last entry the return to it.
    """

    stop_floor: np.ndarray   # int64, 2 x floors + 3 entries: the floor of each entry
    arrive_s: np.ndarray     # float64: the car stops there (doors start to open) [s]
    depart_s: np.ndarray     # float64: the car starts to move on [s]
    boarded: np.ndarray      # int64: passengers boarding at the entry
    alighted: np.ndarray     # int64: passengers alighting at the entry
    board_stop: np.ndarray   # int64, one per passenger: their boarding entry, -1 left behind
    alight_stop: np.ndarray  # int64, one per passenger: their alighting entry, -1 left behind
    alight_s: np.ndarray     # float64, one per passenger: the moment they are out [s]
    cum_flight_s: np.ndarray  # float64, per entry: flight time flown to reach it [s]
    up_entry: np.ndarray     # int64, one per floor: the entry of the up stop there
    down_entry: np.ndarray   # int64, one per floor: the entry of the down stop there


@njit(cache=True)
def new_scratch(passengers, n_levels):
    """Working arrays for trips of up to ``passengers`` passengers on ``n_levels`` floors."""
    m = max(passengers, 1)
    return TripScratch(np.empty(m, np.int64), np.empty(n_levels, np.int64),
                       np.empty(m, np.int64), np.empty(1, np.uint64))


@njit(cache=True)
def new_schedule(passengers, n_levels):
    """Output arrays of :func:`trip_schedule` for up to ``passengers`` passengers."""
    e = 2 * n_levels + 1
    m = max(passengers, 1)
    return ScheduleOut(np.empty(e, np.int64), np.empty(e), np.empty(e), np.empty(e, np.int64),
                       np.empty(e, np.int64), np.empty(m, np.int64), np.empty(m, np.int64),
                       np.empty(m), np.empty(e), np.empty(n_levels, np.int64),
                       np.empty(n_levels, np.int64))


# ------------------------------------------------------------------ sampling
@njit(cache=True, inline="always")
def draw_cell(u, alias):
    """The origin-destination cell a uniform ``u`` picks from the alias table.

    Column k = floor(u K) of the K-cell table; the fraction u K - k chooses
    between the column's own cell and its alias ("A linear algorithm for
    generating random numbers with a given distribution", IEEE Transactions on
    Software Engineering, 1991). The one place the draw is written.
    """
    K = alias.prob.shape[0]
    x = u * K
    k = int(x)
    if k >= K:
        k = K - 1
    a = alias.alias[k]
    return a + (k - a) * ((x - k) < alias.prob[k])      # branch-free choice


#: One column of the alias table as the up-peak draw reads it (:func:`destination_table`).
DESTINATION_COLUMN = np.dtype([("prob", np.float64), ("keep", np.int64), ("other", np.int64)],
                              align=True)


@njit(cache=True)
def destination_table(alias):
    """The alias table's columns with their two destinations: column k keeps the
    destination of cell k (``keep``) with probability ``prob[k]``, else gives that of
    its alias cell (``other``), so that :func:`draw_destination` reads one record."""
    K = alias.prob.shape[0]
    table = np.empty(K, dtype=DESTINATION_COLUMN)
    for k in range(K):
        table[k]["prob"] = alias.prob[k]
        table[k]["keep"] = alias.cell_dest[k]
        table[k]["other"] = alias.cell_dest[alias.alias[k]]
    return table


@njit(cache=True, inline="always")
def draw_destination(u, columns):
    """The destination of the cell :func:`draw_cell` picks for ``u``, read from the
    columns of :func:`destination_table` (the same draw, one record per uniform;
    indexed unsigned, so that the compiled loop carries no negative-index fix-up)."""
    x = u * columns.shape[0]
    k = min(np.uint64(x), np.uint64(columns.shape[0] - 1))
    column = columns[k]
    return column["keep"] if (x - np.float64(k)) < column["prob"] else column["other"]


@njit(cache=True)
def sample_cells(uniforms, alias, origin_out, dest_out):
    """Origin-destination pairs from uniforms by the alias method (one uniform each)."""
    for i in range(uniforms.shape[0]):
        cell = draw_cell(uniforms[i], alias)
        origin_out[i] = alias.cell_origin[cell]
        dest_out[i] = alias.cell_dest[cell]


# ------------------------------------------------------------------ the trip
@njit(cache=True, inline="always")
def trip_time_s(flight_s, stops, boarded, timing):
    """Round-trip time [s]: flights + (stops + 1) x stop overhead + boardings x t_in
    + alightings x t_out (every passenger who boards alights), in that order.

    ``stops`` are the trip's stops besides its terminal stop (the lobby, or for a
    trip without lobby traffic its lowest stop), which is counted once."""
    return (flight_s + (stops + 1) * timing.stop_overhead_s + boarded * timing.transfer_in_s
            + boarded * timing.transfer_out_s)


@njit(cache=True, inline="always")
def write_counts(counts_out, row, stops, highest, lowest, boarded, peak, left, n):
    """The trip's integer figures into ``counts_out[row]`` (the column constants)."""
    counts_out[row, STOPS] = stops
    counts_out[row, HIGHEST] = highest
    counts_out[row, LOWEST] = lowest
    counts_out[row, BOARDED] = boarded
    counts_out[row, PEAK_LOAD] = peak
    counts_out[row, LEFT_BEHIND] = left
    counts_out[row, OFFERED] = n


@njit(cache=True)
def _sweep(orig, dest, n, up, capacity, scratch):
    """Board and alight one direction's passengers floor by floor.

    ``scratch.order`` receives this direction's passengers sorted by origin
    (ascending for up, descending for down), stable in arrival order; the sweep
    then boards each in turn while the load is below ``capacity`` and marks
    ``scratch.boarded[i] = 1`` for each who boards (entries of the others are
    left as they were). Writes into ``scratch.mask[0]`` the stop mask of the
    direction: the origin and destination of every passenger who boards (a full
    car passes a floor where nobody alights: it answers no landing call, the
    full-load bypass of common practice). Returns (boarded, peak load, left
    behind).
    """
    order = scratch.order
    alight = scratch.alight
    m = 0
    for i in range(n):
        if (dest[i] > orig[i]) == up and dest[i] != orig[i]:
            # stable insertion by origin
            o = orig[i]
            pos = m
            if up:
                while pos > 0 and orig[order[pos - 1]] > o:
                    order[pos] = order[pos - 1]
                    pos -= 1
            else:
                while pos > 0 and orig[order[pos - 1]] < o:
                    order[pos] = order[pos - 1]
                    pos -= 1
            order[pos] = i
            m += 1
    mask = np.uint64(0)
    one = np.uint64(1)
    load = 0
    peak = 0
    boarded = 0
    left = 0
    if m == 0:
        scratch.mask[0] = mask
        return 0, 0, 0
    n_levels = alight.shape[0]
    for f in range(n_levels):
        alight[f] = 0
    # floors are passed in travel order; ``g`` is the last floor whose alightings are done
    g = orig[order[0]]
    load -= alight[g]
    for r in range(m):
        i = order[r]
        o = orig[i]
        if up:
            while g < o:
                g += 1
                load -= alight[g]
        else:
            while g > o:
                g -= 1
                load -= alight[g]
        if load < capacity:
            load += 1
            boarded += 1
            scratch.boarded[i] = 1
            alight[dest[i]] += 1
            mask |= (one << np.uint64(o)) | (one << np.uint64(dest[i]))
            if load > peak:
                peak = load
        else:
            left += 1
    scratch.mask[0] = mask
    return boarded, peak, left


# Index of the lowest set bit of a 64-bit word: multiply the isolated bit by a
# de Bruijn sequence and read the top six bits ("Using de Bruijn sequences to
# index a 1 in a computer word", MIT LCS technical report, 1998).
_DEBRUIJN = np.uint64(0x03F79D71B4CB0A89)
_DEBRUIJN_INDEX = np.array([
    0, 1, 48, 2, 57, 49, 28, 3, 61, 58, 50, 42, 38, 29, 17, 4,
    62, 55, 59, 36, 53, 51, 43, 22, 45, 39, 33, 30, 24, 18, 12, 5,
    63, 47, 56, 27, 60, 41, 37, 16, 54, 35, 52, 21, 44, 32, 23, 11,
    46, 26, 40, 15, 34, 20, 31, 10, 25, 14, 19, 9, 13, 8, 7, 6], dtype=np.int64)


@njit(cache=True, inline="always")
def lowest_bit(m):
    """Index of the lowest set bit of the non-zero uint64 ``m``."""
    lsb = m & (~m + np.uint64(1))
    return _DEBRUIJN_INDEX[(lsb * _DEBRUIJN) >> np.uint64(58)]


@njit(cache=True, inline="always")
def terminal_floor(up_mask, dn_mask):
    """The floor where a trip starts and ends: the lobby when a passenger boards or
    alights there (bit 0 of either stop mask) or when the trip carries nobody,
    otherwise the lowest floor it stops at."""
    both = up_mask | dn_mask
    if both == np.uint64(0) or (both & np.uint64(1)):
        return 0
    return lowest_bit(both)


@njit(cache=True, inline="always")
def _lobby_route(up_mask, flight_s):
    """The up-peak route: from the lobby up through ``up_mask`` (destination floors,
    bit 0 ignored) and back. Returns (flight time [s], stops above the lobby,
    highest floor)."""
    one = np.uint64(1)
    flight = 0.0
    pos = 0
    stops = 0
    m = up_mask & ~one
    while m:
        f = lowest_bit(m)
        m &= m - one
        flight += flight_s[pos, f]
        pos = f
        stops += 1
    return flight + flight_s[pos, 0], stops, pos


@njit(cache=True, inline="always")
def _route(up_mask, dn_mask, flight_s):
    """Fly the route: from the terminal floor T (:func:`terminal_floor`), the up stops
    above T ascending, the down stops above T descending (a floor that is both the
    last up stop and the first down stop is one stop), back to T.

    Returns (flight time [s], stops besides the terminal stop, highest floor, T).
    """
    n_levels = flight_s.shape[0]
    one = np.uint64(1)
    T = terminal_floor(up_mask, dn_mask)
    below = (one << np.uint64(T + 1)) - one            # floors 0 ... T
    flight = 0.0
    pos = T
    stops = 0
    m = up_mask & ~below                               # up journey, ascending
    while m:
        f = lowest_bit(m)
        m &= m - one
        flight += flight_s[pos, f]
        pos = f
        stops += 1
    highest = pos
    if dn_mask & ~below:
        for f in range(n_levels - 1, T, -1):           # down journey, descending
            if (dn_mask >> np.uint64(f)) & one:
                if f != pos:
                    flight += flight_s[pos, f]
                    pos = f
                    stops += 1
                if f > highest:
                    highest = f
    flight += flight_s[pos, T]                         # back to the terminal floor
    return flight, stops, highest, T


@njit(cache=True, inline="always")
def _all_at_lobby(orig, n):
    for i in range(n):
        if orig[i] != 0:
            return False
    return True


@njit(cache=True, inline="always")
def car_trip(orig, dest, n, timing, scratch, counts_out, row):
    """Time one car's round trip with its ``n`` passengers (first n of orig, dest).

    Writes the trip's integer figures into ``counts_out[row]`` (see the column
    constants) and returns the round-trip time [s], the sum
    :func:`trip_time_s` of the trip's schedule (:func:`trip_schedule` gives the
    same trip stop by stop). A trip whose passengers all board at the lobby
    takes the short up-peak path; any other goes through the floor-by-floor
    sweeps, which also mark ``scratch.boarded[i] = 1`` for each passenger who
    boards (the caller clears it first when it reads it).
    """
    if _all_at_lobby(orig, n):
        one = np.uint64(1)
        boarded = min(n, timing.rated_load)
        up_mask = np.uint64(0)
        for i in range(boarded):
            up_mask |= one << np.uint64(dest[i])
        return lobby_trip_of_mask(up_mask, n, boarded, timing, counts_out, row)
    return _mixed_trip(orig, dest, n, timing, scratch, counts_out, row)


@njit(cache=True, inline="always")
def lobby_trip_of_mask(up_mask, n, boarded, timing, counts_out, row):
    """The up-peak trip once its stops are known: ``up_mask`` holds the destinations of
    the ``boarded`` passengers (of ``n`` offered at the lobby). Writes counts_out[row]
    and returns the round-trip time [s]."""
    flight, stops, highest = _lobby_route(up_mask, timing.flight_s)
    write_counts(counts_out, row, stops, highest, 0, boarded, boarded, n - boarded, n)
    return trip_time_s(flight, stops, boarded, timing)


@njit(cache=True)
def _mixed_trip(orig, dest, n, timing, scratch, counts_out, row):
    """Any trip: the up sweep and the down sweep decide who boards, then the route."""
    b_up, peak_up, left_up = _sweep(orig, dest, n, True, timing.rated_load, scratch)
    up_mask = scratch.mask[0]
    b_dn, peak_dn, left_dn = _sweep(orig, dest, n, False, timing.rated_load, scratch)
    dn_mask = scratch.mask[0]
    boarded = b_up + b_dn
    flight, inner, highest, T = _route(up_mask, dn_mask, timing.flight_s)
    # stops above the lobby: the terminal floor counts too when it is not the lobby
    write_counts(counts_out, row, inner + (1 if T > 0 else 0), highest, T, boarded,
                 max(peak_up, peak_dn), left_up + left_dn, n)
    return trip_time_s(flight, inner, boarded, timing)


# ------------------------------------------------------------------ the schedule
@njit(cache=True)
def trip_schedule(orig, dest, n, timing, scratch, out):
    """One car's trip stop by stop: who boards, the route, and the time of every event.

    The same model as :func:`car_trip` (the same sweeps decide who boards, the
    same route is flown), written out per stop into ``out`` (a
    :class:`ScheduleOut` from :func:`new_schedule`). Entry 0 is the start at
    the terminal floor (the lobby, or for a trip without lobby traffic its
    lowest stop), entries 1 ... S' the other stops in trip order, entry S' + 1
    the return to the terminal floor. Time 0 is the start of the terminal stop
    (doors start to open). Every time is the model's sum over what happened
    before it, in the order of :func:`trip_time_s`::

        arrive[s] = F_s + s o + B_<s t_in + A_<s t_out
        depart[s] = F_s + (s + 1) o + B_<=s t_in + A_<=s t_out

    with F_s the flight time flown to reach entry s, o the stop overhead
    (door open + door close + start delay) and B, A the boardings and
    alightings so far. A passenger alighting j-th (in arrival order) at entry s
    is out at arrive[s] + door open + j t_out. The last entry's ``depart_s``
    is the round-trip time (the terminal stop counted once, at the start, as in
    ``docs/trip_model.md``); it equals :func:`car_trip` to the bit.

    Returns
    -------
    (entries, round_trip_time_s)
        ``entries`` = S' + 2 filled entries.
    """
    one = np.uint64(1)
    flags = scratch.boarded
    for i in range(n):
        flags[i] = 0
    if _all_at_lobby(orig, n):
        up_mask = np.uint64(0)
        dn_mask = np.uint64(0)
        for i in range(min(n, timing.rated_load)):
            flags[i] = 1
            up_mask |= one << np.uint64(dest[i])
        if n > 0:
            up_mask |= one                     # the lobby: they board there
    else:
        _sweep(orig, dest, n, True, timing.rated_load, scratch)
        up_mask = scratch.mask[0]
        _sweep(orig, dest, n, False, timing.rated_load, scratch)
        dn_mask = scratch.mask[0]
    flight_s = timing.flight_s
    n_levels = flight_s.shape[0]
    T = terminal_floor(up_mask, dn_mask)
    below = (one << np.uint64(T + 1)) - one
    # the route, as _route flies it, entry by entry
    e = 0
    out.stop_floor[0] = T
    out.cum_flight_s[0] = 0.0
    flight = 0.0
    pos = T
    m = up_mask & ~below
    while m:
        f = lowest_bit(m)
        m &= m - one
        flight += flight_s[pos, f]
        pos = f
        e += 1
        out.stop_floor[e] = f
        out.cum_flight_s[e] = flight
        out.up_entry[f] = e
    if dn_mask & ~below:
        for f in range(n_levels - 1, T, -1):
            if (dn_mask >> np.uint64(f)) & one:
                if f != pos:
                    flight += flight_s[pos, f]
                    pos = f
                    e += 1
                    out.stop_floor[e] = f
                    out.cum_flight_s[e] = flight
                out.down_entry[f] = e
    flight += flight_s[pos, T]
    e += 1
    out.stop_floor[e] = T
    out.cum_flight_s[e] = flight
    out.up_entry[T] = 0
    out.down_entry[T] = e
    for s in range(e + 1):
        out.boarded[s] = 0
        out.alighted[s] = 0
    total = 0
    for i in range(n):
        if flags[i]:
            if dest[i] > orig[i]:
                b, a = out.up_entry[orig[i]], out.up_entry[dest[i]]
            else:
                b, a = out.down_entry[orig[i]], out.down_entry[dest[i]]
            out.board_stop[i] = b
            out.alight_stop[i] = a
            out.boarded[b] += 1
            out.alighted[a] += 1
            total += 1
        else:
            out.board_stop[i] = -1
            out.alight_stop[i] = -1
    o = timing.stop_overhead_s
    B = 0
    A = 0
    for s in range(e + 1):
        out.arrive_s[s] = out.cum_flight_s[s] + s * o + B * timing.transfer_in_s + A * timing.transfer_out_s
        B += out.boarded[s]
        A += out.alighted[s]
        out.depart_s[s] = (out.cum_flight_s[s] + (s + 1) * o + B * timing.transfer_in_s
                           + A * timing.transfer_out_s)
    rtt = trip_time_s(flight, e - 1, total, timing)
    out.depart_s[e] = rtt
    # each alighting passenger's moment out, in arrival order at their stop
    for s in range(e + 1):
        out.alighted[s] = 0                       # reused as the running count
    for i in range(n):
        a = out.alight_stop[i]
        if a >= 0:
            out.alighted[a] += 1
            out.alight_s[i] = out.arrive_s[a] + timing.door_open_s + out.alighted[a] * timing.transfer_out_s
        else:
            out.alight_s[i] = np.nan
    return e + 1, rtt


# ------------------------------------------------------------------ many trips
@njit(cache=True)
def _longest(offsets, first, last):
    longest = 1
    for t in range(first, last):
        longest = max(longest, offsets[t + 1] - offsets[t])
    return longest


@njit(cache=True)
def _given_block(orig, dest, offsets, first, last, timing, out):
    """Trips ``first`` .. ``last - 1``; trip t's passengers are offsets[t]:offsets[t+1]."""
    scratch = new_scratch(_longest(offsets, first, last), timing.flight_s.shape[0])
    for t in range(first, last):
        s = offsets[t]
        e = offsets[t + 1]
        out.rtt_s[t] = car_trip(orig[s:e], dest[s:e], e - s, timing, scratch, out.counts, t)


@njit(cache=True, nogil=True)
def given_car_trips(orig, dest, offsets, timing, out):
    """Every trial is one car's trip with given passengers, each on its own (for tests
    and diagrams; the Monte Carlo runs chains, :mod:`roundtrip._chain_kernel`)."""
    _given_block(orig, dest, offsets, 0, offsets.shape[0] - 1, timing, out)
