"""`liftsort demo`: the main job on the built-in invented demo building."""
from __future__ import annotations

from roundtrip.inputfile import load_scenario

from experiments.data import demo_building_path
from experiments.estimates import classical_result
from experiments.outputs import output_set
from experiments.wording import CAUTION

from .calc import print_classical
from .report import check_job_trials, published
from .tables import grid_table


def run(args, scenario=None) -> int:
    from experiments.progress import Stages
    stages = Stages(quiet=args.quiet)
    stages("liftsort demo: the invented demo building")
    from experiments.report_job import run_job
    path = demo_building_path()
    scenario = load_scenario(path)
    check_job_trials(args.trials, scenario)
    with output_set(args.out, command="demo") as outs:
        print_classical(classical_result(scenario, None, True),
                        f"{scenario.building.name} (invented demo building): classical "
                        f"up-peak calculation (demand mode, Poisson passenger counts)")
        result = published(run_job(scenario, path, outs.folder, seed=args.seed,
                                   ci_target_pct=args.ci_target, trials=args.trials,
                                   max_trials=args.max_trials, quiet=args.quiet,
                                   threads=args.threads, stages=stages), outs)
    m = result["monte_carlo"]
    print(f"\nMonte Carlo, conventional control at the demand: round-trip time "
          f"{m['round_trip_time_s']:.1f} s ± {m['ci95_s']:.1f} s, interval {m['interval_s']:.1f} s"
          f"{' (saturated: at design load)' if m['saturated'] else ''}.")
    rows = [[x["rule"], x["round_trip_time_s"], x["ci95_s"], x["interval_s"], x["expected_stops"],
             x["hc_gain_pct_vs_random"], x["hc_gain_ci95_pct"], x["design_hc"]]
            for x in result["rules"]]
    print("\nAllocation rules on the same passengers (Poisson counts, every car open to "
          "allocation):")
    print(grid_table(["rule", "RTT [s]", "+/-", "INT [s]", "stops", "HC gain [%]", "+/-",
                      "HC at design load [%/5min]"], rows))
    print(f"\nSizing (interval at the demand, handling capacity at design load; destination "
          f"rules with "
          f"{result['sizing']['cars_open']} cars open to allocation):")
    for s in result["sizing"]["savings"]:
        print("- " + s["saving"])
    print("\n" + result["headline"])
    print(f"\nreport: {result['report']}")
    print("\n" + CAUTION)
    return 0
