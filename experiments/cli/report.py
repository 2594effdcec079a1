"""`liftsort report`: the whole job for one building, as one self-contained HTML file."""
from __future__ import annotations

from roundtrip.building import Scenario

from experiments.outputs import output_set
from experiments.wording import CAUTION, client_name

from .options import check_trials
from .tables import dumps, grid_table

#: The rows of the terminal's peak table: (quantity, unit, figure).
PEAK_ROWS = (("average waiting time", "s", "average_waiting_time_s"),
             ("waiting time, 95th percentile", "s", "waiting_time_p95_s"),
             ("average time to destination", "s", "average_time_to_destination_s"),
             ("handling capacity delivered", "% / 5 min", "handling_capacity_pct_5min"),
             ("mean departure load", "persons", "mean_departure_load_persons"))


def published(result: dict, outs) -> dict:
    """The job's result with its file paths where the finished set lives."""
    return {**result, "report": str(outs.final_path(result["report"])),
            "csv": str(outs.final_path(result["csv"])),
            "figures": [str(outs.final_path(p)) for p in result["figures"]]}


def check_job_trials(trials, scenario: Scenario) -> None:
    """An exact --trials N of the whole job must fit the run limits."""
    from allocation.registry import default_rules
    g = scenario.group
    check_trials(trials, cars=g.cars, rules=len(default_rules()),
                 passengers_per_car=g.design_load_persons)


def job_options(args) -> dict:
    """The decision's options of `report` and `demo`: the destination control and the
    service criterion (each checked by the parser)."""
    from experiments.decision import ServiceCriterion
    return {"destination_control": args.destination_control,
            "criterion": ServiceCriterion(args.wait_max, args.wait_p95_max)}


def print_answer(result: dict) -> None:
    """The terminal answer: the peak-simulated comparison at the file's demand
    (conventional first), the verdict with its margin, then the bounds, the sizing and
    what the answer turns on."""
    dc = result["destination_control"]
    peak = result["peak"]
    if peak is not None:
        runs = {r["control"]: r for r in peak["controls"]}
        shown = [runs["conventional"], runs[dc]]
        print(f"\n{result['decision']['building']}: peak simulation at the design demand of "
              f"{peak['demand_pct_5min']:g} % of the population per 5 min (simulated in time, "
              f"{shown[0]['replications']} replications of {peak['minutes']:g} min; "
              f"± is the 95 % interval)")
        rows = []
        for text, unit, key in PEAK_ROWS:
            row = [text, unit]
            for r in shown:
                ci = r["ci95"].get(key)
                row.append(f"{r[key]:.1f}" + (f" ± {ci:.1f}" if ci == ci and ci is not None
                                               and key != "mean_departure_load_persons" else ""))
            rows.append(row)
        rows.append(["saturated", ""] + ["yes" if r["saturated"] else "no" for r in shown])
        print(grid_table(["quantity", "unit", "conventional", f"destination control ({dc})"],
                         rows))
        d = result["decision"]
        print("\n" + d["verdict"]["text"])
        caps = {c["control"]: c["handling_capacity_pct_5min"]
                for c in result["capacity_at_criterion"]}
        fmt = (lambda x: "none" if x is None else f"{x:.1f} %")
        print(f"\nHandling capacity at the service criterion (simulated in time): conventional "
              f"{fmt(caps['conventional'])}, destination control {fmt(caps[dc])}.")
    else:
        print("\n" + result["headline"])
    print("Round-trip bounds for destination grouping (not answers): " + "; ".join(
        f"{b['value']:.1f} % at design load with {b['cars_open']} cars open ({b['basis']})"
        for b in result["bounds"]) + f"; conventional control {result['rules'][0]['design_hc']:.1f} %.")
    if result["sizing"] is not None:
        print("\nSizing on the service criterion (simulated in time):")
        for x in result["sizing"]["designs"]:
            who = client_name(x["control"], with_key=False)
            if x["found"]:
                print(f"- {who}: {x['cars']} cars x {x['rated_load_persons']} persons at "
                      f"{x['rated_speed_mps']:g} m/s (average wait "
                      f"{x['average_waiting_time_s']:.1f} s, 95th percentile "
                      f"{x['waiting_time_p95_s']:.1f} s)")
            else:
                print(f"- {who}: {x['message']}")
    if result["decision"] is not None:
        turns = result["decision"]["turns_on"]
        print("\nThe answer turns on: " + (", ".join(turns) if turns else
                                            "none of the inputs moved in the sensitivity "
                                            "study") + ".")


def run(args, scenario: Scenario) -> int:
    from experiments.progress import Stages
    stages = Stages(quiet=args.quiet or args.json)
    stages(f"liftsort report: {scenario.building.name}")
    from experiments.report_job import run_job
    check_job_trials(args.trials, scenario)
    from experiments.tasks import executor
    with output_set(args.out, command="report") as outs, \
            executor(args.workers, args.scheduler, args.threads) as ex:
        result = published(run_job(scenario, args.file, outs.folder, seed=args.seed,
                                   ci_target_pct=args.ci_target, trials=args.trials,
                                   max_trials=args.max_trials, quiet=args.quiet or args.json,
                                   threads=args.threads, stages=stages, ex=ex,
                                   **job_options(args)),
                           outs)
    if args.json:
        print(dumps(result))
        return 0
    print_answer(result)
    print(f"\nreport: {result['report']}")
    print("\n" + CAUTION)
    return 0
