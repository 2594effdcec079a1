"""Monte Carlo round trips checked against the kernel's plain twin, the classical
formulae, and exact enumeration of every passenger batch.

Statistical checks use a fixed seed and the criterion |mean - exact| < 4 sigma/sqrt(n)
(k = 4: a false alarm has probability ~6e-5 per check under the normal
approximation). Each check also asserts its power (tests/mc_power.py): the smallest
bias it detects with 90 % power, (4 + 1.28) sigma/sqrt(n), is at most 1 % of the
quantity checked; the trial counts are set for that.
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

from .mc_power import K_SIGMA, assert_cell_frequencies, assert_estimate, assert_unbiased
from .reference_trip import reference_chain, reference_trip


def flight_table_s(building, group):
    """The flight-time table of the trip model [s]."""
    return trip_timing(building, group).flight_s


SLOW_GROUP = LiftGroup(cars=4, rated_load_persons=16, rated_speed_mps=1.0, acceleration_mps2=1.0,
                       jerk_mps3=1.5, door_open_s=1.8, door_close_s=2.9, start_delay_s=0.5,
                       transfer_in_s=1.2, transfer_out_s=1.2, capacity_factor=0.8)


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
MAX_FLOORS = 63           # stop masks are 64-bit words: floors 0 ... 63


@st.composite
def building_and_group(draw, max_floors=MAX_FLOORS):
    """A building of 1 ... 63 served floors (uneven rises and populations, an express zone
    sometimes) and a group; floor counts near the extremes are drawn often."""
    n = draw(st.one_of(st.integers(1, max_floors), st.sampled_from([1, 2, max_floors - 1,
                                                                    max_floors])))
    rises = draw(st.lists(st.floats(2.5, 6.0), min_size=n, max_size=n))
    pops = draw(st.lists(st.integers(0, 120), min_size=n, max_size=n).filter(lambda p: sum(p) > 0))
    express = draw(st.sampled_from([0.0, 0.0, 12.5]))
    group = replace(SLOW_GROUP, rated_load_persons=draw(st.integers(1, 24)),
                    rated_speed_mps=draw(st.sampled_from([1.0, 1.6, 2.5, 4.0])))
    return Building("H", tuple(rises), tuple(float(p) for p in pops), express), group


def assert_equals_reference(building, group, orig, dest, offsets, sample):
    """Every trip of ``sample`` equals the plain twin's trip, to the bit."""
    for t, ref in enumerate(run_reference(building, group, orig, dest, offsets)):
        assert sample.rtt_s[t] == ref.time_s, f"trip {t}"
        assert list(sample.counts[t]) == [ref.stops, ref.highest, ref.lowest, ref.boarded,
                                          ref.peak_load, ref.left_behind,
                                          offsets[t + 1] - offsets[t]], f"trip {t}"


@settings(max_examples=60)
@given(bg=building_and_group(), mix=st.sampled_from([(1, 0, 0), (0, 1, 0), (0.4, 0.3, 0.3),
                                                      (0, 0, 1), (0.2, 0.2, 0.6)]),
       seed=st.integers(0, 2**32 - 1), mean=st.floats(0, 30))
def test_kernel_equals_plain_reference_exactly(bg, mix, seed, mean):
    """The compiled trip model gives the same numbers, to the bit, as its plain twin,
    on 1 ... 63 floors."""
    building, group = bg
    if mix[2] > 0 and sum(p > 0 for p in building.populations) < 2:
        mix = (1, 0, 0)
    sampler = PassengerSampler(building, Traffic(10.0, *mix))
    orig, dest, offsets = sampler.draw(np.random.default_rng(seed), mean, 40, True)
    assert_equals_reference(building, group, orig, dest, offsets,
                            time_trips(building, group, orig, dest, offsets))


def tall_building(floors: int) -> Building:
    """An invented building of ``floors`` served floors: unequal rises (a tall entrance
    floor, a plant floor every ninth), unequal populations, an express zone."""
    rises = tuple(4.6 if f == 1 else 5.2 if f % 9 == 0 else 3.4 + 0.15 * (f % 4)
                  for f in range(1, floors + 1))
    pops = tuple(float(20 + (37 * f) % 90) for f in range(1, floors + 1))
    return Building(f"tall-{floors}", rises, pops, 8.0)


