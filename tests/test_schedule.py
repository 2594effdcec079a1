"""The trip schedule (roundtrip.schedule): the hand-worked trip of docs/trip_model.md stop
by stop, and, for any trip, the same trip as the plain twin (tests/reference_trip.py) and
as the summed round-trip time, with every time accounted for."""
from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from roundtrip.building import Building, LiftGroup
from roundtrip.kinematics import flight_time_s
from roundtrip.schedule import (N_COUNTS, car_trip, new_scratch, schedule_of, trip_timing)

from .reference_trip import reference_trip

HAND_BUILDING = Building("hand", (4.0, 3.5, 3.5), (1.0, 1.0, 1.0))
HAND_GROUP = LiftGroup(cars=1, rated_load_persons=2, rated_speed_mps=1.0, acceleration_mps2=1.0,
                       jerk_mps3=1.5, door_open_s=1.8, door_close_s=2.9, start_delay_s=0.5,
                       transfer_in_s=1.2, transfer_out_s=1.2)


def test_hand_worked_trip_stop_by_stop():
    """docs/trip_model.md, "The trip in time": floors at 0, 4.0, 7.5, 11.0 m, every flight
    d + 5/3 s, 5.2 s a stop, 1.2 s a transfer, rated load 2; passengers (0->2), (0->3),
    (0->1). Worked by hand there: leave the lobby at 7.6 s, floor 2 at 16.77 s (out at
    19.77 s, away at 23.17 s), floor 3 at 28.33 s (out at 31.33 s, away at 34.73 s), back
    at the lobby at 47.4 s = the round-trip time."""
    s = schedule_of([(0, 2), (0, 3), (0, 1)], HAND_BUILDING, HAND_GROUP)
    assert s.stop_floors == (0, 2, 3, 0)
    assert s.arrive_s == pytest.approx((0.0, 16.7667, 28.3333, 47.4), abs=1e-4)
    assert s.depart_s == pytest.approx((7.6, 23.1667, 34.7333, 47.4), abs=1e-4)
    assert s.boarded == (2, 0, 0, 0) and s.alighted == (0, 1, 1, 0)
    assert s.board_stop == (0, 0, -1) and s.alight_stop == (1, 2, -1)   # the third is left behind
    assert s.alight_s[:2] == pytest.approx((19.7667, 31.3333), abs=1e-4)
    assert s.round_trip_time_s == pytest.approx(47.4, abs=1e-12)
    assert s.stops == 2


@st.composite
def trips(draw, max_floors=63):
    """A building of 1 ... 63 served floors (uneven rises, an express zone sometimes), a
    group and up to 30 passengers of any direction."""
    n = draw(st.integers(1, max_floors))
    rises = draw(st.lists(st.floats(2.5, 6.0), min_size=n, max_size=n))
    building = Building("T", tuple(rises), (1.0,) * n, draw(st.sampled_from([0.0, 0.0, 20.0])))
    group = replace(HAND_GROUP, rated_load_persons=draw(st.integers(1, 10)),
                    rated_speed_mps=draw(st.sampled_from([1.0, 2.5, 6.0])))
    pairs = []
    for _ in range(draw(st.integers(0, 30))):
        o = draw(st.integers(0, n))
        d = draw(st.integers(0, n).filter(lambda x, o=o: x != o))
        if draw(st.booleans()):
            o = 0 if d != 0 else o                      # plenty of lobby traffic
        pairs.append((o, d) if o != d else (0, max(d, 1)))
    return building, group, pairs


@settings(max_examples=80)
@given(t=trips())
def test_schedule_is_the_reference_trip_in_time(t):
    """For any trip: the schedule's route is the plain twin's route, the same passengers
    board, its last time equals the summed round-trip time of car_trip and of the twin to
    the bit, and every time is accounted for: each leg takes the ideal flight time
    (checked against kinematics.flight_time_s), each stop the overhead plus its
    transfers, and every boarded passenger alights at their destination."""
    building, group, pairs = t
    s = schedule_of(pairs, building, group)
    timing = trip_timing(building, group)
    flight = timing.flight_s.tolist()
    ref = reference_trip(pairs, flight, group.rated_load_persons, group.stop_overhead_s,
                         group.transfer_in_s, group.transfer_out_s)
    assert list(s.stop_floors) == ref.route
    assert sum(x >= 0 for x in s.board_stop) == ref.boarded
    assert s.round_trip_time_s == ref.time_s
    o = np.array([p[0] for p in pairs], dtype=np.int64).reshape(-1)
    d = np.array([p[1] for p in pairs], dtype=np.int64).reshape(-1)
    counts = np.empty((1, N_COUNTS), np.int64)
    assert car_trip(o, d, o.size, timing, new_scratch(o.size, building.floors + 1), counts, 0) \
        == s.round_trip_time_s
    levels = building.levels_m
    tol = 1e-9 * max(1.0, s.round_trip_time_s)
    for e in range(len(s.stop_floors) - 1):
        a, b = s.stop_floors[e], s.stop_floors[e + 1]
        leg = flight_time_s(abs(levels[b] - levels[a]), group.rated_speed_mps,
                            group.acceleration_mps2, group.jerk_mps3)
        assert s.arrive_s[e + 1] - s.depart_s[e] == pytest.approx(leg, abs=tol)
        dwell = group.stop_overhead_s + s.boarded[e] * group.transfer_in_s + (
            s.alighted[e] * group.transfer_out_s if e > 0 else 0.0)
        assert s.depart_s[e] - s.arrive_s[e] == pytest.approx(dwell, abs=tol)
    # the route, read from the kernel's own schedule: strictly ascending to the highest
    # stop, strictly descending after it, and back where it started: the lobby, or, for a
    # trip without lobby traffic, its lowest stop (docs/trip_model.md)
    floors = list(s.stop_floors[1:-1])
    top = floors.index(max(floors)) if floors else 0
    assert all(a < b for a, b in zip(floors[:top], floors[1:top + 1]))
    assert all(a > b for a, b in zip(floors[top:], floors[top + 1:]))
    carried = [p for p, b in zip(pairs, s.board_stop) if b >= 0]   # who fitted decides
    lobby_traffic = any(o == 0 or d == 0 for o, d in carried) or not carried
    assert s.stop_floors[0] == s.stop_floors[-1] == (0 if lobby_traffic else min(s.stop_floors))
    for i, (orig, dest) in enumerate(pairs):
        if s.board_stop[i] >= 0:
            assert s.stop_floors[s.board_stop[i]] == orig
            assert s.stop_floors[s.alight_stop[i]] == dest
            assert s.alight_stop[i] > s.board_stop[i]
            assert s.alight_s[i] > s.arrive_s[s.alight_stop[i]]
        else:
            assert np.isnan(s.alight_s[i])


