"""`same-floor-first`: join a car that already stops at the passenger's floor."""
from __future__ import annotations

import numpy as np

from .earliest_leaving import earliest_with_room
from .registry import register_policy


@register_policy(
    "same-floor-first",
    summary="Each passenger, as they register, joins a car with room that already stops at "
            "their floor; only when none does are they given the car that leaves first. Cars "
            "collect passengers for the same floors, so they make fewer stops.",
    source="Immediate hall-call allocation grouping equal destinations, the simplest "
           "destination-control heuristic (common practice).")
def choose_same_floor_first(origin, destination, cars, timing, table):
    floor = destination if destination != 0 else origin
    joined = earliest_with_room(cars, np.uint64(1) << np.uint64(floor))
    if joined >= 0:
        return joined
    return earliest_with_room(cars, 0)
