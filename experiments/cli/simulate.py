"""`liftsort simulate`: Monte Carlo round trips of one car, beside the classical figures."""
from __future__ import annotations

from roundtrip.building import Scenario

from experiments.estimates import classical_at, monte_carlo_result
from experiments.wording import CAUTION

from .options import check_trials, target_note
from .tables import dumps, grid_table


def run(args, scenario: Scenario) -> int:
    most = scenario.group.design_load_persons if args.passengers is None else args.passengers
    check_trials(args.trials, passengers_per_car=most)
    r = monte_carlo_result(scenario, args.passengers, poisson=not args.fixed, trials=args.trials,
                           ci_target_pct=args.ci_target, max_trials=args.max_trials,
                           seed=args.seed, threads=args.threads)
    d = r.to_dict()
    if args.json:
        print(dumps(d))
        return 0
    c = classical_at(scenario, r.passengers_per_trip, not args.fixed,
                     r.saturated if r.mode == "demand" else None).to_dict()
    rows = [
        ["passengers offered per trip", d["passengers_per_trip"], None, c["passengers_per_trip"], "persons"],
        ["passengers carried per trip", d["passengers_carried_per_trip"],
         d["passengers_carried_ci95"], c["passengers_per_trip"], "persons"],
        ["round-trip time", d["round_trip_time_s"], d["ci95_s"], c["round_trip_time_s"], "s"],
        ["interval", d["interval_s"], d["ci95_s"] / r.cars, c["interval_s"], "s"],
        ["stops above the lobby", d["expected_stops"], d["expected_stops_ci95"], c["expected_stops"], "stops"],
        ["highest reversal floor", d["highest_reversal_floor"], d["highest_reversal_floor_ci95"],
         c["highest_reversal_floor"], "floor"],
        ["lowest reversal floor", d["lowest_reversal_floor"], d["lowest_reversal_floor_ci95"],
         c["lowest_reversal_floor"], "floor"],
        ["car load (busiest stretch)", d["car_load_persons"], None, c["car_load_persons"], "persons"],
        ["car load", d["car_load_pct"], None, c["car_load_pct"], "% rated load"],
        ["peak car load (mean of each trip's)", d["peak_car_load_persons"], d["peak_car_load_ci95"],
         None, "persons"],
        ["handling capacity (carried)", d["handling_capacity_persons_5min"], None,
         c["handling_capacity_persons_5min"], "persons / 5 min"],
        ["handling capacity (carried)", d["handling_capacity_pct_5min"], None,
         c["handling_capacity_pct_5min"], "% population / 5 min"],
        ["offered load", d["offered_handling_capacity_pct_5min"], None, None, "% population / 5 min"],
        ["average waiting time", d["average_waiting_time_s"], None, c["average_waiting_time_s"], "s"],
        ["trips that leave someone behind", 100 * d["left_behind_share"], None, None, "%"],
        ["saturated", d["saturated"], None, c["saturated"], ""],
    ]
    title = (f"{scenario.building.name}: Monte Carlo round trips ({r.mode}, {r.traffic_mix}, "
             f"{r.passenger_model} passenger counts, {r.trials:,} trips, seed {r.seed}); "
             f"classical: {c['passenger_model']} counts")
    print(title)
    print(grid_table(["quantity", "Monte Carlo", "+/- 95 %", "classical", "unit"], rows))
    print(f"\nNobody is dropped: of {d['passengers_arrived']:,} passengers who arrived, "
          f"{d['passengers_carried']:,} were carried and {d['passengers_still_waiting']:,} were "
          f"still waiting when their chain of trips ended.")
    if r.mode == "demand":
        print(f"\ndemand {r.demand_pct_5min:g} % population / 5 min; fixed-point iterations "
              f"(on the passengers carried):")
        print(grid_table(["step", "offered per trip", "carried per trip", "round-trip time [s]",
                          "+/- 95 % [s]"],
                         [[i, t["passengers_per_trip"], t["passengers_carried_per_trip"],
                           t["round_trip_time_s"], t["ci95_s"]] for i, t in enumerate(r.trace)]))
        if r.saturated:
            print(f"\nSaturated: the group cannot carry this demand. At the design load "
                  f"({d['car_load_persons']:.1f} persons aboard on the busiest stretch, "
                  f"{d['passengers_per_trip']:.1f} offered per trip) it carries "
                  f"{d['handling_capacity_pct_5min']:.1f} % of the population in 5 minutes.")
        elif not r.converged:
            print("\nThe fixed point did not settle within the iteration limit; "
                  "the last iterate is shown.")
    elif r.saturated:
        print("\nSaturated: this load is above the design load, or more arrive than the car "
              "carries.")
    rtt = d["round_trip_time_s"]
    target = target_note(args, 100 * d["ci95_s"] / rtt if rtt > 0 else 0.0, r.trials)
    for note in list(d["notes"]) + ([target] if target else []):
        print("\n" + note)
    print("\n" + CAUTION)
    return 0
