"""Compiled kernel of a group's rounds: allocate each batch with a rule, time every car.

A trial is one round of the group's L cars, in departure order. Car c's new
passengers are those arriving during its interval (trip c of the round in the
stream, see :mod:`roundtrip.stream`), and everyone waiting is in one queue, in
arrival order. With k cars open to allocation the round is split into
sub-batches of k consecutive cars (and one smaller when k does not divide L).

For each sub-batch the kernel first loads the cars as conventional control
would, car by car in departure order: each car is offered the whole queue,
the earlier arrivals first, and takes whoever the trip model lets board (up to
the rated load aboard at once); whoever it cannot take waits for the next car.
That gives each car's *room* (the passengers it carries) and the *batch*: the
passengers those k cars carry, listed car by car. The rule then shares the
batch between the k cars, each taking exactly its room, so every rule carries
the very same passengers in the very same numbers per car (equal car load),
and the conventional rule (`random`, an arrival-order cut) reproduces
conventional control exactly: the one-car Monte Carlo's chain of trips. When
the batch holds passengers of both directions the rule shares the upward and
the downward ones apart (two batches of one call), each car's room in a
direction being what it carries that way under conventional control: a car
then never needs to hold more at once than conventional control puts in it. Each
car's trip is timed by the trip model (:func:`roundtrip.schedule.car_trip`);
a passenger a rule's car cannot take (the rated load aboard at once) waits for
the next sub-batch. Nobody is dropped.

Rounds form chains (:data:`roundtrip.stream.CHAIN_ROUNDS` rounds) that start
with nobody waiting; chains are independent and run on threads
(:func:`roundtrip.threads.run_chains`), so the numbers are the same on any
thread count.

Every passenger boarding at the lobby (up-peak): the queue is first in, first
out, so the batch of each sub-batch is the next slice of the stream and the
batches of :data:`TRIALS_PER_RULE_CALL` rounds go to the rule in one call (the
contract's :class:`~allocation.contract.RuleBatches`). Any other traffic: one
sub-batch at a time, in order.

The rule arrives as a compiled function of the contract's batch-driver
signature (see :mod:`allocation.contract`), so one compiled kernel serves
every rule.
"""
from __future__ import annotations

from typing import NamedTuple

import numpy as np
from numba import njit

from allocation.contract import (CAR_VIEW, LEFT_BEHIND, N_COUNTS, OFFERED,
                                 RULE_SCRATCH_FIXED, RuleBatches)
from roundtrip.schedule import (car_trip, destination_table, draw_cell, draw_destination,
                                lobby_trip_of_mask, new_scratch)


class GroupLayout(NamedTuple):
    """The group as the kernel sees it."""

    n_cars: int
    cars_open: int          # cars open to one allocation, k
    chain_rounds: int       # rounds per chain


class GroupOut(NamedTuple):
    """Per-round, per-car results, and per-chain sums."""

    rtt_s: np.ndarray        # float64, rounds x cars [s]
    counts: np.ndarray       # int64, rounds x cars x N_COUNTS
    unallocated: np.ndarray  # int64, rounds: passengers a rule gave no car though it had room
    waiting_end: np.ndarray  # int64, chains: passengers still waiting when the chain ends
    load_up: np.ndarray      # int64, chains x levels: summed load on the up stretch f -> f+1
    load_down: np.ndarray    # int64, chains x levels: summed load on the down stretch f+1 -> f

    @classmethod
    def empty(cls, rounds: int, cars: int, chains: int, n_levels: int) -> "GroupOut":
        return cls(np.empty((rounds, cars)), np.empty((rounds, cars, N_COUNTS), np.int64),
                   np.zeros(rounds, np.int64), np.zeros(chains, np.int64),
                   np.zeros((chains, n_levels), np.int64), np.zeros((chains, n_levels), np.int64))


#: Rounds whose sub-batches go to the rule in one call (their data stays in cache).
TRIALS_PER_RULE_CALL = 64


