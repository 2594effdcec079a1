"""`liftsort report`: the whole job for one building, as one self-contained HTML file."""
from __future__ import annotations

from roundtrip.building import Scenario

from experiments.outputs import output_dir
from experiments.wording import CAUTION

from .tables import dumps


def run(args, scenario: Scenario) -> int:
    from experiments.progress import Stages
    stages = Stages(quiet=args.quiet or args.json)
    stages(f"liftsort report: {scenario.building.name}")
    from experiments.report_job import run_job
    out = output_dir(args.out)
    result = run_job(scenario, args.file, out, seed=args.seed, ci_target_pct=args.ci_target,
                     trials=args.trials, quiet=args.quiet or args.json, threads=args.threads,
                     stages=stages)
    if args.json:
        print(dumps(result))
        return 0
    print(result["headline"])
    print(f"\nreport: {result['report']}")
    print("\n" + CAUTION)
    return 0