def test_schedule_refuses_an_impossible_passenger():
    with pytest.raises(ValueError, match="two different floors"):
        schedule_of([(0, 4)], HAND_BUILDING, HAND_GROUP)


@pytest.mark.parametrize("floors", [17, 32, 48, 63])
def test_every_floor_is_reached_where_it_is(floors):
    """Fixed cases on 17, 32, 48 and 63 floors (unequal rises): a trip to floor f alone
    stops at f and nowhere else, and takes exactly the two ideal flights (kinematics)
    plus two stops and one passenger's transfers; the same from floor f down; and a trip
    to every floor stops at each once, in order."""
    rises = tuple(3.4 + 0.35 * (f % 5) + (1.5 if f % 11 == 0 else 0.0) for f in range(1, floors + 1))
    b = Building(f"tall-{floors}", rises, (1.0,) * floors, 6.0)
    g = replace(HAND_GROUP, rated_load_persons=floors, rated_speed_mps=4.0)
    levels = b.levels_m
    for f in range(1, floors + 1):
        run = flight_time_s(levels[f], g.rated_speed_mps, g.acceleration_mps2, g.jerk_mps3)
        expected = 2 * run + 2 * g.stop_overhead_s + g.transfer_in_s + g.transfer_out_s
        for trip in ([(0, f)], [(f, 0)]):
            s = schedule_of(trip, b, g)
            assert s.stop_floors == (0, f, 0), (trip, s.stop_floors)
            assert s.round_trip_time_s == pytest.approx(expected, rel=1e-12)
    s = schedule_of([(0, f) for f in range(floors, 0, -1)], b, g)
    assert s.stop_floors == (0, *range(1, floors + 1), 0)
def test_trip_without_lobby_traffic_by_hand():
    """docs/trip_model.md, "A trip without lobby traffic": the hand-worked floors, every flight
    d + 5/3 s, 5.2 s a stop, 1.2 s a transfer; passengers (1 -> 3) and (2 -> 1). Nobody
    boards or alights at the lobby, so the trip starts and ends at floor 1, its lowest
    stop, counted once: route 1 -> 3 -> 2 -> 1, flights 8.667 + 5.167 + 5.167 = 19.0 s,
    3 stops x 5.2 s = 15.6 s, transfers 2 x 2.4 s = 4.8 s: RTT = 39.4 s; three stops above
    the lobby, highest reversal floor 3, lowest 1."""
    s = schedule_of([(1, 3), (2, 1)], HAND_BUILDING, replace(HAND_GROUP, rated_load_persons=2))
    assert s.stop_floors == (1, 3, 2, 1)
    assert s.round_trip_time_s == pytest.approx(39.4, abs=1e-9)
    ref = reference_trip([(1, 3), (2, 1)], trip_timing(HAND_BUILDING, HAND_GROUP).flight_s.tolist(),
                         2, HAND_GROUP.stop_overhead_s, 1.2, 1.2)
    assert (ref.time_s, ref.stops, ref.highest, ref.lowest) == (s.round_trip_time_s, 3, 3, 1)
    counts = np.empty((1, N_COUNTS), np.int64)
    o, d = np.array([1, 2]), np.array([3, 1])
    assert car_trip(o, d, 2, trip_timing(HAND_BUILDING, HAND_GROUP), new_scratch(2, 4), counts,
                    0) == s.round_trip_time_s
    assert list(counts[0, :3]) == [3, 3, 1]


def test_a_full_car_passes_a_landing_call_by_hand():
    """docs/trip_model.md: a full car answers no landing call. Rated load 1; passengers
    (3 -> 1) and then (2 -> 1): the car takes the first at floor 3, is full at floor 2,
    where nobody alights, and passes it; the second waits (left behind). Route 1 -> 3 -> 1:
    flights 2 x 8.667 = 17.333 s, 2 stops x 5.2 s = 10.4 s, transfers 2.4 s: 30.133 s."""
    one = replace(HAND_GROUP, rated_load_persons=1)
    s = schedule_of([(3, 1), (2, 1)], HAND_BUILDING, one)
    assert s.stop_floors == (1, 3, 1)
    assert s.round_trip_time_s == pytest.approx(2 * (7.0 + 5.0 / 3) + 10.4 + 2.4, abs=1e-9)
    assert s.board_stop == (1, -1)
