"""Monte Carlo rounds of a lift group: allocation rules compared on common passengers.

A trial is one round of the group: each car's new passengers are those arriving
during its interval (Poisson with mean P per car, the usual assumption of
arrivals at random, or fixed), so a round of L cars offers L x P on average,
and whoever a car cannot take waits for the next (see :mod:`batchrounds._kernel`
for the loading, the rooms and the split into sub-batches when fewer cars are
open to allocation than the group has). Every rule allocates the very same
passengers (common random numbers) in the very same numbers per car, and each
car's trip is timed by the trip model of :mod:`roundtrip.schedule`. The
conventional rule (the registry's baseline, ``random``) is then conventional
control exactly: its car trips are the one-car Monte Carlo's
(:func:`roundtrip.montecarlo.simulate_trips`).

For each rule: round-trip time = mean over rounds and cars of each car's
round-trip time; interval = RTT / cars; handling capacity = 300 s x passengers
carried per car trip / interval. Intervals are 95 % normal-theory intervals on
the per-round means (cars within a round are not independent).

Gains against the baseline are ratios of means, with intervals by the delta
method on the per-round values: paired (the same rounds, the variance of the
per-round linearised difference) and, for contrast, unpaired (as if the runs
were independent). The paired interval is the one to quote; common random
numbers make it much narrower.

The rounds are drawn and timed chunk by chunk (:mod:`roundtrip.stream`); each
chunk's per-round values are folded into running means and a running matrix
of co-moments (:class:`RunningMoments`), so memory does not grow with the
rounds.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from allocation import contract as K
from allocation.registry import Rule, baseline_rule, get_rule
from roundtrip.building import Building, LiftGroup, Traffic
from roundtrip.classical import average_waiting_time_s, traffic_mix_name
from roundtrip.montecarlo import (Z95, Estimate, PassengerSampler, check_passengers,
                                  check_run_options, chunk_plan, meets_target, with_threads)
from roundtrip.schedule import TripStream, TripTiming, trip_timing
from roundtrip.stream import CHAIN_ROUNDS, CHUNK_ROUNDS, PART_ROUNDS, count_table, run_stream
from roundtrip.threads import run_chains

from . import _kernel as G

#: Per-round values kept for each rule, in this order.
VALUES = ("rtt_s", "carried", "stops", "highest", "lowest")
MAX_FLOOR = 64


@dataclass(frozen=True)
class GroupSample:
    """Per-round, per-car figures of one rule on one chunk of common rounds."""

    rtt_s: np.ndarray            # rounds x cars
    counts: np.ndarray           # rounds x cars x N_COUNTS
    unallocated: np.ndarray      # rounds
    waiting_end: np.ndarray      # chains
    load_up: np.ndarray          # chains x levels
    load_down: np.ndarray        # chains x levels

    @property
    def trial_rtt_s(self) -> np.ndarray:
        return self.rtt_s.mean(axis=1)

    def trial_mean(self, column: int) -> np.ndarray:
        return self.counts[:, :, column].mean(axis=1)

    def values(self) -> np.ndarray:
        """The per-round values of :data:`VALUES` (rounds x 5)."""
        c = self.counts
        return np.column_stack([self.trial_rtt_s, c[:, :, K.BOARDED].mean(axis=1),
                                c[:, :, K.STOPS].mean(axis=1), c[:, :, K.HIGHEST].mean(axis=1),
                                c[:, :, K.LOWEST].mean(axis=1)])


class RunningMoments:
    """Count, mean vector and co-moment matrix of a stream of rows, merged block by
    block with the pairwise update of "Updating formulae and a pairwise algorithm
    for computing sample variances" (COMPSTAT, 1982): M = M_a + M_b + d d^T n_a n_b / n."""

    def __init__(self, width: int):
        self.n = 0
        self.mean = np.zeros(width)
        self.m2 = np.zeros((width, width))

    def add(self, rows: np.ndarray) -> None:
        rows = np.asarray(rows, dtype=float)
        nb = rows.shape[0]
        if nb == 0:
            return
        mb = rows.mean(axis=0)
        dev = rows - mb
        # numpy's own loops, not BLAS: a threaded BLAS beside the kernels' threads and the
        # stream's helper thread can stall for a tenth of a second on a busy machine
        m2b = np.einsum("ij,ik->jk", dev, dev, optimize=False)
        n = self.n + nb
        d = mb - self.mean
        self.m2 += m2b + np.outer(d, d) * (self.n * nb / n)
        self.mean = self.mean + d * (nb / n)
        self.n = n

    def cov(self) -> np.ndarray:
        return self.m2 / max(self.n - 1, 1)

    def estimate(self, i: int) -> Estimate:
        return Estimate.of_moments(self.n, float(self.mean[i]), float(self.m2[i, i]))


