"""Compiled kernel of a group round: allocate each batch with a rule, time every car.

A trial is one batch: the passengers arriving during one round of the group,
in arrival order. With k cars open to allocation, the batch is split in
arrival order into sub-batches, each in proportion to its cars (cars 0..k-1,
k..2k-1, ...), and each sub-batch is allocated by the rule among its cars,
empty cars at the lobby each with room for the car limit
min(rated load, ceil(sub-batch / k)). Passengers beyond the sub-batch's cars x
rated load are left behind (not allocated), the latest arrivals first. Each
car's trip is then timed by the one-car trip model
(:func:`roundtrip.schedule.car_trip`).

Each block of trials is drawn inside the kernel from its uniforms (one per
passenger), so every rule sees the very same passengers (common random
numbers). The sub-batches of :data:`TRIALS_PER_RULE_CALL` trials go to the
rule in one call (the contract's :class:`~allocation.contract.RuleBatches`),
all sharing one view of empty cars per car limit; the allocation of a
sub-batch does not depend on which call it was in.

The rule arrives as a compiled function of the contract's batch-driver
signature (see :mod:`allocation.contract`), so one compiled kernel serves
every rule.
"""
from __future__ import annotations

from typing import NamedTuple

import numpy as np
from numba import njit, prange

from allocation.contract import CAR_VIEW, RULE_SCRATCH_FIXED, RuleBatches
from roundtrip.schedule import car_trip, draw_cell, lobby_trip_of_mask, new_scratch


class GroupLayout(NamedTuple):
    """The group as the kernel sees it."""

    n_cars: int
    cars_open: int          # cars open to one allocation, k


class GroupOut(NamedTuple):
    """Per-trial, per-car results."""

    rtt_s: np.ndarray        # float64, trials x cars [s]
    counts: np.ndarray       # int64, trials x cars x N_COUNTS
    unallocated: np.ndarray  # int64, trials: passengers no car took


#: Trials whose sub-batches go to the rule in one call (their data stays in cache).
TRIALS_PER_RULE_CALL = 64


