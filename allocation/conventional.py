"""`random`: conventional control, the baseline every grouping gain is measured against."""
from __future__ import annotations

from .ordering import equal_cut
from .registry import register


@register(
    "random",
    summary="Conventional control: passengers board the cars in the order they arrive, "
            "with no regard to where they are going. Each car therefore carries a random "
            "mix of destinations, as with up and down hall-call buttons.",
    source="The loading assumed by the classical round-trip formula (ISO 8100-32:2020; "
           "CIBSE Guide D, 2015): destinations independent of the car taken.")
def allocate_random(origins, destinations, cars_open, car_limit, params, scratch, car_out):
    n = origins.shape[0]
    order = scratch[:n]
    for i in range(n):
        order[i] = i
    equal_cut(order, n, cars_open, car_out)