def single_and_full_trips(floors: int):
    """Fixed trips that visit every floor: for each floor f, (0 -> f), (f -> 0) and an
    interfloor trip through f; then one trip with a passenger to every floor and one
    from every floor. Returns (orig, dest, offsets)."""
    trips = []
    for f in range(1, floors + 1):
        trips.append([(0, f)])
        trips.append([(f, 0)])
        g = f % floors + 1
        trips.append([(f, g)] if g != f else [(0, f)])
    trips.append([(0, f) for f in range(1, floors + 1)])
    trips.append([(f, 0) for f in range(floors, 0, -1)])
    trips.append([(f, floors + 1 - f) for f in range(1, floors + 1) if f != floors + 1 - f])
    orig = np.array([o for t in trips for o, _ in t], dtype=np.int64)
    dest = np.array([d for t in trips for _, d in t], dtype=np.int64)
    offsets = np.concatenate(([0], np.cumsum([len(t) for t in trips]))).astype(np.int64)
    return orig, dest, offsets


@pytest.mark.parametrize("floors", [17, 32, 48, 63])
def test_kernel_equals_plain_reference_on_tall_buildings(floors):
    """Fixed cases on 17, 32, 48 and 63 floors with unequal rises: every floor served alone
    (up, down and interfloor), every floor in one trip (rated load above the floors, and
    at 13 so that passengers are left behind), and mixed batches; all to the bit equal
    to the plain twin."""
    b = tall_building(floors)
    orig, dest, offsets = single_and_full_trips(floors)
    for rated in (64, 13):
        g = replace(SLOW_GROUP, rated_load_persons=rated, rated_speed_mps=2.5)
        assert_equals_reference(b, g, orig, dest, offsets, time_trips(b, g, orig, dest, offsets))
    g = replace(SLOW_GROUP, rated_load_persons=20, rated_speed_mps=4.0)
    sampler = PassengerSampler(b, Traffic(10.0, 0.4, 0.3, 0.3))
    orig, dest, offsets = sampler.draw(np.random.default_rng(floors), 18.0, 300, True)
    assert_equals_reference(b, g, orig, dest, offsets, time_trips(b, g, orig, dest, offsets))


def assert_chains_equal_reference(building, group, sampler, stream, chain):
    """Run the one-car Monte Carlo kernel on ``stream`` in chains of ``chain`` trips and
    check every trip against the plain twin (tests/reference_trip.py::reference_chain):
    to the bit, with the running sums the sums of those trips and every passenger who
    arrived carried or still waiting."""
    timing = trip_timing(building, group)
    orig, dest = sampler.cells(stream.uniforms)
    trips_n = stream.offsets.size - 1
    sample = TripOut.empty(trips_n)
    sums = chain_sums(sampler, timing, stream, chain, sample)
    flight = flight_table_s(building, group).tolist()
    offsets = stream.offsets
    for c0 in range(0, trips_n, chain):
        trips = [list(zip(orig[offsets[t]:offsets[t + 1]].tolist(),
                          dest[offsets[t]:offsets[t + 1]].tolist()))
                 for t in range(c0, min(trips_n, c0 + chain))]
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


@pytest.mark.parametrize("floors", [17, 32, 48, 63])
@pytest.mark.parametrize("mix", [(0.5, 0.3, 0.2), (1.0, 0.0, 0.0)], ids=["mixed", "up-peak"])
def test_fused_sampling_kernel_equals_the_plain_reference_on_tall_buildings(floors, mix):
    """The Monte Carlo kernel (sampling inside the kernel; up-peak straight into the stop
    mask; chains of trips with carry-over) on 17 ... 63 floors with unequal rises: each
    trip equals the plain twin's trip of the passengers the same uniforms pick."""
    b = tall_building(floors)
    g = replace(SLOW_GROUP, rated_load_persons=21, rated_speed_mps=4.0)
    sampler = PassengerSampler(b, Traffic(10.0, *mix))
    stream = sampler.uniforms(np.random.default_rng(floors + 1), 16.0, 400, True)
    assert_chains_equal_reference(b, g, sampler, stream, 7)


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
    stream = sampler.uniforms(np.random.default_rng(seed), mean, 23, True)
    assert_chains_equal_reference(building, group, sampler, stream, chain)


