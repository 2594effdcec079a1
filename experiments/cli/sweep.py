"""`liftsort sweep`: every rule across a range of demand, one tidy CSV (and charts)."""
from __future__ import annotations

from roundtrip.building import Scenario
from roundtrip.inputfile import ARRIVAL_RATE, InputError

from experiments.outputs import output_set, write_atomic
from experiments.sweep import demand_sweep
from experiments.wording import CAUTION

from .options import (CARS, check_rules_fit, check_runs, check_trials, parse_range,
                      parse_rules)
from .tables import dumps, grid_table


def sweep_plan(scenario: Scenario, args) -> dict:
    """The sweep's points and rules from the options, every one checked before any work."""
    arrivals = parse_range(args.arrival, "--arrival", whole=False, low=0.0,
                           plausible=ARRIVAL_RATE)
    cars = parse_range(args.cars, "--cars", whole=True, low=1, plausible=CARS) \
        if args.cars else None
    opens = parse_range(args.cars_open, "--cars-open", whole=True, low=1, plausible=CARS) \
        if args.cars_open else None
    rules = parse_rules(args.rules)
    groups = cars or [scenario.group.cars]
    per_group = [len([k for k in opens if k <= c]) if opens else 1 for c in groups]
    if not sum(per_group):
        raise InputError([f"--cars-open {args.cars_open}: every value exceeds every number of "
                          f"cars ({', '.join(map(str, groups))}); cars open must be at most "
                          f"the cars."])
    check_runs(len(arrivals) * sum(per_group) + sum(per_group),
               "--arrival x --cars x --cars-open")
    design = scenario.group.design_load_persons
    for c in groups:
        for k in ([k for k in opens if k <= c] if opens else [c]):
            check_rules_fit(rules, poisson=not args.fixed, cars=c, cars_open=k,
                            passengers_per_car=design)
    check_trials(args.trials, cars=max(groups), rules=len(rules) + 1,
                 passengers_per_car=design)
    return dict(arrivals=arrivals, rules=rules, cars_list=cars, cars_open_list=opens)


def sweep_table(scenario: Scenario, args, plan: dict | None = None):
    plan = sweep_plan(scenario, args) if plan is None else plan
    return demand_sweep(scenario, plan["arrivals"], plan["rules"], cars_list=plan["cars_list"],
                        cars_open_list=plan["cars_open_list"], poisson=not args.fixed,
                        trials=args.trials, ci_target_pct=args.ci_target,
                        max_trials=args.max_trials, seed=args.seed,
                        quiet=args.quiet or args.json, threads=args.threads)


def run(args, scenario: Scenario) -> int:
    plan = sweep_plan(scenario, args)
    with output_set(args.out, command="sweep") as outs:
        table = sweep_table(scenario, args, plan)
        csv_path = outs.final_path(write_atomic(outs.folder / "sweep.csv",
                                                table.to_csv(index=False)))
        charts = []
        if not args.no_charts:
            from experiments.charts import sweep_charts
            charts = [outs.final_path(p)
                      for p in sweep_charts(table, outs.folder, scenario.building.name)]
    if args.json:
        print(dumps({"building": scenario.building.name, "csv": str(csv_path),
                     "charts": [str(p) for p in charts],
                     "rows": table.to_dict(orient="records")}))
        return 0
    show = table[["arrival_rate_pct_5min", "cars", "cars_open", "rule", "round_trip_time_s",
                  "interval_s", "handling_capacity_pct_5min", "hc_gain_pct_vs_random",
                  "hc_gain_ci95_pct", "design_load_handling_capacity_pct_5min"]]
    print(f"{scenario.building.name}: demand sweep, {len(table)} rows")
    print(grid_table(["demand [%/5min]", "cars", "open", "rule", "RTT [s]", "INT [s]", "HC [%/5min]",
                      "HC gain [%]", "+/-", "HC at design load [%/5min]"],
                     show.values.tolist()))
    print(f"\nwrote {csv_path}" + "".join(f"\nwrote {p}" for p in charts))
    print("\n" + CAUTION)
    return 0
