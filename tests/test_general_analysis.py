"""The classical round trip for any traffic mix (roundtrip.general_analysis) checked
against references the project did not write into the formulae:

- "exact enumeration": every tuple of P passengers over the cells of the
  origin-destination matrix, each with its probability, timed by the plain twin of
  the trip model (tests/reference_trip.py);
- "scipy reference": Poisson arrivals as a sum over passenger counts weighted by
  ``scipy.stats.poisson.pmf``, each count enumerated exactly;
- the Monte Carlo of the trip model (liftsort simulate --poisson), where every jump
  reaches rated speed, so the formula must equal its expectation (criterion
  |mean - formula| < 4 sigma/sqrt(n), as in test_montecarlo.py);
- the up-peak formulae of ISO 8100-32:2020 / CIBSE Guide D (2015) (from memory), the
  special case of all-incoming traffic.
"""
from __future__ import annotations

import itertools
import math
from dataclasses import replace

import numpy as np
import pytest
from scipy.stats import poisson as poisson_dist

from roundtrip.building import Building, LiftGroup, Traffic
from roundtrip.classical import (demand_calculation, demand_passengers, design_passengers,
                                 expected_stops, expected_stops_poisson, highest_reversal_floor,
                                 highest_reversal_floor_poisson, round_trip_calculation,
                                 uppeak_calculation)
from roundtrip.general_analysis import (busiest_stretch_share, flight_probabilities,
                                        general_round_trip_time_s, general_trip, stretch_loads)
from roundtrip.kinematics import flight_time_s, regime_boundaries_m
from roundtrip.montecarlo import simulate_trips
from roundtrip.passengers import od_matrix
from roundtrip.schedule import trip_timing

from .reference_trip import reference_trip

TINY = Building("Tiny House (invented)", (3.0, 4.0, 3.5), (30.0, 50.0, 20.0))
# rated speed 1 m/s, a = 1 m/s^2, j = 1.5 m/s^3: every jump of 1.667 m or more reaches it
SLOW = LiftGroup(cars=3, rated_load_persons=99, rated_speed_mps=1.0, acceleration_mps2=1.0,
                 jerk_mps3=1.5, door_open_s=1.8, door_close_s=2.9, start_delay_s=0.5)
MIXES = {"lunch 45/45/10": (0.45, 0.45, 0.10), "down-peak": (0.0, 1.0, 0.0),
         "interfloor": (0.0, 0.0, 1.0), "mixed 50/30/20": (0.5, 0.3, 0.2),
         "up-peak": (1.0, 0.0, 0.0)}


def enumerate_fixed(building, group, traffic, P):
    """Exact enumeration of every P-tuple of OD cells: expected stops, reversal floors,
    round-trip time, flights per ordered pair and the load on each stretch."""
    p = od_matrix(building, traffic)
    cells = [(o, d) for o in range(p.shape[0]) for d in range(p.shape[0]) if p[o, d] > 0]
    fl = trip_timing(building, group).flight_s.tolist()
    acc = dict(stops=0.0, highest=0.0, lowest=0.0, time=0.0)
    pairs = {}
    n = p.shape[0]
    up = np.zeros(n - 1)
    down = np.zeros(n - 1)
    for combo in itertools.product(cells, repeat=P):
        prob = math.prod(p[c] for c in combo)
        r = reference_trip(list(combo), fl, group.rated_load_persons, group.stop_overhead_s,
                           group.transfer_in_s, group.transfer_out_s)
        acc["stops"] += prob * r.stops
        acc["highest"] += prob * r.highest
        acc["lowest"] += prob * r.lowest
        acc["time"] += prob * r.time_s
        for a, b in zip(r.route[:-1], r.route[1:]):
            if a != b:
                pairs[(a, b)] = pairs.get((a, b), 0.0) + prob
        for o, d in combo:
            lo, hi = min(o, d), max(o, d)
            (up if d > o else down)[lo:hi] += prob
    return acc, pairs, up, down


def formula_rtt(building, group, trip):
    d_f = building.average_interfloor_height_m
    v = group.rated_speed_mps
    overhead = flight_time_s(d_f, v, group.acceleration_mps2, group.jerk_mps3) - d_f / v
    return general_round_trip_time_s(trip, v, overhead, group.stop_overhead_s,
                                     group.transfer_in_s, group.transfer_out_s)


