"""The classical up-peak calculation checked like a handbook.

Sources named beside the checks:
- "exact enumeration": every destination tuple of P passengers over N floors
  (itertools.product), each with its probability from the floor populations;
- "scipy reference": a direct sum over ``scipy.stats.poisson`` probabilities;
- ISO 8100-32:2020, clause on the up-peak round-trip time calculation, and
  CIBSE Guide D: Transportation systems in buildings (2015), chapter on traffic
  planning: the up-peak RTT equation, S and H for unequal populations, interval
  and handling capacity (both from memory);
- CIBSE Guide D (2015), up-peak average waiting time estimate (from memory);
- limits and inequalities (Bernoulli's, Jensen's) stated as such.

The independent implementation below (``reference_uppeak``) is written from
those formulae without calling any helper of ``roundtrip.classical`` and with
its own flight-time construction.
"""
from __future__ import annotations

import itertools
import math
from dataclasses import replace

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.optimize import brentq
from scipy.stats import poisson

from roundtrip.building import Building, LiftGroup, Traffic
from roundtrip.classical import (average_waiting_time_s, awt_within_range,
                                 demand_calculation, demand_passengers, expected_stops,
                                 expected_stops_poisson, highest_reversal_floor,
                                 highest_reversal_floor_poisson, uppeak_calculation)


# ================================================================ references
def enumerate_trips(populations, passengers):
    """Exact enumeration: (E[stops], E[highest floor]) over every destination tuple."""
    u = np.asarray(populations, dtype=float)
    u = u / u.sum()
    floors = range(1, len(u) + 1)
    es = eh = total = 0.0
    for dest in itertools.product(floors, repeat=passengers):
        prob = math.prod(u[f - 1] for f in dest)
        es += prob * len(set(dest))
        eh += prob * (max(dest) if dest else 0)
        total += prob
    assert total == pytest.approx(1.0, abs=1e-12)
    return es, eh


def _ramp_time_s(w, a, j):
    """Duration of the jerk-limited ramp from rest to speed w: jerk phases of
    min(a/j, sqrt(w/j)) around a hold at the peak acceleration."""
    tj = min(a / j, math.sqrt(w / j))
    return 2 * tj + max(w / (j * tj) - tj, 0.0)


def reference_flight_time_s(d, v, a, j):
    """Rest-to-rest flight over d, built from the ramp alone (not kinematics.py).

    The speed rises antisymmetrically about the ramp's midpoint, so a ramp to
    w covers w t_r(w)/2 and the two ramps together w t_r(w). When that exceeds
    d at w = v, the peak speed w < v that fits is found by brentq.
    """
    if d == 0:
        return 0.0
    t_r = _ramp_time_s(v, a, j)
    if v * t_r <= d:
        return 2 * t_r + (d - v * t_r) / v
    w = brentq(lambda w: w * _ramp_time_s(w, a, j) - d, 1e-300, v, xtol=1e-15, rtol=1e-15)
    return 2 * _ramp_time_s(w, a, j)


def reference_uppeak(building: Building, group: LiftGroup, P: float) -> dict:
    """ISO 8100-32:2020 / CIBSE Guide D (2015) up-peak chain (from memory), written out.

    S = sum_i [1 - (1 - U_i/U)^P]
    H = sum_k k [F_k^P - F_(k-1)^P]   (the mean of the highest destination, F_k = sum_{i<=k} U_i/U)
    t_v = d_f / v;  t_s = t_f(d_f) - t_v + t_o + t_c + t_sd;  t_p = (t_in + t_out) / 2
    RTT = 2 H t_v + (S + 1) t_s + 2 P t_p + 2 d_x / v
    INT = RTT / L;  HC5 = 300 P / INT;  %POP = 100 HC5 / U
    """
    pops = [float(p) for p in building.populations]
    U = sum(pops)
    N = len(pops)
    S = sum(1.0 - math.pow(1.0 - p / U, P) for p in pops)
    F = [0.0]
    for p in pops:
        F.append(min(F[-1] + p / U, 1.0))
    H = sum(k * (math.pow(F[k], P) - math.pow(F[k - 1], P)) for k in range(1, N + 1))
    v = group.rated_speed_mps
    d_f = sum(building.floor_rises_m) / N
    t_v = d_f / v
    t_f = reference_flight_time_s(d_f, v, group.acceleration_mps2, group.jerk_mps3)
    t_s = t_f - t_v + group.door_open_s + group.door_close_s + group.start_delay_s
    t_p = (group.transfer_in_s + group.transfer_out_s) / 2
    rtt = 2 * H * t_v + (S + 1) * t_s + 2 * P * t_p + 2 * building.express_m / v
    interval = rtt / group.cars
    hc5 = 300 * P / interval
    return dict(S=S, H=H, t_v=t_v, t_f=t_f, t_s=t_s, t_p=t_p, rtt=rtt, interval=interval,
                hc5=hc5, hc_pct=100 * hc5 / U)


