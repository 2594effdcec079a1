"""`sorted`: destination grouping by sorting the batch on destination."""
from __future__ import annotations

from numba import njit

from .ordering import (all_at_lobby, cars_from_ranks, destination_order, equal_cut,
                       lobby_rank_starts)
from .registry import register


@register(
    "sorted",
    summary="Destination grouping: the waiting passengers are lined up by destination floor "
            "and the line is cut into one equal group per car. Passengers for neighbouring "
            "floors share a car, so each car makes fewer stops and turns back lower.",
    source="Destination-control principle of grouping passengers with the same or adjacent "
           "destinations into one car (common practice; CIBSE Guide D, 2015, section on "
           "destination control, from memory).")
def allocate_sorted(origins, destinations, cars_open, car_limit, params, scratch, car_out):
    n = origins.shape[0]
    if all_at_lobby(origins):
        # up-peak: the same cut made on the ranks of the destination order, without
        # building the order
        sorted_at_lobby(destinations, cars_open, scratch, car_out)
        return
    order = scratch[:n]
    destination_order(origins, destinations, order, scratch[n:])
    equal_cut(order, n, cars_open, car_out)


@njit(cache=True, inline="always")
def sorted_at_lobby(destinations, cars_open, scratch, car_out):
    """`sorted` for a batch boarding at the lobby: the equal cut of
    :func:`allocation.ordering.equal_cut` is made on the ranks of the destination
    order (:func:`allocation.ordering.lobby_rank_starts`), and each passenger reads
    the car of their rank."""
    n = destinations.shape[0]
    top = lobby_rank_starts(destinations, scratch)
    car_of_rank = scratch[top + 2:top + 2 + n]
    for c in range(cars_open):
        for r in range(c * n // cars_open, (c + 1) * n // cars_open):
            car_of_rank[r] = c
    cars_from_ranks(destinations, car_of_rank, scratch, car_out)
