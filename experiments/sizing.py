"""Sizing: the smallest lift group that meets the criteria under each rule.

Candidates are tried in the order a client pays for them: fewest cars first,
then the smallest car (rated load), then the slowest rated speed; acceleration,
jerk, door and transfer times stay as in the input file. Each candidate is run
twice, every rule on the same passengers: at its design load (the load at
which the busiest stretch of the trip carries capacity factor x rated load)
and at the load the criterion demand sets (the Monte Carlo fixed point on
carried passengers under conventional control, every rule at that same load).
It meets the criteria when

* its handling capacity at design load is at least ``hc_min_pct`` % of the
  population in five minutes (it carries the demand), and
* its interval at the load that demand sets is at most ``interval_max_s``
  (the classical practice: the interval is checked at the car load the demand
  needs, which for up-peak is at most the design load).

The first candidate meeting both is that rule's design. Defaults are the
common office up-peak criteria: interval at most 30 s and a five-minute
handling capacity of at least 12 % (CIBSE Guide D, 2015, office up-peak
planning criteria, from memory), or the file's own demand when it gives one.

Cars open to allocation. A destination rule shares each allocation between the
cars open to it; with every car open its figure is the ideal bound, which no
real destination control reaches. The default, :data:`DEFAULT_CARS_OPEN` = 2,
is the realisable value argued in ``docs/rules.md``: in up-peak an allocation
made as passengers register can go only to the car loading at the lobby and
the next one to arrive there (with intervals of 20-40 s and a loading time of
10-20 s, common practice, no third car is within reach). Conventional control
does not depend on it.
"""
from __future__ import annotations

from dataclasses import dataclass, replace

from roundtrip.building import Scenario

DEFAULT_INTERVAL_MAX_S = 30.0
DEFAULT_HC_MIN_PCT = 12.0
#: Cars open to one allocation by default: the car loading and the next (see the notes).
DEFAULT_CARS_OPEN = 2


@dataclass(frozen=True)
class Criteria:
    interval_max_s: float
    hc_min_pct: float


def default_criteria(scenario: Scenario, interval_max_s=None, hc_min_pct=None) -> Criteria:
    hc = hc_min_pct
    if hc is None:
        hc = scenario.traffic.arrival_rate_pct_5min if scenario.traffic else DEFAULT_HC_MIN_PCT
    return Criteria(DEFAULT_INTERVAL_MAX_S if interval_max_s is None else interval_max_s, hc)


def candidates(cars_list, loads, speeds):
    """(cars, rated load, rated speed) in the order smallest first."""
    return [(c, q, v) for c in sorted(cars_list) for q in sorted(loads) for v in sorted(speeds)]


