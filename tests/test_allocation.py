"""Allocation rules: properties that must hold for every batch (hypothesis), exact
expectations on tiny buildings, and facts of the trade about destination grouping."""
from __future__ import annotations

import itertools
import json
import math
from collections import Counter
from dataclasses import replace

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from allocation.ordering import destination_order, equal_cut
from allocation.registry import RULES, RuleParams, car_limit, get_rule, scratch_size
from allocation.sectors import (band_round_trip_s, floor_bands, sectors_by_floor_counts,
                                sectors_in_order)
from allocation.contract import empty_cars
from batchrounds import _kernel as G
from batchrounds.montecarlo import compare_rules, sub_batch_sizes
from experiments.cli import main
from roundtrip import schedule as K
from roundtrip.building import Building, LiftGroup, Traffic
from roundtrip.kinematics import flight_time_s
from roundtrip.passengers import AliasTable
from roundtrip.schedule import TripStream, trip_timing

from .reference_trip import reference_rounds, reference_trip

GROUP = LiftGroup(cars=4, rated_load_persons=8, rated_speed_mps=1.6, acceleration_mps2=1.0,
                  jerk_mps3=1.5, door_open_s=1.8, door_close_s=2.9, start_delay_s=0.5,
                  transfer_in_s=1.2, transfer_out_s=1.2, capacity_factor=0.8)
PLAIN_RULES = [r for r in RULES if r != "best"]


def flight_table_s(building, group):
    """The flight-time table of the trip model [s]."""
    return trip_timing(building, group).flight_s


@st.composite
def batches(draw, max_floors=10, max_passengers=30, lobby_only=False):
    """A building and a batch of (origin, destination) pairs, origin != destination."""
    n_floors = draw(st.integers(1, max_floors))
    rises = tuple(draw(st.lists(st.floats(2.8, 5.0), min_size=n_floors, max_size=n_floors)))
    building = Building("B", rises, (50.0,) * n_floors)
    n = draw(st.integers(0, max_passengers))
    pairs = []
    for _ in range(n):
        if lobby_only or n_floors == 1 or draw(st.booleans()):
            pairs.append((0, draw(st.integers(1, n_floors))))
        else:
            o = draw(st.integers(0, n_floors))
            d = draw(st.integers(0, n_floors).filter(lambda x, o=o: x != o))
            pairs.append((o, d))
    return building, pairs


def allocate(rule_name, building, group, pairs, k):
    rule = get_rule(rule_name)
    o = np.array([p[0] for p in pairs], dtype=np.int64)
    d = np.array([p[1] for p in pairs], dtype=np.int64)
    limit = car_limit(len(pairs), k, group.rated_load_persons)
    return rule.allocate(o, d, k, limit, rule.params(building, group, k, len(pairs) / k)), limit


def car_groups(pairs, cars, k):
    return [Counter(p for p, c in zip(pairs, cars) if c == j) for j in range(k)]


# ---------------------------------------------------------------- properties of every rule
@settings(max_examples=80)
@given(bp=batches(), k=st.integers(1, 5), rule=st.sampled_from(PLAIN_RULES))
def test_every_passenger_allocated_once_within_the_car_limit(bp, k, rule):
    building, pairs = bp
    group = replace(GROUP, cars=k)
    assume(len(pairs) <= k * group.rated_load_persons)      # the engine gives rules batches that fit
    cars, limit = allocate(rule, building, group, pairs, k)
    assert cars.shape == (len(pairs),)
    assert np.all((cars >= 0) & (cars < k))                  # each passenger exactly one car
    assert np.all(np.bincount(cars, minlength=k) <= limit)   # no car above its limit
    assert limit <= group.rated_load_persons


def identity_alias(o, d):
    """An alias table whose cell i is passenger i; uniforms (i + 0.5) / n then make the
    kernel draw exactly these passengers, in this order."""
    n = max(len(o), 1)
    return AliasTable(np.ones(n), np.arange(n), np.concatenate((o, [0]))[:n].astype(np.int64),
                      np.concatenate((d, [1]))[:n].astype(np.int64))


