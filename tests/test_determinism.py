"""The same seed gives the same numbers on one thread and on two, end to end.

CI runs this file with ``NUMBA_NUM_THREADS=2`` set explicitly, so that "two
threads" really is two threads on any runner (numba otherwise takes the core
count, and a one-core runner would compare one thread with one). The identity is
not by construction: the one-car kernels split a run of n trials into
min(n / 2000 + 1, 8 x threads) blocks, so every run below with 16,000 trials or
more in one call is cut differently on one and on two threads; the group kernel
keeps its blocks and runs them concurrently. Covered: fixed and adaptive runs,
the demand fixed point, rule comparisons, the demand sweep and the report.
"""
from __future__ import annotations

import json
from dataclasses import replace

import numba
import numpy as np
import pytest

from batchrounds.montecarlo import compare_rules
from roundtrip.building import Building, LiftGroup, Traffic
from roundtrip.montecarlo import simulate_demand, simulate_trips

UNEQUAL = Building("unequal", (3.6,) * 10,
                   (40.0, 120.0, 80.0, 80.0, 150.0, 60.0, 90.0, 90.0, 20.0, 70.0))
OFFICE = Building("Tamsin Yard", (4.2,) + (3.6,) * 13, (80.0,) * 14)
GROUP = LiftGroup(cars=4, rated_load_persons=16, rated_speed_mps=1.0, acceleration_mps2=1.0,
                  jerk_mps3=1.5, door_open_s=1.8, door_close_s=2.9, start_delay_s=0.5)
MIXED = Traffic(10.0, 0.6, 0.2, 0.2)

# An invented nine-storey building for the command-line runs.
BUILDING_TOML = """
[building]
name = "Quarry Mews"
floors = 9
floor_heights_m = [4.5, 3.6, 3.6, 3.6, 3.6, 3.6, 3.6, 3.6, 4.0]
population = [40, 70, 70, 70, 70, 70, 70, 60, 30]

[group]
cars = 3
rated_load_persons = 13
rated_speed_mps = 1.6
acceleration_mps2 = 1.0
jerk_mps3 = 1.5
door_open_s = 1.8
door_close_s = 2.9
start_delay_s = 0.5

[traffic]
arrival_rate_pct_5min = 11.0
incoming = 0.8
outgoing = 0.1
interfloor = 0.1
"""


@pytest.fixture(autouse=True)
def two_threads():
    """Two numba threads must really be there (CI sets NUMBA_NUM_THREADS=2)."""
    if numba.config.NUMBA_NUM_THREADS < 2:
        pytest.skip("numba has one thread here; CI runs this file with NUMBA_NUM_THREADS=2")


@pytest.fixture
def building_file(tmp_path):
    f = tmp_path / "quarry.toml"
    f.write_text(BUILDING_TOML, encoding="utf-8")
    return f


def test_fixed_run_same_on_one_and_two_threads():
    one, two = (simulate_trips(UNEQUAL, GROUP, 9.5, traffic=MIXED, trials=40_000, seed=99,
                               threads=t, keep_sample=True) for t in (1, 2))
    assert np.array_equal(one.sample.rtt_s, two.sample.rtt_s)
    assert np.array_equal(one.sample.counts, two.sample.counts)
    other = simulate_trips(UNEQUAL, GROUP, 9.5, traffic=MIXED, trials=40_000, seed=100)
    assert other.round_trip_time.mean != one.round_trip_time.mean


def test_adaptive_run_same_on_one_and_two_threads_and_meets_its_target():
    """A 0.1 % target takes well over 16,000 trials after the first chunk."""
    one, two = (simulate_trips(UNEQUAL, GROUP, 10, traffic=MIXED, ci_target_pct=0.1, seed=1,
                               threads=t) for t in (1, 2))
    assert one == two
    assert one.trials > 40_000
    assert one.round_trip_time.ci95 <= 0.001 * one.round_trip_time.mean


def test_demand_fixed_point_same_on_one_and_two_threads():
    one, two = (simulate_demand(OFFICE, replace(GROUP, rated_speed_mps=2.5, cars=6), MIXED,
                                trials=20_000, seed=3, threads=t) for t in (1, 2))
    assert one == two and one.iterations >= 3
    adaptive = [simulate_demand(OFFICE, replace(GROUP, rated_speed_mps=2.5, cars=6), MIXED,
                                ci_target_pct=0.15, seed=3, threads=t) for t in (1, 2)]
    assert adaptive[0] == adaptive[1] and adaptive[0].trials > 40_000


def test_comparison_same_on_one_and_two_threads():
    a, b = (compare_rules(OFFICE, replace(GROUP, rated_speed_mps=2.5), ["sorted", "sectors"],
                          9.0, traffic=MIXED, trials=6000, seed=4, threads=t, keep_sample=True)
                for t in (1, 2))
    for x, y in zip(a.results, b.results):
        assert np.array_equal(x.sample.rtt_s, y.sample.rtt_s)
        assert np.array_equal(x.sample.counts, y.sample.counts)
    assert a.to_dict() == b.to_dict()


def test_sweep_same_on_one_and_two_threads(building_file, tmp_path, capsys):
    from experiments.cli import main
    tables = []
    for t in (1, 2):
        out = tmp_path / f"sweep-{t}"
        assert main(["sweep", str(building_file), "--arrival", "9,13", "--trials", "20000",
                     "--threads", str(t), "--out", str(out), "--no-charts", "--quiet"]) == 0
        tables.append((out / "sweep.csv").read_bytes())
    capsys.readouterr()
    assert tables[0] == tables[1]


@pytest.mark.slow
def test_report_same_on_one_and_two_threads(building_file, tmp_path, capsys):
    """The whole job: every number of the report's JSON, and the report's text but for its
    time stamp."""
    from experiments.cli import main
    results, pages = [], []
    for t in (1, 2):
        out = tmp_path / f"report-{t}"
        assert main(["report", str(building_file), "--out", str(out), "--trials", "20000",
                     "--threads", str(t), "--json"]) == 0
        d = json.loads(capsys.readouterr().out)
        for key in ("report", "figures", "csv"):
            d.pop(key)
        d["stamp"].pop("generated_at")
        results.append(d)
        html = (out / "report.html").read_text(encoding="utf-8")
        pages.append([line for line in html.splitlines() if "UTC" not in line
                      and "data:image/png" not in line])
    assert results[0] == results[1]
    assert pages[0] == pages[1]