@njit(cache=True, nogil=True)
def _uppeak_chain(rule, stream, ch, first, last, columns, layout, timing, table, out):
    """Rounds first .. last - 1, every passenger boarding at the lobby (``columns``: the
    alias table as :func:`roundtrip.schedule.destination_table` gives it)."""
    L = layout.n_cars
    kk = layout.cars_open
    rated = timing.rated_load
    offsets = stream.offsets
    uniforms = stream.uniforms
    subs = (L + kk - 1) // kk
    C = TRIALS_PER_RULE_CALL
    most = C * L * rated + 1
    views = np.zeros(C * subs * kk, dtype=CAR_VIEW)
    b_orig = np.zeros(most, np.int64)          # every origin is the lobby
    b_dest = np.empty(most, np.int64)
    b_off = np.empty(C * subs + 1, np.int64)
    car_start = np.empty(C * subs, np.int64)
    car_stop = np.empty(C * subs, np.int64)
    car_of = np.empty(most, np.int64)
    waiting_at = np.empty(C * L, np.int64)
    scratch = np.empty(4 * kk * rated + 5 * kk + RULE_SCRATCH_FIXED, np.int64)
    up_mask = np.empty(kk, np.uint64)
    taken = np.empty(kk, np.int64)
    one = np.uint64(1)
    head = offsets[first * L]                  # the first passenger still waiting
    aboard = 0
    for t0 in range(first, last, C):
        t1 = min(last, t0 + C)
        # conventional loading, car by car: each car's room, and the batches (the queue is
        # first in, first out: the batches of these rounds are the next passengers in turn)
        start = head
        j = 0
        for t in range(t0, t1):
            for c0 in range(0, L, kk):
                k = min(L, c0 + kk) - c0
                total = 0
                for c in range(k):
                    waiting = offsets[t * L + c0 + c + 1] - (head + total)
                    b = min(waiting, rated)
                    views[j * kk + c]["room"] = b
                    waiting_at[(t - t0) * L + c0 + c] = waiting
                    total += b
                b_off[j] = head - start
                head += total
                car_start[j] = j * kk
                car_stop[j] = j * kk + k
                j += 1
        b_off[j] = head - start
        for p in range(head - start):
            b_dest[p] = draw_destination(uniforms[np.uint64(start + p)], columns)
        rule(RuleBatches(b_orig, b_dest, b_off[:j + 1], views, car_start[:j], car_stop[:j]),
             timing, table, scratch, car_of)
        # time every car
        j = 0
        for t in range(t0, t1):
            counts_t = out.counts[t]
            lost = 0
            for c0 in range(0, L, kk):
                k = min(L, c0 + kk) - c0
                s = b_off[j]
                e = b_off[j + 1]
                lost += (e - s) - _stop_masks(car_of, b_dest, s, e, k, up_mask, taken)
                for c in range(k):
                    waiting = waiting_at[(t - t0) * L + c0 + c]
                    out.rtt_s[t, c0 + c] = lobby_trip_of_mask(up_mask[c], waiting, taken[c],
                                                              timing, counts_t, c0 + c)
                    aboard += taken[c]
                j += 1
            out.unallocated[t] = lost
    out.load_up[ch, 0] = aboard                    # everyone aboard rides the first stretch
    out.waiting_end[ch] = offsets[last * L] - head


#: Cars open up to which the stop masks are built car by car (see :func:`_stop_masks`).
CAR_BY_CAR_MASKS = 8


@njit(cache=True, inline="always")
def _stop_masks(car_of, dest, s, e, k, up_mask, taken):
    """Each car c < k's stop mask (bit f for floor f) and passenger count over the batch
    dest[s:e] with cars car_of[s:e] into up_mask[c] and taken[c]; returns how many had
    a car c < k. Up to :data:`CAR_BY_CAR_MASKS` cars, one pass per car (a loop the
    compiler vectorises, no store a later pass waits for); more, one pass in all."""
    placed = 0
    if k <= CAR_BY_CAR_MASKS:
        for c in range(k):
            mask = np.uint64(0)
            n = 0
            for i in range(s, e):
                hit = car_of[np.uint64(i)] == c
                mask |= np.uint64(hit) << np.uint64(dest[np.uint64(i)])
                n += hit
            up_mask[c] = mask
            taken[c] = n
            placed += n
        return placed
    one = np.uint64(1)
    for c in range(k):
        up_mask[c] = np.uint64(0)
        taken[c] = 0
    for i in range(s, e):
        c = car_of[i]
        if 0 <= c < k:
            taken[c] += 1
            up_mask[c] |= one << np.uint64(dest[i])
            placed += 1
    return placed


