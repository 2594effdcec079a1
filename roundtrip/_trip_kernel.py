"""Compiled kernels of the Monte Carlo round trip (numba, ``cache=True``).

Arrays in, arrays out: no policy, no random state. The plain Python API in
:mod:`roundtrip.montecarlo` validates inputs, owns the random stream and
chooses what to run; :mod:`tests.reference_trip` holds the slow, obviously
correct twin that these kernels must equal exactly.

The trip model of one car (documented with a worked trip in
``docs/trip_model.md``):

* it leaves the lobby (floor 0), stops in ascending order at every origin and
  destination of its up-travelling passengers, reverses at the highest call,
  stops in descending order at every origin and destination of its
  down-travelling passengers, and returns to the lobby;
* at each stop passengers alight first, then board in arrival order while the
  load is below the rated load; a passenger who would take the car above it
  is left behind (their call is still answered, their destination is not);
* time = flights between consecutive stops (in trip order, from the
  flight-time table) + stops x (door open + door close + start delay), the
  lobby counted once + boardings x t_in + alightings x t_out, summed in that
  order.

Stops are held in 64-bit masks (bit f for floor f), hence at most 63 served
floors above the lobby.
"""
from __future__ import annotations

import numpy as np
from numba import njit, prange

# Columns of the integer result array of a trip.
STOPS, HIGHEST, LOWEST, BOARDED, PEAK_LOAD, LEFT_BEHIND, OFFERED = range(7)
N_COUNTS = 7


@njit(cache=True)
def _sample_cells(uniforms, alias_prob, alias_cell, cell_origin, cell_dest, origin_out, dest_out):
    """Origin-destination pairs from uniforms by the alias method (one uniform each).

    A uniform u picks column k = floor(u K) of the K-cell alias table and uses
    the fraction u K - k to choose between the column's own cell and its alias;
    cell c is the trip cell_origin[c] -> cell_dest[c].
    """
    K = alias_prob.shape[0]
    for i in range(uniforms.shape[0]):
        x = uniforms[i] * K
        k = int(x)
        if k >= K:
            k = K - 1
        a = alias_cell[k]
        cell = a + (k - a) * ((x - k) < alias_prob[k])      # branch-free choice
        origin_out[i] = cell_origin[cell]
        dest_out[i] = cell_dest[cell]


@njit(cache=True)
def _sweep(orig, dest, n, up, capacity, order, alight, stop_mask_out):
    """Board and alight one direction's passengers floor by floor.

    ``order`` (scratch) receives this direction's passengers sorted by origin
    (ascending for up, descending for down), stable in arrival order; the
    sweep then boards each in turn while the load is below ``capacity``.
    Returns (stop mask, boarded, peak load, left behind, origin-0 or dest-0 traffic).
    """
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
    lobby = False
    if m == 0:
        stop_mask_out[0] = mask
        return 0, 0, 0, False
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
        mask |= one << np.uint64(o)
        if load < capacity:
            load += 1
            boarded += 1
            alight[dest[i]] += 1
            mask |= one << np.uint64(dest[i])
            if load > peak:
                peak = load
            if dest[i] == 0:
                lobby = True
        else:
            left += 1
        if o == 0:
            lobby = True
    stop_mask_out[0] = mask
    return boarded, peak, left, lobby


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
def _lowest_bit(m):
    lsb = m & (~m + np.uint64(1))
    return _DEBRUIJN_INDEX[(lsb * _DEBRUIJN) >> np.uint64(58)]


@njit(cache=True)
def _route(up_mask, dn_mask, flight_s):
    """Fly the route: up stops ascending, down stops descending, back to the lobby.

    Returns (flight time [s], stops above the lobby, highest floor, lowest floor
    served or -1 when none).
    """
    n_levels = flight_s.shape[0]
    one = np.uint64(1)
    flight = 0.0
    pos = 0
    stops = 0
    m = up_mask & ~one                                # up journey, ascending
    lowest = _lowest_bit(m) if m else -1
    while m:
        f = _lowest_bit(m)
        m &= m - one
        flight += flight_s[pos, f]
        pos = f
        stops += 1
    highest = pos
    if dn_mask & ~one:
        for f in range(n_levels - 1, 0, -1):          # down journey, descending
            if (dn_mask >> np.uint64(f)) & one:
                if f != pos:
                    flight += flight_s[pos, f]
                    pos = f
                    stops += 1
                if f > highest:
                    highest = f
                if lowest < 0 or f < lowest:
                    lowest = f
    flight += flight_s[pos, 0]                        # return to the lobby
    return flight, stops, highest, lowest


@njit(cache=True, inline="always")
def car_trip(orig, dest, n, flight_s, capacity, stop_overhead_s, transfer_in_s,
             transfer_out_s, scratch_order, scratch_alight, scratch_mask, counts_out, row):
    """Time one car's round trip with its ``n`` passengers (first n of orig, dest).

    Writes the trip's integer figures into ``counts_out[row]`` (see the column
    constants) and returns the round-trip time [s]. A trip whose passengers all
    board at the lobby takes the short up-peak path; any other goes through the
    floor-by-floor sweeps.
    """
    lobby_only = True
    for i in range(n):
        if orig[i] != 0:
            lobby_only = False
            break
    if lobby_only:
        return _lobby_trip(dest, n, flight_s, capacity, stop_overhead_s, transfer_in_s,
                           transfer_out_s, counts_out, row)
    return _mixed_trip(orig, dest, n, flight_s, capacity, stop_overhead_s, transfer_in_s,
                       transfer_out_s, scratch_order, scratch_alight, scratch_mask, counts_out, row)