@dataclass
class RuleTotals:
    """What one rule's run adds up besides the per-round moments."""

    cars: int
    n_levels: int
    car_trips: int = 0
    left_trips: int = 0
    peak_sum: int = 0
    unallocated: int = 0
    waiting_end: int = 0
    stops_hist: np.ndarray = None
    highest_hist: np.ndarray = None
    load_up: np.ndarray = None
    load_down: np.ndarray = None
    kept: list = field(default_factory=list)

    def __post_init__(self):
        self.stops_hist = np.zeros(MAX_FLOOR, np.int64)
        self.highest_hist = np.zeros(MAX_FLOOR, np.int64)
        self.load_up = np.zeros(self.n_levels, np.int64)
        self.load_down = np.zeros(self.n_levels, np.int64)

    def add(self, s: GroupSample, keep: bool) -> None:
        c = s.counts
        self.car_trips += c.shape[0] * c.shape[1]
        self.left_trips += int(np.count_nonzero(c[:, :, K.LEFT_BEHIND]))
        self.peak_sum += int(c[:, :, K.PEAK_LOAD].sum())
        self.unallocated += int(s.unallocated.sum())
        self.waiting_end += int(s.waiting_end.sum())
        self.stops_hist += np.bincount(c[:, :, K.STOPS].ravel(), minlength=MAX_FLOOR)[:MAX_FLOOR]
        self.highest_hist += np.bincount(c[:, :, K.HIGHEST].ravel(), minlength=MAX_FLOOR)[:MAX_FLOOR]
        self.load_up += s.load_up.sum(axis=0)
        self.load_down += s.load_down.sum(axis=0)
        if keep:
            self.kept.append(s)

    def sample(self) -> GroupSample | None:
        if not self.kept:
            return None
        k = self.kept
        return GroupSample(np.concatenate([s.rtt_s for s in k]),
                           np.concatenate([s.counts for s in k]),
                           np.concatenate([s.unallocated for s in k]),
                           np.concatenate([s.waiting_end for s in k]),
                           np.concatenate([s.load_up for s in k]),
                           np.concatenate([s.load_down for s in k]))


def _ratio_gain(mean, cov, rule_idx, base_idx, n):
    """Gain % of (mean x / mean y)_rule over (mean x / mean y)_base - 1, with paired and
    unpaired delta-method 95 % half-widths [%]. ``rule_idx`` and ``base_idx`` are
    (x, y) indices into ``mean``/``cov``, y None for a plain mean."""
    def ratio(ix, iy):
        return mean[ix] / (mean[iy] if iy is not None else 1.0)

    def grad(ix, iy):
        g = np.zeros(mean.size)
        g[ix] = 1.0 / mean[ix]
        if iy is not None:
            g[iy] = -1.0 / mean[iy]
        return g

    f = ratio(*rule_idx) / ratio(*base_idx)
    gr, gb = grad(*rule_idx), grad(*base_idx)
    paired = Z95 * f * math.sqrt(max((gr - gb) @ cov @ (gr - gb), 0.0) / n)
    unpaired = Z95 * f * math.sqrt(max(gr @ cov @ gr + gb @ cov @ gb, 0.0) / n)
    return 100.0 * (f - 1.0), 100.0 * paired, 100.0 * unpaired


@dataclass(frozen=True)
class RuleResult:
    """One rule's figures on the common rounds (see :meth:`Comparison.to_dict`)."""

    rule: str
    index: int                               # its position in the comparison's moments
    totals: RuleTotals = field(repr=False)

    @property
    def sample(self) -> GroupSample | None:
        """The per-round figures, kept only when the run was asked to keep them."""
        return self.totals.sample()


