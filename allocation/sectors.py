"""`sectors`: static floor bands, one per car, balanced on expected round-trip time.

The served floors 1 ... N are cut once into k contiguous bands (k = cars open).
A band's cost is its car's expected round-trip time when it serves the band's
share of the batch, by the classical round-trip formula with Poisson passenger
counts applied to the band on its real floor levels:

    RTT_b = 2 E[level of the highest call] / v + (S_b + 1) t_s + 2 m_b t_p

with m_b = k P W_b the band's expected passengers (W_b its population share, P
passengers per car), S_b = sum_{f in b} (1 - exp(-m_b u_f)), u_f = U_f / U_b,
and E[level] = sum_f (level_f - level_{f-1}) Pr(highest >= f) with
Pr(highest >= f) = 1 - exp(-m_b (1 - F_{f-1})) (ISO 8100-32:2020 / CIBSE
Guide D forms of S and H, Poisson version). The bands minimise the largest
band cost, found exactly by dynamic programming over the cut points (a
shortest-bottleneck path through the layered graph "j bands cover floors
1..f"), so the slowest car is as fast as a static zoning can make it.
"""
from __future__ import annotations

import math

import numpy as np
from numba import njit

from roundtrip.classical import expected_stops_poisson, stop_time_s
from roundtrip.kinematics import flight_time_s

from .ordering import all_at_lobby, cars_from_ranks, destination_order, lobby_rank_starts
from .registry import register


def band_round_trip_s(levels_m, populations, lo: int, hi: int, passengers: float,
                      rated_speed_mps: float, stop_time_s: float, transfer_s: float) -> float:
    """Expected round-trip time [s] of a car serving floors lo..hi (see the module notes)."""
    u = np.asarray(populations[lo - 1:hi], dtype=float)
    total = u.sum()
    if total <= 0 or passengers <= 0:
        return 2.0 * levels_m[lo] / rated_speed_mps + stop_time_s if passengers > 0 else 0.0
    share = u / total
    stops = expected_stops_poisson(share, passengers)
    below = np.concatenate(([0.0], np.cumsum(share)[:-1]))         # F_{f-1} within the band
    reach = -np.expm1(-passengers * np.clip(1.0 - below, 0.0, 1.0))  # Pr(highest >= f)
    rises = np.diff(np.asarray(levels_m, dtype=float))[lo - 1:hi]   # level_f - level_{f-1}
    level = float(levels_m[lo - 1]) * reach[0] + float(np.sum(rises * reach))
    return 2.0 * level / rated_speed_mps + (stops + 1.0) * stop_time_s + 2.0 * passengers * transfer_s


def floor_bands(building, group, cars_open: int, passengers_per_car: float):
    """The balanced bands: a list of (first floor, last floor), one per car (at most N)."""
    N = building.floors
    k = min(cars_open, N)
    levels = building.levels_m
    pops = np.asarray(building.populations, dtype=float)
    shares = pops / pops.sum()
    d_f = building.average_interfloor_height_m
    v = group.rated_speed_mps
    t_s = stop_time_s(flight_time_s(d_f, v, group.acceleration_mps2, group.jerk_mps3), d_f / v,
                      group.door_open_s, group.door_close_s, group.start_delay_s)
    batch = cars_open * max(passengers_per_car, 1e-9)

    cost = np.full((N + 2, N + 2), math.inf)
    for lo in range(1, N + 1):
        for hi in range(lo, N + 1):
            m = batch * shares[lo - 1:hi].sum()
            cost[lo, hi] = band_round_trip_s(levels, pops, lo, hi, m, v, t_s, group.transfer_s)
    # best[j, f]: least achievable largest cost when j bands cover floors 1..f
    best = np.full((k + 1, N + 1), math.inf)
    cut = np.zeros((k + 1, N + 1), dtype=int)
    best[0, 0] = 0.0
    for j in range(1, k + 1):
        for f in range(j, N + 1):
            for g in range(j - 1, f):
                c = max(best[j - 1, g], cost[g + 1, f])
                if c < best[j, f]:
                    best[j, f], cut[j, f] = c, g
    bands, f = [], N
    for j in range(k, 0, -1):
        g = cut[j, f]
        bands.append((g + 1, f))
        f = g
    return bands[::-1]


def prepare_sectors(building, group, cars_open, passengers_per_car):
    """The rule's table for ``cars_open`` cars: entry f is the car of floor f (floor 0,
    the lobby, goes with car 0)."""
    table = np.zeros(building.floors + 1, dtype=np.int64)
    for car, (lo, hi) in enumerate(floor_bands(building, group, cars_open, passengers_per_car)):
        table[lo:hi + 1] = car
    return table