@njit(cache=True, inline="always")
def _write_counts(counts_out, row, stops, highest, lowest, boarded, peak, left, n):
    counts_out[row, STOPS] = stops
    counts_out[row, HIGHEST] = highest
    counts_out[row, LOWEST] = lowest
    counts_out[row, BOARDED] = boarded
    counts_out[row, PEAK_LOAD] = peak
    counts_out[row, LEFT_BEHIND] = left
    counts_out[row, OFFERED] = n


@njit(cache=True, inline="always")
def _lobby_trip(dest, n, flight_s, capacity, stop_overhead_s, transfer_in_s, transfer_out_s,
                counts_out, row):
    """Up-peak trip: everyone waits at the lobby, so the first ``capacity``
    passengers in arrival order board and the rest are left behind."""
    one = np.uint64(1)
    boarded = min(n, capacity)
    up_mask = np.uint64(0)
    for i in range(boarded):
        up_mask |= one << np.uint64(dest[i])
    return lobby_trip_of_mask(up_mask, n, boarded, flight_s, stop_overhead_s, transfer_in_s,
                              transfer_out_s, counts_out, row)


@njit(cache=True, inline="always")
def lobby_trip_of_mask(up_mask, n, boarded, flight_s, stop_overhead_s, transfer_in_s,
                       transfer_out_s, counts_out, row):
    """The up-peak trip once its stops are known: ``up_mask`` holds the destinations of
    the ``boarded`` passengers (of ``n`` offered at the lobby). Writes counts_out[row]
    and returns the round-trip time [s]."""
    flight, stops, highest, lowest = _route(up_mask, np.uint64(0), flight_s)
    _write_counts(counts_out, row, stops, highest, 0, boarded, boarded, n - boarded, n)
    return flight + (stops + 1) * stop_overhead_s + boarded * transfer_in_s + boarded * transfer_out_s


@njit(cache=True)
def _mixed_trip(orig, dest, n, flight_s, capacity, stop_overhead_s, transfer_in_s,
                transfer_out_s, scratch_order, scratch_alight, scratch_mask, counts_out, row):
    """Any trip: the up sweep and the down sweep decide who boards, then the route."""
    b_up, peak_up, left_up, lobby_up = _sweep(orig, dest, n, True, capacity,
                                              scratch_order, scratch_alight, scratch_mask)
    up_mask = scratch_mask[0]
    b_dn, peak_dn, left_dn, lobby_dn = _sweep(orig, dest, n, False, capacity,
                                              scratch_order, scratch_alight, scratch_mask)
    dn_mask = scratch_mask[0]
    boarded = b_up + b_dn
    flight, stops, highest, lowest = _route(up_mask, dn_mask, flight_s)
    if lobby_up or lobby_dn or lowest < 0:
        lowest = 0
    _write_counts(counts_out, row, stops, highest, lowest, boarded, max(peak_up, peak_dn),
                  left_up + left_dn, n)
    return flight + (stops + 1) * stop_overhead_s + boarded * transfer_in_s + boarded * transfer_out_s


@njit(cache=True)
def _single_car_block(orig, dest, offsets, first, last, flight_s, capacity, stop_overhead_s,
                      transfer_in_s, transfer_out_s, rtt_out, counts_out):
    """Trips ``first`` .. ``last - 1``; trip t's passengers are offsets[t]:offsets[t+1]."""
    n_levels = flight_s.shape[0]
    longest = 0
    for t in range(first, last):
        longest = max(longest, offsets[t + 1] - offsets[t])
    order = np.empty(max(longest, 1), np.int64)
    alight = np.empty(n_levels, np.int64)
    mask = np.empty(1, np.uint64)
    for t in range(first, last):
        s = offsets[t]
        e = offsets[t + 1]
        rtt_out[t] = car_trip(orig[s:e], dest[s:e], e - s, flight_s, capacity, stop_overhead_s,
                              transfer_in_s, transfer_out_s, order, alight, mask, counts_out, t)


@njit(cache=True, parallel=True)
def single_car_trips(orig, dest, offsets, flight_s, capacity, stop_overhead_s, transfer_in_s,
                     transfer_out_s, n_blocks, rtt_out, counts_out):
    """Every trial is one car's trip; trials are split into ``n_blocks`` run in parallel.

    Each trial's result depends only on its own passengers, so the numbers are
    the same for any thread count.
    """
    n_trials = offsets.shape[0] - 1
    for b in prange(n_blocks):
        first = b * n_trials // n_blocks
        last = (b + 1) * n_trials // n_blocks
        _single_car_block(orig, dest, offsets, first, last, flight_s, capacity,
                          stop_overhead_s, transfer_in_s, transfer_out_s, rtt_out, counts_out)