@njit(cache=True, nogil=True)
def _mixed_chain(rule, stream, ch, first, last, alias, layout, timing, table, out):
    """Rounds first .. last - 1 for any traffic mix, one sub-batch at a time."""
    L = layout.n_cars
    kk = layout.cars_open
    rated = timing.rated_load
    offsets = stream.offsets
    uniforms = stream.uniforms
    n_levels = timing.flight_s.shape[0]
    cap = offsets[last * L] - offsets[first * L] + 1
    q_orig = np.empty(cap, np.int64)            # the queue, in arrival order (by ticket)
    q_dest = np.empty(cap, np.int64)
    q_tick = np.empty(cap, np.int64)
    b_orig = np.empty(cap, np.int64)            # the batch, car by car
    b_dest = np.empty(cap, np.int64)
    b_tick = np.empty(cap, np.int64)
    r_orig = np.empty(cap, np.int64)            # those a rule's car could not take
    r_dest = np.empty(cap, np.int64)
    r_tick = np.empty(cap, np.int64)
    m_orig = np.empty(cap, np.int64)
    m_dest = np.empty(cap, np.int64)
    m_tick = np.empty(cap, np.int64)
    o_car = np.empty(cap, np.int64)
    d_car = np.empty(cap, np.int64)
    t_car = np.empty(cap, np.int64)
    car_of = np.empty(cap, np.int64)
    scratch = np.empty(4 * cap + 5 * kk + RULE_SCRATCH_FIXED, np.int64)
    trip = new_scratch(cap, n_levels)
    views = np.zeros(2 * kk, dtype=CAR_VIEW)
    car_in = np.empty(cap, np.int64)             # each batch passenger's conventional car
    pos = np.empty(cap, np.int64)
    d_orig = np.empty(cap, np.int64)
    d_dest = np.empty(cap, np.int64)
    d_car = np.empty(cap, np.int64)
    waiting_at = np.empty(kk, np.int64)
    left_at = np.empty(kk, np.int64)
    pre = np.zeros((1, N_COUNTS), np.int64)
    b_off = np.zeros(3, np.int64)
    car_start = np.zeros(2, np.int64)
    car_stop = np.zeros(2, np.int64)
    q = 0
    ticket = 0
    for t in range(first, last):
        counts_t = out.counts[t]
        for c0 in range(0, L, kk):
            k = min(L, c0 + kk) - c0
            # conventional loading, car by car, of the queue
            n = 0
            for c in range(k):
                tr = t * L + c0 + c
                for i in range(offsets[tr], offsets[tr + 1]):
                    cell = draw_cell(uniforms[i], alias)
                    q_orig[q] = alias.cell_origin[cell]
                    q_dest[q] = alias.cell_dest[cell]
                    q_tick[q] = ticket
                    ticket += 1
                    q += 1
                _timed(q_orig, q_dest, q, timing, trip, pre, 0)
                kept = 0
                for i in range(q):
                    if trip.boarded[i]:
                        b_orig[n] = q_orig[i]
                        b_dest[n] = q_dest[i]
                        b_tick[n] = q_tick[i]
                        n += 1
                    else:
                        q_orig[kept] = q_orig[i]
                        q_dest[kept] = q_dest[i]
                        q_tick[kept] = q_tick[i]
                        kept += 1
                for i in range(n - (q - kept), n):
                    car_in[i] = c
                waiting_at[c] = q
                left_at[c] = kept
                q = kept
            # the rule shares each direction's passengers (each car keeps its up and its
            # down count, so no car need hold more at once than under conventional control)
            nu = 0
            for i in range(n):
                if b_dest[i] > b_orig[i]:
                    pos[nu] = i
                    nu += 1
            nd = nu
            for i in range(n):
                if b_dest[i] < b_orig[i]:
                    pos[nd] = i
                    nd += 1
            for x in range(n):
                d_orig[x] = b_orig[pos[x]]
                d_dest[x] = b_dest[pos[x]]
            for c in range(2 * kk):
                views[c]["room"] = 0
            for x in range(n):
                c = car_in[pos[x]]
                views[c + (0 if x < nu else k)]["room"] += 1
            b_off[1] = nu
            b_off[2] = n
            car_start[0] = 0
            car_stop[0] = k
            car_start[1] = k
            car_stop[1] = 2 * k
            rule(RuleBatches(d_orig, d_dest, b_off, views[:2 * k], car_start, car_stop), timing,
                 table, scratch, d_car)
            for x in range(n):
                car_of[pos[x]] = d_car[x]
            # time each car with its passengers; whoever its car cannot take waits again
            r = 0
            for c in range(k):
                m = 0
                for i in range(n):
                    if car_of[i] == c:            # its passengers, in arrival order
                        o, d, tk = b_orig[i], b_dest[i], b_tick[i]
                        x = m
                        while x > 0 and t_car[x - 1] > tk:
                            o_car[x], d_car[x], t_car[x] = o_car[x - 1], d_car[x - 1], t_car[x - 1]
                            x -= 1
                        o_car[x], d_car[x], t_car[x] = o, d, tk
                        m += 1
                out.rtt_s[t, c0 + c] = _timed(o_car, d_car, m, timing, trip, counts_t, c0 + c)
                for i in range(m):
                    o = o_car[i]
                    d = d_car[i]
                    if trip.boarded[i]:
                        if d > o:
                            for f in range(o, d):
                                out.load_up[ch, f] += 1
                        else:
                            for f in range(d, o):
                                out.load_down[ch, f] += 1
                    else:
                        r_orig[r] = o
                        r_dest[r] = d
                        r_tick[r] = t_car[i]
                        r += 1
                counts_t[c0 + c, OFFERED] = waiting_at[c]
                counts_t[c0 + c, LEFT_BEHIND] += left_at[c]
            lost = 0
            for i in range(n):
                if not (0 <= car_of[i] < k):
                    r_orig[r] = b_orig[i]
                    r_dest[r] = b_dest[i]
                    r_tick[r] = b_tick[i]
                    r += 1
                    lost += 1
            out.unallocated[t] += lost
            if r > 0:
                q = _merge(q_orig, q_dest, q_tick, q, r_orig, r_dest, r_tick, r,
                           m_orig, m_dest, m_tick)
    out.waiting_end[ch] = q


