"""Monte Carlo round trips of one car: estimates with 95 % confidence intervals.

Each trial is one trip of the car: its new passengers are those arriving
during its interval (origin and destination from the building's
origin-destination matrix, see :mod:`roundtrip.passengers`), and it is offered
everyone waiting, those an earlier trip left behind first; whoever it cannot
take waits for the next trip (nobody is dropped). Each trip is timed with the
trip model of :mod:`roundtrip.schedule` on the real floor levels and the ideal
jerk-limited flight time of every jump. The estimator lifts the classical
formula's assumptions (rated speed reached in one floor jump, equal floor
heights, everyone boards, up-peak only).

This wrapper owns every policy decision and the random stream, defined chunk
by chunk in :mod:`roundtrip.stream`; the chain kernels
(:mod:`roundtrip._chain_kernel`) turn each chunk into running sums, so memory
does not grow with the trials and the same seed gives bit-identical results on
any number of threads.

Estimates: sample mean and the normal-theory 95 % half-width 1.96 s / sqrt(n),
over trips (the trips of a chain are serially dependent through those left
behind; at loads the group carries the dependence is short, which is why the
chains are long). Whole chunks are added until the half-width of the
round-trip time is at most ``ci_target_pct`` % of its mean, or ``max_trials``
is reached; ``trials=N`` runs exactly N.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np

from . import _trip_kernel as K
from ._chain_kernel import ChainSums
from ._chain_kernel import chain_trips as chain_kernel
from .building import Building, LiftGroup, Traffic
from .classical import (average_waiting_time_s, demand_calculation, design_passengers, is_uppeak,
                        traffic_mix_name)
from .passengers import AliasTable, od_alias_table, od_matrix, passenger_counts
from .schedule import TripOut, TripStream, TripTiming, trip_timing
from .threads import run_chains
from .stream import (CHAIN_TRIPS, CHUNK_TRIPS, PART_TRIPS, adaptive_sizes, chunk_sizes,
                     count_table, run_stream)

Z95 = 1.959963984540054   # two-sided 95 % normal quantile


@dataclass(frozen=True)
class Estimate:
    """A sample mean with its 95 % confidence half-width."""

    mean: float
    ci95: float
    std: float
    n: int

    @classmethod
    def of_moments(cls, n: int, mean: float, m2: float) -> "Estimate":
        """From a count, a mean and the sum of squared deviations."""
        std = math.sqrt(max(m2, 0.0) / (n - 1)) if n > 1 else 0.0
        return cls(float(mean), Z95 * std / math.sqrt(n) if n > 1 else math.inf, std, int(n))


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
        K.sample_cells(uniforms, self.alias, orig, dest)
        return orig, dest

    def draw(self, rng: np.random.Generator, mean_passengers: float, n_trials: int,
             poisson: bool):
        """Passenger batches (origins, destinations, offsets) from :meth:`uniforms`."""
        stream = self.uniforms(rng, mean_passengers, n_trials, poisson)
        orig, dest = self.cells(stream.uniforms)
        return orig, dest, stream.offsets


@dataclass
class TripSums:
    """Running sums of a one-car run (from the chain kernels): what every estimate
    is made of, with the round-trip time kept as a count, mean and sum of squared
    deviations (merged chain by chain, a numerically stable form)."""

    n_levels: int
    trips: int = 0
    rtt_mean_s: float = 0.0
    rtt_m2_s2: float = 0.0
    count_sum: np.ndarray = None
    count_sq: np.ndarray = None
    left_trips: int = 0
    arrivals: int = 0
    waiting_end: int = 0
    load_up: np.ndarray = None
    load_down: np.ndarray = None

    def __post_init__(self):
        self.count_sum = np.zeros(K.N_COUNTS, dtype=object)
        self.count_sq = np.zeros(K.N_COUNTS, dtype=object)
        self.load_up = np.zeros(self.n_levels, dtype=np.int64)
        self.load_down = np.zeros(self.n_levels, dtype=np.int64)

    def add(self, chains: ChainSums) -> None:
        """Merge a chunk's chains, in chain order."""
        n = chains.trips.astype(float)
        mean = chains.rtt_shift_s + chains.rtt_sum_s / n
        m2 = np.maximum(chains.rtt_sq_s2 - chains.rtt_sum_s ** 2 / n, 0.0)
        total = n.sum()
        chunk_mean = float(np.sum(n * mean) / total)
        chunk_m2 = float(np.sum(m2) + np.sum(n * (mean - chunk_mean) ** 2))
        both = self.trips + total
        delta = chunk_mean - self.rtt_mean_s
        self.rtt_m2_s2 += chunk_m2 + delta * delta * self.trips * total / both
        self.rtt_mean_s += delta * total / both
        self.trips = int(both)
        self.count_sum += chains.count_sum.sum(axis=0).astype(object)
        self.count_sq += chains.count_sq.sum(axis=0).astype(object)
        self.left_trips += int(chains.left_trips.sum())
        self.arrivals += int(chains.arrivals.sum())
        self.waiting_end += int(chains.waiting_end.sum())
        self.load_up += chains.load_up.sum(axis=0)
        self.load_down += chains.load_down.sum(axis=0)

    def rtt(self) -> "Estimate":
        return Estimate.of_moments(self.trips, self.rtt_mean_s, self.rtt_m2_s2)

    def column(self, which: int) -> "Estimate":
        n = self.trips
        s, q = self.count_sum[which], self.count_sq[which]
        return Estimate.of_moments(n, float(s) / n, float(q - s * s / n) if n else 0.0)

    @property
    def busiest_stretch_load(self) -> float:
        """Mean load on the busiest stretch of the trip [persons]."""
        return float(max(self.load_up.max(), self.load_down.max())) / self.trips