def size_group(scenario: Scenario, rules, criteria: Criteria, cars_list, loads, speeds, *,
               cars_open: int | None = None, poisson: bool = True, trials=None,
               ci_target_pct: float = 0.5, seed: int = 0, threads=None,
               on_candidate=None) -> dict:
    """Search the candidates; returns {"designs": [...], "tried": [...], "savings": [...],
    "criteria": {...}, "cars_open": K}.

    Every candidate runs all rules still without a design, on common rounds, with
    min(K, cars) cars open to allocation (K = ``cars_open``, default
    :data:`DEFAULT_CARS_OPEN`); the search stops as soon as every rule has one.
    """
    from allocation.registry import baseline_rule
    from batchrounds.montecarlo import compare_rules
    from roundtrip.building import Traffic
    from roundtrip.classical import design_passengers
    from roundtrip.montecarlo import simulate_demand

    K = DEFAULT_CARS_OPEN if cars_open is None else int(cars_open)
    if K < 1:
        raise ValueError(f"cars_open = {cars_open!r}: must be a whole number >= 1")

    base = scenario.traffic or Traffic(criteria.hc_min_pct)
    demand = replace(base, arrival_rate_pct_5min=criteria.hc_min_pct)
    wanted = list(dict.fromkeys([baseline_rule(), *rules]))
    found: dict[str, dict] = {}
    tried = []
    for cars, load, speed in candidates(cars_list, loads, speeds):
        open_rules = [r for r in wanted if r not in found]
        if not open_rules:
            break
        group = replace(scenario.group, cars=cars, rated_load_persons=load, rated_speed_mps=speed)
        run = dict(cars_open=min(K, cars), traffic=scenario.traffic, poisson=poisson,
                   trials=trials, ci_target_pct=ci_target_pct, seed=seed, threads=threads)
        design = compare_rules(scenario.building, group, open_rules,
                               design_passengers(scenario.building, group, scenario.traffic),
                               **run)
        conventional = simulate_demand(scenario.building, group, demand, poisson=poisson,
                                       trials=trials, ci_target_pct=ci_target_pct, seed=seed,
                                       threads=threads)
        at_demand = compare_rules(scenario.building, group, open_rules,
                                  conventional.passengers_per_trip, **run)
        busy = {r["rule"]: r for r in at_demand.to_dict()["rules"]}
        for r in design.to_dict()["rules"]:
            d = busy[r["rule"]]
            ok = (d["interval_s"] <= criteria.interval_max_s
                  and r["handling_capacity_pct_5min"] >= criteria.hc_min_pct)
            entry = {"rule": r["rule"], "cars": cars, "cars_open": min(K, cars),
                     "rated_load_persons": load,
                     "rated_speed_mps": speed, "interval_s": d["interval_s"],
                     "interval_at_design_load_s": r["interval_s"],
                     "passengers_per_trip_at_demand": conventional.passengers_per_trip,
                     "handling_capacity_pct_5min": r["handling_capacity_pct_5min"],
                     "handling_capacity_ci95_pct": r["handling_capacity_pct_5min"]
                     * r["ci95_s"] / r["round_trip_time_s"],
                     "round_trip_time_s": r["round_trip_time_s"], "ci95_s": r["ci95_s"],
                     "meets_criteria": ok}
            tried.append(entry)
            if ok and r["rule"] in open_rules:
                found[r["rule"]] = {**entry, "found": True}
        if on_candidate is not None:
            on_candidate()
    designs = []
    for rule in wanted:
        if rule in found:
            designs.append(found[rule])
        else:
            designs.append({"rule": rule, "found": False, "cars": None, "cars_open": None,
                            "rated_load_persons": None,
                            "rated_speed_mps": None, "interval_s": None,
                            "handling_capacity_pct_5min": None, "round_trip_time_s": None,
                            "message": f"no candidate up to {max(cars_list)} cars x "
                                       f"{max(loads)} persons at {max(speeds):g} m/s meets "
                                       f"interval <= {criteria.interval_max_s:g} s at the demand "
                                       f"and handling capacity >= {criteria.hc_min_pct:g} %"})
    return {"criteria": {"interval_max_s": criteria.interval_max_s,
                         "hc_min_pct": criteria.hc_min_pct},
            "cars_open": K, "passenger_model": "poisson" if poisson else "fixed",
            "designs": designs, "tried": tried, "savings": savings(designs)}


def savings(designs: list[dict]) -> list[dict]:
    """What each rule saves against conventional control: cars, car size, speed or margin."""
    base = designs[0]
    out = []
    for d in designs[1:]:
        if not d["found"]:
            text = f"{d['rule']}: no design meets the criteria"
        elif not base["found"]:
            text = (f"{d['rule']}: meets the criteria with {d['cars']} cars x "
                    f"{d['rated_load_persons']} persons at {d['rated_speed_mps']:g} m/s, "
                    f"where conventional control meets them with none of the candidates")
        elif d["cars"] < base["cars"]:
            text = f"{d['rule']}: saves {base['cars'] - d['cars']} car(s)"
        elif d["rated_load_persons"] < base["rated_load_persons"]:
            text = (f"{d['rule']}: same number of cars, smaller cars "
                    f"({d['rated_load_persons']} instead of {base['rated_load_persons']} persons)")
        elif d["rated_speed_mps"] < base["rated_speed_mps"]:
            text = (f"{d['rule']}: same cars, slower rated speed "
                    f"({d['rated_speed_mps']:g} instead of {base['rated_speed_mps']:g} m/s)")
        else:
            text = (f"{d['rule']}: same group; margin of handling capacity "
                    f"{d['handling_capacity_pct_5min'] - base['handling_capacity_pct_5min']:+.1f} "
                    f"points, interval {d['interval_s'] - base['interval_s']:+.1f} s")
        out.append({"rule": d["rule"], "saving": text,
                    "cars_saved": (base["cars"] - d["cars"]) if d["found"] and base["found"] else None})
    return out
