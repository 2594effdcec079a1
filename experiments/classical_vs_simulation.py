"""Experiment: when does the classical round-trip formula mislead?

The classical up-peak formula assumes that the car reaches rated speed in a
one-floor jump and that floors are of equal height. For the invented demo
building (a tall entrance storey, 3.8 m typical storeys) this experiment
computes, at a fixed car load of 10 passengers, the round-trip time by the
classical formula and by Monte Carlo round trips on the real floor levels with
ideal jerk-limited flights, for rated speeds from 1.0 to 4.0 m/s. Where rated
speed is reached in one floor the two agree (to the unequal-height effect);
above that speed the classical formula charges every stop a one-floor flight
overhead that real multi-floor jumps do not all pay, and the two part.

Run: ``python -m experiments.classical_vs_simulation [--trials N] [--seed S] [--out DIR]``
"""
from __future__ import annotations

from dataclasses import replace
from pathlib import Path

from roundtrip.inputfile import load_scenario

from .experiment_cli import experiment_main

QUESTION = "When does the classical round-trip formula mislead?"
SPEEDS_MPS = (1.0, 1.6, 2.0, 2.5, 3.0, 3.5, 4.0)
PASSENGERS = 10.0


def main(trials: int | None = None, seed: int = 2026, out_dir="liftsort-out/classical-vs-simulation"):
    """Save classical_vs_simulation.png/.svg and .csv; return the table."""
    import pandas as pd

    from roundtrip.classical import uppeak_calculation
    from roundtrip.montecarlo import simulate_trips

    from .charts import classical_vs_simulation_chart
    from .data import demo_building_path
    from .outputs import output_dir, write_atomic

    scenario = load_scenario(demo_building_path())
    out = output_dir(out_dir)
    rows = []
    for v in SPEEDS_MPS:
        group = replace(scenario.group, rated_speed_mps=v)
        c = uppeak_calculation(scenario.building, group, PASSENGERS)
        m = simulate_trips(scenario.building, group, PASSENGERS, poisson=False, trials=trials,
                           ci_target_pct=0.2, seed=seed)
        rows.append({"rated_speed_mps": v, "classical_round_trip_time_s": c.round_trip_time_s,
                     "monte_carlo_round_trip_time_s": m.round_trip_time.mean,
                     "monte_carlo_ci95_s": m.round_trip_time.ci95,
                     "difference_pct": 100 * (m.round_trip_time.mean / c.round_trip_time_s - 1),
                     "rated_speed_reached_in_one_floor": c.rated_speed_reached_in_one_floor,
                     "trials": m.trials})
    table = pd.DataFrame(rows)
    write_atomic(out / "classical_vs_simulation.csv", table.to_csv(index=False))
    paths = classical_vs_simulation_chart(table, out, scenario.building.name)
    return table, [Path(p) for p in paths]


if __name__ == "__main__":
    experiment_main(main, QUESTION)
