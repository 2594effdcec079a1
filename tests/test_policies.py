"""The immediate policies of destination control, each on car views written out by hand.

A policy gets one registering passenger and the cars open to them (room, load, the stops
already promised, seconds until each car leaves and opens) and names a car, irrevocably
(docs/rules.md). Each case below is worked from the policy's statement in the registry
(``liftsort peak`` offers them), through the registry's plain call
(:meth:`allocation.registry.Policy.choose`), which runs the rule as Python.
"""
from __future__ import annotations

import numpy as np
import pytest

from allocation.contract import CAR_VIEW
from allocation.registry import get_policy
from roundtrip.building import Building, LiftGroup
from roundtrip.schedule import trip_timing

# An invented six-storey building, 3.5 m storeys; transfer 1.2 s each way, stop overhead
# (door open + close + start delay) 1.8 + 2.9 + 0.5 = 5.2 s.
BUILDING = Building("Wren Yard (invented)", (3.5,) * 6, (60.0,) * 6)
GROUP = LiftGroup(cars=3, rated_load_persons=13, rated_speed_mps=1.6, acceleration_mps2=1.0,
                  jerk_mps3=1.5, door_open_s=1.8, door_close_s=2.9, start_delay_s=0.5)
TIMING = trip_timing(BUILDING, GROUP)


def cars(*rows):
    """Car views from (room, load, promised floors, leaves in [s], opens in [s])."""
    out = np.zeros(len(rows), dtype=CAR_VIEW)
    for c, (room, load, floors, leaves, opens) in enumerate(rows):
        mask = 0
        for f in floors:
            mask |= 1 << f
        out[c] = (room, load, np.uint64(mask), np.uint64(0), leaves, opens)
    return out


def choose(policy, destination, view):
    return get_policy(policy).choose(0, destination, view, TIMING)


def test_earliest_leaving_is_the_car_with_room_that_leaves_first():
    view = cars((3, 0, [], 5.0, 0.0), (0, 13, [2], 2.0, 0.0), (2, 1, [4], 8.0, 0.0))
    assert choose("earliest-leaving", 4, view) == 0          # car 1 leaves first but is full
    view = cars((3, 0, [], 5.0, 4.0), (3, 0, [], 5.0, 1.0))
    assert choose("earliest-leaving", 4, view) == 1          # a tie: the car that opened first
    assert choose("earliest-leaving", 4, cars((0, 13, [1], 1.0, 0.0))) == -1   # none has room


def test_same_floor_first_joins_a_car_already_stopping_at_the_floor():
    view = cars((5, 0, [], 1.0, 0.0), (4, 2, [2, 5], 9.0, 0.0), (4, 2, [5], 20.0, 0.0))
    assert choose("same-floor-first", 5, view) == 1          # of the two stopping at 5, the earlier
    assert choose("same-floor-first", 3, view) == 0          # nobody stops at 3: fewest promised stops
    view = cars((5, 1, [6], 1.0, 0.0), (4, 2, [2, 5], 9.0, 0.0), (4, 1, [4], 20.0, 0.0))
    assert choose("same-floor-first", 3, view) == 0          # one promised stop each: the earlier
    view = cars((0, 13, [3], 1.0, 0.0), (4, 2, [2, 5], 9.0, 0.0))
    assert choose("same-floor-first", 3, view) == 1          # the car stopping at 3 is full


def test_least_added_time_weighs_a_short_wait_against_an_extra_stop_for_others():
    # Car 0 empty, leaving in 10 s; car 1 leaving in 2 s with 3 passengers for floor 5.
    # Joining car 1 for floor 3 costs 2 + 3 x 1.2 (one more boarding) + 3 x (1.2 + 5.2 +
    # extra flight >= 0) (the three ride past a new stop) >= 24.8 s > 10 s: car 0.
    view = cars((10, 0, [], 10.0, 0.0), (10, 3, [5], 2.0, 0.0))
    assert choose("least-added-time", 3, view) == 0
    # When car 1 already stops at 3 (stops {3, 5}: half its riders, 1.5, ride past 3):
    # 2 + 3.6 + 1.5 x 1.2 = 7.4 s < 10 s: car 1.
    view = cars((10, 0, [], 10.0, 0.0), (10, 3, [3, 5], 2.0, 0.0))
    assert choose("least-added-time", 3, view) == 1
    # Both empty: the one that leaves first, whatever its number.
    assert choose("least-added-time", 3, cars((10, 0, [], 6.0, 0.0), (10, 0, [], 3.0, 0.0))) == 1


@pytest.mark.parametrize("policy", ["earliest-leaving", "same-floor-first", "least-added-time"])
def test_no_policy_gives_a_full_car(policy):
    view = cars((0, 13, [3], 0.0, 0.0), (0, 13, [], 1.0, 0.0), (1, 12, [6], 30.0, 0.0))
    assert choose(policy, 3, view) == 2
    assert choose(policy, 3, view[:2]) == -1
