"""Charts: each chart function writes a real PNG and SVG, atomically, from small runs.

Plumbing checks (files written, formats right, bad input refused with a clear
message); how the charts read was checked by eye on the demo building. The
tables come from real sweeps of an invented six-storey building with 200 trials
per estimate, so every drawn number is a computed one.
"""
from __future__ import annotations

from pathlib import Path

import pandas as pd
import pytest

from allocation.registry import rule_names
from experiments import charts
from experiments.sweep import demand_sweep
from batchrounds.montecarlo import compare_rules

from .report_context import HOLLIN, HOLLIN_GROUP, HOLLIN_YARD

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"
RULES = ["random", "sorted", "sectors"]
NAME = "Hollin Yard"


def check_written(paths, stems, out: Path) -> None:
    """Every stem as a non-empty PNG and SVG in out, nothing else new, no temporary file."""
    paths = [Path(p) for p in paths]
    expected = sorted(f"{s}.{e}" for s in stems for e in ("png", "svg"))
    assert sorted(p.name for p in paths) == expected
    for p in paths:
        assert p.parent == out and p.is_file() and p.stat().st_size > 0
        data = p.read_bytes()
        if p.suffix == ".png":
            assert data.startswith(PNG_SIGNATURE)
        else:
            head = data[:400].decode("utf-8")
            assert head.startswith("<?xml") and "<svg" in data.decode("utf-8")
    assert not [f for f in out.iterdir() if f.name.startswith(".") or f.suffix == ".tmp"]


@pytest.fixture(scope="module")
def sweep():
    # 4 % to 14 %: light demand up to past saturation of conventional control.
    return demand_sweep(HOLLIN, [4.0, 8.0, 14.0], RULES, trials=200, seed=1)


@pytest.fixture(scope="module")
def opens_sweep():
    # Groups of 2 and 3 cars with 1 or 2 open: several cars-open values, and a 3-car
    # group with no row where every car is open (the charts then use its 2 open).
    return demand_sweep(HOLLIN, [6.0, 10.0], RULES, cars_list=[2, 3], cars_open_list=[1, 2],
                        trials=200, seed=1)


def test_sweep_charts_write_three_charts(sweep, tmp_path):
    paths = charts.sweep_charts(sweep, tmp_path, NAME)
    check_written(paths, ["rtt_interval_vs_demand", "capacity_vs_demand", "gain_vs_demand"],
                  tmp_path)


def test_sweep_charts_facet_groups_and_add_the_cars_open_chart(opens_sweep, tmp_path):
    paths = charts.sweep_charts(opens_sweep, tmp_path, NAME)
    check_written(paths, ["rtt_interval_vs_demand", "capacity_vs_demand", "gain_vs_demand",
                          "gain_vs_cars_open"], tmp_path)


def test_cars_open_chart(opens_sweep, tmp_path):
    check_written(charts.cars_open_chart(opens_sweep, tmp_path, NAME), ["gain_vs_cars_open"],
                  tmp_path)


def test_distribution_charts(tmp_path):
    c = compare_rules(HOLLIN_YARD, HOLLIN_GROUP, RULES, 6.0, trials=200, seed=3)
    check_written(charts.distribution_charts(c, tmp_path, NAME),
                  ["stops_distribution", "reversal_distribution"], tmp_path)


def test_batch_diagram_and_a_name_with_dollars(tmp_path):
    # "$" would start matplotlib mathtext; the name must print as typed, not fail.
    paths = charts.batch_diagram(HOLLIN_YARD, HOLLIN_GROUP, rules=("random", "sorted"),
                                 passengers_per_car=6.0, seed=5, out_dir=tmp_path,
                                 building_name="Unit $5 & $6_x <b>")
    check_written(paths, ["batch_diagram"], tmp_path)


def test_batch_diagram_refuses_more_than_the_rated_load(tmp_path):
    with pytest.raises(ValueError, match="passengers_per_car = 11"):
        charts.batch_diagram(HOLLIN_YARD, HOLLIN_GROUP, passengers_per_car=11, out_dir=tmp_path)


def test_classical_vs_simulation_chart(tmp_path):
    table = pd.DataFrame({"rated_speed_mps": [1.0, 1.6, 2.5],
                          "classical_round_trip_time_s": [120.0, 101.0, 92.0],
                          "monte_carlo_round_trip_time_s": [119.5, 100.8, 93.1],
                          "monte_carlo_ci95_s": [0.4, 0.4, 0.3],
                          "rated_speed_reached_in_one_floor": [True, True, False]})
    check_written(charts.classical_vs_simulation_chart(table, tmp_path, NAME),
                  ["classical_vs_simulation"], tmp_path)


def test_a_table_without_the_needed_columns_is_refused(sweep, tmp_path):
    with pytest.raises(ValueError, match="missing column.*ci95_s"):
        charts.sweep_charts(sweep.drop(columns=["ci95_s"]), tmp_path, NAME)
    with pytest.raises(ValueError, match="no rows"):
        charts.cars_open_chart(sweep.iloc[0:0], tmp_path, NAME)


def test_rule_colours_are_fixed_distinct_and_the_baseline_is_grey():
    names = rule_names()
    colours = [charts.rule_colour(r) for r in names]
    assert len(set(colours)) == len(names)
    assert colours == [charts.rule_colour(r) for r in names]      # the same every time
    assert charts.rule_colour("random") == "#4d4d4d"
    assert charts.rule_colour("some-future-rule") == charts.rule_colour("some-future-rule")


def test_charts_are_rewritten_in_place(opens_sweep, tmp_path):
    first = charts.cars_open_chart(opens_sweep, tmp_path, NAME)
    second = charts.cars_open_chart(opens_sweep, tmp_path, NAME)
    assert first == second
    assert sorted(tmp_path.iterdir()) == sorted(first)