@settings(max_examples=60)
@given(bp=batches(), k=st.integers(1, 4), rule=st.sampled_from(PLAIN_RULES), data=st.data())
def test_group_kernel_equals_the_plain_twin_round_by_round(bp, k, rule, data):
    """The group kernel, round by round and car by car, equals the plain twin of its model
    (tests/reference_trip.py::reference_rounds: conventional loading car by car gives each
    car's room, the rule shares the batch, every car is timed by the plain trip model,
    whoever a car cannot take waits) to the bit, with several rounds in a chain, uneven
    sub-batches and passengers carried over; no car is above rated load, and the route
    ascends up, descends down and serves every passenger."""
    building, pairs = bp
    L = data.draw(st.integers(k, 2 * k + 1))
    rounds = data.draw(st.integers(1, 3))
    group = replace(GROUP, cars=L, rated_load_persons=3)
    o = np.array([p[0] for p in pairs], dtype=np.int64).reshape(-1)
    d = np.array([p[1] for p in pairs], dtype=np.int64).reshape(-1)
    cuts = sorted(data.draw(st.lists(st.integers(0, len(pairs)), min_size=rounds * L - 1,
                                     max_size=rounds * L - 1)))
    offsets = np.array([0] + cuts + [len(pairs)], dtype=np.int64)
    lobby_only = bool(np.all(o == 0)) and data.draw(st.booleans())
    r = get_rule(rule)
    table = r.table(building, group, sub_batch_sizes(L, k), max(len(pairs), 1) / L)
    timing = trip_timing(building, group)
    n_levels = building.floors + 1
    out = G.GroupOut.empty(rounds, L, 1, n_levels)
    u = (np.arange(len(pairs)) + 0.5) / max(len(pairs), 1)
    G.group_trips(r.compiled, TripStream(u, offsets), identity_alias(o, d),
                  G.GroupLayout(L, k, rounds), timing, table, lobby_only, out, 0, 1)

    def allocate(origins, destinations, rooms):
        cars = empty_cars(len(rooms), 0)
        cars["room"] = rooms
        return r.allocate(origins, destinations, len(rooms), params=RuleParams(table, timing),
                          cars=cars)

    arrivals = [[list(zip(o[offsets[t * L + c]:offsets[t * L + c + 1]].tolist(),
                          d[offsets[t * L + c]:offsets[t * L + c + 1]].tolist()))
                 for c in range(L)] for t in range(rounds)]
    fl = flight_table_s(building, group).tolist()
    twin, waiting = reference_rounds(arrivals, k, allocate, fl, 3, group.stop_overhead_s,
                                     group.transfer_in_s, group.transfer_out_s)
    assert out.waiting_end[0] == len(waiting)
    assert not out.unallocated.any()
    for t in range(rounds):
        for c, (ref, offered, left) in enumerate(twin[t]):
            assert out.rtt_s[t, c] == ref.time_s
            assert list(out.counts[t, c]) == [ref.stops, ref.highest, ref.lowest, ref.boarded,
                                              ref.peak_load, left, offered]
            assert ref.peak_load <= 3
            route = ref.route[1:-1]
            top = route.index(max(route)) if route else 0
            assert route[:top + 1] == sorted(route[:top + 1])
            assert route[top:] == sorted(route[top:], reverse=True)
    # nobody is dropped: every passenger who arrived was carried or is still waiting
    carried = int(out.counts[:, :, K.BOARDED].sum())
    assert carried + out.waiting_end[0] == len(pairs)


@settings(max_examples=80)
@given(bp=batches(), k=st.integers(1, 5), rule=st.sampled_from(["sorted", "sectors"]),
       perm_seed=st.integers(0, 2**31))