# ================================================================ strategies
@st.composite
def buildings(draw, max_floors=24):
    """Invented buildings: uniform or unequal rises, unequal populations, optional express zone."""
    n = draw(st.integers(1, max_floors))
    if draw(st.booleans()):
        rises = (draw(st.floats(2.5, 6.0)),) * n
    else:
        rises = tuple(draw(st.lists(st.floats(2.5, 6.0), min_size=n, max_size=n)))
    pops = draw(st.lists(st.integers(0, 150), min_size=n, max_size=n).filter(lambda p: sum(p) > 0))
    express = draw(st.one_of(st.just(0.0), st.floats(0.0, 80.0)))
    return Building("Hypothetical block", rises, tuple(float(p) for p in pops), express)


@st.composite
def groups(draw):
    """Invented lift groups within the usual ranges of the trade (common practice)."""
    return LiftGroup(
        cars=draw(st.integers(1, 8)),
        rated_load_persons=draw(st.integers(4, 26)),
        rated_speed_mps=draw(st.floats(0.5, 7.0)),
        acceleration_mps2=draw(st.floats(0.4, 1.5)),
        jerk_mps3=draw(st.floats(0.6, 2.5)),
        door_open_s=draw(st.floats(0.5, 4.0)),
        door_close_s=draw(st.floats(0.5, 5.0)),
        start_delay_s=draw(st.floats(0.0, 1.0)),
        transfer_in_s=draw(st.floats(0.5, 2.5)),
        transfer_out_s=draw(st.floats(0.5, 2.5)),
        capacity_factor=draw(st.floats(0.5, 1.0)),
    )


shares_st = (st.lists(st.integers(0, 100), min_size=1, max_size=30)
             .filter(lambda p: sum(p) > 0)
             .map(lambda p: np.asarray(p, dtype=float) / sum(p)))

# Unequal populations for the enumeration checks (one with an empty floor).
POPULATION_SETS = {
    "one floor": [7],
    "two floors": [3, 9],
    "three floors": [12, 5, 8],
    "four floors, one empty": [1, 4, 0, 6],
    "five floors": [10, 2, 7, 3, 5],
}


# ================================================================ S and H
@pytest.mark.parametrize("P", [1, 2, 3, 4])
@pytest.mark.parametrize("pops", list(POPULATION_SETS.values()), ids=list(POPULATION_SETS))
def test_stops_and_reversal_floor_equal_exact_enumeration(pops, P):
    # Source: exact enumeration of every destination tuple (itertools.product),
    # destinations independent with probability U_i/U (the assumption of
    # ISO 8100-32:2020 / CIBSE Guide D, from memory).
    es, eh = enumerate_trips(pops, P)
    shares = np.asarray(pops, dtype=float) / sum(pops)
    assert expected_stops(shares, P) == pytest.approx(es, abs=1e-12)
    assert highest_reversal_floor(shares, P) == pytest.approx(eh, abs=1e-12)


@given(pops=st.lists(st.integers(0, 20), min_size=1, max_size=4).filter(lambda p: sum(p) > 0),
       P=st.integers(1, 4))
