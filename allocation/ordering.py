"""Shared building blocks of the rules: a stable destination order and equal cuts.

Both are numba-compatible functions compiled once (``njit``), callable from a
rule's body in the kernel and from plain Python alike.
"""
from __future__ import annotations

import numpy as np
from numba import njit


@njit(cache=True)
def destination_order(origins, destinations, order_out, work):
    """Passengers in destination order, stable in arrival order.

    Up passengers (origin below destination) first, by destination ascending and
    then origin ascending; then down passengers by origin descending and then
    destination descending. A stable counting sort, O(n + floors): one pass
    when every passenger boards at the lobby, else two (least significant key
    first). ``work`` is working space of at least n + 2 x floors + 3 entries.
    """
    n = origins.shape[0]
    if n == 0:
        return
    levels = 1
    lobby_only = True
    for i in range(n):
        levels = max(levels, origins[i] + 1, destinations[i] + 1)
        if origins[i] != 0:
            lobby_only = False
    count = work[:2 * levels + 1]
    count[:] = 0
    if lobby_only:                        # up-peak: the destination is the whole key
        for i in range(n):
            count[destinations[i] + 1] += 1
        for k in range(1, levels + 1):
            count[k] += count[k - 1]
        for i in range(n):
            order_out[count[destinations[i]]] = i
            count[destinations[i]] += 1
        return
    tmp = work[2 * levels + 1:2 * levels + 1 + n]
    for i in range(n):                    # pass 1: by the minor key
        count[_minor_key(origins[i], destinations[i], levels) + 1] += 1
    for k in range(1, 2 * levels + 1):
        count[k] += count[k - 1]
    for i in range(n):
        key = _minor_key(origins[i], destinations[i], levels)
        tmp[count[key]] = i
        count[key] += 1
    count[:] = 0
    for i in range(n):                    # pass 2: by the major key, stable
        count[_major_key(origins[i], destinations[i], levels) + 1] += 1
    for k in range(1, 2 * levels + 1):
        count[k] += count[k - 1]
    for r in range(n):
        i = tmp[r]
        key = _major_key(origins[i], destinations[i], levels)
        order_out[count[key]] = i
        count[key] += 1


@njit(cache=True, inline="always")
def _major_key(o, d, levels):
    """Up: the destination; down: after every up key, by origin descending."""
    return d if d > o else levels + (levels - 1 - o)


@njit(cache=True, inline="always")
def _minor_key(o, d, levels):
    """Up: the origin; down: the destination, descending."""
    return o if d > o else levels - 1 - d


@njit(cache=True)
def equal_cut(order, n, cars, car_out):
    """Give the passengers order[0 .. n-1] to ``cars`` cars in consecutive, equal groups.

    Car c takes positions floor(c n / cars) ... floor((c + 1) n / cars) - 1, so the
    group sizes differ by at most one.
    """
    for c in range(cars):
        for r in range(c * n // cars, (c + 1) * n // cars):
            car_out[order[r]] = c