@njit(cache=True)
def _group_block(rule, stream, first, last, alias, layout, timing, table, out):
    L = layout.n_cars
    kk = layout.cars_open
    rated = timing.rated_load
    offsets = stream.offsets
    uniforms = stream.uniforms
    subs = (L + kk - 1) // kk
    C = TRIALS_PER_RULE_CALL
    most = 1
    for t0 in range(first, last, C):
        most = max(most, offsets[min(last, t0 + C)] - offsets[t0])
    # one view of identical empty cars per car limit: limit l is cars[l kk : l kk + k]
    views = np.zeros((rated + 1) * kk, dtype=CAR_VIEW)
    for lim in range(rated + 1):
        for c in range(kk):
            views[lim * kk + c]["room"] = lim
    b_orig = np.empty(most, np.int64)
    b_dest = np.empty(most, np.int64)
    b_off = np.empty(C * subs + 1, np.int64)
    b_mixed = np.empty(C * subs, np.bool_)
    car_start = np.empty(C * subs, np.int64)
    car_stop = np.empty(C * subs, np.int64)
    car_of = np.empty(most, np.int64)
    scratch = np.empty(4 * kk * rated + 5 * kk + RULE_SCRATCH_FIXED, np.int64)
    o_car = np.empty(kk * rated + 1, np.int64)
    d_car = np.empty(kk * rated + 1, np.int64)
    start = np.empty(kk + 1, np.int64)
    up_mask = np.empty(kk, np.uint64)
    mixed = np.empty(kk, np.bool_)
    trip = new_scratch(kk * rated + 1, timing.flight_s.shape[0])
    one = np.uint64(1)
    for t0 in range(first, last, C):
        t1 = min(last, t0 + C)
        # the sub-batches of these trials, as the contract's batches: the passengers who
        # fit (those beyond k x rated load are left behind unallocated, never drawn)
        j = 0
        p = 0
        for t in range(t0, t1):
            s = offsets[t]
            n = offsets[t + 1] - s
            unallocated = 0
            for c0 in range(0, L, kk):
                k = min(L, c0 + kk) - c0
                a = n * c0 // L
                m = n * (c0 + k) // L - a
                fits = min(m, k * rated)
                unallocated += m - fits
                limit = min(rated, (fits + k - 1) // k)
                b_off[j] = p
                above = 0
                for i in range(s + a, s + a + fits):
                    cell = draw_cell(uniforms[i], alias)
                    b_orig[p] = alias.cell_origin[cell]
                    b_dest[p] = alias.cell_dest[cell]
                    above |= b_orig[p]
                    p += 1
                b_mixed[j] = above != 0
                car_start[j] = limit * kk
                car_stop[j] = limit * kk + k
                j += 1
            out.unallocated[t] = unallocated
        b_off[j] = p
        rule(RuleBatches(b_orig, b_dest, b_off[:j + 1], views, car_start[:j], car_stop[:j]),
             timing, table, scratch, car_of)
        # time every car of every sub-batch
        j = 0
        for t in range(t0, t1):
            counts_t = out.counts[t]
            unallocated = 0
            for c0 in range(0, L, kk):
                k = min(L, c0 + kk) - c0
                p = b_off[j]
                fits = b_off[j + 1] - p
                any_mixed = b_mixed[j]
                j += 1
                # One pass in arrival order: each car's passenger count, and, while all its
                # passengers board at the lobby, the stop mask of the first rated-load of
                # them (those who board, as in the one-car model's up-peak path).
                start[:k + 1] = 0
                up_mask[:k] = 0
                mixed[:k] = False
                if not any_mixed:                 # every passenger boards at the lobby
                    for i in range(p, p + fits):
                        c = car_of[i]
                        if 0 <= c < k:
                            start[c + 1] += 1
                            if start[c + 1] <= rated:
                                up_mask[c] |= one << np.uint64(b_dest[i])
                        else:
                            unallocated += 1
                    for c in range(k):
                        offered = start[c + 1]
                        out.rtt_s[t, c0 + c] = lobby_trip_of_mask(
                            up_mask[c], offered, min(offered, rated), timing, counts_t, c0 + c)
                    continue
                any_mixed = False
                for i in range(p, p + fits):
                    c = car_of[i]
                    if 0 <= c < k:
                        start[c + 1] += 1
                        if b_orig[i] != 0:
                            mixed[c] = True
                            any_mixed = True
                        elif start[c + 1] <= rated:
                            up_mask[c] |= one << np.uint64(b_dest[i])
                    else:
                        unallocated += 1
                for c in range(k):
                    if not mixed[c]:
                        offered = start[c + 1]
                        out.rtt_s[t, c0 + c] = lobby_trip_of_mask(
                            up_mask[c], offered, min(offered, rated), timing, counts_t, c0 + c)
                if not any_mixed:
                    continue
                # cars with any passenger boarding above the lobby: each car's passengers in
                # arrival order (a stable counting sort by car), timed by the one-car model
                for c in range(k):
                    start[c + 1] += start[c]
                for i in range(p, p + fits):
                    c = car_of[i]
                    if 0 <= c < k:
                        o_car[start[c]] = b_orig[i]
                        d_car[start[c]] = b_dest[i]
                        start[c] += 1
                lo = 0
                for c in range(k):
                    hi = start[c]
                    if mixed[c]:
                        out.rtt_s[t, c0 + c] = car_trip(o_car[lo:hi], d_car[lo:hi], hi - lo,
                                                        timing, trip, counts_t, c0 + c)
                    lo = hi
            out.unallocated[t] += unallocated


@njit(cache=True, parallel=True)
def group_trips(rule, stream, alias, layout, timing, table, n_blocks, out):
    """Every trial is one batch, drawn from stream.uniforms[offsets[t]:offsets[t+1]] by the
    alias table and allocated by ``rule`` (a compiled batch driver); blocks of trials run
    in parallel, one rule call per block.

    Outputs (``out``, a :class:`GroupOut`): rtt_s[t, car] [s], counts[t, car, :] (trip
    counts as in :mod:`roundtrip.schedule`), unallocated[t] (passengers no car took).
    ``table`` is the rule's table, row k for k cars open.
    """
    n_trials = stream.offsets.shape[0] - 1
    for b in prange(n_blocks):
        first = b * n_trials // n_blocks
        last = (b + 1) * n_trials // n_blocks
        if last > first:
            _group_block(rule, stream, first, last, alias, layout, timing, table, out)
