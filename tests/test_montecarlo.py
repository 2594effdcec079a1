"""Monte Carlo round trips checked against the kernel's plain twin, the classical
formulae, and exact enumeration of every passenger batch.

Statistical checks use a fixed seed and the criterion |mean - exact| < 4 sigma/sqrt(n)
(k = 4: a false alarm has probability ~6e-5 per check under the normal
approximation, so the suite stays stable while a bias of a few standard errors
is caught).
"""
from __future__ import annotations

import itertools
import math
from dataclasses import replace

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from roundtrip import schedule as K
from roundtrip.building import Building, LiftGroup, Traffic
from roundtrip.classical import (expected_stops_poisson, highest_reversal_floor_poisson,
                                 uppeak_calculation)
from roundtrip.kinematics import flight_time_s, regime_boundaries_m
from roundtrip.montecarlo import (PassengerSampler, chain_sums, simulate_demand,
                                  simulate_trips, time_trips)
from roundtrip.passengers import alias_table, od_matrix, passenger_counts
from roundtrip.schedule import TripOut, trip_timing

from .reference_trip import reference_chain, reference_trip

K_SIGMA = 4.0

def flight_table_s(building, group):
    """The flight-time table of the trip model [s]."""
    return trip_timing(building, group).flight_s


SLOW_GROUP = LiftGroup(cars=4, rated_load_persons=16, rated_speed_mps=1.0, acceleration_mps2=1.0,
                       jerk_mps3=1.5, door_open_s=1.8, door_close_s=2.9, start_delay_s=0.5,
                       transfer_in_s=1.2, transfer_out_s=1.2, capacity_factor=0.8)


def within(est, exact, k=K_SIGMA):
    se = est.std / math.sqrt(est.n)
    return abs(est.mean - exact) <= k * se + 1e-12, f"{est.mean} vs {exact} (se {se})"


def run_reference(building, group, orig, dest, offsets):
    flight = flight_table_s(building, group).tolist()
    out = []
    for t in range(len(offsets) - 1):
        s, e = offsets[t], offsets[t + 1]
        out.append(reference_trip(list(zip(orig[s:e].tolist(), dest[s:e].tolist())), flight,
                                  group.rated_load_persons, group.stop_overhead_s,
                                  group.transfer_in_s, group.transfer_out_s))
    return out


# ---------------------------------------------------------------- kernel == reference
@st.composite
def building_and_group(draw, max_floors=9):
    n = draw(st.integers(1, max_floors))
    rises = draw(st.lists(st.floats(2.5, 6.0), min_size=n, max_size=n))
    pops = draw(st.lists(st.integers(0, 120), min_size=n, max_size=n).filter(lambda p: sum(p) > 0))
    express = draw(st.sampled_from([0.0, 0.0, 12.5]))
    group = replace(SLOW_GROUP, rated_load_persons=draw(st.integers(1, 8)),
                    rated_speed_mps=draw(st.sampled_from([1.0, 1.6, 2.5, 4.0])))
    return Building("H", tuple(rises), tuple(float(p) for p in pops), express), group


@settings(max_examples=60)
@given(bg=building_and_group(), mix=st.sampled_from([(1, 0, 0), (0, 1, 0), (0.4, 0.3, 0.3),
                                                      (0, 0, 1), (0.2, 0.2, 0.6)]),
       seed=st.integers(0, 2**32 - 1), mean=st.floats(0, 12))
def test_kernel_equals_plain_reference_exactly(bg, mix, seed, mean):
    """The compiled trip model gives the same numbers, to the bit, as its plain twin."""
    building, group = bg
    if mix[2] > 0 and sum(p > 0 for p in building.populations) < 2:
        mix = (1, 0, 0)
    sampler = PassengerSampler(building, Traffic(10.0, *mix))
    orig, dest, offsets = sampler.draw(np.random.default_rng(seed), mean, 40, True)
    sample = time_trips(building, group, orig, dest, offsets)
    for t, ref in enumerate(run_reference(building, group, orig, dest, offsets)):
        assert sample.rtt_s[t] == ref.time_s
        assert list(sample.counts[t]) == [ref.stops, ref.highest, ref.lowest, ref.boarded,
                                          ref.peak_load, ref.left_behind,
                                          offsets[t + 1] - offsets[t]]