def od_by_hand(populations, incoming, outgoing, interfloor):
    """The origin-destination probabilities written out from their definition (module
    notes of roundtrip/passengers.py; the classical traffic patterns): a passenger is
    incoming with probability c_in, to floor k in proportion to its population U_k;
    outgoing with c_out, from floor k in proportion to U_k; interfloor with c_if,
    between two different floors i, k in proportion to U_i U_k (the chance that a
    random person of floor i visits a random person of floor k)."""
    n = len(populations)
    total = sum(populations)
    pairs = sum(populations[i] * populations[k] for i in range(n) for k in range(n) if i != k)
    p = [[0.0] * (n + 1) for _ in range(n + 1)]
    for k in range(1, n + 1):
        p[0][k] += incoming * populations[k - 1] / total
        p[k][0] += outgoing * populations[k - 1] / total
    for i in range(1, n + 1):
        for k in range(1, n + 1):
            if i != k and interfloor > 0:
                p[i][k] += interfloor * populations[i - 1] * populations[k - 1] / pairs
    mass = sum(map(sum, p))
    return np.array(p) / mass


@pytest.mark.parametrize("pops", [(30.0, 50.0, 0.0, 40.0), (10.0, 90.0, 25.0), (7.0,) * 5,
                                  (120.0, 1.0, 60.0, 3.0, 45.0, 80.0)])
@pytest.mark.parametrize("mix", [(1, 0, 0), (0, 1, 0), (0, 0, 1), (0.5, 0.3, 0.2),
                                 (0.1, 0.2, 0.7)])
def test_od_matrix_is_the_traffic_patterns_by_hand(pops, mix):
    """od_matrix equals the patterns written out from the populations and the mix: every
    cell, to rounding (interfloor in proportion to both populations, not to one)."""
    b = Building("H", (3.5,) * len(pops), pops)
    assert od_matrix(b, Traffic(10.0, *mix)) == pytest.approx(od_by_hand(pops, *mix), abs=1e-15)


def test_sampler_draws_from_the_od_matrix():
    """Alias sampling reproduces the origin-destination patterns written out by hand:
    one z test per cell (Bonferroni, family false alarm 1e-4) on 14 million draws, which
    sees a 1 % relative error of any cell (the smallest holds 2.6 % of the draws) with
    90 % power; impossible cells (the empty floor, origin = destination) never drawn."""
    pops = (30.0, 50.0, 0.0, 40.0)
    mix = (0.5, 0.3, 0.2)
    building = Building("H", (3.5, 4.0, 3.5, 3.5), pops)
    sampler = PassengerSampler(building, Traffic(10.0, *mix))
    rng = np.random.default_rng(7)
    observed = np.zeros(25, dtype=np.int64)
    for _ in range(4):                                 # 4 x 3.5 million, a chunk at a time
        orig, dest, _ = sampler.draw(rng, 3_500_000, 1, False)
        observed += np.bincount(orig * 5 + dest, minlength=25)
    assert_cell_frequencies(observed, od_by_hand(pops, *mix).ravel(), "OD cells")


def test_alias_table_is_exact():
    """Each column's kept and aliased mass adds back to K p exactly (alias method)."""
    p = np.array([0.5, 0.1, 0.0, 0.25, 0.15])
    prob, alias = alias_table(p)
    mass = prob.copy()
    np.add.at(mass, alias, 1.0 - prob)
    assert np.allclose(mass, p * p.size, atol=1e-12)


def test_fixed_real_mean_mixes_the_two_nearest_integers():
    """Fixed counts at P = 7.3 take 7 or 8 with mean 7.3 (sd sqrt(0.3 x 0.7); 200,000 draws
    see a 0.07 % bias with 90 % power)."""
    counts = passenger_counts(np.random.default_rng(3), 7.3, 200_000, poisson=False)
    assert set(np.unique(counts)) == {7, 8}
    assert_unbiased(counts, 7.3, "mean count")


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
    r = simulate_trips(building, group, P, poisson=False, trials=150_000, seed=11)
    c = uppeak_calculation(building, group, P)
    assert_estimate(r.round_trip_time, c.round_trip_time_s, "RTT")
    assert_estimate(r.stops, c.expected_stops, "S")
    assert_estimate(r.highest_reversal_floor, c.highest_reversal_floor, "H")


