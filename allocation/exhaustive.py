"""`best`: the allocation of least mean round-trip time, by exhaustive search (tiny batches)."""
from __future__ import annotations

import numpy as np

from roundtrip._trip_kernel import car_trip

from .registry import register

MAX_BATCH = 10


def prepare_best(building, group, cars_open, passengers_per_car):
    """params = [floors + 1, stop overhead, t_in, t_out, flight-time table row by row]."""
    from roundtrip.montecarlo import flight_table_s
    table = flight_table_s(building, group)
    head = [table.shape[0], group.stop_overhead_s, group.transfer_in_s, group.transfer_out_s]
    return np.concatenate((head, table.ravel()))


@register(
    "best",
    summary="A bound, not a control: every way of sharing a tiny batch between the cars, "
            "each car taking at most its equal share, is tried and the one with the least "
            "mean round-trip time is kept. No rule can do better on the same passengers.",
    source="Exhaustive enumeration (a bound for tests and experiments); identical cars, so "
           "allocations that differ only by car numbering are tried once.",
    prepare=prepare_best, max_batch=MAX_BATCH)
def allocate_best(origins, destinations, cars_open, car_limit, params, scratch, car_out):
    n = origins.shape[0]
    levels = int(params[0])
    flight = params[4:4 + levels * levels].reshape((levels, levels))
    overhead, t_in, t_out = params[1], params[2], params[3]
    assign = np.zeros(n, np.int64)
    best = np.zeros(n, np.int64)
    load = np.zeros(cars_open, np.int64)
    o_car = np.empty(max(n, 1), np.int64)
    d_car = np.empty(max(n, 1), np.int64)
    order = np.empty(max(n, 1), np.int64)
    alight = np.empty(levels, np.int64)
    mask = np.empty(1, np.uint64)
    counts = np.empty((1, 7), np.int64)
    best_total = np.inf
    # Depth-first over assignments in restricted-growth form (car numbers appear in
    # first-use order, so identical cars are not tried twice), each car at most
    # `car_limit` passengers; assign[i] = -1 means "not yet tried".
    if n == 0:
        return
    assign[:] = -1
    i = 0
    while i >= 0:
        if assign[i] >= 0:
            load[assign[i]] -= 1                  # undo the previous choice
        limit = 0
        for p in range(i):
            limit = max(limit, assign[p] + 1)
        limit = min(limit, cars_open - 1)
        c = assign[i] + 1
        while c <= limit and load[c] >= car_limit:
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
        for car in range(cars_open):
            m = 0
            for p in range(n):
                if assign[p] == car:
                    o_car[m] = origins[p]
                    d_car[m] = destinations[p]
                    m += 1
            total += car_trip(o_car, d_car, m, flight, car_limit, overhead, t_in, t_out,
                              order, alight, mask, counts, 0)
        if total < best_total:
            best_total = total
            best[:] = assign
    for p in range(n):
        car_out[p] = best[p] if best_total < np.inf else -1