@settings(max_examples=40)
def test_stops_and_reversal_floor_equal_enumeration_random_populations(pops, P):
    # Source: exact enumeration, as above, on random small buildings.
    es, eh = enumerate_trips(pops, P)
    shares = np.asarray(pops, dtype=float) / sum(pops)
    assert expected_stops(shares, P) == pytest.approx(es, abs=1e-12)
    assert highest_reversal_floor(shares, P) == pytest.approx(eh, abs=1e-12)


def test_limit_no_passengers_no_stops():
    # Limit: an empty trip makes no stop (S -> 0 as P -> 0).
    shares = np.array([0.1, 0.3, 0.2, 0.4])
    assert expected_stops(shares, 0) == 0.0
    assert expected_stops(shares, 1e-9) < 1e-8
    assert expected_stops_poisson(shares, 0) == 0.0
    assert expected_stops_poisson(shares, 1e-9) < 1e-8


@pytest.mark.parametrize("P", [1, 2, 2.5, 10, 40])
def test_limit_single_floor(P):
    # Limit: with one served floor every trip of P >= 1 stops once, at floor 1.
    assert expected_stops([1.0], P) == 1.0
    assert highest_reversal_floor([1.0], P) == 1.0


def test_limit_many_passengers_every_floor():
    # Limit: as P -> infinity every floor is served (S -> N) and the car reaches
    # the top floor (H -> N); smallest share 0.02, so (1 - 0.02)^5000 ~ 1e-44.
    pops = [20, 35, 10, 2, 33]
    shares = np.asarray(pops, dtype=float) / sum(pops)
    assert expected_stops(shares, 5000) == pytest.approx(5.0, abs=1e-12)
    assert highest_reversal_floor(shares, 5000) == pytest.approx(5.0, abs=1e-12)
    assert expected_stops_poisson(shares, 5000) == pytest.approx(5.0, abs=1e-12)
    assert highest_reversal_floor_poisson(shares, 5000) == pytest.approx(5.0, abs=1e-12)


def test_limit_one_passenger():
    # Limit: one passenger makes one stop, at the population-weighted mean floor.
    pops = [20, 35, 10, 2, 33]
    shares = np.asarray(pops, dtype=float) / sum(pops)
    mean_floor = sum(k * s for k, s in enumerate(shares, 1))
    assert expected_stops(shares, 1) == pytest.approx(1.0, abs=1e-12)
    assert highest_reversal_floor(shares, 1) == pytest.approx(mean_floor, abs=1e-12)


# ================================================================ Poisson forms
def _poisson_sum(fixed_form, shares, mean, empty_trip_value):
    """scipy reference: sum_k Pr(X = k) f(k), X ~ Poisson(mean), k = 0 given its own value."""
    k_max = int(mean + 20 * math.sqrt(mean) + 40)      # tail beyond this < 1e-20
    ks = np.arange(k_max + 1)
    pmf = poisson.pmf(ks, mean)
    values = np.array([empty_trip_value] + [fixed_form(shares, k) for k in ks[1:]])
    assert poisson.sf(k_max, mean) < 1e-18
    return float(np.sum(pmf * values))


@pytest.mark.parametrize("mean", [0.3, 1.0, 4.5, 12.0, 30.0])
@pytest.mark.parametrize("pops", [[10, 2, 7, 3, 5], [1, 4, 0, 6], [95] * 12 + [40]],
                         ids=["five floors", "four floors, one empty", "thirteen floors"])
def test_poisson_forms_equal_sum_over_poisson_counts(pops, mean):
    # Source: scipy reference (direct sum over scipy.stats.poisson.pmf of the
    # fixed-P forms, themselves checked above by exact enumeration), truncated
    # where the tail is below 1e-18. The zero-passenger term counts an empty
    # trip as no stop and H = 0 (the car does not leave the lobby).
    shares = np.asarray(pops, dtype=float) / sum(pops)
    s_ref = _poisson_sum(expected_stops, shares, mean, empty_trip_value=0.0)
    h_ref = _poisson_sum(highest_reversal_floor, shares, mean, empty_trip_value=0.0)
    assert expected_stops_poisson(shares, mean) == pytest.approx(s_ref, abs=1e-12)
    assert highest_reversal_floor_poisson(shares, mean) == pytest.approx(h_ref, abs=1e-12)


