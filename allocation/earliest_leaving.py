"""`earliest-leaving`: immediate allocation to the car that will leave the lobby first.

Conventional control in disguise: a lobby with up and down buttons loads each
passenger into the open car that opened first, or, when none is open, the next
car to come back. Allocating each passenger, as they register, to the car with
room that will leave first (the car that opened first on a tie) gives every
passenger the car they would have boarded under conventional control, so the
peak simulation must give the same numbers for both (a check of the engine).
"""
from __future__ import annotations

from numba import njit

from .registry import register_policy


@njit(cache=True, inline="always")
def earliest_with_room(cars, floor_mask):
    """The car with room that leaves first (opened first on a tie, then the lower number),
    among the cars whose up or down stops meet ``floor_mask`` (all cars when it is 0);
    -1 when none has room."""
    best = -1
    for c in range(cars.shape[0]):
        if cars[c]["room"] <= 0:
            continue
        if floor_mask != 0 and ((cars[c]["up_stops"] | cars[c]["down_stops"]) & floor_mask) == 0:
            continue
        if (best < 0 or cars[c]["leaves_in_s"] < cars[best]["leaves_in_s"]
                or (cars[c]["leaves_in_s"] == cars[best]["leaves_in_s"]
                    and cars[c]["opens_in_s"] < cars[best]["opens_in_s"])):
            best = c
    return best


@register_policy(
    "earliest-leaving",
    summary="Each passenger, as they register, is given the car with room that will leave "
            "the lobby first. It is conventional control written as an allocation, and is "
            "kept as the check that both give the same result.",
    source="Conventional up-peak loading, first car open first loaded (common practice); "
           "a check of the peak simulation, not a destination-control strategy.")
def choose_earliest_leaving(origin, destination, cars, timing, table):
    return earliest_with_room(cars, 0)
