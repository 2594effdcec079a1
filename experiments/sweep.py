"""Demand sweeps: every rule at every demand point, on common passengers.

At each point (demand, cars, cars open) the load P is the Monte Carlo demand
fixed point on carried passengers under conventional control, capped at the
design load (see :func:`roundtrip.montecarlo.simulate_demand`), and all
rules are compared at that same load on the same batches (common random
numbers, the same seed at every point so that the curves are smooth). A
grouping rule would in practice run lighter cars at the same demand, so its
gains at equal load are exact for handling capacity and conservative for
waiting time.

Separately, for each (cars, cars open), every rule is run at the design load
(the load at which the busiest stretch of the trip carries capacity factor x
rated load): its handling capacity there is the most demand it can carry, so a
rule saturates where the demand line crosses it.

The result is one tidy table (one row per rule per point) with every figure
and its 95 % interval. A destination rule's rows carry their ``basis``
(:mod:`experiments.basis`): ``realisable-bound`` with at most 2 cars open,
``ideal-bound`` with more; these are bounds, not answers (the peak simulation
gives those). Conventional control's rows leave it empty.
"""
from __future__ import annotations

from dataclasses import replace

from roundtrip.building import Scenario, Traffic
from roundtrip.inputfile import InputError

from .limits import trial_cap
from .progress import progress_bar


def _points(scenario: Scenario, arrivals, cars_list, cars_open_list):
    points = []
    for cars in cars_list:
        opens = [cars] if cars_open_list is None else [k for k in cars_open_list if k <= cars]
        for k in opens:
            for a in arrivals:
                points.append((cars, k, a))
    if not points:
        raise InputError([f"--cars-open {cars_open_list}: every value exceeds every number of "
                          f"cars {cars_list}; cars open must be at most the cars."])
    return points


def demand_sweep(scenario: Scenario, arrivals, rules, *, cars_list=None, cars_open_list=None,
                 poisson: bool = True, trials: int | None = None, ci_target_pct: float = 0.5,
                 max_trials: int = 400_000, seed: int = 0, quiet: bool = True, threads=None):
    """The tidy sweep table (pandas DataFrame): one row per rule per point."""
    import pandas as pd

    from allocation.registry import baseline_rule
    from batchrounds.montecarlo import compare_rules
    from roundtrip.classical import design_passengers
    from roundtrip.montecarlo import simulate_demand

    from .basis import round_trip_basis
    base_rule = baseline_rule()

    base_traffic = scenario.traffic or Traffic(arrivals[0])
    cars_list = cars_list or [scenario.group.cars]
    points = _points(scenario, arrivals, cars_list, cars_open_list)
    designs = sorted({(c, k) for c, k, _ in points})
    run = dict(poisson=poisson, trials=trials, ci_target_pct=ci_target_pct, seed=seed,
               threads=threads)
    n_rules = len(rules) + 1          # the baseline is run too
    design_load = scenario.group.design_load_persons
    one_car = trial_cap(max_trials, passengers_per_car=design_load)
    rows = []
    capacity = {}
    with progress_bar(len(points) + len(designs), quiet, scenario.building.name) as bar:
        for cars, k in designs:
            group = replace(scenario.group, cars=cars)
            cap = trial_cap(max_trials, cars=cars, rules=n_rules, passengers_per_car=design_load)
            c = compare_rules(scenario.building, group, rules,
                              design_passengers(scenario.building, group, scenario.traffic),
                              cars_open=k, traffic=scenario.traffic, max_trials=cap, **run)
            for r in c.to_dict()["rules"]:
                capacity[(cars, k, r["rule"])] = r
            bar.update()
        for cars, k, arrival in points:
            group = replace(scenario.group, cars=cars)
            traffic = replace(base_traffic, arrival_rate_pct_5min=arrival)
            conventional = simulate_demand(scenario.building, group, traffic, max_trials=one_car,
                                           **run)
            p = conventional.passengers_per_trip
            cap = trial_cap(max_trials, cars=cars, rules=n_rules, passengers_per_car=p)
            c = compare_rules(scenario.building, group, rules, p, cars_open=k,
                              traffic=scenario.traffic, max_trials=cap, **run)
            d = c.to_dict()
            for r in d["rules"]:
                at_design = capacity[(cars, k, r["rule"])]
                rows.append({
                    "building": scenario.building.name,
                    "arrival_rate_pct_5min": arrival,
                    "demand_persons_5min": arrival / 100.0 * scenario.building.total_population,
                    "cars": cars,
                    "cars_open": k,
                    "rated_load_persons": group.rated_load_persons,
                    "rated_speed_mps": group.rated_speed_mps,
                    "passengers_per_car": p,
                    "saturated_under_random": conventional.saturated,
                    "passenger_model": d["passenger_model"],
                    "trials": d["trials"],
                    "seed": d["seed"],
                    **r,
                    "basis": "" if r["rule"] == base_rule else round_trip_basis(k, cars),
                    "design_load_round_trip_time_s": at_design["round_trip_time_s"],
                    "design_load_ci95_s": at_design["ci95_s"],
                    "design_load_interval_s": at_design["interval_s"],
                    "design_load_handling_capacity_pct_5min": at_design["handling_capacity_pct_5min"],
                    "design_load_handling_capacity_persons_5min":
                        at_design["handling_capacity_persons_5min"],
                    "design_load_hc_gain_pct_vs_random": at_design["hc_gain_pct_vs_random"],
                    "design_load_hc_gain_ci95_pct": at_design["hc_gain_ci95_pct"],
                    "carries_demand": at_design["handling_capacity_pct_5min"] >= arrival,
                })
            bar.update()
    return pd.DataFrame(rows)