def test_poisson_reversal_floor_zero_passenger_term():
    # Source: scipy reference. Counting an empty trip at the fixed form's
    # P = 0 value (H = 1) instead of H = 0 would add exactly Pr(X = 0) = e^-P.
    shares = np.array([0.5, 0.3, 0.2])
    mean = 0.7
    naive = _poisson_sum(highest_reversal_floor, shares, mean,
                         empty_trip_value=highest_reversal_floor(shares, 0))
    assert highest_reversal_floor(shares, 0) == 1.0
    assert naive - highest_reversal_floor_poisson(shares, mean) == pytest.approx(
        math.exp(-mean), abs=1e-12)
    # Limit: with no passengers on average the car never leaves the lobby.
    assert highest_reversal_floor_poisson(shares, 0.0) == 0.0


@given(shares=shares_st, mean=st.floats(0.0, 40.0))
def test_poisson_forms_never_exceed_fixed_forms(shares, mean):
    # Jensen's inequality: S and H are concave in the passenger count, so their
    # mean over Poisson counts is at most their value at the mean count
    # (fixed form at P >= 1, where it is valid).
    if mean >= 1:
        assert expected_stops_poisson(shares, mean) <= expected_stops(shares, mean) + 1e-12
        assert (highest_reversal_floor_poisson(shares, mean)
                <= highest_reversal_floor(shares, mean) + 1e-12)
    # Bernoulli: 1 - exp(-P u) <= P u, so S <= P always; and S <= N.
    assert expected_stops_poisson(shares, mean) <= min(len(shares), mean) + 1e-12
    assert 0.0 <= highest_reversal_floor_poisson(shares, mean) <= len(shares) + 1e-12


# ================================================================ properties of S and H
@given(shares=shares_st, P=st.floats(1.0, 60.0))
def test_stops_bounded_by_floors_and_passengers(shares, P):
    # Bernoulli's inequality (1 - u)^P >= 1 - P u for P >= 1 gives S <= P;
    # each term is at most 1, so S <= N. (For 0 < P < 1 the real-P
    # interpolation exceeds P, so the bound is stated for P >= 1.)
    assert expected_stops(shares, P) <= min(len(shares), P) + 1e-12
    assert expected_stops(shares, P) >= 1.0 - 1e-12      # at least one stop


@given(shares=shares_st, P=st.floats(1.0, 60.0))
def test_reversal_floor_between_one_and_top(shares, P):
    # Limit/bound: with P >= 1 the car rises at least to floor 1 and at most to N.
    H = highest_reversal_floor(shares, P)
    assert 1.0 - 1e-12 <= H <= len(shares) + 1e-12


@given(shares=shares_st, P=st.integers(1, 60))
def test_stops_not_above_reversal_floor(shares, P):
    # Per trip, the stops are distinct floors no higher than the highest one,
    # so their count is at most its number; hence S <= H (exact for integer P).
    assert expected_stops(shares, P) <= highest_reversal_floor(shares, P) + 1e-12


@given(shares=shares_st, P1=st.floats(0.0, 50.0), dP=st.floats(1e-3, 20.0))
def test_stops_and_reversal_floor_rise_with_passengers(shares, P1, dP):
    # Monotonicity: more passengers never mean fewer stops or a lower reversal.
    P2 = P1 + dP
    for S_form, H_form in [(expected_stops, highest_reversal_floor),
                           (expected_stops_poisson, highest_reversal_floor_poisson)]:
        assert S_form(shares, P2) >= S_form(shares, P1) - 1e-12
        assert H_form(shares, P2) >= H_form(shares, P1) - 1e-12


@given(b=buildings(), g=groups(), P1=st.floats(0.0, 30.0), dP=st.floats(1e-3, 10.0),
       poisson_model=st.booleans())