@dataclass(frozen=True)
class Comparison:
    building: str
    cars: int
    cars_open: int
    rated_load_persons: int
    design_load_persons: float
    total_population: float
    passengers_per_car: float
    passenger_model: str
    traffic_mix: str
    trials: int
    seed: int
    results: tuple
    moments: RunningMoments = field(repr=False)

    def result(self, rule: str) -> RuleResult:
        return next(r for r in self.results if r.rule == rule)

    def estimate(self, rule: str, value: str) -> Estimate:
        """A rule's per-round estimate of one of :data:`VALUES`."""
        r = self.result(rule)
        return self.moments.estimate(len(VALUES) * r.index + VALUES.index(value))

    def summary(self, r: RuleResult) -> dict:
        m, cov, n = self.moments.mean, self.moments.cov(), self.moments.n
        w = len(VALUES)
        i, b = w * r.index, 0
        RTT, CAR = VALUES.index("rtt_s"), VALUES.index("carried")
        rtt = self.moments.estimate(i + RTT)
        carried = float(m[i + CAR])
        interval = rtt.mean / self.cars
        hc = 300.0 * carried / interval
        t = r.totals
        car_load = float(max(t.load_up.max(), t.load_down.max())) / t.car_trips
        g_rtt, g_rtt_p, g_rtt_u = _ratio_gain(m, cov, (i + RTT, None), (b + RTT, None), n)
        g_hc, g_hc_p, g_hc_u = _ratio_gain(m, cov, (i + CAR, i + RTT), (b + CAR, b + RTT), n)
        d = np.zeros(m.size)
        d[i + RTT] += 1.0
        d[b + RTT] -= 1.0
        diff_var = max(d @ cov @ d, 0.0)
        stops = self.moments.estimate(i + VALUES.index("stops"))
        high = self.moments.estimate(i + VALUES.index("highest"))
        low = self.moments.estimate(i + VALUES.index("lowest"))
        baseline = r.index == 0
        awt = (average_waiting_time_s(interval, car_load / self.rated_load_persons)
               if baseline and self.traffic_mix == "up-peak"
               and car_load <= self.design_load_persons * 1.001 else None)
        return {
            "rule": r.rule,
            "passenger_model": self.passenger_model,
            "round_trip_time_s": rtt.mean,
            "ci95_s": rtt.ci95,
            "interval_s": interval,
            "handling_capacity_persons_5min": hc,
            "handling_capacity_pct_5min": 100.0 * hc / self.total_population,
            "expected_stops": stops.mean,
            "expected_stops_ci95": stops.ci95,
            "highest_reversal_floor": high.mean,
            "highest_reversal_floor_ci95": high.ci95,
            "lowest_reversal_floor": low.mean,
            "passengers_carried_per_car": carried,
            "car_load_persons": car_load,
            "car_load_pct": 100.0 * car_load / self.rated_load_persons,
            "peak_car_load_persons": t.peak_sum / t.car_trips,
            "average_waiting_time_s": awt,
            "left_behind_share": t.left_trips / t.car_trips,
            "passengers_still_waiting": t.waiting_end,
            "rtt_gain_pct_vs_random": 0.0 - g_rtt,
            "rtt_gain_ci95_pct": g_rtt_p,
            "rtt_gain_ci95_pct_unpaired": g_rtt_u,
            "hc_gain_pct_vs_random": g_hc + 0.0,
            "hc_gain_ci95_pct": g_hc_p,
            "hc_gain_ci95_pct_unpaired": g_hc_u,
            "rtt_difference_s": float(m[i + RTT] - m[b + RTT]),
            "rtt_difference_ci95_s": Z95 * math.sqrt(diff_var / n),
            "rtt_difference_ci95_s_unpaired": Z95 * math.sqrt(
                (cov[i + RTT, i + RTT] + cov[b + RTT, b + RTT]) / n),
        }

    def to_dict(self) -> dict:
        return {
            "building": self.building,
            "cars": self.cars,
            "cars_open": self.cars_open,
            "passengers_per_car": self.passengers_per_car,
            "passenger_model": self.passenger_model,
            "traffic_mix": self.traffic_mix,
            "trials": self.trials,
            "seed": self.seed,
            "rules": [self.summary(r) for r in self.results],
        }


def sub_batch_sizes(cars: int, cars_open: int) -> list[int]:
    """The numbers of cars of the sub-batches a round is split into (k, ..., the rest)."""
    return sorted({min(cars_open, cars - c0) for c0 in range(0, cars, cars_open)})


