"""Demand sweeps: every rule at every demand point, on common passengers.

At each point (demand, cars, cars open) the load P is the Monte Carlo demand
fixed point on carried passengers under conventional control, capped at the
design load (see :func:`roundtrip.montecarlo.simulate_demand`), and all
rules are compared at that same load on the same batches (common random
numbers; the demand points of one design share one random stream, so that the
curves are smooth). A
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
gives those). Conventional control's rows leave it empty. Every row names its
building and the digest of its file (``building_file_sha256``, the first 12
hexadecimal digits of the SHA-256 of the file's bytes; empty when the scenario
did not come from a file).

As tasks (:mod:`experiments.tasks`). Each design (cars, cars open) of a building is one
task at the design load and one task per demand point; all of a design's tasks draw
from one stream, seeded by ``task_seed(seed, ("sweep", building, digest, cars, cars
open))``, so the table depends on the run's seed and the units alone, and is the same in
process and on a cluster, byte for byte. The ``seed`` column gives that stream's seed
(``run_seed`` the run's).
"""
from __future__ import annotations

from dataclasses import replace

from roundtrip.building import Scenario, Traffic
from roundtrip.inputfile import InputError

from .limits import trial_cap
from .progress import progress_bar
from .tasks import InProcess, Task, task_seed


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


def _design_load_task(scenario: Scenario, cars: int, cars_open: int, rules, cap: int,
                      run: dict) -> list[dict]:
    """Every rule at the design load of ``cars`` cars with ``cars_open`` open: one row each."""
    from batchrounds.montecarlo import compare_rules
    from roundtrip.classical import design_passengers
    group = replace(scenario.group, cars=cars)
    c = compare_rules(scenario.building, group, rules,
                      design_passengers(scenario.building, group, scenario.traffic),
                      cars_open=cars_open, traffic=scenario.traffic, max_trials=cap, **run)
    return c.to_dict()["rules"]


def _demand_point_task(scenario: Scenario, traffic: Traffic, cars: int, cars_open: int, rules,
                       one_car: int, max_trials: int, n_rules: int, run: dict) -> dict:
    """One demand point: the conventional fixed point, then every rule at its load."""
    from batchrounds.montecarlo import compare_rules
    from roundtrip.montecarlo import simulate_demand
    group = replace(scenario.group, cars=cars)
    conventional = simulate_demand(scenario.building, group, traffic, max_trials=one_car, **run)
    p = conventional.passengers_per_trip
    cap = trial_cap(max_trials, cars=cars, rules=n_rules, passengers_per_car=p)
    c = compare_rules(scenario.building, group, rules, p, cars_open=cars_open,
                      traffic=scenario.traffic, max_trials=cap, **run)
    return {"passengers_per_car": p, "saturated": conventional.saturated,
            "comparison": c.to_dict()}