def test_round_trip_time_strictly_rises_with_passengers(b, g, P1, dP, poisson_model):
    # Monotonicity: S and H never fall with P, and each extra passenger adds
    # 2 t_p > 0 of transfer time (ISO 8100-32:2020 RTT equation, from memory).
    r1 = uppeak_calculation(b, g, P1, poisson=poisson_model)
    r2 = uppeak_calculation(b, g, P1 + dP, poisson=poisson_model)
    assert r2.round_trip_time_s > r1.round_trip_time_s


# ================================================================ the RTT chain
WREN_COURT = Building(
    name="Wren Court (invented)",
    floor_rises_m=(3.5,) * 5,
    populations=(60.0, 50.0, 40.0, 30.0, 20.0),
)
WREN_GROUP = LiftGroup(
    cars=2, rated_load_persons=8, rated_speed_mps=1.5, acceleration_mps2=1.0,
    jerk_mps3=2.0, door_open_s=2.0, door_close_s=3.0, start_delay_s=0.5,
    transfer_in_s=1.0, transfer_out_s=1.4,
)


def test_worked_example_by_hand():
    # Source: ISO 8100-32:2020 clause on the up-peak RTT and CIBSE Guide D (2015)
    # traffic planning chapter (both from memory), worked by hand for an
    # invented building, P = 3 passengers per trip:
    #
    #   shares U_i/U = 60, 50, 40, 30, 20 / 200 = 0.30, 0.25, 0.20, 0.15, 0.10
    #   S = (1-0.7^3) + (1-0.75^3) + (1-0.8^3) + (1-0.85^3) + (1-0.9^3)
    #     = 0.657 + 0.578125 + 0.488 + 0.385875 + 0.271            = 2.38
    #   F_j = 0.30, 0.55, 0.75, 0.90
    #   H = 5 - (0.027 + 0.166375 + 0.421875 + 0.729) = 5 - 1.34425 = 3.65575
    #   d_f = 3.5 m; rated speed is reached in one floor: v^2/a + v a/j
    #     = 2.25 + 0.75 = 3.0 m <= 3.5 m, and v = 1.5 >= a^2/j = 0.5, so
    #   t_f(3.5) = d/v + v/a + a/j = 2.333333 + 1.5 + 0.5          = 4.333333 s
    #   t_v = 3.5/1.5                                               = 2.333333 s
    #   t_s = 4.333333 - 2.333333 + 2.0 + 3.0 + 0.5                 = 7.5 s
    #   t_p = (1.0 + 1.4)/2                                         = 1.2 s
    #   RTT = 2 x 3.65575 x 2.333333 + 3.38 x 7.5 + 2 x 3 x 1.2
    #       = 17.060167 + 25.35 + 7.2                               = 49.610167 s
    #   INT = 49.610167 / 2                                         = 24.805083 s
    #   HC5 = 300 x 3 / 24.805083                                   = 36.282886 persons
    #   %POP = 100 x 36.282886 / 200                                = 18.141443 %
    #   car load = 3/8 = 37.5 % <= 50 %, so AWT = 0.4 x INT         = 9.922033 s
    #   ATT = 0.5 H t_v + 0.5 S t_s + P t_p (CIBSE Guide D (2015), from memory)
    #       = 0.5 x 3.65575 x 2.333333 + 0.5 x 2.38 x 7.5 + 3 x 1.2
    #       = 4.265042 + 8.925 + 3.6                                = 16.790042 s
    r = uppeak_calculation(WREN_COURT, WREN_GROUP, 3)
    assert r.average_transit_time_s == pytest.approx(16.790042, abs=5e-7)
    assert r.expected_stops == pytest.approx(2.38, abs=1e-12)
    assert r.highest_reversal_floor == pytest.approx(3.65575, abs=1e-12)
    assert r.rated_speed_reached_in_one_floor
    assert r.single_floor_flight_s == pytest.approx(4.333333, abs=5e-7)
    assert r.t_v_s == pytest.approx(2.333333, abs=5e-7)
    assert r.t_s_s == pytest.approx(7.5, abs=1e-12)
    assert r.t_p_s == pytest.approx(1.2, abs=1e-12)
    assert r.round_trip_time_s == pytest.approx(49.610167, abs=5e-7)
    assert r.interval_s == pytest.approx(24.805083, abs=5e-7)
    assert r.handling_capacity_persons_5min == pytest.approx(36.282886, abs=5e-7)
    assert r.handling_capacity_pct_5min == pytest.approx(18.141443, abs=5e-7)
    assert r.car_load_pct == pytest.approx(37.5, abs=1e-12)
    assert r.average_waiting_time_s == pytest.approx(9.922033, abs=5e-7)