@njit(cache=True, inline="always")
def _timed(orig, dest, n, timing, trip, counts_out, row):
    """The trip of these ``n`` passengers (:func:`roundtrip.schedule.car_trip`, counts
    into counts_out[row]), and who boards it: trip.boarded[i] = 1 or 0."""
    lobby = True
    for i in range(n):
        trip.boarded[i] = 0
        if orig[i] != 0:
            lobby = False
    rtt = car_trip(orig, dest, n, timing, trip, counts_out, row)
    if lobby:                                  # the up-peak path: the first ones board
        for i in range(min(n, timing.rated_load)):
            trip.boarded[i] = 1
    return rtt


@njit(cache=True)
def _merge(q_orig, q_dest, q_tick, q, r_orig, r_dest, r_tick, r, m_orig, m_dest, m_tick):
    """The queue and the returned passengers merged in arrival order (by ticket) back into
    the queue arrays; returns the new queue length."""
    for a in range(1, r):                     # the returned ones, by ticket
        o, d, tk = r_orig[a], r_dest[a], r_tick[a]
        b = a
        while b > 0 and r_tick[b - 1] > tk:
            r_orig[b] = r_orig[b - 1]
            r_dest[b] = r_dest[b - 1]
            r_tick[b] = r_tick[b - 1]
            b -= 1
        r_orig[b], r_dest[b], r_tick[b] = o, d, tk
    i = 0
    j = 0
    m = 0
    while i < q or j < r:
        if j >= r or (i < q and q_tick[i] < r_tick[j]):
            m_orig[m], m_dest[m], m_tick[m] = q_orig[i], q_dest[i], q_tick[i]
            i += 1
        else:
            m_orig[m], m_dest[m], m_tick[m] = r_orig[j], r_dest[j], r_tick[j]
            j += 1
        m += 1
    for x in range(m):
        q_orig[x], q_dest[x], q_tick[x] = m_orig[x], m_dest[x], m_tick[x]
    return m


@njit(cache=True, nogil=True)
def group_trips(rule, stream, alias, layout, timing, table, lobby_only, out, c0, c1):
    """Chains c0 ... c1 - 1 of the stream's rounds (round t's car c is trip t L + c), each
    of ``layout.chain_rounds`` rounds, each round allocated by ``rule`` (a compiled batch
    driver) and every car timed. Chains are independent, so any split of them between
    threads (:func:`roundtrip.threads.run_chains`) gives the same numbers.

    Outputs (``out``, a :class:`GroupOut`): rtt_s[t, car] [s], counts[t, car, :]
    (trip counts as in :mod:`roundtrip.schedule`, with OFFERED the passengers waiting
    when the car leaves and LEFT_BEHIND those it leaves waiting), and per chain the
    passengers still waiting at its end and the summed stretch loads (up-peak: only
    the first stretch, the busiest). ``table`` is the rule's table, row k for k cars
    open.
    """
    n_rounds = (stream.offsets.shape[0] - 1) // layout.n_cars
    R = layout.chain_rounds
    columns = destination_table(alias)          # the up-peak draw's table (K records)
    for ch in range(c0, c1):
        first = ch * R
        last = min(n_rounds, first + R)
        if lobby_only:
            _uppeak_chain(rule, stream, ch, first, last, columns, layout, timing, table, out)
        else:
            _mixed_chain(rule, stream, ch, first, last, alias, layout, timing, table, out)
