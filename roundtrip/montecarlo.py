"""Monte Carlo round trips of one car: estimates with 95 % confidence intervals.

Each trial samples one car's passengers (origin and destination from the
building's origin-destination matrix, see :mod:`roundtrip.passengers`) and
times its round trip with the trip model of :mod:`roundtrip._trip_kernel`,
on the real floor levels and the ideal jerk-limited flight time of every
jump. The estimator lifts the classical formula's assumptions (rated speed
reached in one floor jump, equal floor heights, up-peak only).

This wrapper owns every policy decision and the random stream: one
``numpy.random.Generator`` (PCG64) seeded by ``seed`` draws, chunk by chunk,
first the passenger counts, then one uniform per passenger. The kernels only
turn those arrays into trip figures, so the same seed gives bit-identical
results on any number of threads.

Estimates: sample mean and the normal-theory 95 % half-width 1.96 s / sqrt(n).
Trials are added until the half-width of the round-trip time is at most
``ci_target_pct`` % of its mean, or ``max_trials`` is reached; ``trials=N``
runs exactly N.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np

from . import _trip_kernel as K
from .building import Building, LiftGroup, Traffic
from .classical import average_waiting_time_s, demand_calculation
from .passengers import AliasTable, od_alias_table, od_matrix, passenger_counts
from .schedule import TripOut, TripStream, TripTiming, trip_timing

Z95 = 1.959963984540054   # two-sided 95 % normal quantile


@dataclass(frozen=True)
class Estimate:
    """A sample mean with its 95 % confidence half-width."""

    mean: float
    ci95: float
    std: float
    n: int

    @classmethod
    def of(cls, x) -> "Estimate":
        x = np.asarray(x, dtype=float)
        n = x.size
        std = float(x.std(ddof=1)) if n > 1 else 0.0
        return cls(float(x.mean()), Z95 * std / math.sqrt(n) if n > 1 else math.inf, std, n)


@dataclass(frozen=True)
class TripSample:
    """Per-trial figures of a run: round-trip time [s] and the integer counts."""

    rtt_s: np.ndarray
    counts: np.ndarray          # columns as in roundtrip.schedule (STOPS, HIGHEST, ...)

    def column(self, which: int) -> np.ndarray:
        return self.counts[:, which]


class PassengerSampler:
    """Draws passenger batches for one building and traffic mix.

    ``draw(rng, mean, n, poisson)`` returns (origins, destinations, offsets):
    trial t's passengers, in arrival order, are the slice offsets[t]:offsets[t+1].
    """

    def __init__(self, building: Building, traffic: Traffic | None = None):
        self.n_levels = building.floors + 1
        self.od = od_matrix(building, traffic)
        self.alias: AliasTable = od_alias_table(self.od)
        #: every trip starts at the lobby: the up-peak kernel applies
        self.lobby_origins_only = bool(np.all(self.od[1:, :] == 0))

    def uniforms(self, rng: np.random.Generator, mean_passengers: float, n_trials: int,
                 poisson: bool) -> TripStream:
        """The random stream of ``n_trials`` trips.

        First the passenger counts, then one uniform per passenger; trial t's
        passengers come from uniforms[offsets[t]:offsets[t+1]], in arrival order.
        """
        counts = passenger_counts(rng, mean_passengers, n_trials, poisson)
        offsets = np.zeros(n_trials + 1, dtype=np.int64)
        np.cumsum(counts, out=offsets[1:])
        return TripStream(rng.random(int(offsets[-1])), offsets)

    def cells(self, uniforms: np.ndarray):
        """(origins, destinations) of the passengers that ``uniforms`` pick."""
        orig = np.empty(uniforms.size, dtype=np.int64)
        dest = np.empty(uniforms.size, dtype=np.int64)
        blocks = _blocks(uniforms.size // 8)
        if blocks == 1:                   # too few to be worth the threads
            K.sample_cells(uniforms, self.alias, orig, dest)
        else:
            K.sample_cells_parallel(uniforms, self.alias, blocks, orig, dest)
        return orig, dest

    def draw(self, rng: np.random.Generator, mean_passengers: float, n_trials: int,
             poisson: bool):
        """Passenger batches (origins, destinations, offsets) from :meth:`uniforms`."""
        stream = self.uniforms(rng, mean_passengers, n_trials, poisson)
        orig, dest = self.cells(stream.uniforms)
        return orig, dest, stream.offsets

    def sampled_trips(self, timing: TripTiming, stream: TripStream) -> TripSample:
        """Time one car's trip per trial, sampling its passengers inside the kernel:
        the same numbers as :meth:`draw` then :func:`time_trips`, faster. The one
        helper through which every caller runs the one-car kernels."""
        n = stream.offsets.size - 1
        out = TripOut.empty(n)
        kernel = K.uppeak_car_trips if self.lobby_origins_only else K.sampled_car_trips
        kernel(stream, self.alias, timing, _blocks(n), out)
        return TripSample(out.rtt_s, out.counts)


def _blocks(n_trials: int) -> int:
    import numba
    return max(1, min(n_trials // 2000 + 1, 8 * numba.get_num_threads()))


def time_trips(building: Building, group: LiftGroup, orig, dest, offsets,
               timing: TripTiming | None = None) -> TripSample:
    """Time one car's trip per trial for given passengers (see :class:`PassengerSampler`)."""
    timing = trip_timing(building, group) if timing is None else timing
    n = offsets.size - 1
    out = TripOut.empty(n)
    K.given_car_trips(np.ascontiguousarray(orig, dtype=np.int64),
                      np.ascontiguousarray(dest, dtype=np.int64),
                      np.ascontiguousarray(offsets, dtype=np.int64), timing, _blocks(n), out)
    return TripSample(out.rtt_s, out.counts)


