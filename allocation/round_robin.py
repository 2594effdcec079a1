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
def allocate_round_robin(origins, destinations, cars, timing, table, scratch, car_out):
    """Passenger i goes to car i mod k, or the next car in turn that has room."""
    k = cars.shape[0]
    for c in range(k):
        scratch[c] = 0                        # taken by car c
    turn = 0                                  # i mod k
    for i in range(origins.shape[0]):
        car_out[i] = -1
        c = turn
        for _ in range(k):
            if scratch[c] < cars[c]["room"]:
                car_out[i] = c
                scratch[c] += 1
                break
            c = c + 1 if c + 1 < k else 0
        turn = turn + 1 if turn + 1 < k else 0
