"""Experiment: how many cars must be open to allocation to get most of the gain?

Destination control allocates a passenger to a car before boarding; how much
it can group depends on how many cars share each allocation decision. With
one car open, every rule is conventional control; with all cars open the
grouping is ideal. For the invented demo building at its design demand, this
experiment sweeps the number of cars open from 1 to all and reports each
rule's handling-capacity gain over conventional control with paired 95 %
intervals.

Run: ``python -m experiments.cars_open_needed [--trials N] [--seed S] [--out DIR]``
"""
from __future__ import annotations

from pathlib import Path

from roundtrip.inputfile import load_scenario

from .experiment_cli import experiment_main

QUESTION = "How many cars must be open to allocation to get most of the gain?"


def main(trials: int | None = None, seed: int = 2026, out_dir="liftsort-out/cars-open"):
    """Run the sweep, save gain_vs_cars_open.png/.svg and cars_open.csv; return the table."""
    from .charts import cars_open_chart
    from allocation.registry import default_rules

    from .data import demo_building_path
    from .outputs import output_dir, write_atomic
    from .sweep import demand_sweep

    scenario = load_scenario(demo_building_path())
    out = output_dir(out_dir)
    cars = scenario.group.cars
    table = demand_sweep(scenario, [scenario.traffic.arrival_rate_pct_5min],
                         default_rules(),
                         cars_open_list=list(range(1, cars + 1)), trials=trials, seed=seed)
    write_atomic(out / "cars_open.csv", table.to_csv(index=False))
    return table, [Path(p) for p in cars_open_chart(table, out, scenario.building.name)]


if __name__ == "__main__":
    experiment_main(main, QUESTION)