@dataclass(frozen=True)
class MonteCarloResult:
    """Monte Carlo estimates of one car's round trip at one mean load."""

    building: str
    cars: int
    rated_load_persons: int
    total_population: float
    passenger_model: str
    passengers_per_trip: float          # mean passengers offered (asked for)
    round_trip_time: Estimate
    stops: Estimate
    highest_reversal_floor: Estimate
    lowest_reversal_floor: Estimate
    passengers_offered: Estimate
    passengers_carried: Estimate
    peak_car_load: Estimate
    left_behind_share: float
    left_behind_per_trip: float
    trials: int
    seed: int
    mode: str = "given load"
    saturated: bool = False
    iterations: int = 0
    trace: tuple = field(default=())
    converged: bool = True
    demand_pct_5min: float | None = None
    sample: TripSample | None = field(default=None, repr=False, compare=False)

    @property
    def interval_s(self) -> float:
        return self.round_trip_time.mean / self.cars

    @property
    def handling_capacity_persons_5min(self) -> float:
        """300 s x passengers carried per trip / interval; 0 when nobody is carried (an empty
        car with zero door times has a zero round trip)."""
        carried = self.passengers_carried.mean
        return 300.0 * carried / self.interval_s if carried > 0 else 0.0

    def to_dict(self) -> dict:
        hc = self.handling_capacity_persons_5min
        load = self.passengers_carried.mean / self.rated_load_persons
        return {
            "building": self.building,
            "mode": self.mode,
            "passenger_model": self.passenger_model,
            "round_trip_time_s": self.round_trip_time.mean,
            "ci95_s": self.round_trip_time.ci95,
            "interval_s": self.interval_s,
            "passengers_per_trip": self.passengers_per_trip,
            "passengers_carried_per_trip": self.passengers_carried.mean,
            "expected_stops": self.stops.mean,
            "expected_stops_ci95": self.stops.ci95,
            "highest_reversal_floor": self.highest_reversal_floor.mean,
            "highest_reversal_floor_ci95": self.highest_reversal_floor.ci95,
            "lowest_reversal_floor": self.lowest_reversal_floor.mean,
            "lowest_reversal_floor_ci95": self.lowest_reversal_floor.ci95,
            "peak_car_load_persons": self.peak_car_load.mean,
            "peak_car_load_ci95": self.peak_car_load.ci95,
            "handling_capacity_persons_5min": hc,
            "handling_capacity_pct_5min": 100.0 * hc / self.total_population,
            "car_load_pct": 100.0 * load,
            "average_waiting_time_s": average_waiting_time_s(self.interval_s, load),
            "saturated": self.saturated,
            "demand_pct_5min": self.demand_pct_5min,
            "left_behind_share": self.left_behind_share,
            "left_behind_per_trip": self.left_behind_per_trip,
            "trials": self.trials,
            "iterations": self.iterations,
            "converged": self.converged,
            "trace": [dict(t) for t in self.trace],
            "seed": self.seed,
        }