@pytest.mark.parametrize("mix", MIXES.values(), ids=MIXES.keys())
@pytest.mark.parametrize("P", [1, 2, 3])
def test_fixed_counts_equal_exact_enumeration(mix, P):
    """Fixed P: stops, highest and lowest reversal floors, each flight's probability and
    the mean load on every stretch equal the exact enumeration; every jump here reaches
    rated speed, so the round-trip time (Eq. 1 of the module) does too."""
    traffic = Traffic(10.0, *mix)
    assert min(TINY.floor_rises_m) >= regime_boundaries_m(1.0, 1.0, 1.5)[0]
    exact, pairs, up, down = enumerate_fixed(TINY, SLOW, traffic, P)
    od = od_matrix(TINY, traffic)
    trip = general_trip(od, TINY.levels_m, P, poisson=False)
    assert trip.expected_stops == pytest.approx(exact["stops"], abs=1e-12)
    assert trip.highest_reversal_floor == pytest.approx(exact["highest"], abs=1e-12)
    assert trip.lowest_reversal_floor == pytest.approx(exact["lowest"], abs=1e-12)
    assert formula_rtt(TINY, SLOW, trip) == pytest.approx(exact["time"], rel=1e-12)
    for pair, prob in flight_probabilities(od, P, False).items():
        assert prob == pytest.approx(pairs.get(pair, 0.0), abs=1e-12), pair
    loads_up, loads_down = stretch_loads(od, P)
    assert np.allclose(loads_up, up, atol=1e-12) and np.allclose(loads_down, down, atol=1e-12)


PAIR = Building("Two Storeys (invented)", (3.2, 4.1), (40.0, 70.0))


@pytest.mark.parametrize("mix", MIXES.values(), ids=MIXES.keys())
@pytest.mark.parametrize("mean", [0.4, 0.9])
def test_poisson_arrivals_equal_the_sum_over_poisson_counts(mix, mean):
    """Poisson arrivals: the expectations equal sum_n Pr(N = n) E[. | n passengers], each
    term enumerated exactly (two floors, so that six passengers enumerate quickly),
    weighted by scipy.stats.poisson.pmf; the tail beyond six passengers is below 5e-5
    at these means and bounds the tolerance."""
    traffic = Traffic(10.0, *mix)
    od = od_matrix(PAIR, traffic)
    trip = general_trip(od, PAIR.levels_m, mean, poisson=True)
    ref = dict(stops=0.0, highest=0.0, lowest=0.0, time=0.0)
    weight = 0.0
    for n in range(7):
        w = poisson_dist.pmf(n, mean)
        weight += w
        if n == 0:
            ref["time"] += w * SLOW.stop_overhead_s          # a trip with nobody: the lobby stop
            continue
        exact, _, _, _ = enumerate_fixed(PAIR, SLOW, traffic, n)
        for k in ref:
            ref[k] += w * exact[k]
    tail = 1.0 - weight
    assert tail < 5e-5
    scale = 1 + max(abs(v) for v in ref.values())
    assert trip.expected_stops == pytest.approx(ref["stops"], abs=tail * 10 * scale)
    assert trip.highest_reversal_floor == pytest.approx(ref["highest"], abs=tail * 10 * scale)
    assert trip.lowest_reversal_floor == pytest.approx(ref["lowest"], abs=tail * 10 * scale)
    assert formula_rtt(PAIR, SLOW, trip) == pytest.approx(ref["time"], abs=tail * 100 * scale)
    exact = round_trip_calculation(PAIR, SLOW, mean, poisson=True, traffic=traffic)
    assert exact.exact_round_trip_time_s == pytest.approx(ref["time"], abs=tail * 100 * scale)


@pytest.mark.parametrize("P", [0.5, 3.0, 8.0, 13.0])
@pytest.mark.parametrize("poisson", [False, True], ids=["fixed", "poisson"])
def test_all_incoming_traffic_is_the_uppeak_formula(P, poisson):
    """The special case: with incoming traffic only the general analysis gives the up-peak
    S and H of ISO 8100-32:2020 / CIBSE Guide D (from memory), in their fixed and Poisson
    forms, no lowest reversal floor, and one lobby stop per trip."""
    b = Building("Up Yard (invented)", (4.2, 3.6, 3.6, 3.9, 3.6), (40.0, 80.0, 0.0, 95.0, 60.0))
    trip = general_trip(od_matrix(b), b.levels_m, P, poisson)
    u = b.population_shares
    S = expected_stops_poisson(u, P) if poisson else expected_stops(u, P)
    H = highest_reversal_floor_poisson(u, P) if poisson else highest_reversal_floor(u, P)
    assert trip.expected_stops == pytest.approx(S, rel=1e-12)
    assert trip.highest_reversal_floor == pytest.approx(H, rel=1e-12)
    assert trip.lowest_reversal_floor == 0.0 and trip.down_stops == 0.0
    assert trip.lobby_stop == pytest.approx(1.0, abs=1e-15)
    assert busiest_stretch_share(od_matrix(b)) == pytest.approx(1.0)