def time_trips(building: Building, group: LiftGroup, orig, dest, offsets,
               timing: TripTiming | None = None) -> TripSample:
    """Time one car's trip per trial for given passengers, each trip on its own (no
    carry-over; see :class:`PassengerSampler`)."""
    timing = trip_timing(building, group) if timing is None else timing
    n = offsets.size - 1
    out = TripOut.empty(n)
    K.given_car_trips(np.ascontiguousarray(orig, dtype=np.int64),
                      np.ascontiguousarray(dest, dtype=np.int64),
                      np.ascontiguousarray(offsets, dtype=np.int64), timing, out)
    return TripSample(out.rtt_s, out.counts)


def chain_sums(sampler: PassengerSampler, timing: TripTiming, stream: TripStream,
               chain_trips: int = CHAIN_TRIPS, sample: TripOut | None = None,
               threaded: bool = True) -> ChainSums:
    """The chain kernel on one part of the stream: the one helper through which every
    caller runs it. With ``sample`` (a :class:`TripOut` as long as the part) each
    trip's own figures are written there too; ``threaded``: its chains split between
    the worker threads (off inside a worker)."""
    n = stream.offsets.size - 1
    sums = ChainSums.empty(max(1, -(-n // chain_trips)), sampler.n_levels)
    keep = sample is not None
    out = sample if keep else _NO_SAMPLE
    run_chains(chain_kernel, sums.trips.size, stream, sampler.alias, timing, int(chain_trips),
               sampler.lobby_origins_only, sums, keep, out, threaded=threaded)
    return sums


_NO_SAMPLE = TripOut(np.empty(0), np.empty((0, K.N_COUNTS), dtype=np.int64))


@dataclass(frozen=True)
class MonteCarloResult:
    """Monte Carlo estimates of one car's round trip at one mean load.

    ``passengers_per_trip`` is the offered load: the mean of the passengers
    arriving during a car's interval (its trip's new passengers). Those left
    behind wait for the next car, so the carried load (``passengers_carried``)
    falls short of the offered load only while the queue grows.
    """

    building: str
    cars: int
    rated_load_persons: int
    design_load_persons: float
    total_population: float
    passenger_model: str
    traffic_mix: str
    passengers_per_trip: float          # mean passengers offered (asked for)
    round_trip_time: Estimate
    stops: Estimate
    highest_reversal_floor: Estimate
    lowest_reversal_floor: Estimate
    passengers_waiting: Estimate        # waiting when a car leaves: new + carried over
    passengers_carried: Estimate
    peak_car_load: Estimate
    car_load_persons: float             # mean load on the busiest stretch
    left_behind_share: float
    left_behind_per_trip: float
    passengers_arrived: int
    passengers_still_waiting: int
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
    def offered_per_trip(self) -> float:
        """Mean passengers who arrived per trip (measured)."""
        return self.passengers_arrived / self.trials

    @property
    def handling_capacity_persons_5min(self) -> float:
        """300 s x passengers carried per trip / interval; 0 when nobody is carried (an empty
        car with zero door times has a zero round trip)."""
        carried = self.passengers_carried.mean
        return 300.0 * carried / self.interval_s if carried > 0 else 0.0

    @property
    def waiting_time_s(self) -> float | None:
        """The up-peak waiting-time estimate, for up-peak traffic the group carries."""
        if self.traffic_mix != "up-peak" or self.saturated:
            return None
        return average_waiting_time_s(self.interval_s, self.car_load_persons / self.rated_load_persons)

    def notes(self) -> list[str]:
        return [WAITING_TIME_NOTE] if self.waiting_time_s is None else []

    def to_dict(self) -> dict:
        hc = self.handling_capacity_persons_5min
        offered_hc = (300.0 * self.offered_per_trip / self.interval_s
                      if self.offered_per_trip > 0 else 0.0)
        return {
            "building": self.building,
            "mode": self.mode,
            "traffic_mix": self.traffic_mix,
            "passenger_model": self.passenger_model,
            "round_trip_time_s": self.round_trip_time.mean,
            "ci95_s": self.round_trip_time.ci95,
            "interval_s": self.interval_s,
            "passengers_per_trip": self.passengers_per_trip,
            "passengers_offered_per_trip": self.offered_per_trip,
            "passengers_carried_per_trip": self.passengers_carried.mean,
            "passengers_carried_ci95": self.passengers_carried.ci95,
            "passengers_waiting_per_trip": self.passengers_waiting.mean,
            "expected_stops": self.stops.mean,
            "expected_stops_ci95": self.stops.ci95,
            "highest_reversal_floor": self.highest_reversal_floor.mean,
            "highest_reversal_floor_ci95": self.highest_reversal_floor.ci95,
            "lowest_reversal_floor": self.lowest_reversal_floor.mean,
            "lowest_reversal_floor_ci95": self.lowest_reversal_floor.ci95,
            "car_load_persons": self.car_load_persons,
            "peak_car_load_persons": self.peak_car_load.mean,
            "peak_car_load_ci95": self.peak_car_load.ci95,
            "design_load_persons": self.design_load_persons,
            "handling_capacity_persons_5min": hc,
            "handling_capacity_pct_5min": 100.0 * hc / self.total_population,
            "offered_handling_capacity_pct_5min": 100.0 * offered_hc / self.total_population,
            "car_load_pct": 100.0 * self.car_load_persons / self.rated_load_persons,
            "average_waiting_time_s": self.waiting_time_s,
            "saturated": self.saturated,
            "demand_pct_5min": self.demand_pct_5min,
            "left_behind_share": self.left_behind_share,
            "left_behind_per_trip": self.left_behind_per_trip,
            "passengers_arrived": self.passengers_arrived,
            "passengers_carried": int(round(self.passengers_carried.mean * self.trials)),
            "passengers_still_waiting": self.passengers_still_waiting,
            "trials": self.trials,
            "iterations": self.iterations,
            "converged": self.converged,
            "trace": [dict(t) for t in self.trace],
            "notes": self.notes(),
            "seed": self.seed,
        }


WAITING_TIME_NOTE = ("The waiting time is left out: the up-peak waiting-time estimate holds only "
                     "for up-peak traffic at a load the group carries. The peak simulation gives "
                     "waiting times.")


def check_run_options(trials, ci_target_pct, max_trials, threads) -> None:
    if trials is not None and (not isinstance(trials, (int, np.integer)) or trials < 2):
        raise ValueError(f"trials = {trials!r}: must be a whole number >= 2")
    if not (ci_target_pct > 0 and math.isfinite(ci_target_pct)):
        raise ValueError(f"ci_target_pct = {ci_target_pct!r}: must be > 0 [%]")
    if not (isinstance(max_trials, (int, np.integer)) and max_trials >= 2):
        raise ValueError(f"max_trials = {max_trials!r}: must be a whole number >= 2")
    if threads is not None and not (isinstance(threads, int) and threads >= 1):
        raise ValueError(f"threads = {threads!r}: must be a whole number >= 1")


def check_passengers(passengers, group: LiftGroup, building: Building | None = None,
                     traffic: Traffic | None = None, what: str = "passengers") -> None:
    """A mean load per car between 0 and what a car can carry: the rated load on the
    busiest stretch of the trip (up-peak: the rated load). A higher one could never
    be carried: the queue would grow without end."""
    if not (passengers >= 0 and math.isfinite(passengers)):
        raise ValueError(f"{what} = {passengers!r}: must be a finite number >= 0")
    top = float(group.rated_load_persons)
    if building is not None and not is_uppeak(traffic):
        top = design_passengers(building, group, traffic) / group.capacity_factor
    if passengers > top * (1.0 + 1e-12):
        raise ValueError(f"{what} = {passengers:g}: must be at most {top:.4g} persons per trip, "
                         f"where the busiest stretch of the trip carries the rated load "
                         f"{group.rated_load_persons} (a car cannot carry more on average)")


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


def chunk_plan(trials: int | None, max_trials: int, chunk: int):
    """The chunk sizes of a run: exactly ``trials``, or whole chunks up to the cap."""
    return chunk_sizes(trials, chunk) if trials is not None else adaptive_sizes(chunk, max_trials)


def meets_target(estimates, ci_target_pct: float) -> bool:
    """Every estimate's 95 % half-width within ``ci_target_pct`` % of its mean."""
    return all(e.n > 1 and e.ci95 <= ci_target_pct / 100.0 * abs(e.mean) for e in estimates)


def simulate_trips(building: Building, group: LiftGroup, passengers: float, *,
                   traffic: Traffic | None = None, poisson: bool = True,
                   trials: int | None = None, ci_target_pct: float = 0.5,
                   max_trials: int = 2_000_000, seed: int = 0, threads: int | None = None,
                   keep_sample: bool = False) -> MonteCarloResult:
    """Monte Carlo estimate of one car's round trips at a mean of ``passengers`` per trip.

    Trips follow one another in chains (see :mod:`roundtrip.stream`): whoever a trip
    leaves behind waits for the next, so nobody is dropped, and the figures are
    running sums over chunks of bounded size.

    Parameters
    ----------
    passengers : float
        Mean passengers arriving per trip (per car interval) [persons], 0 ... rated load.
    traffic : Traffic, optional
        Traffic mix (its shares); None is up-peak (all incoming).
    poisson : bool
        Poisson passenger counts (True) or fixed counts (False; a real mean mixes
        the two nearest integers).
    trials : int, optional
        Run exactly this many trips instead of stopping on ``ci_target_pct``.
    ci_target_pct : float
        Stop, after a whole chunk, when the 95 % half-width of the RTT is at most this
        % of its mean.
    max_trials : int
        Trip cap of the adaptive run.
    seed : int
        Seed of the stream; the same seed gives the same numbers.
    threads : int, optional
        Numba threads for the kernels (default: numba's setting); results do
        not depend on it.
    keep_sample : bool
        Keep every trip's own figures (memory grows with the trips).
    """
    check_passengers(passengers, group, building, traffic)
    check_run_options(trials, ci_target_pct, max_trials, threads)
    sampler = PassengerSampler(building, traffic)
    timing = trip_timing(building, group)
    counts = count_table(passengers, poisson)
    sums = TripSums(sampler.n_levels)
    kept = []

    def work(stream):
        sample = TripOut.empty(stream.offsets.size - 1) if keep_sample else None
        return chain_sums(sampler, timing, stream, CHAIN_TRIPS, sample, threaded=False), sample

    def merge(results) -> bool:
        for part, sample in results:
            sums.add(part)
            if keep_sample:
                kept.append(sample)
        return trials is None and meets_target([sums.rtt()], ci_target_pct)

    with_threads(threads, lambda: run_stream(seed, counts, chunk_plan(trials, max_trials,
                                                                      CHUNK_TRIPS),
                                             PART_TRIPS, work, merge))
    sample = None
    if keep_sample:
        sample = TripSample(np.concatenate([s.rtt_s for s in kept]),
                            np.concatenate([s.counts for s in kept]))
    return _result(building, group, traffic, passengers, poisson, sums, seed, sample)


def _result(building, group, traffic, passengers, poisson, sums: TripSums, seed,
            sample) -> MonteCarloResult:
    carried = sums.column(K.BOARDED)
    car_load = sums.busiest_stretch_load
    grows = sums.arrivals > 0 and carried.mean * sums.trips < 0.99 * sums.arrivals
    # at a given load: saturated above the design load, or when the queue grows
    saturated = bool(car_load > group.design_load_persons * 1.001 or grows)
    return MonteCarloResult(
        building=building.name, cars=group.cars, rated_load_persons=group.rated_load_persons,
        design_load_persons=group.design_load_persons,
        total_population=building.total_population,
        passenger_model="poisson" if poisson else "fixed",
        traffic_mix=traffic_mix_name(traffic),
        passengers_per_trip=float(passengers),
        round_trip_time=sums.rtt(),
        stops=sums.column(K.STOPS),
        highest_reversal_floor=sums.column(K.HIGHEST),
        lowest_reversal_floor=sums.column(K.LOWEST),
        passengers_waiting=sums.column(K.OFFERED),
        passengers_carried=carried,
        peak_car_load=sums.column(K.PEAK_LOAD),
        car_load_persons=car_load,
        left_behind_share=sums.left_trips / sums.trips,
        left_behind_per_trip=sums.column(K.LEFT_BEHIND).mean,
        passengers_arrived=sums.arrivals, passengers_still_waiting=sums.waiting_end,
        trials=sums.trips, seed=int(seed), saturated=saturated, sample=sample)


def simulate_demand(building: Building, group: LiftGroup, traffic: Traffic, *,
                    poisson: bool = True, trials: int | None = None, ci_target_pct: float = 0.5,
                    max_trials: int = 2_000_000, seed: int = 0, threads: int | None = None,
                    max_iterations: int = 40) -> MonteCarloResult:
    """Monte Carlo round trips at the load the demand sets: the fixed point on carried
    passengers, C(P) = lambda RTT(P) / L.

    P is the offered load (passengers arriving per car interval) and C(P) the
    passengers carried per trip (below P only while the queue grows). The design
    load limits the car load, the mean load on the busiest stretch of the trip
    (up-peak: the passengers carried): first the load P_d at which it reaches the
    design load is found (:func:`roundtrip.classical.design_passengers`, corrected
    by the Monte Carlo for a mixed traffic). When the handling capacity carried
    there falls short of the demand the group is *saturated* and the figures are
    given at P_d. Otherwise, from the classical demand-mode estimate, repeat
    P <- P lambda RTT(P) / (L C(P)) (the same seed each time: common random
    numbers) until the RTT changes by less than its 95 % half-width.

    ``max_iterations`` (a whole number >= 1) caps the Monte Carlo steps after
    the classical start; when the last of them has not settled, the result is
    that last iterate with ``converged=False``.
    """
    if not (isinstance(max_iterations, (int, np.integer)) and not isinstance(max_iterations, bool)
            and max_iterations >= 1):
        raise ValueError(f"max_iterations = {max_iterations!r}: must be a whole number >= 1")
    lam = traffic.arrival_rate_persons_per_s(building)
    L = group.cars
    design = group.design_load_persons
    run = dict(traffic=traffic, poisson=poisson, trials=trials, ci_target_pct=ci_target_pct,
               max_trials=max_trials, seed=seed, threads=threads)
    p_top = design_passengers(building, group, traffic) / group.capacity_factor
    p_design = min(design_passengers(building, group, traffic), p_top)
    at_design = simulate_trips(building, group, p_design, **run)
    trace = [_step(p_design, at_design)]
    if not is_uppeak(traffic):
        for _ in range(4):           # the car load at P_d, as the Monte Carlo has it
            load = at_design.car_load_persons
            if load <= 0 or abs(load - design) <= 0.002 * design:
                break
            p_design = min(p_design * design / load, p_top)
            at_design = simulate_trips(building, group, p_design, **run)
            trace.append(_step(p_design, at_design))
    demand_5min = 300.0 * lam
    if at_design.handling_capacity_persons_5min < demand_5min:
        return replace(at_design, mode="demand", saturated=True, iterations=len(trace),
                       trace=tuple(trace), demand_pct_5min=traffic.arrival_rate_pct_5min)
    p = min(demand_calculation(building, group, traffic, poisson).passengers_per_trip, p_design)
    rtt = None
    result = None
    converged = False
    for _ in range(max_iterations):
        result = simulate_trips(building, group, p, **run)
        trace.append(_step(p, result))
        new = result.round_trip_time.mean
        if rtt is not None and abs(new - rtt) <= result.round_trip_time.ci95:
            converged = True
            break
        rtt = new
        carried = max(result.passengers_carried.mean, 1e-9)
        p = min(p * lam * new / (L * carried), p_design) if p > 0 else lam * new / L
    return replace(result, mode="demand", saturated=False, iterations=len(trace),
                   trace=tuple(trace), converged=converged,
                   demand_pct_5min=traffic.arrival_rate_pct_5min)


def _step(p: float, r: MonteCarloResult) -> dict:
    return {"passengers_per_trip": p, "passengers_carried_per_trip": r.passengers_carried.mean,
            "round_trip_time_s": r.round_trip_time.mean, "ci95_s": r.round_trip_time.ci95}
