"""Compiled kernels of the one-car Monte Carlo: chains of trips with carry-over.

Arrays in, arrays out (numba, ``cache=True``, ``nogil=True``): no policy, no
random state. :mod:`roundtrip.stream` defines the random stream these kernels
read, :mod:`roundtrip.montecarlo` owns it and turns the sums into estimates,
and ``tests/test_montecarlo.py`` holds the plain-Python chain they must equal
exactly.

A chain is a run of consecutive trips of one car that starts with nobody
waiting. Trip t's new passengers are those arriving during its interval
(``uniforms[offsets[t]:offsets[t + 1]]``, one uniform each, in arrival order);
the car is offered everyone waiting, those left behind by earlier trips first,
and whoever it leaves behind waits for the next trip: nobody is dropped. Each
chain's figures are kept as running sums (:class:`ChainSums`, one row per
chain), never per trip unless the caller asks for the sample.
"""
from __future__ import annotations

from typing import NamedTuple

import numpy as np
from numba import njit

from ._trip_kernel import (BOARDED, HIGHEST, LEFT_BEHIND, LOWEST, N_COUNTS, OFFERED, PEAK_LOAD,
                           STOPS, _lobby_route, car_trip, draw_cell, new_scratch, trip_time_s,
                           write_counts)


class ChainSums(NamedTuple):
    """Running sums of each chain of trips (row c: chain c)."""

    trips: np.ndarray          # int64, chains: trips in the chain
    rtt_shift_s: np.ndarray    # float64: the chain's first round-trip time (the shift) [s]
    rtt_sum_s: np.ndarray      # float64: sum of (rtt - shift) [s]
    rtt_sq_s2: np.ndarray      # float64: sum of (rtt - shift)^2 [s^2]
    count_sum: np.ndarray      # int64, chains x N_COUNTS: sums of the trip counts
    count_sq: np.ndarray       # int64, chains x N_COUNTS: sums of their squares
    left_trips: np.ndarray     # int64: trips that leave someone behind
    arrivals: np.ndarray       # int64: passengers who arrived during the chain
    waiting_end: np.ndarray    # int64: passengers still waiting when it ends
    load_up: np.ndarray        # int64, chains x levels: summed load on the up stretch f -> f+1
    load_down: np.ndarray      # int64, chains x levels: summed load on the down stretch f+1 -> f

    @classmethod
    def empty(cls, chains: int, n_levels: int) -> "ChainSums":
        z = np.zeros
        return cls(z(chains, np.int64), z(chains), z(chains), z(chains),
                   z((chains, N_COUNTS), np.int64), z((chains, N_COUNTS), np.int64),
                   z(chains, np.int64), z(chains, np.int64), z(chains, np.int64),
                   z((chains, n_levels), np.int64), z((chains, n_levels), np.int64))


# ------------------------------------------------------------------ passenger counts
@njit(cache=True, nogil=True)
def counts_by_inversion(uniforms, cdf, guide, counts_out):
    """Passenger counts from one uniform each by inversion of a discrete CDF.

    Count of u = the number of entries of ``cdf`` below u (``cdf`` ascending,
    its last entry 1); ``guide[g]`` is the count at u = g / G, where the search
    starts (the guide-table method of inversion).
    """
    G = guide.shape[0]
    last = cdf.shape[0] - 1
    for i in range(uniforms.shape[0]):
        u = uniforms[i]
        k = guide[min(int(u * G), G - 1)]
        while k < last and cdf[k] < u:
            k += 1
        counts_out[i] = k


# ------------------------------------------------------------------ accumulation
@njit(cache=True, inline="always")
def _add_trip(sums, c, rtt, counts, first):
    """Add one trip (its round-trip time and counts row 0) to chain c's sums."""
    if first:
        sums.rtt_shift_s[c] = rtt
    x = rtt - sums.rtt_shift_s[c]
    sums.rtt_sum_s[c] += x
    sums.rtt_sq_s2[c] += x * x
    for k in range(N_COUNTS):
        v = counts[0, k]
        sums.count_sum[c, k] += v
        sums.count_sq[c, k] += v * v
    if counts[0, LEFT_BEHIND] > 0:
        sums.left_trips[c] += 1


@njit(cache=True, inline="always")
def _chain_bounds(c, chain_trips, n_trips):
    first = c * chain_trips
    return first, min(n_trips, first + chain_trips)