def _assert_matches_reference(r, ref, rel=1e-6):
    assert r.expected_stops == pytest.approx(ref["S"], rel=rel)
    assert r.highest_reversal_floor == pytest.approx(ref["H"], rel=rel)
    assert r.t_v_s == pytest.approx(ref["t_v"], rel=rel)
    assert r.single_floor_flight_s == pytest.approx(ref["t_f"], rel=rel)
    assert r.t_s_s == pytest.approx(ref["t_s"], rel=rel)
    assert r.t_p_s == pytest.approx(ref["t_p"], rel=rel)
    assert r.round_trip_time_s == pytest.approx(ref["rtt"], rel=rel)
    assert r.interval_s == pytest.approx(ref["interval"], rel=rel)
    assert r.handling_capacity_persons_5min == pytest.approx(ref["hc5"], rel=rel)
    assert r.handling_capacity_pct_5min == pytest.approx(ref["hc_pct"], rel=rel)


@given(b=buildings(), g=groups(), data=st.data())
def test_chain_equals_independent_implementation(b, g, data):
    # Source: ISO 8100-32:2020 / CIBSE Guide D (2015) up-peak formulae (from
    # memory), implemented independently in this file (reference_uppeak) with
    # its own flight time; P drawn in the standard's range 1 <= P <= rated load.
    P = data.draw(st.floats(1.0, float(g.rated_load_persons)), label="P")
    _assert_matches_reference(uppeak_calculation(b, g, P), reference_uppeak(b, g, P))


def test_worked_example_equals_independent_implementation():
    # Source: as above; the hand-worked building through both implementations.
    _assert_matches_reference(uppeak_calculation(WREN_COURT, WREN_GROUP, 3),
                              reference_uppeak(WREN_COURT, WREN_GROUP, 3), rel=1e-12)


def test_express_zone_adds_twice_its_run_at_rated_speed():
    # Source: ISO 8100-32:2020 / CIBSE Guide D (2015) express-zone term (from
    # memory): the car runs the unserved rise d_x up and down at rated speed,
    # adding 2 d_x / v and nothing else. Hand value for Wren Court with a 30 m
    # express rise: 2 x 30 / 1.5 = 40 s, RTT = 49.610167 + 40 = 89.610167 s.
    plain = uppeak_calculation(WREN_COURT, WREN_GROUP, 3)
    with_express = uppeak_calculation(replace(WREN_COURT, express_m=30.0), WREN_GROUP, 3)
    assert with_express.express_time_s == pytest.approx(20.0, abs=1e-12)
    assert with_express.round_trip_time_s == pytest.approx(89.610167, abs=5e-7)
    assert (with_express.round_trip_time_s - plain.round_trip_time_s
            == pytest.approx(40.0, abs=1e-12))
    for name in ("expected_stops", "highest_reversal_floor", "t_v_s", "t_s_s",
                 "average_interfloor_height_m"):
        assert getattr(with_express, name) == getattr(plain, name)


@given(b=buildings(), g=groups(), P=st.floats(1.0, 20.0), express=st.floats(0.5, 120.0))
def test_express_term_reduces_to_plain_formula(b, g, P, express):
    # Source: as above. At d_x = 0 the chain is the plain RTT equation (the
    # independent reference with no express term); with d_x > 0 it adds exactly
    # 2 d_x / v.
    plain_b = replace(b, express_m=0.0)
    plain = uppeak_calculation(plain_b, g, P)
    assert plain.express_time_s == 0.0
    _assert_matches_reference(plain, reference_uppeak(plain_b, g, P))
    r = uppeak_calculation(replace(b, express_m=express), g, P)
    assert r.round_trip_time_s - plain.round_trip_time_s == pytest.approx(
        2 * express / g.rated_speed_mps, rel=1e-9)