def check_run_options(trials, ci_target_pct, max_trials, threads) -> None:
    if trials is not None and (not isinstance(trials, (int, np.integer)) or trials < 2):
        raise ValueError(f"trials = {trials!r}: must be a whole number >= 2")
    if not (ci_target_pct > 0 and math.isfinite(ci_target_pct)):
        raise ValueError(f"ci_target_pct = {ci_target_pct!r}: must be > 0 [%]")
    if not (isinstance(max_trials, (int, np.integer)) and max_trials >= 2):
        raise ValueError(f"max_trials = {max_trials!r}: must be a whole number >= 2")
    if threads is not None and not (isinstance(threads, int) and threads >= 1):
        raise ValueError(f"threads = {threads!r}: must be a whole number >= 1")


def run_until(chunk, trials: int | None, ci_target_pct: float, max_trials: int,
              first_chunk: int = 4000):
    """Call ``chunk(n) -> (rtt, payload)`` until the RTT interval is tight enough.

    ``rtt`` holds one round-trip time per trial, or one column per estimate
    (trials x columns), every column of which must meet the target. With
    ``trials`` set, one call of exactly that many. Otherwise chunks are added
    until 1.96 s/sqrt(n) <= ci_target_pct/100 x mean or ``max_trials``. The
    chunk sizes depend only on the results so far, so a run is reproducible
    from its seed. Returns the list of payloads.
    """
    if trials is not None:
        return [chunk(trials)[1]]
    payloads, rtts = [], []
    n = 0
    want = min(first_chunk, max_trials)
    while True:
        rtt, payload = chunk(want)
        payloads.append(payload)
        rtts.append(np.asarray(rtt, dtype=float).reshape(want, -1))
        n += want
        x = np.concatenate(rtts)
        mean = np.abs(x.mean(axis=0))
        half = Z95 * x.std(axis=0, ddof=1) / math.sqrt(n)
        target = ci_target_pct / 100.0 * mean
        if np.all(half <= target) or n >= max_trials:
            return payloads
        needed = math.ceil(n * float(np.max((half / np.maximum(target, 1e-300)) ** 2)) * 1.1)
        want = int(min(max(needed - n, 1000), max_trials - n))


def with_threads(threads, fn):
    if threads is None:
        return fn()
    import numba
    old = numba.get_num_threads()
    numba.set_num_threads(min(threads, numba.config.NUMBA_NUM_THREADS))
    try:
        return fn()
    finally:
        numba.set_num_threads(old)


def simulate_trips(building: Building, group: LiftGroup, passengers: float, *,
                   traffic: Traffic | None = None, poisson: bool = True,
                   trials: int | None = None, ci_target_pct: float = 0.5,
                   max_trials: int = 2_000_000, seed: int = 0, threads: int | None = None,
                   keep_sample: bool = False) -> MonteCarloResult:
    """Monte Carlo estimate of one car's round trip at a mean of ``passengers`` per trip.

    Parameters
    ----------
    passengers : float
        Mean passengers offered per trip [persons], >= 0.
    traffic : Traffic, optional
        Traffic mix (its shares); None is up-peak (all incoming).
    poisson : bool
        Poisson passenger counts (True) or fixed counts (False; a real mean mixes
        the two nearest integers).
    trials : int, optional
        Run exactly this many trials instead of stopping on ``ci_target_pct``.
    ci_target_pct : float
        Stop when the 95 % half-width of the RTT is at most this % of its mean.
    max_trials : int
        Trial cap of the adaptive run.
    seed : int
        Seed of the numpy PCG64 generator; the same seed gives the same numbers.
    threads : int, optional
        Numba threads for the kernels (default: numba's setting); results do
        not depend on it.
    """
    if not (passengers >= 0 and math.isfinite(passengers)):
        raise ValueError(f"passengers = {passengers!r}: must be a finite number >= 0")
    check_run_options(trials, ci_target_pct, max_trials, threads)
    sampler = PassengerSampler(building, traffic)
    timing = trip_timing(building, group)
    rng = np.random.default_rng(seed)

    def chunk(n):
        s = sampler.sampled_trips(timing, sampler.uniforms(rng, passengers, n, poisson))
        return s.rtt_s, s

    samples = with_threads(threads, lambda: run_until(chunk, trials, ci_target_pct, max_trials))
    sample = TripSample(np.concatenate([s.rtt_s for s in samples]),
                        np.concatenate([s.counts for s in samples]))
    return _result(building, group, passengers, poisson, sample, seed, keep_sample)