def test_grouping_rules_ignore_the_listing_order(bp, k, rule, perm_seed):
    """`sorted` and `sectors` give the same groups of (origin, destination) whatever
    order the batch is listed in."""
    building, pairs = bp
    group = replace(GROUP, cars=k)
    assume(len(pairs) <= k * group.rated_load_persons)
    perm = np.random.default_rng(perm_seed).permutation(len(pairs))
    shuffled = [pairs[i] for i in perm]
    a, _ = allocate(rule, building, group, pairs, k)
    b, _ = allocate(rule, building, group, shuffled, k)
    assert car_groups(pairs, a, k) == car_groups(shuffled, b, k)


@settings(max_examples=80)
@given(bp=batches(lobby_only=True), k=st.integers(1, 5), limit=st.integers(1, 12))
def test_sectors_from_floor_counts_equals_sectors_one_by_one(bp, k, limit):
    """The lobby-only shortcut of `sectors` (runs of ranks per band from the floor counts) gives
    every passenger the car that the rule as stated (one passenger at a time, in
    destination order) gives them, including when bands overflow into neighbours and
    when every car is at its limit (not allocated, -1)."""
    building, pairs = bp
    assume(pairs)
    group = replace(GROUP, cars=k)
    o = np.array([p[0] for p in pairs], dtype=np.int64)
    d = np.array([p[1] for p in pairs], dtype=np.int64)
    params = get_rule("sectors").params(building, group, k, len(pairs) / k)
    cars = empty_cars(k, limit)
    one_by_one = np.full(len(pairs), -7, np.int64)
    by_counts = np.full(len(pairs), -7, np.int64)
    sectors_in_order(o, d, cars, params.table[k], np.zeros(scratch_size(len(pairs), k), np.int64),
                     one_by_one)
    done = sectors_by_floor_counts(o, d, cars, params.table[k],
                                   np.zeros(scratch_size(len(pairs), k), np.int64), by_counts)
    assert done
    assert np.array_equal(one_by_one, by_counts)
    assert np.array_equal(get_rule("sectors").allocate(o, d, k, limit, params), one_by_one)


@settings(max_examples=100)
@given(bp=batches(lobby_only=True), k=st.integers(1, 6), data=st.data())
def test_fewest_stops_at_the_lobby_equals_the_rule_as_stated(bp, k, data):
    """The lobby shortcut of `fewest-stops` (a bit mask of cars per floor) gives every
    passenger the car that the rule as stated gives them (each passenger in arrival
    order, every car weighed on new stops, load, rise), whatever the cars' rooms, loads
    and the stops they are already due to make."""
    from allocation.fewest_stops import fewest_stops_at_lobby, fewest_stops_in_order
    building, pairs = bp
    n_floors = building.floors
    o = np.zeros(len(pairs), np.int64)
    d = np.array([p[1] for p in pairs], dtype=np.int64).reshape(-1)
    cars = empty_cars(k, 0)
    for c in range(k):
        cars[c]["room"] = data.draw(st.integers(0, 12))
        cars[c]["load"] = data.draw(st.integers(0, 5))
        cars[c]["up_stops"] = data.draw(st.integers(0, (1 << (n_floors + 1)) - 1))
        cars[c]["down_stops"] = data.draw(st.integers(0, (1 << (n_floors + 1)) - 1))
    stated = np.full(len(pairs), -7, np.int64)
    shortcut = np.full(len(pairs), -7, np.int64)
    fewest_stops_in_order(o, d, cars, np.zeros(scratch_size(len(pairs), k), np.int64), stated)
    fewest_stops_at_lobby(d, cars, np.zeros(scratch_size(len(pairs), k), np.int64), shortcut)
    assert np.array_equal(stated, shortcut)