@pytest.mark.parametrize("mean", [0.7, 5.0, 14.0])
def test_poisson_counts_match_poisson_forms(mean):
    """Poisson passengers: mean stops and highest reversal floor equal the Poisson forms
    S = sum(1 - exp(-P u_i)), H = N - sum_{j>=0} exp(-P (1 - F_j)) (zero-passenger
    term included); E[(1-u)^X] = exp(-P u) for X ~ Poisson(P). The forms know no
    rated load, so the car here is large enough never to leave anyone behind."""
    b = CLASSICAL_BUILDINGS[1]
    big = replace(SLOW_GROUP, rated_load_persons=60)
    r = simulate_trips(b, big, mean, poisson=True, trials=600_000, seed=5)
    assert_estimate(r.stops, expected_stops_poisson(b.population_shares, mean), "S")
    assert_estimate(r.highest_reversal_floor,
                    highest_reversal_floor_poisson(b.population_shares, mean), "H")


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
    r = simulate_trips(building, FAST_GROUP, P, poisson=False, trials=150_000, seed=21)
    for name, est in (("time_s", r.round_trip_time), ("stops", r.stops),
                      ("highest", r.highest_reversal_floor)):
        assert_estimate(est, exact[name], name)


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
    assert_estimate(r.round_trip_time, exact, "RTT")
    assert r.round_trip_time.mean > classical


def test_mixed_traffic_matches_exact_enumeration():
    """Incoming, outgoing and interfloor passengers in a tiny building: stops and
    reversal floors against the exact enumeration of every pair of OD cells, with the
    cells' probabilities written out by hand (od_by_hand). Interfloor traffic is the
    larger share so that the lowest reversal floor (0 whenever a trip has lobby
    traffic) is common enough to be checked to 1 %."""
    pops = (30.0, 50.0, 20.0)
    b = Building("tiny", (3.0, 4.0, 3.5), pops)
    t = Traffic(10.0, 0.25, 0.15, 0.6)
    p = od_by_hand(pops, 0.25, 0.15, 0.6)
    cells = [(o, d) for o in range(4) for d in range(4) if p[o, d] > 0]
    flight = flight_table_s(b, SLOW_GROUP).tolist()
    exact = dict(stops=0.0, highest=0.0, lowest=0.0, time_s=0.0)
    for pair in itertools.product(cells, repeat=2):
        prob = p[pair[0]] * p[pair[1]]
        ref = reference_trip(list(pair), flight, 16, SLOW_GROUP.stop_overhead_s,
                             SLOW_GROUP.transfer_in_s, SLOW_GROUP.transfer_out_s)
        for k in exact:
            exact[k] += prob * getattr(ref, k)
    r = simulate_trips(b, SLOW_GROUP, 2, traffic=t, poisson=False, trials=800_000, seed=4)
    for name, est in (("stops", r.stops), ("highest", r.highest_reversal_floor),
                      ("lowest", r.lowest_reversal_floor), ("time_s", r.round_trip_time)):
        assert_estimate(est, exact[name], name)


def test_distribution_of_stops_is_the_occupancy_distribution():
    """N = P = 10, equal populations: Pr(S = k) = C(N, k) k! S2(P, k) / N^P, the classical
    occupancy distribution (S2: Stirling numbers of the second kind). One z test per
    class (Bonferroni), the tails pooled into S <= 5 and S >= 8 so that the smallest
    class holds 14.6 % of the trips; 2.4 million trips see a 1 % relative error of any
    class with 90 % power."""
    def stirling2(n, k):
        return sum((-1) ** i * math.comb(k, i) * (k - i) ** n for i in range(k + 1)) // math.factorial(k)

    N = P = 10
    pmf = np.array([math.comb(N, k) * math.factorial(k) * stirling2(P, k) / N ** P
                    for k in range(N + 1)])
    assert pmf.sum() == pytest.approx(1.0, abs=1e-12)
    b = Building("ten", (3.6,) * N, (50.0,) * N)
    counts = np.zeros(N + 1, dtype=np.int64)
    for seed in range(8, 12):                          # 4 runs of 600,000 trips
        r = simulate_trips(b, SLOW_GROUP, P, poisson=False, trials=600_000, seed=seed,
                           keep_sample=True)
        counts += np.bincount(r.sample.column(K.STOPS), minlength=N + 1)

    def pooled(x):
        return np.array([x[:6].sum(), x[6], x[7], x[8:].sum()])
    assert_cell_frequencies(pooled(counts), pooled(pmf), "Pr(S <= 5), Pr(S = 6), Pr(S = 7), "
                                                          "Pr(S >= 8)")


def test_streamed_moments_equal_the_moments_of_the_whole_sample():
    # Numerical reference: numpy's mean and variance of every trip's round-trip time. The
    # run keeps running sums chain by chain and merges them chunk by chunk by the pairwise
    # update of "Updating formulae and a pairwise algorithm for computing sample
    # variances" (COMPSTAT, 1982); over three chunks of unequal size the merged moments
    # must equal the whole sample's to rounding.
    from roundtrip.stream import CHUNK_TRIPS
    b = CLASSICAL_BUILDINGS[0]
    trials = 2 * CHUNK_TRIPS + 12_345
    r = simulate_trips(b, SLOW_GROUP, 6.0, trials=trials, seed=5, keep_sample=True)
    x = r.sample.rtt_s
    assert x.size == trials == r.round_trip_time.n
    assert r.round_trip_time.mean == pytest.approx(float(np.mean(x)), rel=1e-12)
    assert r.round_trip_time.std == pytest.approx(float(np.std(x, ddof=1)), rel=1e-9)