def group_sample(rule: Rule, table: np.ndarray, sampler: PassengerSampler, timing: TripTiming,
                 cars: int, cars_open: int, stream: TripStream,
                 chain_rounds: int = CHAIN_ROUNDS, buffers: dict | None = None,
                 threaded: bool = True) -> GroupSample:
    """One rule on the rounds of ``stream`` (round t's car c is trip t x cars + c): the one
    helper through which every caller runs the group kernel. ``buffers`` (a dict the
    caller keeps) lends the output arrays from one call to the next; ``threaded``: the
    chains split between the worker threads (off inside a worker)."""
    n = (stream.offsets.size - 1) // cars
    chains = max(1, -(-n // chain_rounds))
    out = _out(buffers, n, cars, chains, sampler.n_levels)
    run_chains(G.group_trips, chains, rule.compiled, stream, sampler.alias,
               G.GroupLayout(int(cars), int(cars_open), int(chain_rounds)), timing, table,
               sampler.lobby_origins_only, out, threaded=threaded)
    if out.unallocated.any():
        raise RuntimeError(f"rule {rule.name!r} gave {int(out.unallocated.sum())} passenger(s) no "
                           f"car though the cars had room: a defect of the rule")
    return GroupSample(*out)


def _out(buffers, n, cars, chains, n_levels) -> "G.GroupOut":
    """Output arrays for n rounds: fresh, or the caller's, cleared, when they fit (the
    per-round arrays are overwritten; the per-chain sums start from zero)."""
    if buffers is None:
        return G.GroupOut.empty(n, cars, chains, n_levels)
    old = buffers.get("out")
    if old is None or old.rtt_s.shape[0] < n or old.waiting_end.size < chains:
        old = buffers["out"] = G.GroupOut.empty(n, cars, chains, n_levels)
    out = G.GroupOut(old.rtt_s[:n], old.counts[:n], old.unallocated[:n],
                     old.waiting_end[:chains], old.load_up[:chains], old.load_down[:chains])
    for a in (out.unallocated, out.waiting_end, out.load_up, out.load_down):
        a[...] = 0
    return out


def compare_rules(building: Building, group: LiftGroup, rules, passengers_per_car: float, *,
                  cars_open: int | None = None, traffic: Traffic | None = None,
                  poisson: bool = True, trials: int | None = None, ci_target_pct: float = 0.5,
                  max_trials: int = 1_000_000, seed: int = 0,
                  threads: int | None = None, keep_sample: bool = False) -> Comparison:
    """Compare allocation rules on common passengers.

    Parameters
    ----------
    rules : sequence of str
        Rule names (see :mod:`allocation.registry`); the baseline (``random``) is
        always run, first.
    passengers_per_car : float
        Mean passengers arriving per car interval, P [persons], 0 ... rated load: a
        round offers cars x P.
    cars_open : int, optional
        Cars open to allocation at once, 1 ... cars (default: all cars).
    keep_sample : bool
        Keep every round's per-car figures (memory grows with the rounds).
    Other parameters as :func:`roundtrip.montecarlo.simulate_trips`, with trials
    counted in rounds; the adaptive run stops, after a whole chunk, when every
    rule's RTT interval meets the target.
    """
    check_passengers(passengers_per_car, group, building, traffic, what="passengers_per_car")
    check_run_options(trials, ci_target_pct, max_trials, threads)
    k = group.cars if cars_open is None else cars_open
    if not (isinstance(k, (int, np.integer)) and 1 <= k <= group.cars):
        raise ValueError(f"cars_open = {cars_open!r}: must be a whole number from 1 to "
                         f"cars = {group.cars}")
    base = baseline_rule()
    names = [base] + [r for r in dict.fromkeys(rules) if r != base]
    chosen = [get_rule(r) for r in names]
    for rule in chosen:
        if rule.max_batch is not None:
            biggest = math.ceil(passengers_per_car) * k
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
    counts = count_table(passengers_per_car, poisson)
    L = group.cars
    moments = RunningMoments(len(VALUES) * len(chosen))
    totals = [RuleTotals(L, sampler.n_levels) for _ in chosen]
    w = len(VALUES)

    def work(stream):
        """Every rule on one part's rounds (common random numbers)."""
        return [group_sample(rule, table, sampler, timing, L, k, stream, threaded=False)
                for rule, table in zip(chosen, tables)]

    def merge(results) -> bool:
        for samples in results:
            for s, tot in zip(samples, totals):
                tot.add(s, keep_sample)
            moments.add(np.hstack([s.values() for s in samples]))
        return trials is None and meets_target(
            [moments.estimate(w * i) for i in range(len(chosen))], ci_target_pct)

    with_threads(threads, lambda: run_stream(seed, counts, chunk_plan(trials, max_trials,
                                                                      CHUNK_ROUNDS),
                                             PART_ROUNDS, work, merge, trips_per_unit=L))
    results = tuple(RuleResult(name, i, tot) for i, (name, tot) in enumerate(zip(names, totals)))
    return Comparison(building.name, L, int(k), group.rated_load_persons,
                      group.design_load_persons, building.total_population,
                      float(passengers_per_car), "poisson" if poisson else "fixed",
                      traffic_mix_name(traffic), int(moments.n), int(seed),
                      results, moments)
