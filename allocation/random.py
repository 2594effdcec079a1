"""`random`: conventional control, the baseline every grouping gain is measured against."""
from __future__ import annotations

from .ordering import capped_sizes
from .registry import register


@register(
    "random",
    summary="Conventional control: passengers board the cars in the order they arrive, "
            "with no regard to where they are going. Each car therefore carries a random "
            "mix of destinations, as with up and down hall-call buttons.",
    source="The loading assumed by the classical round-trip formula (ISO 8100-32:2020; "
           "CIBSE Guide D, 2015): destinations independent of the car taken.",
    baseline=True, default=True)
def allocate_random(origins, destinations, cars, timing, table, scratch, car_out):
    """The batch in arrival order, cut into one equal group per car (each capped by the
    car's room, see :func:`allocation.ordering.capped_sizes`)."""
    n = origins.shape[0]
    capped_sizes(n, cars, scratch, 0)
    i = 0
    for c in range(cars.shape[0]):
        for _ in range(scratch[c]):
            car_out[i] = c
            i += 1
    for q in range(i, n):
        car_out[q] = -1
