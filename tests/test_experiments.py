"""Sweeps, sizing, the report job and the experiment scripts, end to end (tiny trial counts)."""
from __future__ import annotations

import hashlib
import json
import subprocess
import sys

import pandas as pd
import pytest

from experiments.cli import main
from experiments.cli.options import parse_range
from experiments.tasks import task_seed
from roundtrip.inputfile import InputError

BUILDING = """
[building]
name = "{name}"
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
"""


@pytest.fixture
def building_file(tmp_path):
    f = tmp_path / "quarry.toml"
    f.write_text(BUILDING.format(name="Quarry Mews"), encoding="utf-8")
    return f


def test_ranges_parse_and_refuse_clearly():
    assert parse_range("6:10:2", "--arrival", whole=False, low=0) == [6, 8, 10]
    assert parse_range("6:7:0.5", "--arrival", whole=False, low=0) == [6, 6.5, 7]
    assert parse_range("3,4,5", "--cars", whole=True, low=1) == [3, 4, 5]
    for bad, msg in (("20:6", "STOP"), ("6:20:0", "step"), ("a:3", "not a number"),
                     ("1.5,2", "whole"), ("0:3", ">= 1")):
        with pytest.raises(InputError, match=msg):
            parse_range(bad, "--cars", whole=True, low=1)


