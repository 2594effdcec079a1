"""Monte Carlo rounds of a lift group: allocation rules compared on common passengers.

A trial is one batch, the passengers arriving during one round of the group:
cars x P on average (Poisson, or fixed). Every rule allocates the very same
batches (common random numbers), and each car's trip is timed by the trip
model of :mod:`roundtrip.schedule` (see :mod:`batchrounds._kernel` for the
split into sub-batches when fewer cars are open to allocation than the group
has).

For each rule: round-trip time = mean over trials and cars of each car's
round-trip time; interval = RTT / cars; handling capacity = 300 s x passengers
carried per car trip / interval. Intervals are 95 % normal-theory intervals on
the per-trial means (trials are independent; cars within a trial are not).

Gains against the conventional baseline (the registry's baseline rule,
``random``) are ratios of means, with intervals by the delta
method on the per-trial values: paired (the same batches, the variance of the
per-trial linearised difference) and, for contrast, unpaired (as if the runs
were independent). The paired interval is the one to quote; common random
numbers make it much narrower.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from allocation import contract as K
from allocation.registry import Rule, baseline_rule, get_rule
from roundtrip.building import Building, LiftGroup, Traffic
from roundtrip.classical import average_waiting_time_s
from roundtrip.montecarlo import (Z95, Estimate, PassengerSampler, check_run_options, run_until,
                                  with_threads)
from roundtrip.schedule import TripStream, TripTiming, trip_timing

from . import _kernel as G


@dataclass(frozen=True)
class GroupSample:
    """Per-trial, per-car figures of one rule on the common batches."""

    rtt_s: np.ndarray            # trials x cars
    counts: np.ndarray           # trials x cars x N_COUNTS
    unallocated: np.ndarray      # trials

    @property
    def trial_rtt_s(self) -> np.ndarray:
        return self.rtt_s.mean(axis=1)

    def trial_mean(self, column: int) -> np.ndarray:
        return self.counts[:, :, column].mean(axis=1)


def _ratio_gain(rule_x, rule_y, base_x, base_y):
    """Gain % of (mean rule_x / mean rule_y) over (mean base_x / mean base_y) - 1, with
    paired and unpaired delta-method 95 % half-widths [%]."""
    n = rule_x.size
    mx, my, bx, by = rule_x.mean(), rule_y.mean(), base_x.mean(), base_y.mean()
    f = (mx / my) / (bx / by)
    lin_rule = rule_x / mx - rule_y / my
    lin_base = base_x / bx - base_y / by
    paired = Z95 * f * np.std(lin_rule - lin_base, ddof=1) / math.sqrt(n)
    unpaired = Z95 * f * math.sqrt(np.var(lin_rule, ddof=1) + np.var(lin_base, ddof=1)) / math.sqrt(n)
    return 100.0 * (f - 1.0), 100.0 * paired, 100.0 * unpaired


@dataclass(frozen=True)
class RuleResult:
    rule: str
    sample: GroupSample = field(repr=False)

    def summary(self, cars: int, rated_load: int, population: float, base: "RuleResult") -> dict:
        s = self.sample
        rtt = Estimate.of(s.trial_rtt_s)
        carried = s.trial_mean(K.BOARDED)
        interval = rtt.mean / cars
        hc = 300.0 * carried.mean() / interval
        load = carried.mean() / rated_load
        ones = np.ones_like(carried)
        # RTT gain: 1 - RTT_rule / RTT_random;  HC gain: (C/R)_rule / (C/R)_random - 1
        g_rtt, g_rtt_p, g_rtt_u = _ratio_gain(s.trial_rtt_s, ones, base.sample.trial_rtt_s, ones)
        g_hc, g_hc_p, g_hc_u = _ratio_gain(carried, s.trial_rtt_s,
                                           base.sample.trial_mean(K.BOARDED),
                                           base.sample.trial_rtt_s)
        diff = Estimate.of(s.trial_rtt_s - base.sample.trial_rtt_s)
        lost = (s.unallocated > 0) | (s.counts[:, :, K.LEFT_BEHIND].sum(axis=1) > 0)
        stops = Estimate.of(s.trial_mean(K.STOPS))
        high = Estimate.of(s.trial_mean(K.HIGHEST))
        return {
            "rule": self.rule,
            "round_trip_time_s": rtt.mean,
            "ci95_s": rtt.ci95,
            "interval_s": interval,
            "handling_capacity_persons_5min": hc,
            "handling_capacity_pct_5min": 100.0 * hc / population,
            "expected_stops": stops.mean,
            "expected_stops_ci95": stops.ci95,
            "highest_reversal_floor": high.mean,
            "highest_reversal_floor_ci95": high.ci95,
            "passengers_carried_per_car": float(carried.mean()),
            "car_load_pct": 100.0 * load,
            "average_waiting_time_s": average_waiting_time_s(interval, load),
            "left_behind_share": float(lost.mean()),
            "rtt_gain_pct_vs_random": 0.0 - g_rtt,
            "rtt_gain_ci95_pct": g_rtt_p,
            "rtt_gain_ci95_pct_unpaired": g_rtt_u,
            "hc_gain_pct_vs_random": g_hc + 0.0,
            "hc_gain_ci95_pct": g_hc_p,
            "hc_gain_ci95_pct_unpaired": g_hc_u,
            "rtt_difference_s": diff.mean,
            "rtt_difference_ci95_s": diff.ci95,
            "rtt_difference_ci95_s_unpaired": Z95 * math.sqrt(
                (np.var(s.trial_rtt_s, ddof=1) + np.var(base.sample.trial_rtt_s, ddof=1))
                / s.trial_rtt_s.size),
        }


@dataclass(frozen=True)
class Comparison:
    building: str
    cars: int
    cars_open: int
    rated_load_persons: int
    total_population: float
    passengers_per_car: float
    passenger_model: str
    trials: int
    seed: int
    results: tuple

    def result(self, rule: str) -> RuleResult:
        return next(r for r in self.results if r.rule == rule)

    def to_dict(self) -> dict:
        base = self.results[0]
        return {
            "building": self.building,
            "cars": self.cars,
            "cars_open": self.cars_open,
            "passengers_per_car": self.passengers_per_car,
            "passenger_model": self.passenger_model,
            "trials": self.trials,
            "seed": self.seed,
            "rules": [r.summary(self.cars, self.rated_load_persons, self.total_population, base)
                      for r in self.results],
        }


def sub_batch_sizes(cars: int, cars_open: int) -> list[int]:
    """The numbers of cars of the sub-batches a round is split into (k, ..., the rest)."""
    return sorted({min(cars_open, cars - c0) for c0 in range(0, cars, cars_open)})


def group_sample(rule: Rule, table: np.ndarray, sampler: PassengerSampler, timing: TripTiming,
                 cars: int, cars_open: int, stream: TripStream) -> GroupSample:
    """One rule on the batches of ``stream``: the one helper through which every caller
    runs the group kernel."""
    n = stream.offsets.size - 1
    out = G.GroupOut(np.empty((n, cars)), np.empty((n, cars, K.N_COUNTS), dtype=np.int64),
                     np.empty(n, dtype=np.int64))
    blocks = max(1, min(n // 500 + 1, 64))
    G.group_trips(rule.compiled, stream, sampler.alias, G.GroupLayout(int(cars), int(cars_open)),
                  timing, table, blocks, out)
    return GroupSample(out.rtt_s, out.counts, out.unallocated)


def compare_rules(building: Building, group: LiftGroup, rules, passengers_per_car: float, *,
                  cars_open: int | None = None, traffic: Traffic | None = None,
                  poisson: bool = True, trials: int | None = None, ci_target_pct: float = 0.5,
                  max_trials: int = 1_000_000, seed: int = 0,
                  threads: int | None = None) -> Comparison:
    """Compare allocation rules on common passenger batches.

    Parameters
    ----------
    rules : sequence of str
        Rule names (see :mod:`allocation.registry`); ``random`` is always run,
        first, as the baseline.
    passengers_per_car : float
        Mean passengers per car per round, P [persons]: a batch holds cars x P.
    cars_open : int, optional
        Cars open to allocation at once, 1 ... cars (default: all cars).
    Other parameters as :func:`roundtrip.montecarlo.simulate_trips`; the
    adaptive run stops when every rule's RTT interval meets the target.
    """
    if not (passengers_per_car >= 0 and math.isfinite(passengers_per_car)):
        raise ValueError(f"passengers = {passengers_per_car!r}: must be a finite number >= 0")
    check_run_options(trials, ci_target_pct, max_trials, threads)
    k = group.cars if cars_open is None else cars_open
    if not (isinstance(k, (int, np.integer)) and 1 <= k <= group.cars):
        raise ValueError(f"cars_open = {cars_open!r}: must be a whole number from 1 to "
                         f"cars = {group.cars}")
    base = baseline_rule()
    names = [base] + [r for r in dict.fromkeys(rules) if r != base]
    chosen = [get_rule(r) for r in names]
    batch_mean = group.cars * passengers_per_car
    for rule in chosen:
        if rule.max_batch is not None:
            biggest = math.ceil(math.ceil(batch_mean) * k / group.cars) + 1
            if poisson or biggest > rule.max_batch:
                raise ValueError(
                    f"rule = {rule.name!r}: an exhaustive rule for tiny batches only: it needs "
                    f"fixed passenger counts and at most {rule.max_batch} passengers per "
                    f"sub-batch (cars open x passengers per car); here the sub-batch is "
                    f"{'unbounded (Poisson counts)' if poisson else f'up to {biggest}'}")
    sizes = sub_batch_sizes(group.cars, k)
    tables = [r.table(building, group, sizes, passengers_per_car) for r in chosen]
    sampler = PassengerSampler(building, traffic)
    timing = trip_timing(building, group)
    rng = np.random.default_rng(seed)
    L = group.cars

    def chunk(n):
        stream = sampler.uniforms(rng, batch_mean, n, poisson)
        out = [group_sample(rule, table, sampler, timing, L, k, stream)
               for rule, table in zip(chosen, tables)]
        return np.column_stack([s.trial_rtt_s for s in out]), out

    parts = with_threads(threads, lambda: run_until(chunk, trials, ci_target_pct, max_trials))
    results = []
    for i, name in enumerate(names):
        results.append(RuleResult(name, GroupSample(
            np.concatenate([p[i].rtt_s for p in parts]),
            np.concatenate([p[i].counts for p in parts]),
            np.concatenate([p[i].unallocated for p in parts]))))
    return Comparison(building.name, L, int(k), group.rated_load_persons,
                      building.total_population, float(passengers_per_car),
                      "poisson" if poisson else "fixed",
                      int(results[0].sample.rtt_s.shape[0]), int(seed), tuple(results))
