"""`liftsort sweep`: every rule across a range of demand, one tidy CSV (and charts)."""
from __future__ import annotations

from roundtrip.building import Scenario

from experiments.outputs import output_dir, write_atomic
from experiments.sweep import demand_sweep
from experiments.wording import CAUTION

from .options import parse_range, parse_rules
from .tables import dumps, grid_table


def sweep_table(scenario: Scenario, args):
    arrivals = parse_range(args.arrival, "--arrival", whole=False, low=1e-9)
    cars = parse_range(args.cars, "--cars", whole=True, low=1) if args.cars else None
    opens = parse_range(args.cars_open, "--cars-open", whole=True, low=1) if args.cars_open else None
    rules = parse_rules(args.rules)
    return demand_sweep(scenario, arrivals, rules, cars_list=cars, cars_open_list=opens,
                        poisson=not args.fixed, trials=args.trials, ci_target_pct=args.ci_target,
                        max_trials=args.max_trials, seed=args.seed, quiet=args.quiet or args.json,
                        threads=args.threads)


def run(args, scenario: Scenario) -> int:
    table = sweep_table(scenario, args)
    out = output_dir(args.out)
    csv_path = write_atomic(out / "sweep.csv", table.to_csv(index=False))
    charts = []
    if not args.no_charts:
        from experiments.charts import sweep_charts
        charts = sweep_charts(table, out, scenario.building.name)
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
