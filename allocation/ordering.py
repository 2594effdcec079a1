"""Shared building blocks of the rules: a stable destination order and equal cuts.

All are numba-compatible functions compiled once (``njit``), callable from a
rule's body in the kernel and from plain Python alike. Those on the hot
up-peak path take the rule's whole working array and an offset into it rather
than a slice of it: a slice of a reference-counted array costs an atomic
count at every use, a dozen of which would be a fifth of a batch's time.
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
    if all_at_lobby(origins):             # up-peak: the destination is the whole key
        lobby_rank_starts(destinations, work)
        for i in range(n):
            d = destinations[i]
            order_out[work[d]] = i
            work[d] += 1
        return
    levels = 1
    for i in range(n):
        levels = max(levels, origins[i] + 1, destinations[i] + 1)
    count = work[:2 * levels + 1]
    count[:] = 0
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


@njit(cache=True, inline="always")
def all_at_lobby(origins):
    """True when every passenger boards at the lobby (floor 0), as in up-peak."""
    above = 0
    for i in range(origins.shape[0]):
        above |= origins[i]                # origins are >= 0: the OR is 0 only if all are
    return above == 0


@njit(cache=True, inline="always")
def lobby_rank_starts(destinations, start):
    """Where each floor's passengers start in :func:`destination_order` when every
    passenger boards at the lobby (see :func:`all_at_lobby`).

    With every origin at the lobby the stable destination order puts the
    passengers for floor f at ranks start_f, start_f + 1, ... in arrival order,
    start_f being the number bound for floors below f. Writes start_f into
    ``start[f]`` for f = 0 ... top + 1 (``start[top + 1]`` = n) and returns top,
    the highest destination. ``start`` needs top + 2 entries (at most 65).
    """
    top = 0
    for i in range(destinations.shape[0]):
        top = max(top, destinations[i])
    for f in range(top + 2):
        start[f] = 0
    for i in range(destinations.shape[0]):
        start[destinations[i] + 1] += 1
    for f in range(1, top + 2):
        start[f] += start[f - 1]
    return top


@njit(cache=True, inline="always")
def cars_from_ranks(destinations, work, rank_base, car_out):
    """Each passenger's car is the car of their rank in the destination order: the car of
    rank r is ``work[rank_base + r]``, and each passenger's rank is counted on the fly
    from the floor starts ``work[0 ...]`` of :func:`lobby_rank_starts` (used up)."""
    for i in range(destinations.shape[0]):
        d = destinations[i]
        car_out[i] = work[rank_base + work[d]]
        work[d] += 1


@njit(cache=True, inline="always")
def capped_sizes(n, cars, work, base):
    """How many of n passengers each car takes in an equal cut capped by its room.

    First the equal cut: car c takes floor((c + 1) n / k) - floor(c n / k) (sizes
    differ by at most one, as :func:`equal_cut`). A car given more than its
    ``room`` keeps its room, and what it gives up is cut equally again among the
    cars that still have room, until everyone is placed or every car is full.
    With every room at least ceil(n / k) this is :func:`equal_cut` exactly; when the
    rooms add up to n or less every car takes its room.
    Writes car c's size into ``work[base + c]``; returns the passengers placed (n, or
    the total room).
    """
    k = cars.shape[0]
    total_room = 0
    for c in range(k):
        total_room += cars[c]["room"]
    if total_room <= n:                   # every car full: each takes its room
        for c in range(k):
            work[base + c] = cars[c]["room"]
        return total_room
    excess = 0
    below = 0
    for c in range(k):
        upto = (c + 1) * n // k
        size = upto - below
        below = upto
        room = cars[c]["room"]
        if size > room:
            excess += size - room
            size = room
        work[base + c] = size
    if excess > 0:
        return _spread_excess(excess, n, cars, work[base:base + k])
    return n


@njit(cache=True)
def _spread_excess(excess, n, cars, sizes):
    """The rest of :func:`capped_sizes`: cut ``excess`` equally among the cars with room
    left, again and again, until it is placed or every car is full."""
    k = cars.shape[0]
    while excess > 0:
        spare = 0
        for c in range(k):
            if sizes[c] < cars[c]["room"]:
                spare += 1
        if spare == 0:
            break
        j = 0
        given = 0
        for c in range(k):
            room = cars[c]["room"]
            if sizes[c] < room:
                share = (j + 1) * excess // spare - j * excess // spare
                j += 1
                add = min(share, room - sizes[c])
                sizes[c] += add
                given += add
        excess -= given
    return n - excess


@njit(cache=True)
def capped_cut(order, n, cars, sizes, car_out):
    """Give the passengers order[0 .. n-1] to the cars in consecutive groups of the
    sizes :func:`capped_sizes` finds (``sizes`` is its working space, one entry per
    car); any passenger beyond every car's room gets -1."""
    capped_sizes(n, cars, sizes, 0)
    r = 0
    for c in range(cars.shape[0]):
        for _ in range(sizes[c]):
            car_out[order[r]] = c
            r += 1
    for q in range(r, n):
        car_out[order[q]] = -1


@njit(cache=True)
def equal_cut(order, n, cars, car_out):
    """Give the passengers order[0 .. n-1] to ``cars`` cars in consecutive, equal groups.

    Car c takes positions floor(c n / cars) ... floor((c + 1) n / cars) - 1, so the
    group sizes differ by at most one.
    """
    for c in range(cars):
        for r in range(c * n // cars, (c + 1) * n // cars):
            car_out[order[r]] = c