@settings(max_examples=40)
@given(bg=building_and_group(), mix=st.sampled_from([(1, 0, 0), (0, 1, 0), (0.4, 0.3, 0.3),
                                                      (0, 0, 1), (0.45, 0.45, 0.1)]),
       seed=st.integers(0, 2**32 - 1), mean=st.floats(0, 10), chain=st.integers(1, 9))
def test_chain_kernel_equals_the_plain_chain_exactly(bg, mix, seed, mean, chain):
    """The one-car Monte Carlo kernel (chains of trips, whoever is left behind waiting
    for the next trip) gives, trip by trip, the numbers of its plain twin
    (tests/reference_trip.py::reference_chain) to the bit, and its running sums are the
    sums of those trips; every passenger who arrived was carried or is still waiting."""
    building, group = bg
    if mix[2] > 0 and sum(p > 0 for p in building.populations) < 2:
        mix = (1, 0, 0)
    sampler = PassengerSampler(building, Traffic(10.0, *mix))
    timing = trip_timing(building, group)
    stream = sampler.uniforms(np.random.default_rng(seed), mean, 23, True)
    orig, dest = sampler.cells(stream.uniforms)
    sample = TripOut.empty(23)
    sums = chain_sums(sampler, timing, stream, chain, sample)
    flight = flight_table_s(building, group).tolist()
    offsets = stream.offsets
    for c0 in range(0, 23, chain):
        trips = [list(zip(orig[offsets[t]:offsets[t + 1]].tolist(),
                          dest[offsets[t]:offsets[t + 1]].tolist()))
                 for t in range(c0, min(23, c0 + chain))]
        twin, waiting = reference_chain(trips, flight, group.rated_load_persons,
                                        group.stop_overhead_s, group.transfer_in_s,
                                        group.transfer_out_s)
        assert sums.waiting_end[c0 // chain] == len(waiting)
        for i, (ref, offered) in enumerate(twin):
            t = c0 + i
            assert sample.rtt_s[t] == ref.time_s
            assert list(sample.counts[t]) == [ref.stops, ref.highest, ref.lowest, ref.boarded,
                                              ref.peak_load, offered - ref.boarded, offered]
    assert np.array_equal(sums.count_sum.sum(axis=0), sample.counts.sum(axis=0))
    assert sums.count_sum[:, K.BOARDED].sum() + sums.waiting_end.sum() == offsets[-1]
    assert sums.rtt_sum_s.sum() + (sums.rtt_shift_s * sums.trips).sum() == pytest.approx(
        sample.rtt_s.sum(), rel=1e-12)


def test_sampler_draws_from_the_od_matrix():
    """Alias sampling reproduces the OD matrix (chi-square goodness of fit, scipy)."""
    from scipy.stats import chisquare
    building = Building("H", (3.5, 4.0, 3.5, 3.5), (10.0, 50.0, 0.0, 40.0))
    p = od_matrix(building, Traffic(10.0, 0.5, 0.3, 0.2))
    sampler = PassengerSampler(building, Traffic(10.0, 0.5, 0.3, 0.2))
    orig, dest, _ = sampler.draw(np.random.default_rng(7), 100_000, 1, False)
    observed = np.bincount(orig * 5 + dest, minlength=25)
    mask = p.ravel() > 0
    assert observed[~mask].sum() == 0                       # impossible cells never drawn
    assert chisquare(observed[mask], p.ravel()[mask] * observed.sum()).pvalue > 1e-4


def test_alias_table_is_exact():
    """Each column's kept and aliased mass adds back to K p exactly (alias method)."""
    p = np.array([0.5, 0.1, 0.0, 0.25, 0.15])
    prob, alias = alias_table(p)
    mass = prob.copy()
    np.add.at(mass, alias, 1.0 - prob)
    assert np.allclose(mass, p * p.size, atol=1e-12)


def test_fixed_real_mean_mixes_the_two_nearest_integers():
    counts = passenger_counts(np.random.default_rng(3), 7.3, 200_000, poisson=False)
    assert set(np.unique(counts)) == {7, 8}
    assert abs(counts.mean() - 7.3) < 4 * math.sqrt(0.3 * 0.7 / counts.size)


def test_hand_worked_trip():
    """The worked trip of docs/trip_model.md, computed by hand there.

    Floors 0..3 at 0, 4, 7.5, 11 m; v = 1.0 m/s, a = 1.0 m/s^2, j = 1.5 m/s^3
    (rated speed reached in any jump >= 1.667 m, so t_f(d) = d + 1 + 2/3 s);
    rated load 2; passengers (0->2), (0->3), (0->1): the third is left behind.
    Route 0 -> 2 -> 3 -> 0: flights (7.5+1.6667) + (3.5+1.6667) + (11+1.6667) = 27.0 s,
    stops 3 (two above the lobby + the lobby) x 5.2 s = 15.6 s, transfers 2 x (1.2+1.2) = 4.8 s.
    RTT = 47.4 s.
    """
    building = Building("worked", (4.0, 3.5, 3.5), (1.0, 1.0, 1.0))
    group = replace(SLOW_GROUP, rated_load_persons=2)
    assert flight_time_s(3.5, 1.0, 1.0, 1.5) == pytest.approx(3.5 + 1 + 2 / 3, abs=1e-12)
    s = time_trips(building, group, np.array([0, 0, 0]), np.array([2, 3, 1]), np.array([0, 3]))
    assert s.rtt_s[0] == pytest.approx(47.4, abs=1e-9)
    assert list(s.counts[0][:6]) == [2, 3, 0, 2, 2, 1]


# ---------------------------------------------------------------- against the classical formula
CLASSICAL_BUILDINGS = [
    Building("equal", (3.6,) * 12, (100.0,) * 12),
    Building("unequal", (3.6,) * 10, (40.0, 120.0, 80.0, 80.0, 150.0, 60.0, 90.0, 90.0, 20.0, 70.0)),
    Building("express", (3.6,) * 8, (80.0, 90.0, 100.0, 110.0, 70.0, 60.0, 100.0, 50.0), 30.0),
]


@pytest.mark.slow
@pytest.mark.parametrize("building", CLASSICAL_BUILDINGS, ids=lambda b: b.name)
@pytest.mark.parametrize("P", [1, 6, 13])
def test_fixed_load_matches_iso_8100_32_formula(building, P):
    """Fixed integer P, equal floor heights, rated speed reached in one floor jump:
    the exact expectation of the trip model is the ISO 8100-32:2020 / CIBSE Guide D
    RTT, because then each flight is t_f(k d_f) = k t_v + t_f(d_f) - t_v and the RTT
    is linear in S and H."""
    group = replace(SLOW_GROUP, rated_speed_mps=1.0)
    assert building.average_interfloor_height_m >= regime_boundaries_m(1.0, 1.0, 1.5)[0]
    r = simulate_trips(building, group, P, poisson=False, trials=60_000, seed=11)
    c = uppeak_calculation(building, group, P)
    ok, msg = within(r.round_trip_time, c.round_trip_time_s)
    assert ok, msg
    assert within(r.stops, c.expected_stops)[0]
    assert within(r.highest_reversal_floor, c.highest_reversal_floor)[0]


@pytest.mark.parametrize("mean", [0.7, 5.0, 14.0])
def test_poisson_counts_match_poisson_forms(mean):
    """Poisson passengers: mean stops and highest reversal floor equal the Poisson forms
    S = sum(1 - exp(-P u_i)), H = N - sum_{j>=0} exp(-P (1 - F_j)) (zero-passenger
    term included); E[(1-u)^X] = exp(-P u) for X ~ Poisson(P). The forms know no
    rated load, so the car here is large enough never to leave anyone behind."""
    b = CLASSICAL_BUILDINGS[1]
    big = replace(SLOW_GROUP, rated_load_persons=60)
    r = simulate_trips(b, big, mean, poisson=True, trials=40_000, seed=5)
    assert within(r.stops, expected_stops_poisson(b.population_shares, mean))[0]
    assert within(r.highest_reversal_floor, highest_reversal_floor_poisson(b.population_shares, mean))[0]


# ---------------------------------------------------------------- exact enumeration
def exact_uppeak(building, group, P):
    """Exact expectation of the trip model: every destination tuple with its probability
    (the exhaustively enumerated weighted-average method for round-trip time)."""
    w = building.population_shares
    flight = flight_table_s(building, group).tolist()
    keys = ("time_s", "stops", "highest")
    acc = dict.fromkeys(keys, 0.0)
    for dests in itertools.product(range(1, building.floors + 1), repeat=P):
        prob = math.prod(w[d - 1] for d in dests)
        if prob == 0:
            continue
        ref = reference_trip([(0, d) for d in dests], flight, group.rated_load_persons,
                             group.stop_overhead_s, group.transfer_in_s, group.transfer_out_s)
        for k in keys:
            acc[k] += prob * getattr(ref, k)
    return acc


SMALL = [
    (Building("small-a", (4.5, 3.0, 3.3, 2.8), (30.0, 80.0, 10.0, 60.0)), 3),
    (Building("small-b", (3.2, 4.1, 2.9, 3.0, 3.6), (50.0, 20.0, 70.0, 40.0, 20.0), 6.0), 4),
]
FAST_GROUP = replace(SLOW_GROUP, rated_speed_mps=3.5, acceleration_mps2=0.9, jerk_mps3=1.2)


@pytest.mark.slow
@pytest.mark.parametrize("building,P", SMALL, ids=lambda x: getattr(x, "name", str(x)))
def test_unequal_heights_slow_jumps_match_exact_enumeration(building, P):
    """Unequal heights and populations, rated speed NOT reached in a one-floor jump:
    the Monte Carlo mean equals the exact enumerated expectation."""
    v, a, j = FAST_GROUP.rated_speed_mps, FAST_GROUP.acceleration_mps2, FAST_GROUP.jerk_mps3
    assert max(building.floor_rises_m) < regime_boundaries_m(v, a, j)[0]
    exact = exact_uppeak(building, FAST_GROUP, P)
    r = simulate_trips(building, FAST_GROUP, P, poisson=False, trials=80_000, seed=21)
    for name, est in (("time_s", r.round_trip_time), ("stops", r.stops),
                      ("highest", r.highest_reversal_floor)):
        ok, msg = within(est, exact[name])
        assert ok, f"{name}: {msg}"


def test_monte_carlo_above_classical_when_one_floor_flight_is_below_the_cruise_line():
    """With equal heights and t_f(d_f) <= d_f/v + v/a + a/j (here: rated speed far from
    reached in one floor), every k-floor jump costs at least t_f(d_f) + (k-1) t_v, so the
    trip model's exact expectation is at least the classical RTT: the classical
    formula's one-floor assumption underestimates such a round trip (with rated speed
    nearly reached in one floor it can overestimate instead: the condition matters)."""
    b = Building("tall-fast", (3.4,) * 5, (60.0, 20.0, 90.0, 30.0, 50.0))
    g = FAST_GROUP
    v, a, j = g.rated_speed_mps, g.acceleration_mps2, g.jerk_mps3
    d = b.average_interfloor_height_m
    ks = np.arange(1, 6)
    assert np.all(flight_time_s(ks * d, v, a, j) >= flight_time_s(d, v, a, j) + (ks - 1) * d / v)
    exact = exact_uppeak(b, g, 4)["time_s"]
    classical = uppeak_calculation(b, g, 4).round_trip_time_s
    r = simulate_trips(b, g, 4, poisson=False, trials=40_000, seed=2)
    assert exact > classical
    assert within(r.round_trip_time, exact)[0]
    assert r.round_trip_time.mean > classical


def test_mixed_traffic_matches_exact_enumeration():
    """Incoming, outgoing and interfloor passengers in a tiny building: stops and
    reversal floors against the exact enumeration of every pair of OD cells."""
    b = Building("tiny", (3.0, 4.0, 3.5), (30.0, 50.0, 20.0))
    t = Traffic(10.0, 0.5, 0.3, 0.2)
    p = od_matrix(b, t)
    cells = [(o, d) for o in range(4) for d in range(4) if p[o, d] > 0]
    flight = flight_table_s(b, SLOW_GROUP).tolist()
    exact = dict(stops=0.0, highest=0.0, lowest=0.0, time_s=0.0)
    for pair in itertools.product(cells, repeat=2):
        prob = p[pair[0]] * p[pair[1]]
        ref = reference_trip(list(pair), flight, 16, SLOW_GROUP.stop_overhead_s,
                             SLOW_GROUP.transfer_in_s, SLOW_GROUP.transfer_out_s)
        for k in exact:
            exact[k] += prob * getattr(ref, k)
    r = simulate_trips(b, SLOW_GROUP, 2, traffic=t, poisson=False, trials=60_000, seed=4)
    for name, est in (("stops", r.stops), ("highest", r.highest_reversal_floor),
                      ("lowest", r.lowest_reversal_floor), ("time_s", r.round_trip_time)):
        ok, msg = within(est, exact[name])
        assert ok, f"{name}: {msg}"


def test_distribution_of_stops_is_the_occupancy_distribution():
    """N = P = 10, equal populations: Pr(S = k) = C(N, k) k! S2(P, k) / N^P, the classical
    occupancy distribution (S2: Stirling numbers of the second kind); chi-square with
    the tail k <= 4 pooled (expected counts >= 5), scipy reference test."""
    from scipy.stats import chisquare

    def stirling2(n, k):
        return sum((-1) ** i * math.comb(k, i) * (k - i) ** n for i in range(k + 1)) // math.factorial(k)

    N = P = 10
    pmf = np.array([math.comb(N, k) * math.factorial(k) * stirling2(P, k) / N ** P
                    for k in range(N + 1)])
    assert pmf.sum() == pytest.approx(1.0, abs=1e-12)
    b = Building("ten", (3.6,) * N, (50.0,) * N)
    n = 50_000
    r = simulate_trips(b, SLOW_GROUP, P, poisson=False, trials=n, seed=8, keep_sample=True)
    counts = np.bincount(r.sample.column(K.STOPS), minlength=N + 1)
    obs = np.concatenate(([counts[:5].sum()], counts[5:]))
    exp = np.concatenate(([pmf[:5].sum()], pmf[5:])) * n
    assert chisquare(obs, exp).pvalue > 1e-4


# ---------------------------------------------------------------- determinism and limits
def test_same_seed_same_numbers_on_one_and_two_threads():
    b = CLASSICAL_BUILDINGS[1]
    t = Traffic(10.0, 0.6, 0.2, 0.2)
    one = simulate_trips(b, SLOW_GROUP, 9.5, traffic=t, trials=30_000, seed=99, threads=1,
                         keep_sample=True)
    two = simulate_trips(b, SLOW_GROUP, 9.5, traffic=t, trials=30_000, seed=99, threads=2,
                         keep_sample=True)
    assert np.array_equal(one.sample.rtt_s, two.sample.rtt_s)
    assert np.array_equal(one.sample.counts, two.sample.counts)
    other = simulate_trips(b, SLOW_GROUP, 9.5, traffic=t, trials=30_000, seed=100)
    assert other.round_trip_time.mean != one.round_trip_time.mean


def test_adaptive_run_is_reproducible_and_meets_its_target():
    b = CLASSICAL_BUILDINGS[0]
    a = simulate_trips(b, SLOW_GROUP, 10, ci_target_pct=0.3, seed=1)
    c = simulate_trips(b, SLOW_GROUP, 10, ci_target_pct=0.3, seed=1)
    assert a == c
    assert a.round_trip_time.ci95 <= 0.003 * a.round_trip_time.mean


def test_capacity_is_never_exceeded():
    b = CLASSICAL_BUILDINGS[0]
    g = replace(SLOW_GROUP, rated_load_persons=8)
    r = simulate_trips(b, g, 12, traffic=Traffic(10.0, 0.4, 0.3, 0.3), trials=20_000, seed=3,
                       keep_sample=True)
    assert r.sample.column(K.PEAK_LOAD).max() <= 8
    assert r.left_behind_share > 0.05          # the limit was exercised


def test_demand_fixed_point_satisfies_its_equation():
    """P = lambda RTT(P) / L at the converged point, within the RTT's interval."""
    b = CLASSICAL_BUILDINGS[0]
    t = Traffic(11.0)
    g = replace(SLOW_GROUP, rated_speed_mps=2.5, cars=6)
    r = simulate_demand(b, g, t, seed=3)
    assert not r.saturated and r.converged
    lam = t.arrival_rate_persons_per_s(b)
    implied = lam * r.round_trip_time.mean / g.cars
    assert abs(implied - r.passengers_per_trip) <= lam * 2 * r.round_trip_time.ci95 / g.cars


def test_demand_beyond_the_group_is_saturated_at_the_design_load():
    b = CLASSICAL_BUILDINGS[0]
    r = simulate_demand(b, SLOW_GROUP, Traffic(25.0), seed=3)
    assert r.saturated
    assert r.passengers_per_trip == pytest.approx(SLOW_GROUP.design_load_persons)


def test_bad_arguments_are_refused():
    b = CLASSICAL_BUILDINGS[0]
    with pytest.raises(ValueError, match="passengers"):
        simulate_trips(b, SLOW_GROUP, -1)
    with pytest.raises(ValueError, match="ci_target_pct"):
        simulate_trips(b, SLOW_GROUP, 5, ci_target_pct=0)
    with pytest.raises(ValueError, match="interfloor"):
        od_matrix(Building("one", (3.0,), (10.0,)), Traffic(5.0, 0.0, 0.0, 1.0))


def test_simulate_command_json_keys_and_errors(tmp_path, capsys):
    """`liftsort simulate --json`: the calc keys plus ci95_s, trials, iterations,
    left_behind_share and seed; bad options exit 2."""
    import json

    from experiments.cli import main
    f = tmp_path / "b.toml"
    f.write_text('[building]\nname = "Tarn House"\nfloors = 10\nfloor_height_m = 3.5\n'
                 'population = 80\n[group]\ncars = 4\nrated_load_persons = 13\n'
                 'rated_speed_mps = 1.6\nacceleration_mps2 = 1.0\njerk_mps3 = 1.5\n'
                 'door_open_s = 1.8\ndoor_close_s = 2.9\n[traffic]\narrival_rate_pct_5min = 11\n')
    assert main(["simulate", str(f), "--json", "--seed", "4"]) == 0
    d = json.loads(capsys.readouterr().out)
    for key in ("round_trip_time_s", "interval_s", "passengers_per_trip", "expected_stops",
                "highest_reversal_floor", "handling_capacity_persons_5min",
                "handling_capacity_pct_5min", "car_load_pct", "average_waiting_time_s",
                "saturated", "ci95_s", "trials", "iterations", "left_behind_share", "seed"):
        assert key in d, key
    assert d["seed"] == 4 and d["iterations"] >= 1
    assert d["ci95_s"] <= 0.005 * d["round_trip_time_s"]
    assert main(["simulate", str(f), "--passengers", "8", "--fixed", "--trials", "500",
                 "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    assert d["trials"] == 500 and d["passenger_model"] == "fixed"
    for bad in (["--fixed", "--poisson"], ["--ci-target", "0"], ["--trials", "1"]):
        with pytest.raises(SystemExit) as exit_:          # argparse: usage and exit 2
            main(["simulate", str(f), *bad])
        assert exit_.value.code == 2


def test_streamed_estimates_do_not_depend_on_threads_or_chunk_prefetch():
    """The stream is defined chunk by chunk (roundtrip/stream.py): the demand fixed point
    and a comparison of rules give the very same numbers on one and on two threads,
    and a run of exactly N trips is the chunks of that plan, in order."""
    from batchrounds.montecarlo import compare_rules
    from roundtrip.stream import CHUNK_TRIPS, chunk_sizes
    b = CLASSICAL_BUILDINGS[1]
    t = Traffic(9.0, 0.7, 0.2, 0.1)
    one = simulate_demand(b, SLOW_GROUP, t, seed=5, threads=1).to_dict()
    two = simulate_demand(b, SLOW_GROUP, t, seed=5, threads=2).to_dict()
    assert one == two
    a = compare_rules(b, SLOW_GROUP, ["sorted"], 8.0, traffic=t, trials=5000, seed=2, threads=1)
    c = compare_rules(b, SLOW_GROUP, ["sorted"], 8.0, traffic=t, trials=5000, seed=2, threads=2)
    assert a.to_dict() == c.to_dict()
    assert chunk_sizes(2 * CHUNK_TRIPS + 5, CHUNK_TRIPS) == [CHUNK_TRIPS, CHUNK_TRIPS, 5]
    r = simulate_trips(b, SLOW_GROUP, 8.0, traffic=t, trials=CHUNK_TRIPS + 7, seed=3)
    assert r.trials == CHUNK_TRIPS + 7
