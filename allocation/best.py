"""`best`: the allocation of least mean round-trip time, by exhaustive search (tiny batches)."""
from __future__ import annotations

import numpy as np

from roundtrip.schedule import N_COUNTS, car_trip, new_scratch

from .registry import register

MAX_BATCH = 10


@register(
    "best",
    summary="A bound, not a control: every way of sharing a tiny batch between the cars, "
            "each car taking at most its room, is tried and the one with the least mean "
            "round-trip time is kept. No rule can do better on the same passengers.",
    source="Exhaustive enumeration (a bound for tests and experiments); identical cars, so "
           "allocations that differ only by car numbering are tried once.",
    max_batch=MAX_BATCH, allocates=True)
def allocate_best(origins, destinations, cars, timing, table, scratch, car_out):
    """Each car takes at most its room; every trip is timed by the trip model
    (:func:`roundtrip.schedule.car_trip`) with the given timing."""
    n = origins.shape[0]
    k = cars.shape[0]
    levels = timing.flight_s.shape[0]
    assign = np.zeros(n, np.int64)
    best = np.zeros(n, np.int64)
    load = np.zeros(k, np.int64)
    o_car = np.empty(max(n, 1), np.int64)
    d_car = np.empty(max(n, 1), np.int64)
    trip_scratch = new_scratch(n, levels)
    counts = np.empty((1, N_COUNTS), np.int64)
    best_total = np.inf
    # Depth-first over assignments in restricted-growth form (car numbers appear in
    # first-use order, so identical cars are not tried twice), each car at most its
    # room; assign[i] = -1 means "not yet tried". Cars of unequal room are not
    # interchangeable, so the restricted growth applies only when every room is equal.
    if n == 0:
        return
    equal = True
    for c in range(k):
        if cars[c]["room"] != cars[0]["room"]:
            equal = False
    assign[:] = -1
    i = 0
    while i >= 0:
        if assign[i] >= 0:
            load[assign[i]] -= 1                  # undo the previous choice
        limit = k - 1
        if equal:
            limit = 0
            for p in range(i):
                limit = max(limit, assign[p] + 1)
            limit = min(limit, k - 1)
        c = assign[i] + 1
        while c <= limit and load[c] >= cars[c]["room"]:
            c += 1
        if c > limit:
            assign[i] = -1
            i -= 1
            continue
        assign[i] = c
        load[c] += 1
        if i < n - 1:
            i += 1
            continue
        total = 0.0
        for car in range(k):
            m = 0
            for p in range(n):
                if assign[p] == car:
                    o_car[m] = origins[p]
                    d_car[m] = destinations[p]
                    m += 1
            total += car_trip(o_car, d_car, m, timing, trip_scratch, counts, 0)
        if total < best_total:
            best_total = total
            best[:] = assign
    for p in range(n):
        car_out[p] = best[p] if best_total < np.inf else -1
