"""`sorted`: destination grouping by sorting the batch on destination."""
from __future__ import annotations

from .ordering import all_at_lobby, destination_order, equal_cut, equal_cut_by_destination
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
    if all_at_lobby(origins):             # up-peak: the same cut, found without sorting
        equal_cut_by_destination(destinations, cars_open, car_out, scratch)
        return
    order = scratch[:n]
    destination_order(origins, destinations, order, scratch[n:])
    equal_cut(order, n, cars_open, car_out)
