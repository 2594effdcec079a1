"""Compiled kernel of a group round: allocate each batch with a rule, time every car.

A trial is one batch: the passengers arriving during one round of the group,
in arrival order. With k cars open to allocation, the batch is split in
arrival order into sub-batches, each in proportion to its cars (cars 0..k-1,
k..2k-1, ...), and each sub-batch is allocated by the rule among its cars.
Passengers beyond the sub-batch's cars x rated load are left behind (not
allocated), the latest arrivals first. Each car's trip is then timed by the
one-car trip model (:func:`roundtrip._trip_kernel.car_trip`).

The rule arrives as a compiled function of the fixed rule signature (see
:mod:`allocation.registry`), so one compiled kernel serves every rule.
"""
from __future__ import annotations

import numpy as np
from numba import njit, prange

from ._trip_kernel import car_trip


@njit(cache=True)
def _group_block(rule, orig, dest, offsets, first, last, n_cars, cars_open, rated_load, params,
                 flight_s, stop_overhead_s, transfer_in_s, transfer_out_s, rtt_out, counts_out,
                 unallocated_out):
    n_levels = flight_s.shape[0]
    longest = 1
    for t in range(first, last):
        longest = max(longest, offsets[t + 1] - offsets[t])
    car_of = np.empty(longest, np.int64)
    o_car = np.empty(longest, np.int64)
    d_car = np.empty(longest, np.int64)
    order = np.empty(longest, np.int64)
    alight = np.empty(n_levels, np.int64)
    mask = np.empty(1, np.uint64)
    for t in range(first, last):
        s = offsets[t]
        n = offsets[t + 1] - s
        unallocated = 0
        for c0 in range(0, n_cars, cars_open):
            c1 = min(n_cars, c0 + cars_open)
            k = c1 - c0
            a = s + n * c0 // n_cars
            m = s + n * c1 // n_cars - a
            fits = min(m, k * rated_load)
            unallocated += m - fits
            limit = min(rated_load, (fits + k - 1) // k)
            car_of[:fits] = -1
            rule(orig[a:a + fits], dest[a:a + fits], k, limit, params[k], car_of[:fits])
            for c in range(k):
                p = 0
                for i in range(fits):
                    if car_of[i] == c:
                        o_car[p] = orig[a + i]
                        d_car[p] = dest[a + i]
                        p += 1
                rtt_out[t, c0 + c] = car_trip(o_car, d_car, p, flight_s, rated_load,
                                              stop_overhead_s, transfer_in_s, transfer_out_s,
                                              order, alight, mask, counts_out[t], c0 + c)
            for i in range(fits):
                if car_of[i] < 0 or car_of[i] >= k:
                    unallocated += 1
        unallocated_out[t] = unallocated


@njit(cache=True, parallel=True)
def group_trips(rule, orig, dest, offsets, n_cars, cars_open, rated_load, params, flight_s,
                stop_overhead_s, transfer_in_s, transfer_out_s, n_blocks, rtt_out, counts_out,
                unallocated_out):
    """Every trial is one batch allocated by ``rule``; blocks of trials run in parallel.

    Outputs: rtt_out[t, car] [s], counts_out[t, car, :] (trip counts as in
    _trip_kernel), unallocated_out[t] (passengers no car took). ``params[k]`` is
    the rule's table for k cars open.
    """
    n_trials = offsets.shape[0] - 1
    for b in prange(n_blocks):
        first = b * n_trials // n_blocks
        last = (b + 1) * n_trials // n_blocks
        _group_block(rule, orig, dest, offsets, first, last, n_cars, cars_open, rated_load,
                     params, flight_s, stop_overhead_s, transfer_in_s, transfer_out_s, rtt_out,
                     counts_out, unallocated_out)