@settings(max_examples=80)
@given(bp=batches(lobby_only=True), k=st.integers(1, 6))
def test_sorted_from_floor_counts_equals_sorting_then_cutting(bp, k):
    """The lobby-only shortcut of `sorted` (each passenger's rank counted from the floor
    counts) gives every passenger the car of the rule as stated: sort the batch by
    destination, stable in arrival order, and cut it into k equal groups."""
    _, pairs = bp
    o = np.zeros(len(pairs), np.int64)
    d = np.array([p[1] for p in pairs], dtype=np.int64).reshape(-1)
    order = np.empty(len(pairs), np.int64)
    destination_order(o, d, order, np.zeros(scratch_size(len(pairs), k), np.int64))
    as_stated = np.full(len(pairs), -7, np.int64)
    equal_cut(order, len(pairs), k, as_stated)
    by_counts = get_rule("sorted").allocate(o, d, k, car_limit(len(pairs), k, 99))
    assert np.array_equal(as_stated, by_counts)
    # and the stable order is the one Python's stable sort gives
    assert order.tolist() == sorted(range(len(pairs)), key=lambda i: d[i])


@settings(max_examples=60)
@given(bp=batches(), rule=st.sampled_from(PLAIN_RULES))
def test_with_one_car_open_every_rule_is_conventional(bp, rule):
    building, pairs = bp
    group = replace(GROUP, cars=1)
    assume(len(pairs) <= group.rated_load_persons)
    cars, _ = allocate(rule, building, group, pairs, 1)
    base, _ = allocate("random", building, group, pairs, 1)
    assert np.array_equal(cars, base)


def mean_rtt(building, group, pairs, cars, k):
    fl = flight_table_s(building, group).tolist()
    return sum(reference_trip([p for p, c in zip(pairs, cars) if c == j], fl,
                              group.rated_load_persons, group.stop_overhead_s,
                              group.transfer_in_s, group.transfer_out_s).time_s
               for j in range(k)) / k


@settings(max_examples=40)
@given(bp=batches(max_floors=8, max_passengers=7), k=st.integers(1, 3))
def test_best_is_never_worse_than_any_rule(bp, k):
    """`best` searches every allocation within the same car limits, so no rule beats it
    on the same batch (exhaustive enumeration is the bound)."""
    building, pairs = bp
    group = replace(GROUP, cars=k)
    best, _ = allocate("best", building, group, pairs, k)
    bound = mean_rtt(building, group, pairs, best, k)
    for rule in PLAIN_RULES:
        cars, _ = allocate(rule, building, group, pairs, k)
        assert bound <= mean_rtt(building, group, pairs, cars, k) + 1e-9


def test_worked_example_rule_deals_in_turn():
    """The contributor's worked example: passengers dealt to the cars in turn."""
    b = Building("B", (3.5,) * 6, (10.0,) * 6)
    cars, _ = allocate("round-robin", b, GROUP, [(0, 3), (0, 1), (0, 6), (0, 2), (0, 5)], 3)
    assert cars.tolist() == [0, 1, 2, 0, 1]


def test_sorted_groups_by_destination():
    """Hand check: destinations 3,1,4,1,5,6,2,6 to 3 cars -> {1,1}, {2,3,4}, {5,6,6}."""
    b = Building("B", (3.5,) * 6, (10.0,) * 6)
    pairs = [(0, x) for x in (3, 1, 4, 1, 5, 6, 2, 6)]
    cars, _ = allocate("sorted", b, GROUP, pairs, 3)
    groups = [sorted(p[1] for p, c in zip(pairs, cars) if c == j) for j in range(3)]
    assert groups == [[1, 1], [2, 3, 4], [5, 6, 6]]


def test_sector_bands_are_the_exact_minimax_partition():
    """The dynamic programme finds the contiguous banding whose slowest band is fastest:
    checked against exact enumeration of every placement of the cuts."""
    b = Building("B", (4.5,) + (3.6,) * 9, (30.0, 90.0, 90.0, 60.0, 120.0, 80.0, 80.0, 40.0, 100.0, 20.0))
    k, P = 3, 10.0
    levels, pops = b.levels_m, np.asarray(b.populations)
    shares = pops / pops.sum()
    v = GROUP.rated_speed_mps
    d_f = b.average_interfloor_height_m
    t_s = flight_time_s(d_f, v, 1.0, 1.5) - d_f / v + GROUP.stop_overhead_s

    def worst(bands):
        return max(band_round_trip_s(levels, pops, lo, hi, k * P * shares[lo - 1:hi].sum(), v,
                                     t_s, GROUP.transfer_s) for lo, hi in bands)

    best = min(worst([(a + 1, c) for a, c in zip((0,) + cuts, cuts + (10,))])
               for cuts in itertools.combinations(range(1, 10), k - 1))
    assert worst(floor_bands(b, GROUP, k, P)) == pytest.approx(best, rel=1e-12)