MC_BUILDING = Building("Orrin Court (invented)", (4.0, 3.5, 3.8, 3.5, 3.6, 4.2, 3.5),
                       (60.0, 90.0, 40.0, 110.0, 80.0, 70.0, 50.0))


@pytest.mark.slow
@pytest.mark.parametrize("mix", [MIXES["lunch 45/45/10"], MIXES["down-peak"],
                                 MIXES["interfloor"], MIXES["mixed 50/30/20"]],
                         ids=["lunch", "down-peak", "interfloor", "mixed"])
def test_monte_carlo_agrees_where_every_jump_reaches_rated_speed(mix):
    """Unequal floor heights, every jump reaching rated speed, a car no load fills (so
    nobody is left behind): the trip model's expectation is the general analysis
    exactly, and `simulate --poisson` agrees with it within 4 standard errors
    (n = 200,000 trips: a bias of a few hundredths of a second would be caught)."""
    assert min(MC_BUILDING.floor_rises_m) >= regime_boundaries_m(1.0, 1.0, 1.5)[0]
    traffic = Traffic(10.0, *mix)
    group = replace(SLOW, rated_load_persons=60)
    P = 9.0
    c = round_trip_calculation(MC_BUILDING, group, P, True, traffic)
    r = simulate_trips(MC_BUILDING, group, P, traffic=traffic, poisson=True, trials=200_000,
                       seed=13)
    assert r.left_behind_share == 0.0
    assert c.rated_speed_note is False
    assert c.round_trip_time_s == pytest.approx(c.exact_round_trip_time_s, rel=1e-12)
    for est, exact in ((r.round_trip_time, c.round_trip_time_s), (r.stops, c.expected_stops),
                       (r.highest_reversal_floor, c.highest_reversal_floor),
                       (r.lowest_reversal_floor, c.lowest_reversal_floor)):
        assert abs(est.mean - exact) <= 4 * est.std / math.sqrt(est.n) + 1e-12, (est, exact)
    # the car load: the mean load on the busiest stretch, as the Monte Carlo counts it
    assert r.car_load_persons == pytest.approx(c.car_load_persons, rel=0.01)


def test_exact_expectation_where_jumps_fall_short_of_rated_speed():
    """A fast car on short floors: the exact expected round-trip time (short flights timed
    on the real kinematics) equals the exact enumeration, and the formula's assumption
    shows: it is off by more than the 1 % of the rated-speed note."""
    fast = replace(SLOW, rated_speed_mps=4.0, acceleration_mps2=0.8, jerk_mps3=1.0)
    traffic = Traffic(10.0, 0.45, 0.45, 0.10)
    for P in (1, 2):
        exact, _, _, _ = enumerate_fixed(TINY, fast, traffic, P)
        c = round_trip_calculation(TINY, fast, P, False, traffic)
        assert c.exact_round_trip_time_s == pytest.approx(exact["time"], rel=1e-12)
    assert c.rated_speed_note
    up = uppeak_calculation(TINY, fast, 2, poisson=False)
    exact_up, _, _, _ = enumerate_fixed(TINY, fast, None, 2)
    assert up.exact_round_trip_time_s == pytest.approx(exact_up["time"], rel=1e-12)


def test_lunch_time_design_load_limits_the_load_aboard_not_per_trip():
    """The design load limits how many are in the car at once: at lunch time (45 % in,
    45 % out) a trip may carry twice the design load while the busiest stretch holds
    the design load; the demand mode solves P = lambda RTT(P) / L below that."""
    b = Building("Tallis Row (invented)", (4.5,) + (3.7,) * 13, (60.0,) + (90.0,) * 13)
    g = LiftGroup(cars=5, rated_load_persons=17, rated_speed_mps=2.5, acceleration_mps2=1.0,
                  jerk_mps3=1.5, door_open_s=1.8, door_close_s=2.9, start_delay_s=0.5)
    lunch = Traffic(11.0, 0.45, 0.45, 0.10)
    p_design = design_passengers(b, g, lunch)
    assert p_design > 1.9 * g.design_load_persons
    at_design = round_trip_calculation(b, g, p_design, True, lunch)
    assert at_design.car_load_persons == pytest.approx(g.design_load_persons, rel=1e-12)
    assert not at_design.saturated
    P, saturated = demand_passengers(b, g, lunch, poisson=True)
    assert not saturated and P > g.design_load_persons
    r = demand_calculation(b, g, lunch, poisson=True)
    assert r.handling_capacity_pct_5min == pytest.approx(11.0, rel=1e-9)
    assert r.car_load_pct < 80.0 and r.average_waiting_time_s is None
    # the same building in up-peak is saturated at this demand: the mix matters
    up = demand_calculation(b, g, Traffic(11.0), poisson=True)
    assert up.saturated and up.round_trip_time_s != r.round_trip_time_s


