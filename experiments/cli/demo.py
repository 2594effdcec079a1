"""`liftsort demo`: the main job on the built-in invented demo building."""
from __future__ import annotations

from roundtrip.inputfile import load_scenario

from experiments.data import demo_building_path
from experiments.estimates import classical_result
from experiments.outputs import output_set
from experiments.wording import CAUTION

from .calc import print_classical
from .report import check_job_trials, job_options, print_answer, published


def run(args, scenario=None) -> int:
    from experiments.progress import Stages
    stages = Stages(quiet=args.quiet)
    stages("liftsort demo: the invented demo building")
    from experiments.report_job import run_job
    path = demo_building_path()
    scenario = load_scenario(path)
    check_job_trials(args.trials, scenario)
    with output_set(args.out, command="demo") as outs:
        result = published(run_job(scenario, path, outs.folder, seed=args.seed,
                                   ci_target_pct=args.ci_target, trials=args.trials,
                                   max_trials=args.max_trials, quiet=args.quiet,
                                   threads=args.threads, stages=stages, **job_options(args)),
                           outs)
    print(f"{scenario.building.name} (invented demo building): is destination control worth "
          f"specifying?")
    print_answer(result)
    print()
    print_classical(classical_result(scenario, None, True),
                    "Method check, conventional control: classical up-peak calculation "
                    "(demand mode, Poisson passenger counts)")
    m = result["monte_carlo"]
    print(f"\nMonte Carlo round trips, conventional control at the demand: round-trip time "
          f"{m['round_trip_time_s']:.1f} s (95 % interval ± {m['ci95_s']:.1f} s), interval "
          f"{m['interval_s']:.1f} s{' (saturated: at design load)' if m['saturated'] else ''}.")
    print(f"\nreport: {result['report']}")
    print("\n" + CAUTION)
    return 0