@register(
    "sectors",
    summary="Static floor bands: the floors are split once into one band per car, sized so "
            "that every car's expected round trip is about equally long. Each passenger takes "
            "the car of the band their floor lies in.",
    source="Zoning of a lift group into floor bands (sectoring), a long-standing "
           "destination-control and up-peak technique (common practice); bands balanced by "
           "dynamic programming on the ISO 8100-32:2020 round-trip formula.",
    prepare=prepare_sectors, default=True, peak=True)
def allocate_sectors(origins, destinations, cars, timing, table, scratch, car_out):
    """Each passenger's car is the band of their upper floor (destination going up,
    origin going down), from row k of the table for k cars. When a band's car has
    no room left, the passenger goes to the nearest band with room (the lower one
    on a tie). Passengers are taken in destination order, so the result does not
    depend on the order they are listed in.

    When every passenger boards at the lobby the destination order is by floor
    alone, and the same allocation is found from the floor counts (see
    :func:`sectors_by_floor_counts`) without sorting the passengers."""
    bands = table[cars.shape[0]]
    if not sectors_by_floor_counts(origins, destinations, cars, bands, scratch, car_out):
        sectors_in_order(origins, destinations, cars, bands, scratch, car_out)


@njit(cache=True, inline="always")
def _home_car(floor, cars_open, bands):
    """The car of the band ``floor`` lies in (the top car above the table)."""
    home = bands[floor] if floor < bands.shape[0] else cars_open - 1
    return min(home, cars_open - 1)


@njit(cache=True, inline="always")
def _nearest_with_room(home, cars, work, taken):
    """``home`` if it has room, else the nearest car with room (the lower on a tie), or -1;
    car c has taken ``work[taken + c]`` of the batch so far."""
    k = cars.shape[0]
    for step in range(k):
        lower = home - step
        upper = home + step
        if lower >= 0 and work[taken + lower] < cars[lower]["room"]:
            return lower
        if upper < k and work[taken + upper] < cars[upper]["room"]:
            return upper
    return -1


@njit(cache=True)
def sectors_in_order(origins, destinations, cars, bands, scratch, car_out):
    """The rule as stated: passengers one by one in :func:`destination_order`."""
    n = origins.shape[0]
    k = cars.shape[0]
    order = scratch[:n]
    for c in range(k):
        scratch[n + c] = 0                    # taken by car c: scratch[n + c]
    destination_order(origins, destinations, order, scratch[n + k:])
    for r in range(n):
        i = order[r]
        floor = destinations[i] if destinations[i] > origins[i] else origins[i]
        car = _nearest_with_room(_home_car(floor, k, bands), cars, scratch, n)
        car_out[i] = car
        if car >= 0:
            scratch[n + car] += 1


@njit(cache=True, inline="always")
def sectors_by_floor_counts(origins, destinations, cars, bands, scratch, car_out):
    """The same allocation as :func:`sectors_in_order`, for a batch boarding at the
    lobby; returns False, having written nothing to ``car_out``, for any other batch.

    With every origin at the lobby the destination order is by floor alone, so the
    passengers of one band are consecutive in it (:func:`allocation.ordering.
    lobby_rank_starts` gives where each floor starts), and all of them search the
    cars in the same order from the band's car. What each car takes only grows, so
    in that order they fill one car, then the next: each band is one or a few runs
    of ranks. The bands are walked once giving each run of ranks its car, and each
    passenger then reads the car of their rank, counted on the fly in arrival order.
    """
    n = destinations.shape[0]
    if n == 0 or not all_at_lobby(origins):
        return False
    k = cars.shape[0]
    top = lobby_rank_starts(destinations, scratch)   # floor starts: scratch[0 ... top + 1]
    taken = top + 2                                   # taken by car c: scratch[taken + c]
    ranks = taken + k                                 # car of rank r: scratch[ranks + r]
    for c in range(k):
        scratch[taken + c] = 0
    rank = 0
    f = 1
    while f <= top:
        home = _home_car(f, k, bands)
        g = f                                 # the band's floors f ... g (up to top)
        while g < top and _home_car(g + 1, k, bands) == home:
            g += 1
        left = scratch[g + 1] - scratch[f]
        while left > 0:
            car = _nearest_with_room(home, cars, scratch, taken)
            take = left if car < 0 else min(left, cars[car]["room"] - scratch[taken + car])
            for r in range(rank, rank + take):
                scratch[ranks + r] = car
            rank += take
            left -= take
            if car >= 0:
                scratch[taken + car] += take
        f = g + 1
    cars_from_ranks(destinations, scratch, ranks, car_out)
    return True
