"""`liftsort report`: the whole job for one building, as one self-contained HTML file."""
from __future__ import annotations

from roundtrip.building import Scenario

from experiments.outputs import output_set
from experiments.wording import CAUTION

from .options import check_trials
from .tables import dumps


def published(result: dict, outs) -> dict:
    """The job's result with its file paths where the finished set lives."""
    return {**result, "report": str(outs.final_path(result["report"])),
            "csv": str(outs.final_path(result["csv"])),
            "figures": [str(outs.final_path(p)) for p in result["figures"]]}


def check_job_trials(trials, scenario: Scenario) -> None:
    """An exact --trials N of the whole job must fit the run limits (its sizing search
    tries up to three cars more than the group has)."""
    from allocation.registry import default_rules
    g = scenario.group
    check_trials(trials, cars=g.cars + 3, rules=len(default_rules()),
                 passengers_per_car=g.design_load_persons)


def run(args, scenario: Scenario) -> int:
    from experiments.progress import Stages
    stages = Stages(quiet=args.quiet or args.json)
    stages(f"liftsort report: {scenario.building.name}")
    from experiments.report_job import run_job
    check_job_trials(args.trials, scenario)
    with output_set(args.out, command="report") as outs:
        result = published(run_job(scenario, args.file, outs.folder, seed=args.seed,
                                   ci_target_pct=args.ci_target, trials=args.trials,
                                   max_trials=args.max_trials, quiet=args.quiet or args.json,
                                   threads=args.threads, stages=stages), outs)
    if args.json:
        print(dumps(result))
        return 0
    print(result["headline"])
    print(f"\nreport: {result['report']}")
    print("\n" + CAUTION)
    return 0
