"""Shared building blocks of the rules: a stable destination order and equal cuts.

Both are numba-compatible functions compiled once (``njit``), callable from a
rule's body in the kernel and from plain Python alike.
"""
from __future__ import annotations

import numpy as np
from numba import njit


@njit(cache=True)
def destination_order(origins, destinations, order_out):
    """Passengers in destination order, stable in arrival order.

    Up passengers (origin below destination) first, by destination ascending and
    then origin ascending; then down passengers by origin descending and then
    destination descending. Two passes of a stable counting sort (least
    significant key first), O(n + floors).
    """
    n = origins.shape[0]
    if n == 0:
        return
    levels = 1
    for i in range(n):
        levels = max(levels, origins[i] + 1, destinations[i] + 1)
    major = np.empty(n, np.int64)
    minor = np.empty(n, np.int64)
    for i in range(n):
        o, d = origins[i], destinations[i]
        if d > o:
            major[i] = d
            minor[i] = o
        else:
            major[i] = levels + (levels - 1 - o)
            minor[i] = levels - 1 - d
    tmp = np.empty(n, np.int64)
    count = np.zeros(2 * levels + 1, np.int64)
    for i in range(n):                    # pass 1: by the minor key
        count[minor[i] + 1] += 1
    for k in range(1, 2 * levels + 1):
        count[k] += count[k - 1]
    for i in range(n):
        tmp[count[minor[i]]] = i
        count[minor[i]] += 1
    count[:] = 0
    for i in range(n):                    # pass 2: by the major key, stable
        count[major[i] + 1] += 1
    for k in range(1, 2 * levels + 1):
        count[k] += count[k - 1]
    for r in range(n):
        i = tmp[r]
        order_out[count[major[i]]] = i
        count[major[i]] += 1


@njit(cache=True)
def equal_cut(order, n, cars, car_out):
    """Give the passengers order[0 .. n-1] to ``cars`` cars in consecutive, equal groups.

    Car c takes positions floor(c n / cars) ... floor((c + 1) n / cars) - 1, so the
    group sizes differ by at most one.
    """
    for c in range(cars):
        for r in range(c * n // cars, (c + 1) * n // cars):
            car_out[order[r]] = c
