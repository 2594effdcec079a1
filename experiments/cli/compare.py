"""`liftsort compare`: allocation rules compared on common passenger batches."""
from __future__ import annotations

from allocation.registry import baseline_rule
from roundtrip.building import Scenario
from roundtrip.inputfile import InputError

from experiments.basis import label, round_trip_basis
from experiments.estimates import comparison_run
from experiments.wording import CAUTION, count_of

from .options import (check_cars_open, check_rules_fit, check_trials, parse_rules,
                      target_note)
from .tables import dumps, grid_table


def run(args, scenario: Scenario) -> int:
    group = scenario.group
    check_cars_open(args.cars_open, group.cars)
    rules = parse_rules(args.rules)
    if args.passengers is not None and args.passengers <= 0:
        raise InputError([f"--passengers {args.passengers:g}: comparing rules needs "
                          f"passengers to allocate; give P > 0 [persons per car]."])
    most = group.design_load_persons if args.passengers is None else args.passengers
    check_trials(args.trials, cars=group.cars, rules=len(rules) + 1, passengers_per_car=most)
    if args.passengers is not None:
        check_rules_fit(rules, poisson=not args.fixed, cars=group.cars,
                        cars_open=args.cars_open or group.cars,
                        passengers_per_car=args.passengers)
    d = comparison_run(scenario, rules, args.passengers,
                       cars_open=args.cars_open, poisson=not args.fixed, trials=args.trials,
                       ci_target_pct=args.ci_target, max_trials=args.max_trials, seed=args.seed,
                       threads=args.threads).to_dict()
    basis = round_trip_basis(d["cars_open"], d["cars"])
    for r in d["rules"]:
        if r["rule"] != baseline_rule():
            r["basis"] = basis            # a round-trip batch figure: a bound, never the answer
    if args.json:
        print(dumps(d))
        return 0
    print(f"{d['building']}: allocation rules on common passengers "
          f"({count_of(d['cars'], 'car')}, "
          f"{d['cars_open']} open to allocation, {d['passengers_per_car']:.2f} passengers offered "
          f"per car interval ({d['passenger_model']} counts, {d['traffic_mix']} traffic), "
          f"{d['trials']:,} rounds, seed {d['seed']})")
    print(f"Destination rules: {label(basis)} - a bound, not an answer; `liftsort peak` "
          f"simulates destination control in time.")
    rows = [[r["rule"] + (" (conventional)" if r["rule"] == baseline_rule() else ""), r["round_trip_time_s"], r["ci95_s"], r["interval_s"],
             r["handling_capacity_pct_5min"], r["expected_stops"], r["highest_reversal_floor"],
             r["car_load_pct"], 100.0 * r["left_behind_share"], r["rtt_gain_pct_vs_random"],
             r["rtt_gain_ci95_pct"], r["hc_gain_pct_vs_random"], r["hc_gain_ci95_pct"]]
            for r in d["rules"]]
    print(grid_table(["rule", "RTT [s]", "+/-", "INT [s]", "HC [%/5min]", "stops", "H",
                      "load [%]", "left [% trips]", "RTT gain [%]", "+/-", "HC gain [%]", "+/-"],
                     rows))
    print("\nGains are against `random` (conventional control) on the same passengers, each car "
          "carrying as many as under conventional control; +/- are paired 95 % intervals. "
          "load: the mean load on the busiest stretch of the trip; left: the car trips that "
          "leave someone waiting for the next car (nobody is dropped).")
    note = target_note(args, max(100 * r["ci95_s"] / r["round_trip_time_s"] for r in d["rules"]
                                 if r["round_trip_time_s"] > 0) if d["rules"] else 0.0,
                       d["trials"])
    if note:
        print("\n" + note)
    if d["saturated_under_random"]:
        print("Demand mode: conventional control is saturated at this demand, so the rules are "
              "compared at the design load.")
    print("\n" + CAUTION)
    return 0