def test_sweep_writes_one_tidy_table(building_file, tmp_path, capsys):
    out = tmp_path / "sw"
    assert main(["sweep", str(building_file), "--arrival", "8:12:2", "--cars-open", "1,3",
                 "--trials", "300", "--out", str(out), "--no-charts", "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    table = pd.read_csv(out / "sweep.csv")
    assert len(table) == len(d["rows"]) == 3 * 2 * 4          # points x cars open x rules
    assert set(table["rule"]) == {"random", "sorted", "sectors", "fewest-stops"}
    for col in ("round_trip_time_s", "ci95_s", "hc_gain_pct_vs_random", "hc_gain_ci95_pct",
                "design_load_handling_capacity_pct_5min"):
        assert table[col].notna().all()
    base = table[table["rule"] == "random"]
    assert (base["hc_gain_pct_vs_random"] == 0).all()          # baseline against itself
    one_open = table[(table["cars_open"] == 1) & (table["rule"] == "sorted")]
    assert one_open["hc_gain_pct_vs_random"].abs().max() < 1e-9  # k = 1 is conventional


def test_sweep_refuses_bad_ranges(building_file, tmp_path, capsys):
    assert main(["sweep", str(building_file), "--arrival", "20:6", "--out", str(tmp_path)]) == 2
    err = capsys.readouterr().err
    assert "--arrival" in err and "Traceback" not in err
    assert not (tmp_path / "sweep.csv").exists()
    assert main(["sweep", str(building_file), "--arrival", "8", "--cars-open", "7",
                 "--out", str(tmp_path)]) == 2
    assert "--cars-open" in capsys.readouterr().err


def test_size_finds_the_smallest_group_and_says_when_none(building_file, capsys):
    assert main(["size", str(building_file), "--cars", "1:6", "--trials", "400", "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    keys = {"rule", "cars", "rated_load_persons", "rated_speed_mps", "interval_s",
            "handling_capacity_pct_5min", "round_trip_time_s"}
    designs = {x["rule"]: x for x in d["designs"]}
    assert set(designs) == {"random", "sorted", "sectors", "fewest-stops"}
    for x in designs.values():
        assert keys <= set(x)
        if x["found"]:
            assert x["interval_s"] <= 30.0 and x["handling_capacity_pct_5min"] >= 11.0
    # grouping never needs more cars than conventional control
    assert designs["sorted"]["cars"] <= designs["random"]["cars"]
    assert main(["size", str(building_file), "--cars", "1:2", "--interval-max", "1",
                 "--trials", "300", "--json"]) == 0
    none = json.loads(capsys.readouterr().out)["designs"]
    assert all(not x["found"] and x["cars"] is None and "no candidate" in x["message"]
               for x in none)


def brute_force_designs(scenario, rules, cars, loads, speeds, interval_max_s, hc_min_pct,
                        trials, seed, cars_open=2):
    """The smallest design of every rule by brute force: every candidate of the grid run
    (all rules on common batches, as `size` runs them, with min(cars_open, cars) cars
    open), then, among those meeting both criteria (the interval at the load the demand
    sets, the handling capacity at the design load), the first in the stated order:
    fewest cars, then the smallest rated load, then the slowest rated speed. With a fixed
    trial count a rule's figures do not depend on which other rules share its batches."""
    import itertools
    from dataclasses import replace

    from batchrounds.montecarlo import compare_rules
    from roundtrip.classical import design_passengers
    from roundtrip.montecarlo import simulate_demand
    demand = replace(scenario.traffic, arrival_rate_pct_5min=hc_min_pct)
    meets = {}
    for c, q, v in itertools.product(cars, loads, speeds):
        g = replace(scenario.group, cars=c, rated_load_persons=q, rated_speed_mps=v)
        run = dict(cars_open=min(cars_open, c), traffic=scenario.traffic, trials=trials,
                   seed=seed)
        full = compare_rules(scenario.building, g, rules,
                             design_passengers(scenario.building, g, scenario.traffic),
                             **run).to_dict()
        p = simulate_demand(scenario.building, g, demand, trials=trials,
                            seed=seed).passengers_per_trip
        busy = {r["rule"]: r for r in compare_rules(scenario.building, g, rules, p,
                                                    **run).to_dict()["rules"]}
        for r in full["rules"]:
            interval = busy[r["rule"]]["interval_s"]
            meets[(r["rule"], c, q, v)] = (interval <= interval_max_s
                                           and r["handling_capacity_pct_5min"] >= hc_min_pct,
                                           interval, r["handling_capacity_pct_5min"])
    designs = {}
    for rule in rules:
        passing = [key[1:] for key, (ok, *_) in meets.items() if key[0] == rule and ok]
        designs[rule] = (min(passing, key=lambda x: (x[0], x[1] * x[2], x[1], x[2]))
                         if passing else None)     # cars, then load x speed, then load
    return designs, meets


@pytest.mark.parametrize("hc_min", [None, 25.0], ids=["file's demand, 25 s", "25 %"])
def test_size_is_the_first_passing_candidate_of_a_brute_force_search(building_file, capsys,
                                                                      hc_min):
    """`size --cars --loads --speeds` returns, for every rule, exactly the design a brute
    force search of the same grid finds (the first candidate meeting the criteria in
    the stated order, with its figures), lists given out of order. The grid is chosen
    so that the order decides: at 25 % conventional control also passes with larger,
    slower cars (5 x 21 persons at 1.6 m/s) and with more cars (6 x 13 at 1.6 m/s)
    than its design (5 x 13 at 2.5 m/s)."""
    from allocation.registry import default_rules
    from roundtrip.inputfile import load_scenario
    argv = ["size", str(building_file), "--cars", "1:6", "--loads", "21,13", "--speeds",
            "2.5,1.6", "--trials", "400", "--seed", "2026", "--json"]
    argv += ["--hc-min", str(hc_min)] if hc_min is not None else ["--interval-max", "25"]
    assert main(argv) == 0
    d = json.loads(capsys.readouterr().out)
    scenario = load_scenario(building_file)
    hc = 11.0 if hc_min is None else hc_min
    interval = 30.0 if hc_min is not None else 25.0
    assert d["criteria"] == {"interval_max_s": interval, "hc_min_pct": hc}
    rules = default_rules()
    # every candidate draws from the search's one stream, seeded from the run's seed and
    # the building (experiments/tasks.py): the brute force runs on that stream
    digest = hashlib.sha256(building_file.read_bytes()).hexdigest()[:12]
    stream = task_seed(2026, ("size", "round-trip", "Quarry Mews", digest))
    expected, meets = brute_force_designs(scenario, rules, range(1, 7), (13, 21), (1.6, 2.5),
                                          interval, hc, 400, stream)
    got = {x["rule"]: x for x in d["designs"]}
    assert list(got) == rules
    for rule in rules:
        x = got[rule]
        assert x["found"] == (expected[rule] is not None)
        if x["found"]:
            key = (x["cars"], x["rated_load_persons"], x["rated_speed_mps"])
            assert key == expected[rule], rule
            ok, interval, hc_pct = meets[(rule, *key)]
            assert x["interval_s"] == interval and x["handling_capacity_pct_5min"] == hc_pct
    if hc_min is not None:              # the order, not the grid, decides these
        assert expected["random"] == (5, 13, 2.5)
        assert meets[("random", 5, 21, 1.6)][0] and meets[("random", 6, 13, 1.6)][0]
    else:
        assert expected["random"] == (3, 13, 2.5)           # speed is searched too
        assert not meets[("random", 3, 13, 1.6)][0]


def test_every_candidate_size_tried_is_the_group_it_names(building_file):
    """Each candidate `size` lists as tried carries the figures of the very group it names
    (cars, rated load, rated speed), as the brute-force search computes them one group
    at a time: a search that ran the file's own car for every rated load would pass
    the design checks whenever the answer has the file's load, but not this one."""
    from allocation.registry import default_rules
    from experiments.sizing import Criteria, size_group
    from roundtrip.inputfile import load_scenario
    scenario = load_scenario(building_file)
    rules = default_rules()
    criteria = Criteria(interval_max_s=1.0, hc_min_pct=11.0)   # nothing passes: all tried
    out = size_group(scenario, rules, criteria, [3, 4], [13, 21], [2.5], trials=300,
                     seed=7)
    stream = task_seed(7, ("size", "round-trip", "Quarry Mews", ""))   # no file: no digest
    _, meets = brute_force_designs(scenario, rules, (3, 4), (13, 21), (2.5,), 1.0, 11.0,
                                   300, stream)
    assert {(t["rule"], t["cars"], t["rated_load_persons"], t["rated_speed_mps"])
            for t in out["tried"]} == set(meets)
    for t in out["tried"]:
        _, interval, hc = meets[(t["rule"], t["cars"], t["rated_load_persons"],
                                 t["rated_speed_mps"])]
        assert (t["interval_s"], t["handling_capacity_pct_5min"]) == (interval, hc), t
    by_load = {t["rated_load_persons"]: t["handling_capacity_pct_5min"]
               for t in out["tried"] if t["rule"] == rules[0] and t["cars"] == 4}
    assert by_load[21] > by_load[13]          # a larger car carries more (common practice)


@pytest.mark.slow
def test_report_end_to_end_escapes_the_building_name(tmp_path, capsys):
    f = tmp_path / "mark.toml"
    f.write_text(BUILDING.format(name="<b>Quarry</b> & <script>alert(1)</script>"), encoding="utf-8")
    out = tmp_path / "rep"
    assert main(["report", str(f), "--out", str(out), "--trials", "300", "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    html = (out / "report.html").read_text(encoding="utf-8")
    assert "<script>alert(1)</script>" not in html
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in html
    assert "data:image/png;base64," in html
    assert d["headline"] and "caution" in html.lower()
    for key, value in d["headline_numbers"].items():
        assert f'data-key="{key}"' in html


@pytest.mark.slow
@pytest.mark.parametrize("name", ["grouping_gain_vs_demand", "cars_open_needed",
                                  "classical_vs_simulation"])
def test_experiment_scripts_run_and_write_figure_and_csv(name, tmp_path):
    import importlib
    module = importlib.import_module(f"experiments.{name}")
    assert module.__doc__ and "?" in module.QUESTION
    table, paths = module.main(trials=300, seed=3, out_dir=tmp_path)
    assert len(table) > 0
    assert list(tmp_path.glob("*.csv"))
    assert any(p.suffix == ".png" and p.stat().st_size > 0 for p in paths)
    assert any(p.suffix == ".svg" for p in paths)


def test_calc_starts_without_numba_pandas_or_seaborn(building_file):
    """`liftsort calc` must answer fast: it may not import the heavy libraries."""
    code = ("import sys; from experiments.cli import main; "
            f"main(['calc', {str(building_file)!r}, '--json']); "
            "heavy = [m for m in ('numba', 'pandas', 'seaborn', 'scipy', 'matplotlib') "
            "if m in sys.modules]; print('HEAVY', heavy)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert "HEAVY []" in out.stdout
