"""`round-robin`: the worked example of how to add a rule (see DEVELOPERS.md).

It deals passengers to the cars like cards, one each in turn. It is a
conventional rule (no regard to destination) and so must perform like
`random` on average: the tests check exactly that.
"""
from __future__ import annotations

from .registry import register


@register(
    "round-robin",
    summary="Worked example: passengers are dealt to the cars in turn, like cards, with no "
            "regard to destination. It should perform like conventional control.",
    source="Worked example for contributors; a conventional rule by construction.")
def allocate_round_robin(origins, destinations, cars_open, car_limit, params, scratch, car_out):
    for i in range(origins.shape[0]):
        car_out[i] = i % cars_open
