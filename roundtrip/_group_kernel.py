"""Compiled kernel of a group round: allocate each batch with a rule, time every car.

A trial is one batch: the passengers arriving during one round of the group,
in arrival order. With k cars open to allocation, the batch is split in
arrival order into sub-batches, each in proportion to its cars (cars 0..k-1,
k..2k-1, ...), and each sub-batch is allocated by the rule among its cars.
Passengers beyond the sub-batch's cars x rated load are left behind (not
allocated), the latest arrivals first. Each car's trip is then timed by the
one-car trip model (:func:`roundtrip._trip_kernel.car_trip`).

Each batch is drawn inside the kernel from its uniforms (one per passenger),
so every rule sees the very same passengers (common random numbers).

The rule arrives as a compiled function of the fixed rule signature (see
:mod:`allocation.registry`), so one compiled kernel serves every rule.
"""
from __future__ import annotations

import numpy as np
from numba import njit, prange

from ._trip_kernel import _sample_cells, car_trip, lobby_trip_of_mask
from ._views import borrowed

RULE_SCRATCH_FIXED = 2 * 64 + 2
"""Working space a rule gets beyond 4 entries per passenger and 4 per car (see
:func:`allocation.registry.scratch_size`)."""


@njit(cache=True)
def _longest_batch(offsets, first, last):
    longest = 1
    for t in range(first, last):
        longest = max(longest, offsets[t + 1] - offsets[t])
    return longest


@njit(cache=True, inline="always")
def _rule_work_size(longest, cars_open):
    """The block's passengers (origins, destinations, cars) and the rule's scratch."""
    return 3 * longest + 4 * longest + 4 * cars_open + RULE_SCRATCH_FIXED


@njit(cache=True)
def _group_block(rule, uniforms, offsets, first, last, alias_prob, alias_cell, cell_origin,
                 cell_dest, n_cars, cars_open, rated_load, params, flight_s, stop_overhead_s,
                 transfer_in_s, transfer_out_s, rtt_out, counts_out, unallocated_out,
                 longest, rule_work):
    n_levels = flight_s.shape[0]
    # What the rule is given is borrowed (not reference counted, see roundtrip._views)
    # from ``rule_work`` and ``params``: arguments, which the caller keeps alive.
    work = borrowed(rule_work)
    orig = work[:longest]
    dest = work[longest:2 * longest]
    car_of = work[2 * longest:3 * longest]
    scratch = work[3 * longest:]
    rule_params = borrowed(params)
    o_car = np.empty(longest, np.int64)
    d_car = np.empty(longest, np.int64)
    start = np.empty(cars_open + 1, np.int64)
    order = np.empty(longest, np.int64)
    alight = np.empty(n_levels, np.int64)
    mask = np.empty(1, np.uint64)
    up_mask = np.empty(cars_open, np.uint64)
    mixed = np.empty(cars_open, np.bool_)
    one = np.uint64(1)
    for t in range(first, last):
        s = offsets[t]
        n = offsets[t + 1] - s
        _sample_cells(uniforms[s:s + n], alias_prob, alias_cell, cell_origin, cell_dest, orig, dest)
        counts_t = counts_out[t]
        unallocated = 0
        for c0 in range(0, n_cars, cars_open):
            c1 = min(n_cars, c0 + cars_open)
            k = c1 - c0
            a = n * c0 // n_cars
            m = n * c1 // n_cars - a
            fits = min(m, k * rated_load)
            unallocated += m - fits
            limit = min(rated_load, (fits + k - 1) // k)
            car_of[:fits] = -1
            rule(orig[a:a + fits], dest[a:a + fits], k, limit, rule_params[k], scratch,
                 car_of[:fits])
            # One pass in arrival order: each car's passenger count, and, while all its
            # passengers board at the lobby, the stop mask of the first rated-load of them
            # (those who board, as in the one-car model's up-peak path).
            start[:k + 1] = 0
            up_mask[:k] = 0
            mixed[:k] = False
            any_mixed = False
            for i in range(fits):
                c = car_of[i]
                if 0 <= c < k:
                    start[c + 1] += 1
                    if orig[a + i] != 0:
                        mixed[c] = True
                        any_mixed = True
                    elif start[c + 1] <= rated_load:
                        up_mask[c] |= one << np.uint64(dest[a + i])
                else:
                    unallocated += 1
            for c in range(k):
                if not mixed[c]:
                    offered = start[c + 1]
                    rtt_out[t, c0 + c] = lobby_trip_of_mask(
                        up_mask[c], offered, min(offered, rated_load), flight_s, stop_overhead_s,
                        transfer_in_s, transfer_out_s, counts_t, c0 + c)
            if not any_mixed:
                continue
            # cars with any passenger boarding above the lobby: each car's passengers in
            # arrival order (a stable counting sort by car), timed by the one-car model
            for c in range(k):
                start[c + 1] += start[c]
            for i in range(fits):
                c = car_of[i]
                if 0 <= c < k:
                    o_car[start[c]] = orig[a + i]
                    d_car[start[c]] = dest[a + i]
                    start[c] += 1
            lo = 0
            for c in range(k):
                hi = start[c]
                if mixed[c]:
                    rtt_out[t, c0 + c] = car_trip(o_car[lo:hi], d_car[lo:hi], hi - lo, flight_s,
                                                  rated_load, stop_overhead_s, transfer_in_s,
                                                  transfer_out_s, order, alight, mask, counts_t,
                                                  c0 + c)
                lo = hi
        unallocated_out[t] = unallocated


@njit(cache=True, parallel=True)
def group_trips(rule, uniforms, offsets, alias_prob, alias_cell, cell_origin, cell_dest, n_cars,
                cars_open, rated_load, params, flight_s, stop_overhead_s, transfer_in_s,
                transfer_out_s, n_blocks, rtt_out, counts_out, unallocated_out):
    """Every trial is one batch, drawn from uniforms[offsets[t]:offsets[t+1]] by the alias
    table (as :func:`roundtrip._trip_kernel.sample_cells`) and allocated by ``rule``;
    blocks of trials run in parallel.

    Outputs: rtt_out[t, car] [s], counts_out[t, car, :] (trip counts as in
    _trip_kernel), unallocated_out[t] (passengers no car took). ``params[k]`` is
    the rule's table for k cars open.
    """
    n_trials = offsets.shape[0] - 1
    for b in prange(n_blocks):
        first = b * n_trials // n_blocks
        last = (b + 1) * n_trials // n_blocks
        longest = _longest_batch(offsets, first, last)
        rule_work = np.empty(_rule_work_size(longest, cars_open), np.int64)
        _group_block(rule, uniforms, offsets, first, last, alias_prob, alias_cell, cell_origin,
                     cell_dest, n_cars, cars_open, rated_load, params, flight_s,
                     stop_overhead_s, transfer_in_s, transfer_out_s, rtt_out, counts_out,
                     unallocated_out, longest, rule_work)