class SweepStudy:
    """The tasks of one building's demand sweep and the table made from their results."""

    def __init__(self, scenario: Scenario, arrivals, rules, *, cars_list=None,
                 cars_open_list=None, poisson: bool = True, trials: int | None = None,
                 ci_target_pct: float = 0.5, max_trials: int = 400_000, seed: int = 0,
                 threads=None, building_file_sha256: str = ""):
        self.scenario = scenario
        self.rules = list(rules)
        self.digest = building_file_sha256
        self.seed = seed
        base_traffic = scenario.traffic or Traffic(arrivals[0])
        cars_list = cars_list or [scenario.group.cars]
        self.points = _points(scenario, arrivals, cars_list, cars_open_list)
        self.designs = sorted({(c, k) for c, k, _ in self.points})
        name = scenario.building.name
        n_rules = len(self.rules) + 1          # the baseline is run too
        design_load = scenario.group.design_load_persons
        one_car = trial_cap(max_trials, passengers_per_car=design_load)
        self.stream_seed = {(c, k): task_seed(seed, ("sweep", name, self.digest, c, k))
                            for c, k in self.designs}

        def run(c, k):
            return dict(poisson=poisson, trials=trials, ci_target_pct=ci_target_pct,
                        seed=self.stream_seed[(c, k)], threads=threads)
        self.tasks = []
        for cars, k in self.designs:
            cap = trial_cap(max_trials, cars=cars, rules=n_rules, passengers_per_car=design_load)
            self.tasks.append(Task(("sweep", name, self.digest, f"{cars} cars", f"{k} open",
                                    "design load"), _design_load_task,
                                   dict(scenario=scenario, cars=cars, cars_open=k,
                                        rules=self.rules, cap=cap, run=run(cars, k))))
        for cars, k, arrival in self.points:
            traffic = replace(base_traffic, arrival_rate_pct_5min=arrival)
            self.tasks.append(Task(("sweep", name, self.digest, f"{cars} cars", f"{k} open",
                                    f"{arrival:g} %"), _demand_point_task,
                                   dict(scenario=scenario, traffic=traffic, cars=cars,
                                        cars_open=k, rules=self.rules, one_car=one_car,
                                        max_trials=max_trials, n_rules=n_rules,
                                        run=run(cars, k))))

    def with_threads(self, threads):
        """The same tasks computing on ``threads`` threads (results do not depend on it)."""
        for t in self.tasks:
            t.kwargs["run"]["threads"] = threads
        return self

    def table(self, results: list):
        """The tidy table from the tasks' results (in the order of :attr:`tasks`)."""
        import pandas as pd

        from allocation.registry import baseline_rule

        from .basis import round_trip_basis
        base_rule = baseline_rule()
        scenario = self.scenario
        capacity = {}
        for (cars, k), rows in zip(self.designs, results):
            for r in rows:
                capacity[(cars, k, r["rule"])] = r
        rows = []
        for (cars, k, arrival), res in zip(self.points, results[len(self.designs):]):
            group = replace(scenario.group, cars=cars)
            d = res["comparison"]
            p = res["passengers_per_car"]
            for r in d["rules"]:
                at_design = capacity[(cars, k, r["rule"])]
                rows.append({
                    "building": scenario.building.name,
                    "building_file_sha256": self.digest,
                    "arrival_rate_pct_5min": arrival,
                    "demand_persons_5min": arrival / 100.0 * scenario.building.total_population,
                    "cars": cars,
                    "cars_open": k,
                    "rated_load_persons": group.rated_load_persons,
                    "rated_speed_mps": group.rated_speed_mps,
                    "passengers_per_car": p,
                    "saturated_under_random": res["saturated"],
                    "passenger_model": d["passenger_model"],
                    "trials": d["trials"],
                    "run_seed": self.seed,
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
        return pd.DataFrame(rows)


def run_sweeps(studies: list[SweepStudy], ex=None, on_done=None) -> list:
    """Every study's table, all their tasks run together on the executor ``ex`` (default:
    in process)."""
    ex = InProcess() if ex is None else ex
    tasks = [t for s in studies for t in s.tasks]
    results = ex.run(tasks, on_done)
    tables = []
    at = 0
    for s in studies:
        tables.append(s.table(results[at:at + len(s.tasks)]))
        at += len(s.tasks)
    return tables


def demand_sweep(scenario: Scenario, arrivals, rules, *, cars_list=None, cars_open_list=None,
                 poisson: bool = True, trials: int | None = None, ci_target_pct: float = 0.5,
                 max_trials: int = 400_000, seed: int = 0, quiet: bool = True, threads=None,
                 building_file_sha256: str = "", ex=None):
    """The tidy sweep table (pandas DataFrame): one row per rule per point, its tasks run
    on the executor ``ex`` (default: in process, on ``threads`` threads)."""
    study = SweepStudy(scenario, arrivals, rules, cars_list=cars_list,
                       cars_open_list=cars_open_list, poisson=poisson, trials=trials,
                       ci_target_pct=ci_target_pct, max_trials=max_trials, seed=seed,
                       threads=threads, building_file_sha256=building_file_sha256)
    if ex is not None and ex.threads is not None:
        study.with_threads(ex.threads)
    with progress_bar(len(study.tasks), quiet, scenario.building.name) as bar:
        return run_sweeps([study], ex, bar.update)[0]