# ---------------------------------------------------------------- exact expectation
def test_sorted_with_all_cars_open_matches_exact_enumeration():
    """Tiny building, 2 cars x 2 passengers fixed, up-peak: the Monte Carlo mean of the
    sorted rule equals the exact expectation over every batch (3^4 destination tuples
    with their probabilities), within 4 standard errors."""
    b = Building("tiny", (4.0, 3.0, 3.5), (20.0, 50.0, 30.0))
    g = replace(GROUP, cars=2, rated_load_persons=8)
    w = b.population_shares
    exact = dict(rtt=0.0, stops=0.0, high=0.0)
    fl = flight_table_s(b, g).tolist()
    for dests in itertools.product((1, 2, 3), repeat=4):
        prob = math.prod(w[x - 1] for x in dests)
        pairs = [(0, x) for x in dests]
        cars, _ = allocate("sorted", b, g, pairs, 2)
        trips = [reference_trip([p for p, c in zip(pairs, cars) if c == j], fl, 8,
                                g.stop_overhead_s, g.transfer_in_s, g.transfer_out_s)
                 for j in range(2)]
        exact["rtt"] += prob * sum(t.time_s for t in trips) / 2
        exact["stops"] += prob * sum(t.stops for t in trips) / 2
        exact["high"] += prob * sum(t.highest for t in trips) / 2
    c = compare_rules(b, g, ["sorted"], 2, poisson=False, trials=40_000, seed=17, keep_sample=True)
    s = c.result("sorted").sample
    for name, x in (("rtt", s.trial_rtt_s), ("stops", s.trial_mean(K.STOPS)),
                    ("high", s.trial_mean(K.HIGHEST))):
        se = x.std(ddof=1) / math.sqrt(x.size)
        assert abs(x.mean() - exact[name]) < 4 * se, name


# ---------------------------------------------------------------- facts of the trade
OFFICE = Building("Tamsin Yard", (4.2,) + (3.6,) * 13, (80.0,) * 14)
OFFICE_GROUP = replace(GROUP, cars=4, rated_load_persons=16, rated_speed_mps=2.5)


@pytest.fixture(scope="module")
def office_comparisons():
    return {k: compare_rules(OFFICE, OFFICE_GROUP, ["sorted", "sectors", "fewest-stops",
                                                    "round-robin"], 10.0, cars_open=k,
                             trials=6000, seed=5).to_dict()
            for k in (1, 2, 4)}


def test_destination_grouping_lowers_stops_and_rtt_and_raises_capacity(office_comparisons):
    """Common practice: in up-peak, grouping passengers by destination lowers the mean
    number of stops and the round-trip time, and raises handling capacity, against
    conventional (random) allocation at the same car load."""
    rules = {r["rule"]: r for r in office_comparisons[4]["rules"]}
    for name in ("sorted", "sectors", "fewest-stops"):
        r = rules[name]
        assert r["expected_stops"] < rules["random"]["expected_stops"]
        assert r["rtt_gain_pct_vs_random"] - r["rtt_gain_ci95_pct"] > 0
        assert r["hc_gain_pct_vs_random"] - r["hc_gain_ci95_pct"] > 0