# ------------------------------------------------------------------ up-peak chains
@njit(cache=True, nogil=True)
def _uppeak_chain(stream, c, first, last, alias, timing, sums, keep, sample):
    """Trips first .. last - 1, every passenger boarding at the lobby.

    The lobby queue is first in, first out, so those waiting are always the latest
    arrivals: ``uniforms[head:offsets[t + 1]]``. The car takes the first
    min(waiting, rated load) of them; each one's destination goes straight into
    the stop mask. The sums are kept in local variables and written once.
    """
    one = np.uint64(1)
    uniforms = stream.uniforms
    offsets = stream.offsets
    rated = timing.rated_load
    flight_s = timing.flight_s
    counts = np.zeros((1, N_COUNTS), np.int64)
    head = offsets[first]
    shift = 0.0
    r1 = 0.0
    r2 = 0.0
    s1 = s2 = h1 = h2 = b1 = b2 = l1 = l2 = w1 = w2 = 0
    lefts = 0
    for t in range(first, last):
        waiting = offsets[t + 1] - head
        b = min(waiting, rated)
        mask = np.uint64(0)
        for i in range(head, head + b):
            mask |= one << np.uint64(alias.cell_dest[draw_cell(uniforms[i], alias)])
        head += b
        flight, stops, highest = _lobby_route(mask, flight_s)
        rtt = trip_time_s(flight, stops, b, timing)
        if t == first:
            shift = rtt
        x = rtt - shift
        r1 += x
        r2 += x * x
        left = waiting - b
        s1 += stops
        s2 += stops * stops
        h1 += highest
        h2 += highest * highest
        b1 += b
        b2 += b * b
        l1 += left
        l2 += left * left
        w1 += waiting
        w2 += waiting * waiting
        if left > 0:
            lefts += 1
        if keep:
            write_counts(counts, 0, stops, highest, 0, b, b, left, waiting)
            sample.rtt_s[t] = rtt
            for k in range(N_COUNTS):
                sample.counts[t, k] = counts[0, k]
    sums.rtt_shift_s[c] = shift
    sums.rtt_sum_s[c] = r1
    sums.rtt_sq_s2[c] = r2
    for k, v1, v2 in ((STOPS, s1, s2), (HIGHEST, h1, h2), (BOARDED, b1, b2),
                      (PEAK_LOAD, b1, b2), (LEFT_BEHIND, l1, l2), (OFFERED, w1, w2)):
        sums.count_sum[c, k] = v1
        sums.count_sq[c, k] = v2
    sums.count_sum[c, LOWEST] = 0
    sums.count_sq[c, LOWEST] = 0
    sums.left_trips[c] = lefts
    sums.load_up[c, 0] = b1                   # everyone aboard rides the first stretch
    sums.trips[c] = last - first
    sums.arrivals[c] = offsets[last] - offsets[first]
    sums.waiting_end[c] = offsets[last] - head


# ------------------------------------------------------------------ any traffic
@njit(cache=True, nogil=True)
def _mixed_chain(stream, c, first, last, alias, timing, sums, keep, sample):
    """Trips first .. last - 1 for any traffic mix.

    The queue holds everyone waiting, in arrival order: those left behind by the
    last trip, then the new arrivals. After each trip those who did not board
    stay in it, in order.
    """
    uniforms = stream.uniforms
    offsets = stream.offsets
    n_levels = timing.flight_s.shape[0]
    rated = timing.rated_load
    room = offsets[last] - offsets[first] + 1
    q_orig = np.empty(room, np.int64)
    q_dest = np.empty(room, np.int64)
    scratch = new_scratch(room, n_levels)
    counts = np.zeros((1, N_COUNTS), np.int64)
    q = 0
    for t in range(first, last):
        for i in range(offsets[t], offsets[t + 1]):
            cell = draw_cell(uniforms[i], alias)
            q_orig[q] = alias.cell_origin[cell]
            q_dest[q] = alias.cell_dest[cell]
            q += 1
        lobby = True
        for i in range(q):
            scratch.boarded[i] = 0
            if q_orig[i] != 0:
                lobby = False
        rtt = car_trip(q_orig, q_dest, q, timing, scratch, counts, 0)
        if lobby:                              # the up-peak path: the first ones board
            for i in range(min(q, rated)):
                scratch.boarded[i] = 1
        kept = 0
        for i in range(q):
            o = q_orig[i]
            d = q_dest[i]
            if scratch.boarded[i]:
                if d > o:                      # riding up over the stretches o ... d - 1
                    for f in range(o, d):
                        sums.load_up[c, f] += 1
                else:                          # riding down over d ... o - 1
                    for f in range(d, o):
                        sums.load_down[c, f] += 1
            else:
                q_orig[kept] = o
                q_dest[kept] = d
                kept += 1
        q = kept
        _add_trip(sums, c, rtt, counts, t == first)
        if keep:
            sample.rtt_s[t] = rtt
            for k in range(N_COUNTS):
                sample.counts[t, k] = counts[0, k]
    sums.trips[c] = last - first
    sums.arrivals[c] = offsets[last] - offsets[first]
    sums.waiting_end[c] = q


@njit(cache=True, nogil=True)
def chain_trips(stream, alias, timing, chain_trips, lobby_only, sums, keep, sample, c0, c1):
    """Chains c0 ... c1 - 1 of ``chain_trips`` consecutive trips of the stream.

    Chain c is trips c x chain_trips ... (c + 1) x chain_trips - 1 (the last one
    may be shorter); its sums go to row c of ``sums`` (a :class:`ChainSums`).
    ``lobby_only``: every passenger boards at the lobby (the up-peak kernel).
    With ``keep`` the trips' own figures are written into ``sample`` (a
    :class:`roundtrip.schedule.TripOut` as long as the stream). A chain's figures
    depend only on its own trips, so any split of the chains between threads
    (:func:`roundtrip.threads.run_chains`) gives the same numbers.
    """
    n_trips = stream.offsets.shape[0] - 1
    for c in range(c0, c1):
        first, last = _chain_bounds(c, chain_trips, n_trips)
        if lobby_only:
            _uppeak_chain(stream, c, first, last, alias, timing, sums, keep, sample)
        else:
            _mixed_chain(stream, c, first, last, alias, timing, sums, keep, sample)