# ---------------------------------------------------------------- determinism and limits
def test_capacity_is_never_exceeded():
    b = CLASSICAL_BUILDINGS[0]
    g = replace(SLOW_GROUP, rated_load_persons=8)
    r = simulate_trips(b, g, 12, traffic=Traffic(10.0, 0.4, 0.3, 0.3), trials=20_000, seed=3,
                       keep_sample=True)
    assert r.sample.column(K.PEAK_LOAD).max() <= 8
    assert r.left_behind_share > 0.05          # the limit was exercised


# The demand fixed point from a poor start: the classical start is the up-peak formula
# (105 s here), while this mixed traffic takes about 150 s a round trip, so the
# iteration has to travel.
MIXED_OFFICE = CLASSICAL_BUILDINGS[0]
MIXED_GROUP = replace(SLOW_GROUP, rated_speed_mps=2.5, cars=6)
MIXED_DEMAND = Traffic(11.0, 0.5, 0.3, 0.2)


def test_demand_fixed_point_from_a_poor_start_is_the_fixed_point():
    """P = lambda RTT(P) / L, checked by independent Monte Carlo runs (another seed,
    400,000 trials) rather than by the iteration's own exit rule: g(P) = lambda RTT(P) /
    L - P falls through zero at the fixed point, so g > 0 at 0.99 P* and g < 0 at
    1.01 P* puts the true fixed point within 1 % of the returned P*. Each sign is
    asserted with a margin of 4 standard errors of g; a P* 1 % or more away from the
    fixed point leaves |g| <= 0 at one end and fails there with probability above
    1 - 3e-5 (and one 0.8 % away with 90 % power: the slope of g is about -0.4)."""
    r = simulate_demand(MIXED_OFFICE, MIXED_GROUP, MIXED_DEMAND, seed=3)
    assert not r.saturated and r.converged
    assert r.iterations >= 3                     # the start was poor: it had to iterate
    assert r.passengers_per_trip == r.trace[-1]["passengers_per_trip"]
    lam = MIXED_DEMAND.arrival_rate_persons_per_s(MIXED_OFFICE)
    for factor, sign in ((0.99, +1), (1.01, -1)):
        p = factor * r.passengers_per_trip
        check = simulate_trips(MIXED_OFFICE, MIXED_GROUP, p, traffic=MIXED_DEMAND,
                               trials=400_000, seed=20_260)
        g = lam * check.round_trip_time.mean / MIXED_GROUP.cars - p
        se = lam * check.round_trip_time.std / math.sqrt(check.trials) / MIXED_GROUP.cars
        assert sign * g > K_SIGMA * se, (factor, g, se)


def test_demand_fixed_point_that_does_not_settle_says_so(capsys, monkeypatch, tmp_path):
    """One step from the poor start does not settle: converged is False, the result is that
    last iterate (design-load run + one step in the trace), and `liftsort simulate`
    says the fixed point did not settle."""
    r = simulate_demand(MIXED_OFFICE, MIXED_GROUP, MIXED_DEMAND, seed=3, max_iterations=1)
    assert not r.converged and not r.saturated
    assert r.iterations == 2 and len(r.trace) == 2
    assert r.passengers_per_trip == r.trace[-1]["passengers_per_trip"]
    assert r.round_trip_time.mean == r.trace[-1]["round_trip_time_s"]
    two = simulate_demand(MIXED_OFFICE, MIXED_GROUP, MIXED_DEMAND, seed=3, max_iterations=2)
    assert not two.converged and two.iterations == 3
    assert two.trace[:2] == r.trace                  # the same steps, one more
    full = simulate_demand(MIXED_OFFICE, MIXED_GROUP, MIXED_DEMAND, seed=3)
    assert full.trace[:3] == two.trace

    import functools

    import roundtrip.montecarlo as montecarlo
    from experiments.cli import main
    monkeypatch.setattr(montecarlo, "simulate_demand",
                        functools.partial(montecarlo.simulate_demand, max_iterations=1))
    f = tmp_path / "mixed.toml"
    f.write_text('[building]\nname = "Sorrel Quay"\nfloors = 12\nfloor_height_m = 3.6\n'
                 'population = 100\n[group]\ncars = 6\nrated_load_persons = 16\n'
                 'rated_speed_mps = 2.5\nacceleration_mps2 = 1.0\njerk_mps3 = 1.5\n'
                 'door_open_s = 1.8\ndoor_close_s = 2.9\nstart_delay_s = 0.5\n'
                 '[traffic]\narrival_rate_pct_5min = 11\nincoming = 0.5\noutgoing = 0.3\n'
                 'interfloor = 0.2\n')
    assert main(["simulate", str(f), "--seed", "3"]) == 0
    assert "did not settle within the iteration limit" in capsys.readouterr().out


