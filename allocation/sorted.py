"""`sorted`: destination grouping by sorting the batch on destination."""
from __future__ import annotations

from numba import njit

from .ordering import (all_at_lobby, capped_cut, capped_sizes, cars_from_ranks,
                       destination_order, lobby_rank_starts)
from .registry import register


@register(
    "sorted",
    summary="Destination grouping: the waiting passengers are lined up by destination floor "
            "and the line is cut into one equal group per car. Passengers for neighbouring "
            "floors share a car, so each car makes fewer stops and turns back lower.",
    source="Destination-control principle of grouping passengers with the same or adjacent "
           "destinations into one car (common practice; CIBSE Guide D, 2015, section on "
           "destination control, from memory).",
    default=True, peak=True)
def allocate_sorted(origins, destinations, cars, timing, table, scratch, car_out):
    """The batch in :func:`allocation.ordering.destination_order`, cut into consecutive
    groups, one per car, equal but for the cars' room
    (:func:`allocation.ordering.capped_cut`)."""
    n = origins.shape[0]
    if all_at_lobby(origins):
        # up-peak: the same cut made on the ranks of the destination order, without
        # building the order
        sorted_at_lobby(destinations, cars, scratch, car_out)
        return
    order = scratch[:n]
    destination_order(origins, destinations, order, scratch[n + cars.shape[0]:])
    capped_cut(order, n, cars, scratch[n:n + cars.shape[0]], car_out)


@njit(cache=True, inline="always")
def sorted_at_lobby(destinations, cars, scratch, car_out):
    """`sorted` for a batch boarding at the lobby: the cut of
    :func:`allocation.ordering.capped_cut` is made on the ranks of the destination
    order (:func:`allocation.ordering.lobby_rank_starts`), and each passenger reads
    the car of their rank."""
    n = destinations.shape[0]
    k = cars.shape[0]
    top = lobby_rank_starts(destinations, scratch)        # floor starts: scratch[0 ... top + 1]
    sizes = top + 2                                        # each car's size: scratch[sizes + c]
    ranks = sizes + k                                      # car of rank r: scratch[ranks + r]
    placed = capped_sizes(n, cars, scratch, sizes)
    r = 0
    for c in range(k):
        for _ in range(scratch[sizes + c]):
            scratch[ranks + r] = c
            r += 1
    for q in range(placed, n):
        scratch[ranks + q] = -1
    cars_from_ranks(destinations, scratch, ranks, car_out)