@pytest.mark.parametrize("mix", [m for m in MIXES if m != "up-peak"])
def test_an_empty_round_trip_is_one_door_cycle_at_the_lobby(mix):
    # Exact enumeration (of the one empty trip) and the trip model: a car that carries
    # nobody makes no run, so its round trip is its door cycle at the lobby
    # (docs/trip_model.md, terminal floor); the general analysis accepts no load.
    traffic = Traffic(10.0, *MIXES[mix])
    r = round_trip_calculation(TINY, SLOW, 0.0, traffic=traffic)
    empty = reference_trip([], trip_timing(TINY, SLOW).flight_s.tolist(),
                           SLOW.rated_load_persons, SLOW.stop_overhead_s,
                           SLOW.transfer_in_s, SLOW.transfer_out_s)
    assert r.expected_stops == 0.0 and r.highest_reversal_floor == 0.0
    assert r.round_trip_time_s == pytest.approx(empty.time_s, abs=1e-12)
    assert r.round_trip_time_s == pytest.approx(SLOW.stop_overhead_s, abs=1e-12)
    mc = simulate_trips(TINY, SLOW, 0.0, traffic=traffic, trials=200, seed=1)
    assert mc.round_trip_time.mean == pytest.approx(empty.time_s, abs=1e-12)
    assert mc.to_dict()["offered_handling_capacity_pct_5min"] == 0.0


@pytest.mark.parametrize("rated_speed_mps, reached", [(1.0, True), (2.0, False)])
def test_whether_one_floor_reaches_rated_speed_is_said_for_any_mix(rated_speed_mps, reached):
    # Worked by hand, a = 1 m/s^2, j = 1.5 m/s^3 (a < sqrt(v j) for both speeds, so the
    # acceleration is reached on the way): the shortest run that reaches rated speed is
    # v^2/a + v a/j = 1.667 m at 1 m/s (within a 3.5 m floor) and 4 + 1.333 = 5.333 m at
    # 2 m/s (beyond it).
    building = Building("Even House (invented)", (3.5,) * 3, (30.0, 50.0, 20.0))
    group = replace(SLOW, rated_speed_mps=rated_speed_mps)
    r = round_trip_calculation(building, group, 2.0,
                               traffic=Traffic(10.0, *MIXES["lunch 45/45/10"]))
    assert r.rated_speed_reached_in_one_floor is reached


@pytest.mark.parametrize("mix", [m for m in MIXES if m != "up-peak"])
@pytest.mark.parametrize("P", [1.3, 2.6])
def test_a_real_fixed_load_is_the_mix_of_the_two_nearest_whole_loads(mix, P):
    # Exact enumeration: a fixed real load P carries floor(P) passengers with probability
    # 1 - frac and floor(P) + 1 with probability frac (the trip model's fixed counts,
    # docs/trip_model.md), so the exact expected round trip is that mix of the two
    # enumerated ones.
    traffic = Traffic(10.0, *MIXES[mix])
    lo, hi = math.floor(P), math.floor(P) + 1
    frac = P - lo
    want = ((1 - frac) * enumerate_fixed(TINY, SLOW, traffic, lo)[0]["time"]
            + frac * enumerate_fixed(TINY, SLOW, traffic, hi)[0]["time"])
    r = round_trip_calculation(TINY, SLOW, P, poisson=False, traffic=traffic)
    assert r.exact_round_trip_time_s == pytest.approx(want, rel=1e-12)


@pytest.mark.parametrize("mix, up_only", [("up-peak", True), ("down-peak", False)])
def test_one_way_traffic_stops_one_way(mix, up_only):
    # A fact of the model: all-incoming trips stop only going up, all-outgoing only going
    # down, so the stops of the other direction are none and these are all of them.
    trip = general_trip(od_matrix(TINY, Traffic(10.0, *MIXES[mix])), TINY.levels_m, 2.5, True)
    one_way, other = ((trip.up_stops, trip.down_stops) if up_only
                      else (trip.down_stops, trip.up_stops))
    assert other == 0.0
    assert one_way == pytest.approx(trip.expected_stops, rel=1e-12) and one_way > 0


def test_the_classical_calculations_default_to_the_one_passenger_model():
    # Issue of one baseline: every command uses Poisson counts per car unless --fixed;
    # the library's defaults say the same.
    traffic = Traffic(10.0, *MIXES["lunch 45/45/10"])
    assert demand_calculation(TINY, SLOW, traffic).passenger_model == "poisson"
    assert round_trip_calculation(TINY, SLOW, 2.0, traffic=traffic).passenger_model == "poisson"
    assert demand_passengers(TINY, SLOW, traffic) == demand_passengers(TINY, SLOW, traffic,
                                                                        True)