@pytest.mark.parametrize("bad", [0, -1, 2.5, True, None])
def test_demand_fixed_point_refuses_a_bad_iteration_limit(bad):
    """max_iterations must be a whole number >= 1 (0 used to end in a TypeError)."""
    with pytest.raises(ValueError, match="max_iterations"):
        simulate_demand(MIXED_OFFICE, MIXED_GROUP, MIXED_DEMAND, seed=3, max_iterations=bad)


def test_demand_fixed_point_from_a_good_start_settles_in_a_few_steps():
    """Up-peak on equal floors: the classical start is close to the fixed point, so each
    step moves the offered load by under 1 % and the round-trip time settles (two
    successive steps within the Monte Carlo's 95 % half-width) in at most three steps
    after the design-load run."""
    r = simulate_demand(MIXED_OFFICE, MIXED_GROUP, Traffic(11.0), seed=3)
    assert r.converged and r.iterations <= 4
    loads = [t["passengers_per_trip"] for t in r.trace[1:]]
    assert all(abs(b / a - 1.0) < 0.01 for a, b in zip(loads, loads[1:])), loads


def test_demand_beyond_the_group_is_saturated_at_the_design_load():
    b = CLASSICAL_BUILDINGS[0]
    r = simulate_demand(b, SLOW_GROUP, Traffic(25.0), seed=3)
    assert r.saturated
    assert r.passengers_per_trip == pytest.approx(SLOW_GROUP.design_load_persons)
    assert r.mode == "demand" and r.iterations == len(r.trace) >= 1


def test_a_load_above_what_a_car_can_carry_is_refused_at_once():
    b = CLASSICAL_BUILDINGS[0]
    top = SLOW_GROUP.rated_load_persons
    assert simulate_trips(b, SLOW_GROUP, top, trials=200, seed=1).passengers_per_trip == top
    with pytest.raises(ValueError, match="passengers"):
        simulate_trips(b, SLOW_GROUP, top + 0.01, trials=200, seed=1)


def test_bad_arguments_are_refused():
    b = CLASSICAL_BUILDINGS[0]
    with pytest.raises(ValueError, match="passengers"):
        simulate_trips(b, SLOW_GROUP, -1)
    with pytest.raises(ValueError, match="ci_target_pct"):
        simulate_trips(b, SLOW_GROUP, 5, ci_target_pct=0)
    with pytest.raises(ValueError, match="interfloor"):
        od_matrix(Building("one", (3.0,), (10.0,)), Traffic(5.0, 0.0, 0.0, 1.0))
    for kwargs, message in (({"max_trials": 1}, "max_trials = 1: must be a whole number >= 2"),
                            ({"trials": 1}, "trials = 1: must be a whole number >= 2"),
                            ({"threads": 0}, "threads = 0: must be a whole number >= 1")):
        with pytest.raises(ValueError, match=message):
            simulate_trips(b, SLOW_GROUP, 5, **kwargs)


@pytest.mark.parametrize("poisson", [True, False])
def test_a_part_of_the_stream_is_the_same_drawn_into_a_reused_buffer(poisson):
    # The stream's definition (roundtrip/stream.py): a part's counts and uniforms come from
    # its own generator; drawing them into a reused buffer changes nothing.
    from roundtrip.stream import Buffer, count_table, draw_part
    counts = count_table(6.3, poisson)
    fresh = draw_part(11, 2, 1, 500, counts)
    buffer = Buffer()
    draw_part(11, 0, 0, 900, counts, buffer)            # the buffer has been used before
    reused = draw_part(11, 2, 1, 500, counts, buffer)
    np.testing.assert_array_equal(fresh.offsets, reused.offsets)
    np.testing.assert_array_equal(fresh.uniforms, reused.uniforms)


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
