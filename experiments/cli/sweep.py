"""`liftsort sweep`: every rule across a range of demand, one tidy CSV (and charts), for one
building file or several, in this process or on a Dask cluster (--workers, --scheduler)."""
from __future__ import annotations

from roundtrip.building import Scenario
from roundtrip.inputfile import ARRIVAL_RATE, InputError

from experiments.outputs import output_set, write_atomic
from experiments.wording import CAUTION

from .options import (CARS, building_digests, check_rules_fit, check_runs, check_trials,
                      parse_range, parse_rules)
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


def _scenarios(scenario) -> list:
    return list(scenario) if isinstance(scenario, (list, tuple)) else [scenario]


def sweep_studies(scenarios, args, digests):
    """One :class:`experiments.sweep.SweepStudy` per building, each plan checked first."""
    from experiments.sweep import SweepStudy
    plans = [sweep_plan(s, args) for s in scenarios]
    studies = [SweepStudy(s, p["arrivals"], p["rules"], cars_list=p["cars_list"],
                       cars_open_list=p["cars_open_list"], poisson=not args.fixed,
                       trials=args.trials, ci_target_pct=args.ci_target,
                       max_trials=args.max_trials, seed=args.seed, threads=args.threads,
                       building_file_sha256=d)
            for s, p, d in zip(scenarios, plans, digests)]
    if len(studies) > 1:
        check_runs(sum(len(s.tasks) for s in studies),
                   "buildings x (--arrival + 1) x --cars x --cars-open")
    return studies


def sweep_tables(studies, args) -> list:
    """Every building's table, the tasks of all of them run together on the executor the
    options ask for, with one progress bar."""
    from experiments.progress import progress_bar
    from experiments.sweep import run_sweeps
    from experiments.tasks import executor
    with executor(args.workers, args.scheduler, args.threads) as ex:
        for s in studies:
            s.with_threads(ex.threads)
        desc = studies[0].scenario.building.name if len(studies) == 1 else \
            f"{len(studies)} buildings"
        with progress_bar(sum(len(s.tasks) for s in studies), args.quiet or args.json,
                          desc) as bar:
            return run_sweeps(studies, ex, bar.update)


def run(args, scenario) -> int:
    import pandas as pd
    scenarios = _scenarios(scenario)
    files = args.file if isinstance(args.file, list) else [args.file]
    digests = building_digests(files)
    studies = sweep_studies(scenarios, args, digests)
    several = len(scenarios) > 1
    with output_set(args.out, command="sweep") as outs:
        tables = sweep_tables(studies, args)
        table = pd.concat(tables, ignore_index=True)
        csv_path = outs.final_path(write_atomic(outs.folder / "sweep.csv",
                                                table.to_csv(index=False)))
        charts = []
        if not args.no_charts:
            from experiments.charts import sweep_charts
            for s, d, t in zip(scenarios, digests, tables):
                folder = outs.folder / f"charts-{d}" if several else outs.folder
                charts += [outs.final_path(p) for p in sweep_charts(t, folder, s.building.name)]
    buildings = [{"building": s.building.name, "file": str(f), "building_file_sha256": d}
                 for s, f, d in zip(scenarios, files, digests)]
    if args.json:
        print(dumps({"building": scenarios[0].building.name if not several else None,
                     "buildings": buildings, "csv": str(csv_path),
                     "charts": [str(p) for p in charts],
                     "rows": table.to_dict(orient="records")}))
        return 0
    for s, d, t in zip(scenarios, digests, tables):
        show = t[["arrival_rate_pct_5min", "cars", "cars_open", "rule", "round_trip_time_s",
                  "interval_s", "handling_capacity_pct_5min", "hc_gain_pct_vs_random",
                  "hc_gain_ci95_pct", "design_load_handling_capacity_pct_5min"]]
        print(f"{s.building.name}" + (f" (file SHA-256 {d}...)" if several else "")
              + f": demand sweep, {len(t)} rows")
        print(grid_table(["demand [%/5min]", "cars", "open", "rule", "RTT [s]", "INT [s]",
                          "HC [%/5min]", "HC gain [%]", "+/-", "HC at design load [%/5min]"],
                         show.values.tolist()))
        if several:
            print()
    print(f"\nwrote {csv_path}" + "".join(f"\nwrote {p}" for p in charts))
    print("\n" + CAUTION)
    return 0
