"""`liftsort compare`: allocation rules compared on common passenger batches."""
from __future__ import annotations

from roundtrip.building import Scenario
from roundtrip.inputfile import InputError

from .calc_command import require_traffic
from .tables import dumps, grid_table
from .wording import CAUTION

def parse_rules(text: str) -> list[str]:
    """Rule names from a comma list, each checked against the registry."""
    from allocation.registry import get_rule
    names = [r.strip() for r in text.split(",") if r.strip()]
    if not names:
        raise InputError([f"--rules {text!r}: give at least one rule name."])
    problems = []
    for name in names:
        try:
            get_rule(name)
        except ValueError as exc:
            problems.append(f"--rules: {exc}.")
    if problems:
        raise InputError(problems)
    return names


def demand_passengers_per_car(scenario: Scenario, poisson: bool, seed: int, threads=None):
    """P for demand mode: the Monte Carlo fixed point under conventional control."""
    from roundtrip.montecarlo import simulate_demand
    require_traffic(scenario)
    r = simulate_demand(scenario.building, scenario.group, scenario.traffic, poisson=poisson,
                        seed=seed, threads=threads)
    return r.passengers_per_trip, r.saturated


def comparison(scenario: Scenario, args):
    from roundtrip.group_montecarlo import compare_rules
    rules = parse_rules(args.rules)
    poisson = not args.fixed
    saturated = None
    if args.passengers is not None:
        p = args.passengers
    else:
        p, saturated = demand_passengers_per_car(scenario, poisson, args.seed, args.threads)
    try:
        c = compare_rules(scenario.building, scenario.group, rules, p, cars_open=args.cars_open,
                          traffic=scenario.traffic, poisson=poisson, trials=args.trials,
                          ci_target_pct=args.ci_target, max_trials=args.max_trials,
                          seed=args.seed, threads=args.threads)
    except ValueError as exc:
        raise InputError([str(exc).replace("cars_open", "--cars-open")], scenario.source) from None
    d = c.to_dict()
    d["mode"] = "given load" if args.passengers is not None else "demand"
    d["saturated_under_random"] = saturated
    return c, d


def run(args, scenario: Scenario) -> int:
    _, d = comparison(scenario, args)
    if args.json:
        print(dumps(d))
        return 0
    print(f"{d['building']}: allocation rules on common passengers ({d['cars']} cars, "
          f"{d['cars_open']} open to allocation, {d['passengers_per_car']:.2f} passengers per car "
          f"({d['passenger_model']}), {d['trials']:,} batches, seed {d['seed']})")
    rows = [[r["rule"], r["round_trip_time_s"], r["ci95_s"], r["interval_s"],
             r["handling_capacity_pct_5min"], r["expected_stops"], r["highest_reversal_floor"],
             r["car_load_pct"], r["rtt_gain_pct_vs_random"], r["rtt_gain_ci95_pct"],
             r["hc_gain_pct_vs_random"], r["hc_gain_ci95_pct"]] for r in d["rules"]]
    print(grid_table(["rule", "RTT [s]", "+/-", "INT [s]", "HC [%/5min]", "stops", "H",
                      "load [%]", "RTT gain [%]", "+/-", "HC gain [%]", "+/-"], rows))
    print("\nGains are against `random` (conventional control) on the same batches; "
          "+/- are paired 95 % intervals.")
    if d["saturated_under_random"]:
        print("Demand mode: conventional control is saturated at this demand, so the rules are "
              "compared at the design load.")
    print("\n" + CAUTION)
    return 0
