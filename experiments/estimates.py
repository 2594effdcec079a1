"""The estimates behind the command line, as plain functions returning frozen records.

Each picks the mode a file and the options ask for (a given load, or the load
the demand sets) and calls the model; printing is the command line's job
(:mod:`experiments.cli`), which never does model work itself.
"""
from __future__ import annotations

from dataclasses import dataclass

from roundtrip.building import Scenario
from roundtrip.classical import (ClassicalResult, demand_calculation, design_passengers,
                                 round_trip_calculation)
from roundtrip.inputfile import InputError

from .limits import trial_cap


def require_traffic(scenario: Scenario) -> None:
    """Demand mode needs the [traffic] section: a clear input error when it is absent."""
    if scenario.traffic is None:
        raise InputError(["[traffic] is missing: demand mode needs "
                          "traffic.arrival_rate_pct_5min; give it, or give --passengers P."],
                         scenario.source)


def most_passengers(scenario: Scenario) -> float:
    """The largest mean load per trip a car can carry: the rated load on the busiest
    stretch of the trip (the rated load itself in up-peak)."""
    g = scenario.group
    return design_passengers(scenario.building, g, scenario.traffic) / g.capacity_factor


def check_passengers_option(scenario: Scenario, passengers: float | None) -> None:
    """--passengers above what a car can carry is refused with a clear message."""
    if passengers is None:
        return
    top = most_passengers(scenario)
    rated = scenario.group.rated_load_persons
    if passengers > top * (1.0 + 1e-12):
        where = ("the rated load (group.rated_load_persons)" if abs(top - rated) < 1e-9 else
                 f"the load at which the busiest stretch of the trip carries the rated load of "
                 f"{rated} persons (group.rated_load_persons) for this traffic mix")
        raise InputError([f"--passengers {passengers:g}: must be at most {top:.4g} persons per "
                          f"trip, {where}; no car carries more on average."], scenario.source)


def classical_result(scenario: Scenario, passengers: float | None, poisson: bool) -> ClassicalResult:
    """Given-load mode when ``passengers`` is set, otherwise demand mode; any traffic mix
    (the up-peak formula, or the general analysis)."""
    if passengers is not None:
        check_passengers_option(scenario, passengers)
        return round_trip_calculation(scenario.building, scenario.group, passengers, poisson,
                                      traffic=scenario.traffic)
    require_traffic(scenario)
    return demand_calculation(scenario.building, scenario.group, scenario.traffic, poisson)


def classical_at(scenario: Scenario, passengers: float, poisson: bool,
                 saturated: bool | None = None) -> ClassicalResult:
    """The classical figures at a load a Monte Carlo run chose (its saturation kept)."""
    return round_trip_calculation(scenario.building, scenario.group, passengers, poisson,
                                  traffic=scenario.traffic, saturated=saturated)


def monte_carlo_result(scenario: Scenario, passengers: float | None, *, poisson: bool,
                       trials=None, ci_target_pct: float = 0.5, max_trials: int = 2_000_000,
                       seed: int = 0, threads=None):
    """One car's Monte Carlo round trips: at ``passengers``, or at the demand's fixed point."""
    from roundtrip.montecarlo import simulate_demand, simulate_trips
    most = scenario.group.design_load_persons if passengers is None else passengers
    run = dict(poisson=poisson, trials=trials, ci_target_pct=ci_target_pct,
               max_trials=trial_cap(max_trials, passengers_per_car=most), seed=seed,
               threads=threads)
    check_passengers_option(scenario, passengers)
    try:
        if passengers is not None:
            return simulate_trips(scenario.building, scenario.group, passengers,
                                  traffic=scenario.traffic, **run)
        require_traffic(scenario)
        return simulate_demand(scenario.building, scenario.group, scenario.traffic, **run)
    except InputError:
        raise
    except ValueError as exc:          # e.g. interfloor traffic with one populated floor
        raise InputError([str(exc)], scenario.source) from None


@dataclass(frozen=True)
class ComparisonRun:
    """Rules compared at one load, with the mode that chose the load."""

    comparison: object                     # batchrounds.montecarlo.Comparison
    mode: str                              # "given load" or "demand"
    saturated_under_random: bool | None    # demand mode: conventional control saturated

    def to_dict(self) -> dict:
        return {**self.comparison.to_dict(), "mode": self.mode,
                "saturated_under_random": self.saturated_under_random}


def demand_passengers_per_car(scenario: Scenario, poisson: bool, seed: int, threads=None, *,
                              trials=None, ci_target_pct: float = 0.5,
                              max_trials: int = 2_000_000):
    """P for demand mode: the Monte Carlo fixed point under conventional control (with the
    same trial options as the comparison that follows)."""
    from roundtrip.montecarlo import simulate_demand
    require_traffic(scenario)
    cap = trial_cap(max_trials, passengers_per_car=scenario.group.design_load_persons)
    r = simulate_demand(scenario.building, scenario.group, scenario.traffic, poisson=poisson,
                        trials=trials, ci_target_pct=ci_target_pct, max_trials=cap,
                        seed=seed, threads=threads)
    return r.passengers_per_trip, r.saturated


def comparison_run(scenario: Scenario, rules, passengers: float | None, *, cars_open=None,
                   poisson: bool = True, trials=None, ci_target_pct: float = 0.5,
                   max_trials: int = 1_000_000, seed: int = 0, threads=None) -> ComparisonRun:
    """Allocation rules on common batches at ``passengers`` per car, or at the demand."""
    from batchrounds.montecarlo import compare_rules
    saturated = None
    check_passengers_option(scenario, passengers)
    try:
        if passengers is None:
            passengers, saturated = demand_passengers_per_car(
                scenario, poisson, seed, threads, trials=trials, ci_target_pct=ci_target_pct,
                max_trials=max_trials)
        cap = trial_cap(max_trials, cars=scenario.group.cars, rules=len(rules) + 1,
                        passengers_per_car=passengers)
        c = compare_rules(scenario.building, scenario.group, rules, passengers,
                          cars_open=cars_open, traffic=scenario.traffic, poisson=poisson,
                          trials=trials, ci_target_pct=ci_target_pct, max_trials=cap,
                          seed=seed, threads=threads)
    except InputError:
        raise
    except ValueError as exc:
        raise InputError([str(exc)], scenario.source) from None
    return ComparisonRun(c, "demand" if saturated is not None else "given load", saturated)


def peak_study(scenario: Scenario, controls, *, window_s: float | None = None,
               minutes: float | None = None, warmup_minutes: float = 5.0,
               replications: int | None = None, seed: int = 0, threads=None,
               cars_open: int | None = None):
    """The peak simulation of the file's building under each control (peak.simulation)."""
    from peak.simulation import DEFAULT_WINDOW_S, simulate_peak
    require_traffic(scenario)
    try:
        return simulate_peak(scenario.building, scenario.group, scenario.traffic, controls,
                             window_s=DEFAULT_WINDOW_S if window_s is None else window_s,
                             minutes=minutes, warmup_minutes=warmup_minutes,
                             replications=replications, seed=seed, threads=threads,
                             cars_open=cars_open)
    except ValueError as exc:
        raise InputError([str(exc)], scenario.source) from None