def test_negative_passengers_refused():
    # Input validation: passengers per trip are a finite number >= 0.
    with pytest.raises(ValueError, match="passengers"):
        uppeak_calculation(WREN_COURT, WREN_GROUP, -1.0)
    with pytest.raises(ValueError, match="passengers"):
        uppeak_calculation(WREN_COURT, WREN_GROUP, float("nan"))


# ================================================================ demand mode
HALDEN_YARD = Building(
    name="Halden Yard (invented)",
    floor_rises_m=(4.5,) + (3.8,) * 15,
    populations=(60.0,) + (90.0,) * 13 + (70.0, 40.0),
)
HALDEN_GROUP = LiftGroup(
    cars=4, rated_load_persons=16, rated_speed_mps=2.5, acceleration_mps2=1.0,
    jerk_mps3=1.5, door_open_s=1.8, door_close_s=2.9, start_delay_s=0.5,
)


def _arrival_rate_persons_per_s(building, pct_5min):
    # Common practice: demand given as % of the building population in 5 minutes.
    return pct_5min / 100.0 * sum(building.populations) / 300.0


@pytest.mark.parametrize("poisson_model", [False, True], ids=["fixed", "poisson"])
@pytest.mark.parametrize("building, group, pct", [
    (WREN_COURT, WREN_GROUP, 5.0), (WREN_COURT, WREN_GROUP, 12.0),
    (WREN_COURT, WREN_GROUP, 25.0),
    (HALDEN_YARD, HALDEN_GROUP, 4.0), (HALDEN_YARD, HALDEN_GROUP, 6.5),
], ids=["Wren 5%", "Wren 12%", "Wren 25%", "Halden 4%", "Halden 6.5%"])
def test_demand_fixed_point(building, group, pct, poisson_model):
    # Source: ISO 8100-32:2020 / CIBSE Guide D (2015) (from memory): in one
    # interval lambda INT persons arrive, so the car load that carries the demand
    # satisfies P = lambda RTT(P) / L, and there HC5 equals the demand.
    traffic = Traffic(arrival_rate_pct_5min=pct)
    P, saturated = demand_passengers(building, group, traffic, poisson=poisson_model)
    assert not saturated
    lam = _arrival_rate_persons_per_s(building, pct)
    rtt = uppeak_calculation(building, group, P, poisson=poisson_model).round_trip_time_s
    assert P == pytest.approx(lam * rtt / group.cars, rel=1e-9)
    r = demand_calculation(building, group, traffic, poisson=poisson_model)
    assert r.mode == "demand" and not r.saturated
    assert r.passenger_model == ("poisson" if poisson_model else "fixed")
    assert r.passengers_per_trip == P
    assert r.handling_capacity_pct_5min == pytest.approx(pct, rel=1e-9)
    assert r.demand_pct_5min == pct


@pytest.mark.parametrize("poisson_model", [False, True], ids=["fixed", "poisson"])
def test_demand_overload_is_saturated_at_design_load(poisson_model):
    # Definition (README, from ISO 8100-32 practice, from memory): when no car
    # load at or below the design load carries the demand, the group is
    # saturated and the figures are given at the design load (0.8 x 16 = 12.8).
    traffic = Traffic(arrival_rate_pct_5min=40.0)
    P, saturated = demand_passengers(HALDEN_YARD, HALDEN_GROUP, traffic, poisson=poisson_model)
    assert saturated and P == pytest.approx(12.8, abs=1e-12)
    r = demand_calculation(HALDEN_YARD, HALDEN_GROUP, traffic, poisson=poisson_model)
    at_design = uppeak_calculation(HALDEN_YARD, HALDEN_GROUP, 12.8, poisson=poisson_model)
    assert r.saturated
    assert r.passengers_per_trip == pytest.approx(12.8, abs=1e-12)
    assert r.handling_capacity_persons_5min == pytest.approx(
        at_design.handling_capacity_persons_5min, rel=1e-12)
    assert r.round_trip_time_s == pytest.approx(at_design.round_trip_time_s, rel=1e-12)
    assert r.handling_capacity_pct_5min < 40.0
    assert r.demand_persons_5min == pytest.approx(0.40 * sum(HALDEN_YARD.populations))


