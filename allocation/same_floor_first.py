"""`same-floor-first`: join a car that already stops at the passenger's floor."""
from __future__ import annotations

import numpy as np

from .earliest_leaving import earliest_with_room
from .registry import register_policy


@register_policy(
    "same-floor-first",
    summary="Each passenger, as they register, joins a car with room that already stops at "
            "their floor; when none does, they are given a car with room that has the fewest "
            "stops promised, the one that leaves first among those. Cars collect passengers "
            "for the same floors, so they make fewer stops.",
    source="Immediate hall-call allocation grouping equal destinations, the simplest "
           "destination-control heuristic (common practice).")
def choose_same_floor_first(origin, destination, cars, timing, table):
    """A car already stopping at the floor, the earliest-leaving of them; else the
    earliest-leaving of the cars with room and the fewest promised stops. (Falling back
    to the earliest-leaving car of all would make the rule conventional control: with
    cars filled in the order they leave, the only car with promised stops and room is
    the earliest-leaving one, so a new floor would always join it.)"""
    floor = destination if destination != 0 else origin
    joined = earliest_with_room(cars, np.uint64(1) << np.uint64(floor))
    if joined >= 0:
        return joined
    fewest = 65
    for c in range(cars.shape[0]):
        if cars[c]["room"] > 0:
            stops = cars[c]["up_stops"] | cars[c]["down_stops"]
            n = 0
            while stops:
                stops &= stops - np.uint64(1)
                n += 1
            fewest = min(fewest, n)
    best = -1
    for c in range(cars.shape[0]):
        if cars[c]["room"] <= 0:
            continue
        stops = cars[c]["up_stops"] | cars[c]["down_stops"]
        n = 0
        while stops:
            stops &= stops - np.uint64(1)
            n += 1
        if n == fewest and (best < 0 or cars[c]["leaves_in_s"] < cars[best]["leaves_in_s"]
                            or (cars[c]["leaves_in_s"] == cars[best]["leaves_in_s"]
                                and cars[c]["opens_in_s"] < cars[best]["opens_in_s"])):
            best = c
    return best
