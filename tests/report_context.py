"""A tiny invented building and a report context built from a real (small) run.

Shared by the report tests; every number in the context comes from the run.
"""
from __future__ import annotations

from pathlib import Path

from roundtrip.building import Building, LiftGroup, Scenario, Traffic

# An invented six-storey office block, small enough for runs of a fraction of a second.
HOLLIN_YARD = Building("Hollin Yard", (4.2, 3.5, 3.5, 3.5, 3.5, 3.8),
                       (40.0, 60.0, 60.0, 60.0, 55.0, 35.0))
HOLLIN_GROUP = LiftGroup(cars=3, rated_load_persons=10, rated_speed_mps=1.6,
                         acceleration_mps2=1.0, jerk_mps3=1.5, door_open_s=1.8,
                         door_close_s=2.9, start_delay_s=0.5)
HOLLIN = Scenario(HOLLIN_YARD, HOLLIN_GROUP, Traffic(12.0))

HOSTILE_NAME = "<script>alert(1)</script> & Co"


def tiny_context(out_dir: Path, building_name: str = HOSTILE_NAME, *, trials: int = 200,
                 seed: int = 7) -> dict:
    """Run a tiny comparison, draw two of its charts into out_dir, and return a context."""
    from experiments import charts
    from batchrounds.montecarlo import compare_rules

    c = compare_rules(HOLLIN_YARD, HOLLIN_GROUP, ["random", "sorted", "sectors"], 6.0,
                      trials=trials, seed=seed)
    rules = {r["rule"]: r for r in c.to_dict()["rules"]}
    paths = charts.distribution_charts(c, out_dir, building_name)
    paths += charts.batch_diagram(HOLLIN_YARD, HOLLIN_GROUP, rules=("random", "sorted"),
                                  passengers_per_car=6.0, seed=seed, out_dir=out_dir,
                                  building_name=building_name)
    figures = [{"title": p.stem.replace("_", " "), "caption": f"From {trials} batches; "
                f"a name like {building_name} stays text.", "png": p}
               for p in paths if p.suffix == ".png"]
    s, r = rules["sorted"], rules["random"]
    numbers = {"hc_gain_pct": s["hc_gain_pct_vs_random"], "hc_gain_ci95_pct": s["hc_gain_ci95_pct"],
               "rtt_gain_pct": s["rtt_gain_pct_vs_random"],
               "random_round_trip_time_s": r["round_trip_time_s"],
               "sorted_round_trip_time_s": s["round_trip_time_s"],
               "negative_zero_check": -0.04}
    columns = ["rule", "RTT [s]", "± [s]", "interval [s]", "stops", "HC gain [%]"]
    rows = [[x["rule"], x["round_trip_time_s"], x["ci95_s"], x["interval_s"],
             x["expected_stops"], x["hc_gain_pct_vs_random"]] for x in rules.values()]
    return {
        "title": f"{building_name}: is destination control worth specifying?",
        "building": building_name,
        "headline": f"Grouping ('sorted') raises handling capacity by "
                    f"{s['hc_gain_pct_vs_random']:.1f} % against conventional control.",
        "answer_points": [f"Conventional round-trip time {r['round_trip_time_s']:.1f} s.",
                          f"A point naming {building_name}."],
        "headline_numbers": numbers,
        "inputs": [("building", "name", building_name), ("building", "floors", "6"),
                   ("group", "cars", "3"), ("group", "rated_speed_mps", 1.6)],
        "method": ["Each trial samples one batch of passengers; every rule allocates the "
                   "same batch.", "Gains carry paired 95 % intervals."],
        "assumptions": ["Up-peak traffic.", "Ideal jerk-limited kinematics."],
        "sources": ["CIBSE Guide D: Transportation systems in buildings, 2015."],
        "tables": [{"title": "Rules on the same passengers", "columns": columns, "rows": rows},
                   {"title": "Mixed cells", "columns": ["what", "value"],
                    "rows": [["an integer", 7], ["a float", 156.1412], ["text", "yes"],
                             ["empty", ""]]}],
        "figures": figures,
        "caution": "Planning estimates only.",
        "stamp": {"liftsort_version": "0.1.0", "seed": seed, "trials": c.trials,
                  "input_sha256": "0" * 64, "generated_at": "2026-01-01 00:00 UTC"},
    }