@given(b=buildings(max_floors=16), g=groups(), pct=st.floats(0.5, 40.0),
       poisson_model=st.booleans())
@settings(max_examples=30)
def test_demand_saturated_exactly_when_design_load_falls_short(b, g, pct, poisson_model):
    # Source: the definition of saturation (README) and the fixed point above:
    # saturated iff lambda RTT(design load) / L > design load; otherwise the
    # returned P satisfies P = lambda RTT(P) / L.
    lam = _arrival_rate_persons_per_s(b, pct)
    design = g.capacity_factor * g.rated_load_persons
    short = lam * uppeak_calculation(b, g, design, poisson_model).round_trip_time_s / g.cars > design
    P, saturated = demand_passengers(b, g, Traffic(pct), poisson=poisson_model)
    assert saturated == short
    if saturated:
        assert P == design
    else:
        rtt = uppeak_calculation(b, g, P, poisson_model).round_trip_time_s
        assert P == pytest.approx(lam * rtt / g.cars, rel=1e-9, abs=1e-11)
        assert 0 <= P <= design


# ================================================================ waiting time
@pytest.mark.parametrize("load", [0.0, 0.1, 0.3, 0.5])
def test_waiting_time_light_load(load):
    # Source: CIBSE Guide D (2015), up-peak waiting-time estimate (from memory):
    # AWT = 0.4 INT for car loads up to 50 %.
    assert average_waiting_time_s(30.0, load) == pytest.approx(12.0, rel=1e-15)


@pytest.mark.parametrize("load, factor", [
    (0.6, 0.4 + (1.08 - 0.77) ** 2),      # 0.4961
    (0.7, 0.4 + (1.26 - 0.77) ** 2),      # 0.6401
    (0.8, 0.4 + (1.44 - 0.77) ** 2),      # 0.8489
])
def test_waiting_time_heavier_load(load, factor):
    # Source: CIBSE Guide D (2015) (from memory): between 50 % and 80 % car load
    # AWT = [0.4 + (1.8 P/CC - 0.77)^2] INT.
    assert average_waiting_time_s(40.0, load) == pytest.approx(factor * 40.0, rel=1e-12)
    assert average_waiting_time_s(40.0, 0.8) == pytest.approx(0.8489 * 40.0, rel=1e-12)


def test_waiting_time_just_above_half_load():
    # Source: CIBSE Guide D (2015) (from memory). The two published pieces do
    # not meet at 50 %: just above it the factor is 0.4 + (0.9 - 0.77)^2 = 0.4169.
    assert average_waiting_time_s(100.0, 0.5) == pytest.approx(40.0, rel=1e-15)
    assert average_waiting_time_s(100.0, 0.5 + 1e-12) == pytest.approx(41.69, rel=1e-9)


def test_waiting_time_range_flag():
    # Source: CIBSE Guide D (2015) (from memory): the estimate is published for
    # car loads up to 80 %.
    assert awt_within_range(0.8) and awt_within_range(0.3)
    assert not awt_within_range(0.81)


def test_chain_uses_waiting_time_estimate():
    # Plumbing: the chain applies the estimate at its own interval and car load
    # (Halden Yard at 12 of 16 persons, 75 %: factor 0.4 + (1.35 - 0.77)^2 = 0.7364).
    r = uppeak_calculation(HALDEN_YARD, HALDEN_GROUP, 12)
    assert r.car_load_pct == pytest.approx(75.0)
    assert r.average_waiting_time_s == pytest.approx(0.7364 * r.interval_s, rel=1e-12)
    assert r.average_waiting_time_in_range
