"""Sizing: the cheapest lift group that meets the criteria under each control.

Two searches share the candidates and their order, the order a client pays for
them: fewest cars first, then the smaller installation (rated load x rated
speed, or rated load + w x rated speed for a cost weight w), then the smaller
car; acceleration and jerk stay as in the input file, door and transfer times
too unless the file sets ``times_scale_with_car_size`` (:func:`candidate_group`).

:func:`size_by_service` is the answer: the peak simulation of each candidate
under conventional control and the destination control, a design passing only
when the upper end of every 95 % interval meets the service criterion
(:mod:`experiments.decision`). :func:`size_group` is the round-trip screen
below, a bound for the destination rules.

The round-trip screen. Each candidate is run
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

from .basis import REALISABLE_CARS_OPEN
from .wording import count_of

DEFAULT_INTERVAL_MAX_S = 30.0
DEFAULT_HC_MIN_PCT = 12.0
#: Cars open to one allocation by default: the car loading and the next (see the notes).
DEFAULT_CARS_OPEN = REALISABLE_CARS_OPEN


@dataclass(frozen=True)
class Criteria:
    interval_max_s: float
    hc_min_pct: float


def default_criteria(scenario: Scenario, interval_max_s=None, hc_min_pct=None) -> Criteria:
    hc = hc_min_pct
    if hc is None:
        hc = scenario.traffic.arrival_rate_pct_5min if scenario.traffic else DEFAULT_HC_MIN_PCT
    return Criteria(DEFAULT_INTERVAL_MAX_S if interval_max_s is None else interval_max_s, hc)


def candidates(cars_list, loads, speeds, cost_weight: float | None = None):
    """(cars, rated load, rated speed) in the order a client pays for them (see
    :func:`installation_order`)."""
    return installation_order(cars_list, loads, speeds, cost_weight)


def _screen_task(scenario: Scenario, group, rules, demand, cars_open: int, poisson: bool,
                 trials, ci_target_pct: float, max_trials: int, seed: int, threads) -> dict:
    """One candidate of the round-trip screen: every rule at the design load and at the load
    the demand sets, on common rounds."""
    from batchrounds.montecarlo import compare_rules
    from roundtrip.classical import design_passengers
    from roundtrip.montecarlo import simulate_demand

    from .limits import trial_cap
    cap = trial_cap(max_trials, cars=group.cars, rules=len(rules),
                    passengers_per_car=group.design_load_persons)
    run = dict(cars_open=cars_open, traffic=scenario.traffic, poisson=poisson, trials=trials,
               ci_target_pct=ci_target_pct, max_trials=cap, seed=seed, threads=threads)
    design = compare_rules(scenario.building, group, rules,
                           design_passengers(scenario.building, group, scenario.traffic), **run)
    conventional = simulate_demand(scenario.building, group, demand, poisson=poisson,
                                   trials=trials, ci_target_pct=ci_target_pct,
                                   max_trials=trial_cap(max_trials,
                                                        passengers_per_car=group.design_load_persons),
                                   seed=seed, threads=threads)
    at_demand = compare_rules(scenario.building, group, rules,
                              conventional.passengers_per_trip, **run)
    return {"design": design.to_dict()["rules"], "at_demand": at_demand.to_dict()["rules"],
            "passengers_per_trip": conventional.passengers_per_trip}


def size_group(scenario: Scenario, rules, criteria: Criteria, cars_list, loads, speeds, *,
               cars_open: int | None = None, poisson: bool = True, trials=None,
               ci_target_pct: float = 0.5, max_trials: int = 1_000_000, seed: int = 0,
               threads=None, on_candidate=None, ex=None,
               building_file_sha256: str = "") -> dict:
    """Search the candidates; returns {"designs": [...], "tried": [...], "savings": [...],
    "criteria": {...}, "cars_open": K}.

    Every candidate runs all rules on common rounds (one task, :mod:`experiments.tasks`),
    with min(K, cars) cars open to allocation (K = ``cars_open``, default
    :data:`DEFAULT_CARS_OPEN`); a rule is listed as tried at each candidate up to its
    design, and the search stops as soon as every rule has one. Every candidate draws from
    one stream, ``task_seed(seed, ("size", "round-trip", building, digest))`` (common
    random numbers across the candidates). On a cluster (``ex``) candidates run a few
    ahead; the answer and the list tried are the same. An adaptive run stops at
    ``max_trials`` or at the run limits (:func:`experiments.limits.trial_cap`).
    """
    from allocation.registry import baseline_rule
    from roundtrip.building import Traffic

    from .basis import round_trip_basis
    from .tasks import InProcess, Task, ordered_search, task_seed

    K = DEFAULT_CARS_OPEN if cars_open is None else int(cars_open)
    if K < 1:
        raise ValueError(f"cars_open = {cars_open!r}: must be a whole number >= 1")
    ex = InProcess(threads) if ex is None else ex
    threads = ex.threads if ex.threads is not None else threads

    base = scenario.traffic or Traffic(criteria.hc_min_pct)
    demand = replace(base, arrival_rate_pct_5min=criteria.hc_min_pct)
    wanted = list(dict.fromkeys([baseline_rule(), *rules]))
    name = scenario.building.name
    stream_seed = task_seed(seed, ("size", "round-trip", name, building_file_sha256))
    order = candidates(cars_list, loads, speeds)
    found: dict[str, dict] = {}
    tried = []

    def make_task(i):
        cars, load, speed = order[i]
        group = replace(scenario.group, cars=cars, rated_load_persons=load, rated_speed_mps=speed)
        return Task(("size", "round-trip", name, building_file_sha256, f"{cars} cars",
                     f"{load} persons", f"{speed:g} mps"), _screen_task,
                    dict(scenario=scenario, group=group, rules=wanted, demand=demand,
                         cars_open=min(K, cars), poisson=poisson, trials=trials,
                         ci_target_pct=ci_target_pct, max_trials=max_trials, seed=stream_seed,
                         threads=threads))

    def take(i, result):
        cars, load, speed = order[i]
        open_rules = [r for r in wanted if r not in found]
        busy = {r["rule"]: r for r in result["at_demand"]}
        for r in result["design"]:
            if r["rule"] not in open_rules:
                continue
            d = busy[r["rule"]]
            ok = (d["interval_s"] <= criteria.interval_max_s
                  and r["handling_capacity_pct_5min"] >= criteria.hc_min_pct)
            entry = {"rule": r["rule"], "cars": cars, "cars_open": min(K, cars),
                     **({} if r["rule"] == wanted[0]
                        else {"basis": round_trip_basis(min(K, cars), cars)}),
                     "rated_load_persons": load,
                     "rated_speed_mps": speed, "interval_s": d["interval_s"],
                     "interval_at_design_load_s": r["interval_s"],
                     "passengers_per_trip_at_demand": result["passengers_per_trip"],
                     "handling_capacity_pct_5min": r["handling_capacity_pct_5min"],
                     "handling_capacity_ci95_pct": r["handling_capacity_pct_5min"]
                     * r["ci95_s"] / r["round_trip_time_s"],
                     "round_trip_time_s": r["round_trip_time_s"], "ci95_s": r["ci95_s"],
                     "meets_criteria": ok}
            tried.append(entry)
            if ok:
                found[r["rule"]] = {**entry, "found": True}
        return all(r in found for r in wanted)

    ordered_search(ex, len(order), make_task, take, on_candidate)
    designs = []
    for rule in wanted:
        if rule in found:
            designs.append(found[rule])
        else:
            designs.append({"rule": rule, "found": False, "cars": None, "cars_open": None,
                            **({} if rule == wanted[0]
                               else {"basis": round_trip_basis(K, max(cars_list))}),
                            "rated_load_persons": None,
                            "rated_speed_mps": None, "interval_s": None,
                            "handling_capacity_pct_5min": None, "round_trip_time_s": None,
                            "message": f"no candidate up to {count_of(max(cars_list), 'car')} x "
                                       f"{max(loads)} persons at {max(speeds):g} m/s meets "
                                       f"interval <= {criteria.interval_max_s:g} s at the demand "
                                       f"and handling capacity >= {criteria.hc_min_pct:g} %"})
    return {"criteria": {"interval_max_s": criteria.interval_max_s,
                         "hc_min_pct": criteria.hc_min_pct},
            "cars_open": K, "passenger_model": "poisson" if poisson else "fixed",
            "designs": designs, "tried": tried, "savings": savings(designs)}


def savings(designs: list[dict]) -> list[dict]:
    """What each rule would save against conventional control by the round-trip screen
    (cars, car size, speed or margin), worded as a bound: a saving is claimed only from
    the peak simulation (:func:`size_by_service`)."""
    base = designs[0]
    out = []
    for d in designs[1:]:
        bound = f"{d['rule']} ({d['basis']})" if d.get("basis") else d["rule"]
        if not d["found"]:
            text = f"{bound}: no design meets the criteria"
        elif not base["found"]:
            text = (f"{bound}: meets the criteria with {count_of(d['cars'], 'car')} x "
                    f"{d['rated_load_persons']} persons at {d['rated_speed_mps']:g} m/s, "
                    f"where conventional control meets them with none of the candidates")
        elif d["cars"] < base["cars"]:
            text = (f"{bound}: would need {count_of(base['cars'] - d['cars'], 'car')} fewer "
                    f"by this bound")
        elif d["rated_load_persons"] < base["rated_load_persons"]:
            text = (f"{bound}: same number of cars, smaller cars "
                    f"({d['rated_load_persons']} instead of {base['rated_load_persons']} persons)")
        elif d["rated_speed_mps"] < base["rated_speed_mps"]:
            text = (f"{bound}: same cars, slower rated speed "
                    f"({d['rated_speed_mps']:g} instead of {base['rated_speed_mps']:g} m/s)")
        else:
            text = (f"{bound}: same group; margin of handling capacity "
                    f"{d['handling_capacity_pct_5min'] - base['handling_capacity_pct_5min']:+.1f} "
                    f"points, interval {d['interval_s'] - base['interval_s']:+.1f} s")
        out.append({"rule": d["rule"], "saving": text, "basis": d.get("basis"),
                    "cars_saved": (base["cars"] - d["cars"]) if d["found"] and base["found"] else None})
    return out


# ------------------------------------------------------------------ sizing by service
#: Door width [mm] for a car's rated load [persons], ISO 4190-1:2010 office cars (from
#: memory): (most persons, width).
DOOR_WIDTHS_MM = ((10, 800), (13, 900), (21, 1100), (10_000, 1300))


def door_width_mm(rated_load_persons: int) -> int:
    """The standard door width of a car of ``rated_load_persons`` (see DOOR_WIDTHS_MM)."""
    return next(w for most, w in DOOR_WIDTHS_MM if rated_load_persons <= most)


def candidate_group(group, cars: int, rated_load: int, speed: float, scale_times: bool):
    """The file's group with ``cars`` cars of ``rated_load`` persons at ``speed``.

    With ``scale_times`` the car's door and transfer times follow the standard door
    width w of its size (:data:`DOOR_WIDTHS_MM`) against the file's car, w0:

        t_door = t_door,0 w / w0        (one door operator opens every width at one speed)
        t_transfer = t_transfer,0 w0 / w  (the flow through a doorway grows with its width)

    Both are stated modelling assumptions (common practice in kind, not published
    factors); without ``scale_times`` every candidate keeps the file's times.
    """
    g = replace(group, cars=cars, rated_load_persons=rated_load, rated_speed_mps=speed)
    if scale_times:
        f = door_width_mm(rated_load) / door_width_mm(group.rated_load_persons)
        g = replace(g, door_open_s=group.door_open_s * f, door_close_s=group.door_close_s * f,
                    transfer_in_s=group.transfer_in_s / f, transfer_out_s=group.transfer_out_s / f)
    return g


#: Rated loads [persons] of the preferred car sizes (630, 800, 1000, 1275, 1600, 1800 and
#: 2000 kg at 75 kg a person; ISO 4190-1:2010, from memory).
STANDARD_LOADS_PERSONS = (8, 10, 13, 17, 21, 24, 26)
#: Rated speeds [m/s] commonly offered for passenger lifts (ISO 4190-1:2010 and common
#: practice, from memory).
STANDARD_SPEEDS_MPS = (1.0, 1.6, 2.0, 2.5, 3.0, 3.5, 4.0, 5.0, 6.0)


def neighbours(value, standard) -> list:
    """``value`` with the next smaller and next larger entries of ``standard``."""
    below = [x for x in standard if x < value]
    above = [x for x in standard if x > value]
    return sorted({value, *below[-1:], *above[:1]})


def installation_size(rated_load_persons: float, rated_speed_mps: float,
                      cost_weight: float | None = None) -> float:
    """The size of one car's installation in the sizing's cost order: rated load x rated
    speed [persons m/s], or with a ``cost_weight`` w, rated load + w x rated speed."""
    if cost_weight is None:
        return rated_load_persons * rated_speed_mps
    return rated_load_persons + cost_weight * rated_speed_mps


def installation_order(cars_list, loads, speeds, cost_weight: float | None = None):
    """(cars, rated load, rated speed) in the order a client pays for them: fewest cars,
    then the smaller installation (:func:`installation_size`), then the smaller car."""
    return sorted(((c, q, v) for c in cars_list for q in loads for v in speeds),
                  key=lambda x: (x[0], installation_size(x[1], x[2], cost_weight), x[1], x[2]))


def _service_task(scenario: Scenario, group, destination_control: str, criterion, *,
                  window_s: float, minutes: float, replications: int, seed: int,
                  peak_if_filtered: bool, threads=None) -> dict:
    """One candidate of the peak sizing: the round-trip filter's most handling capacity
    [% / 5 min], then (unless the filter fails and ``peak_if_filtered`` is False) the peak
    simulation of conventional control and the destination control on the same arrivals."""
    from peak.simulation import simulate_peak
    from roundtrip.montecarlo import simulate_trips

    from .decision import meets
    cars = group.cars
    mc = simulate_trips(scenario.building, group, group.departure_load_persons,
                        traffic=scenario.traffic, poisson=False, trials=4000, seed=seed)
    most = (100 * 300 * mc.passengers_carried.mean * cars / mc.round_trip_time.mean
            / scenario.building.total_population)
    if most < scenario.traffic.arrival_rate_pct_5min and not peak_if_filtered:
        return {"most": most, "runs": None}
    study = simulate_peak(scenario.building, group, scenario.traffic, [destination_control],
                          window_s=window_s, minutes=minutes, replications=replications,
                          seed=seed, slots=False, threads=threads)
    runs = []
    for run in study.runs:
        ok, why = meets(run, study.runs[0], criterion)
        s = run.summary
        runs.append({"control": run.control.name, "meets_criterion": ok, "why": why,
                     "basis": "peak",
                     "average_waiting_time_s": s["average_waiting_time_s"].mean,
                     "average_waiting_time_ci95_s": s["average_waiting_time_s"].ci95,
                     "waiting_time_p95_s": s["waiting_time_p95_s"].mean,
                     "average_time_to_destination_s": s["average_time_to_destination_s"].mean,
                     "handling_capacity_pct_5min": s["handling_capacity_pct_5min"].mean})
    return {"most": most, "runs": runs}


def size_by_service(scenario: Scenario, destination_control: str, criterion, cars_list, loads,
                    speeds, *, seed: int = 0, replications: int = 10, window_s: float = 5.0,
                    minutes: float = 60.0, scale_times: bool | None = None,
                    cost_weight: float | None = None, on_candidate=None, ex=None,
                    building_file_sha256: str = "") -> dict:
    """The cheapest group meeting the service criterion under each control, by the peak
    simulation (:mod:`experiments.decision`).

    Candidates go in :func:`installation_order`. For each, the peak simulation runs
    conventional control and ``destination_control`` on the same arrivals at the file's
    demand; a control's design is the first candidate at which it meets the criterion with
    the upper end of every 95 % interval (:func:`experiments.decision.meets`). A first
    filter spares the simulation of groups that cannot carry the demand at all: the
    round-trip Monte Carlo's handling capacity of conventional control at the departure
    load (its most, lobby never empty) below the demand fails conventional control there.

    Each candidate is one task (:mod:`experiments.tasks`); every candidate draws from one
    stream, ``task_seed(seed, ("size", "peak", building, digest))``, so that each meets
    the same arrivals (common random numbers across the candidates). On a cluster (``ex``)
    candidates run a few ahead; the answer and the list tried are the same.

    Returns ``{"designs": [...], "tried": [...], "savings": [...], "criterion": ...}``;
    a control without a design says so (``found: false`` and a message).
    """
    from .tasks import InProcess, Task, ordered_search, task_seed
    if scale_times is None:
        scale_times = scenario.group.times_scale_with_car_size
    ex = InProcess() if ex is None else ex
    threads = ex.threads               # one per worker on a cluster; results do not depend on it
    names = ["conventional", destination_control]
    demand = scenario.traffic.arrival_rate_pct_5min
    name = scenario.building.name
    stream_seed = task_seed(seed, ("size", "peak", name, building_file_sha256))
    order = installation_order(cars_list, loads, speeds, cost_weight)
    found: dict = {}
    tried = []

    def make_task(i):
        cars, load, speed = order[i]
        group = candidate_group(scenario.group, cars, load, speed, scale_times)
        # the simulation may be spared after a failed filter only while conventional
        # control is without a design and the destination control has one
        spare = "conventional" not in found and destination_control in found
        return Task(("size", "peak", name, building_file_sha256, f"{cars} cars",
                     f"{load} persons", f"{speed:g} mps"), _service_task,
                    dict(scenario=scenario, group=group, destination_control=destination_control,
                         criterion=criterion, window_s=window_s, minutes=minutes,
                         replications=replications, seed=stream_seed,
                         peak_if_filtered=not spare, threads=threads))

    def take(i, result):
        cars, load, speed = order[i]
        group = candidate_group(scenario.group, cars, load, speed, scale_times)
        open_names = [n for n in names if n not in found]
        base = {"cars": cars, "rated_load_persons": load, "rated_speed_mps": speed,
                "door_open_s": group.door_open_s, "door_close_s": group.door_close_s,
                "transfer_in_s": group.transfer_in_s, "transfer_out_s": group.transfer_out_s}
        most = result["most"]
        if most < demand and "conventional" in open_names:
            tried.append({**base, "control": "conventional", "meets_criterion": False,
                          "why": [f"round trip carries at most {most:.1f} %"], "basis": "round-trip"})
            open_names = [n for n in open_names if n != "conventional"]
            if not open_names:
                return False
        for run in result["runs"]:
            entry = {**base, **run}
            tried.append(entry)
            if run["meets_criterion"] and run["control"] in open_names:
                found[run["control"]] = {**entry, "found": True}
        return all(n in found for n in names)

    ordered_search(ex, len(order), make_task, take, on_candidate)
    designs = []
    for name in names:
        if name in found:
            designs.append(found[name])
        else:
            designs.append({"control": name, "found": False, "basis": "peak",
                            "message": f"no candidate up to {max(cars_list)} cars x "
                                       f"{max(loads)} persons at {max(speeds):g} m/s meets "
                                       f"the criterion ({criterion.describe()})"})
    conv, dc = designs
    savings = None
    if conv["found"] and dc["found"]:
        size = (lambda d: installation_size(d["rated_load_persons"], d["rated_speed_mps"],
                                            cost_weight))
        savings = {"cars_saved": conv["cars"] - dc["cars"], "basis": "peak",
                   "installation_conventional": size(conv), "installation_destination": size(dc),
                   "installation_measure": ("rated load x speed" if cost_weight is None
                                            else f"rated load + {cost_weight:g} x speed")}
    return {"criterion": criterion.to_dict(), "demand_pct_5min": demand, "designs": designs,
            "tried": tried, "savings": savings, "times_scale_with_car_size": scale_times,
            "cost_order": ("cars, then rated load x speed" if cost_weight is None
                           else f"cars, then rated load + {cost_weight:g} x speed"),
            "cost_weight": cost_weight}
