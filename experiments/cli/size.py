"""`liftsort size`: the smallest group meeting the criteria under each rule."""
from __future__ import annotations

from roundtrip.building import Scenario

from experiments.progress import progress_bar
from experiments.sizing import default_criteria, size_group
from experiments.wording import CAUTION

from .options import (CARS, LOADS, SPEEDS, check_rules_fit, check_runs, check_trials,
                      parse_range, parse_rules)
from .tables import dumps, grid_table


def sizing_plan(scenario: Scenario, args) -> dict:
    """The candidates and rules from the options, every one checked before any work."""
    cars = parse_range(args.cars, "--cars", whole=True, low=1, plausible=CARS)
    loads = parse_range(args.loads, "--loads", whole=True, low=1, plausible=LOADS) \
        if args.loads else [scenario.group.rated_load_persons]
    speeds = parse_range(args.speeds, "--speeds", whole=False, low=0.0, plausible=SPEEDS) \
        if args.speeds else [scenario.group.rated_speed_mps]
    rules = parse_rules(args.rules)
    check_runs(len(cars) * len(loads) * len(speeds), "--cars x --loads x --speeds")
    factor = scenario.group.capacity_factor
    for c in cars:
        check_rules_fit(rules, poisson=not args.fixed, cars=c, cars_open=c,
                        passengers_per_car=factor * max(loads))
    check_trials(args.trials, cars=max(cars), rules=len(rules) + 1,
                 passengers_per_car=factor * max(loads))
    return dict(cars=cars, loads=loads, speeds=speeds, rules=rules)


def sizing(scenario: Scenario, args) -> dict:
    plan = sizing_plan(scenario, args)
    criteria = default_criteria(scenario, args.interval_max, args.hc_min)
    total = len(plan["cars"]) * len(plan["loads"]) * len(plan["speeds"])
    with progress_bar(total, args.quiet or args.json, "sizing") as bar:
        result = size_group(scenario, plan["rules"], criteria, plan["cars"], plan["loads"],
                            plan["speeds"], cars_open=args.cars_open, poisson=not args.fixed,
                            trials=args.trials, ci_target_pct=args.ci_target,
                            max_trials=args.max_trials, seed=args.seed, threads=args.threads,
                            on_candidate=bar.update)
    return {"building": scenario.building.name, **result}


def run(args, scenario: Scenario) -> int:
    d = sizing(scenario, args)
    if args.json:
        out = dict(d)
        out.pop("tried")
        print(dumps(out))
        return 0
    c = d["criteria"]
    print(f"{d['building']}: smallest group with interval <= {c['interval_max_s']:g} s at the "
          f"demand and handling capacity >= {c['hc_min_pct']:g} % / 5 min at design load "
          f"({d['passenger_model']} passenger counts; destination rules with "
          f"{d['cars_open']} car(s) open to allocation"
          f"{' (the default, realisable)' if args.cars_open is None else ''})")
    rows = [[x["rule"], x["cars"] if x["found"] else "none", x["cars_open"],
             x["rated_load_persons"], x["rated_speed_mps"], x["interval_s"],
             x["handling_capacity_pct_5min"], x["round_trip_time_s"]] for x in d["designs"]]
    print(grid_table(["rule", "cars", "cars open", "load [persons]", "speed [m/s]",
                      "INT at demand [s]", "HC at design load [%/5min]", "RTT at design [s]"],
                     rows))
    for s in d["savings"]:
        print("- " + s["saving"])
    for x in d["designs"]:
        if not x["found"]:
            print(f"- {x['rule']}: {x['message']}")
    print("\n" + CAUTION)
    return 0