@njit(cache=True, parallel=True)
def sample_cells(uniforms, alias_prob, alias_cell, cell_origin, cell_dest, n_blocks, origin_out,
                 dest_out):
    """Parallel :func:`_sample_cells` over ``n_blocks`` contiguous blocks."""
    n = uniforms.shape[0]
    for b in prange(n_blocks):
        first = b * n // n_blocks
        last = (b + 1) * n // n_blocks
        _sample_cells(uniforms[first:last], alias_prob, alias_cell, cell_origin, cell_dest,
                      origin_out[first:last], dest_out[first:last])


@njit(cache=True)
def _sampled_car_block(uniforms, offsets, first, last, alias_prob, alias_cell, cell_origin,
                       cell_dest, flight_s, capacity, stop_overhead_s, transfer_in_s,
                       transfer_out_s, rtt_out, counts_out):
    """As :func:`_single_car_block`, sampling each trip's passengers from its uniforms
    into a small buffer first (the passengers never leave the cache)."""
    n_levels = flight_s.shape[0]
    longest = 0
    for t in range(first, last):
        longest = max(longest, offsets[t + 1] - offsets[t])
    orig = np.empty(max(longest, 1), np.int64)
    dest = np.empty(max(longest, 1), np.int64)
    order = np.empty(max(longest, 1), np.int64)
    alight = np.empty(n_levels, np.int64)
    mask = np.empty(1, np.uint64)
    for t in range(first, last):
        s = offsets[t]
        e = offsets[t + 1]
        _sample_cells(uniforms[s:e], alias_prob, alias_cell, cell_origin, cell_dest, orig, dest)
        rtt_out[t] = car_trip(orig, dest, e - s, flight_s, capacity, stop_overhead_s,
                              transfer_in_s, transfer_out_s, order, alight, mask, counts_out, t)


@njit(cache=True, parallel=True)
def sampled_car_trips(uniforms, offsets, alias_prob, alias_cell, cell_origin, cell_dest, flight_s,
                      capacity, stop_overhead_s, transfer_in_s, transfer_out_s, n_blocks,
                      rtt_out, counts_out):
    """Every trial is one car's trip, its passengers drawn from uniforms[offsets[t]:offsets[t+1]]
    by the alias table; the same numbers as :func:`sample_cells` then :func:`single_car_trips`."""
    n_trials = offsets.shape[0] - 1
    for b in prange(n_blocks):
        first = b * n_trials // n_blocks
        last = (b + 1) * n_trials // n_blocks
        _sampled_car_block(uniforms, offsets, first, last, alias_prob, alias_cell, cell_origin,
                           cell_dest, flight_s, capacity, stop_overhead_s, transfer_in_s,
                           transfer_out_s, rtt_out, counts_out)


@njit(cache=True)
def _uppeak_block(uniforms, offsets, first, last, alias_prob, alias_cell, cell_dest, flight_s,
                  capacity, stop_overhead_s, transfer_in_s, transfer_out_s, rtt_out, counts_out):
    """Up-peak trips (every origin the lobby): sample each boarding passenger's
    destination straight into the stop mask. The same numbers as
    :func:`_sampled_car_block` when the OD matrix has only lobby origins."""
    K = alias_prob.shape[0]
    one = np.uint64(1)
    for t in range(first, last):
        s = offsets[t]
        n = offsets[t + 1] - s
        boarded = min(n, capacity)
        mask = np.uint64(0)
        for i in range(s, s + boarded):
            x = uniforms[i] * K
            k = int(x)
            if k >= K:
                k = K - 1
            a = alias_cell[k]
            cell = a + (k - a) * ((x - k) < alias_prob[k])
            mask |= one << np.uint64(cell_dest[cell])
        flight, stops, highest, lowest = _route(mask, np.uint64(0), flight_s)
        rtt_out[t] = (flight + (stops + 1) * stop_overhead_s + boarded * transfer_in_s
                      + boarded * transfer_out_s)
        counts_out[t, STOPS] = stops
        counts_out[t, HIGHEST] = highest
        counts_out[t, LOWEST] = 0
        counts_out[t, BOARDED] = boarded
        counts_out[t, PEAK_LOAD] = boarded
        counts_out[t, LEFT_BEHIND] = n - boarded
        counts_out[t, OFFERED] = n


@njit(cache=True, parallel=True)
def uppeak_car_trips(uniforms, offsets, alias_prob, alias_cell, cell_dest, flight_s, capacity,
                     stop_overhead_s, transfer_in_s, transfer_out_s, n_blocks, rtt_out, counts_out):
    """Parallel :func:`_uppeak_block` over ``n_blocks`` blocks of trials."""
    n_trials = offsets.shape[0] - 1
    for b in prange(n_blocks):
        first = b * n_trials // n_blocks
        last = (b + 1) * n_trials // n_blocks
        _uppeak_block(uniforms, offsets, first, last, alias_prob, alias_cell, cell_dest,
                      flight_s, capacity, stop_overhead_s, transfer_in_s, transfer_out_s,
                      rtt_out, counts_out)