def _result(building, group, passengers, poisson, sample: TripSample, seed, keep_sample,
            **extra) -> MonteCarloResult:
    left = sample.column(K.LEFT_BEHIND)
    return MonteCarloResult(
        building=building.name, cars=group.cars, rated_load_persons=group.rated_load_persons,
        total_population=building.total_population,
        passenger_model="poisson" if poisson else "fixed",
        passengers_per_trip=float(passengers),
        round_trip_time=Estimate.of(sample.rtt_s),
        stops=Estimate.of(sample.column(K.STOPS)),
        highest_reversal_floor=Estimate.of(sample.column(K.HIGHEST)),
        lowest_reversal_floor=Estimate.of(sample.column(K.LOWEST)),
        passengers_offered=Estimate.of(sample.column(K.OFFERED)),
        passengers_carried=Estimate.of(sample.column(K.BOARDED)),
        peak_car_load=Estimate.of(sample.column(K.PEAK_LOAD)),
        left_behind_share=float(np.mean(left > 0)),
        left_behind_per_trip=float(np.mean(left)),
        trials=int(sample.rtt_s.size), seed=int(seed),
        sample=sample if keep_sample else None, **extra)


def simulate_demand(building: Building, group: LiftGroup, traffic: Traffic, *,
                    poisson: bool = True, trials: int | None = None, ci_target_pct: float = 0.5,
                    max_trials: int = 2_000_000, seed: int = 0, threads: int | None = None,
                    max_iterations: int = 40) -> MonteCarloResult:
    """Monte Carlo round trip at the load the demand sets: the fixed point P = lambda RTT(P) / L.

    Start from the classical demand-mode RTT; then repeat P = lambda RTT / L,
    Monte Carlo at P (same seed each time: common random numbers), new RTT,
    until the change of RTT is within its 95 % half-width. If at the design
    load (capacity_factor x rated load) the demand would still need more,
    lambda RTT(P_design) / L > P_design, the group is saturated and the
    estimate is given at the design load.

    ``max_iterations`` (a whole number >= 1) caps the Monte Carlo steps after
    the classical start; when the last of them has not settled, the result is
    that last iterate with ``converged=False``.
    """
    if not (isinstance(max_iterations, (int, np.integer)) and not isinstance(max_iterations, bool)
            and max_iterations >= 1):
        raise ValueError(f"max_iterations = {max_iterations!r}: must be a whole number >= 1")
    lam = traffic.arrival_rate_persons_per_s(building)
    p_design = group.design_load_persons
    run = dict(traffic=traffic, poisson=poisson, trials=trials, ci_target_pct=ci_target_pct,
               max_trials=max_trials, seed=seed, threads=threads)
    at_design = simulate_trips(building, group, p_design, **run)
    trace = [{"passengers_per_trip": p_design, "round_trip_time_s": at_design.round_trip_time.mean,
              "ci95_s": at_design.round_trip_time.ci95}]
    if lam * at_design.round_trip_time.mean / group.cars > p_design:
        return replace(at_design, mode="demand", saturated=True, iterations=1,
                        trace=tuple(trace), demand_pct_5min=traffic.arrival_rate_pct_5min)
    rtt = demand_calculation(building, group, traffic, poisson).round_trip_time_s
    result = None
    converged = False
    for _ in range(max_iterations):
        p = min(lam * rtt / group.cars, p_design)
        result = simulate_trips(building, group, p, **run)
        new = result.round_trip_time.mean
        trace.append({"passengers_per_trip": p, "round_trip_time_s": new,
                      "ci95_s": result.round_trip_time.ci95})
        if abs(new - rtt) <= result.round_trip_time.ci95:
            converged = True
            break
        rtt = new
    return replace(result, mode="demand", saturated=False, iterations=len(trace),
                    trace=tuple(trace), converged=converged,
                    demand_pct_5min=traffic.arrival_rate_pct_5min)