def test_grouping_gain_grows_with_cars_open(office_comparisons):
    """Common practice: the more cars open to allocation, the more grouping can gain;
    with one car open, destination grouping is conventional control."""
    gain = {k: {r["rule"]: r["hc_gain_pct_vs_random"] for r in c["rules"]}
            for k, c in office_comparisons.items()}
    for name in ("sorted", "sectors"):
        assert gain[1][name] == pytest.approx(0.0, abs=1e-9)
        assert gain[1][name] < gain[2][name] < gain[4][name]


def test_paired_intervals_are_much_narrower_than_unpaired(office_comparisons):
    for r in office_comparisons[4]["rules"][1:]:
        assert r["rtt_gain_ci95_pct"] < 0.7 * r["rtt_gain_ci95_pct_unpaired"]


def test_worked_example_rule_performs_like_conventional(office_comparisons):
    r = {x["rule"]: x for x in office_comparisons[4]["rules"]}["round-robin"]
    assert abs(r["rtt_gain_pct_vs_random"]) < 4 * r["rtt_gain_ci95_pct"] / 1.96 + 1e-9


def test_same_seed_same_comparison_on_one_and_two_threads():
    a = compare_rules(OFFICE, OFFICE_GROUP, ["sorted"], 9.0, traffic=Traffic(10.0, 0.5, 0.3, 0.2),
                      trials=3000, seed=4, threads=1, keep_sample=True)
    b = compare_rules(OFFICE, OFFICE_GROUP, ["sorted"], 9.0, traffic=Traffic(10.0, 0.5, 0.3, 0.2),
                      trials=3000, seed=4, threads=2, keep_sample=True)
    for x, y in zip(a.results, b.results):
        assert np.array_equal(x.sample.rtt_s, y.sample.rtt_s)
        assert np.array_equal(x.sample.counts, y.sample.counts)


# ---------------------------------------------------------------- command line
def test_compare_json_has_the_contract_keys(tmp_path, capsys):
    f = tmp_path / "b.toml"
    f.write_text('[building]\nname = "Pell Row"\nfloors = 8\nfloor_height_m = 3.5\npopulation = 60\n'
                 '[group]\ncars = 3\nrated_load_persons = 13\nrated_speed_mps = 1.6\n'
                 'acceleration_mps2 = 1.0\njerk_mps3 = 1.5\ndoor_open_s = 1.8\ndoor_close_s = 2.9\n')
    assert main(["compare", str(f), "--passengers", "8", "--trials", "2000", "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    keys = {"rule", "round_trip_time_s", "ci95_s", "interval_s", "handling_capacity_persons_5min",
            "handling_capacity_pct_5min", "expected_stops", "highest_reversal_floor",
            "car_load_pct", "left_behind_share", "rtt_gain_pct_vs_random", "rtt_gain_ci95_pct"}
    assert [r["rule"] for r in d["rules"]] == ["random", "sorted", "sectors", "fewest-stops"]
    for r in d["rules"]:
        assert keys <= set(r)
        assert r["interval_s"] == pytest.approx(r["round_trip_time_s"] / 3)
    assert main(["compare", str(f), "--passengers", "8", "--rules", "random,sortd"]) == 2
    assert "did you mean 'sorted'" in capsys.readouterr().err
    assert main(["compare", str(f), "--passengers", "3", "--rules", "best"]) == 2
    assert "tiny batches" in capsys.readouterr().err
    assert main(["compare", str(f), "--passengers", "8", "--cars-open", "4"]) == 2
    assert "--cars-open" in capsys.readouterr().err


def test_docs_table_is_made_from_the_registry():
    """docs/rules.md is the registry's own table (regenerate: python -m allocation.rules_table)."""
    from pathlib import Path

    from allocation.rules_table import rules_markdown
    committed = (Path(__file__).parent.parent / "docs" / "rules.md").read_text(encoding="utf-8")
    assert committed == rules_markdown()


def test_every_rule_is_described_in_two_sentences_with_a_source():
    for rule in RULES.values():
        sentences = [s for s in rule.summary.replace("e.g.", "eg").split(". ") if s.strip()]
        assert 2 <= len(sentences) <= 3, rule.name
        assert rule.source
