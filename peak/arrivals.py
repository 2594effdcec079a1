"""Passenger arrivals over a peak period: Poisson processes per origin-destination cell.

Within each stretch of constant demand, passengers for the cell (i -> k) arrive
as a Poisson process of rate lambda p(i -> k), lambda the arrival rate
[persons/s] and p the origin-destination matrix (:func:`roundtrip.passengers.
od_matrix`). The superposition of independent Poisson processes is a Poisson
process of rate lambda whose arrivals are each, independently, of cell c with
probability p(c) (the superposition and colouring theorems, "Poisson
Processes", Oxford Studies in Probability, 1993); so each stretch is drawn as
a Poisson number of arrivals, placed uniformly at random within it (the order
statistics property of the Poisson process), each with a cell drawn from p by
the alias method.

The stream of one replication, from its own ``numpy.random.Generator``:
first, stretch by stretch (a stretch is a longest run of constant demand), the
count and then the arrival instants; then one uniform per passenger, in time
order, for their cell. The same generator state
gives the same arrivals on any machine and thread count.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from roundtrip.building import Building, Traffic

SLOT_S = 300.0                  # the 5-minute slot of demand figures [s]


@dataclass(frozen=True)
class Stretch:
    """A stretch of constant demand."""

    start_s: float
    end_s: float
    rate_persons_per_s: float


@dataclass(frozen=True)
class PeakPeriod:
    """The simulated period: a warm-up, the measured period, and a tail.

    Statistics are taken over passengers arriving in the measured period
    [``measure_start_s``, ``measure_end_s``); arrivals go on through the tail so
    that the last measured passengers see the traffic behind them, and the
    simulation runs until every passenger has been delivered.
    """

    stretches: tuple[Stretch, ...]
    measure_start_s: float
    measure_end_s: float

    @property
    def end_s(self) -> float:
        return self.stretches[-1].end_s

    @property
    def measured_s(self) -> float:
        return self.measure_end_s - self.measure_start_s

    def expected_passengers(self) -> float:
        return sum(s.rate_persons_per_s * (s.end_s - s.start_s) for s in self.stretches)


def peak_period(building: Building, traffic: Traffic, *, minutes: float | None = None,
                warmup_minutes: float = 5.0, tail_minutes: float = 5.0) -> PeakPeriod:
    """The period of a peak simulation.

    Demand is ``traffic.arrival_rate_pct_5min`` throughout, or, with
    ``traffic.profile_pct_5min``, the profile's rate in each successive 5-minute
    slot of the measured period (its last rate beyond its end); the warm-up runs
    at the measured period's first rate, the tail at its last.

    Parameters
    ----------
    minutes : float, optional
        Length of the measured period [min] (default 60, or the profile's length).
    warmup_minutes, tail_minutes : float
        Simulated before and after the measured period [min], not measured.
    """
    profile = traffic.profile_pct_5min
    if minutes is None:
        minutes = 60.0 if profile is None else 5.0 * len(profile)
    if not (minutes > 0 and math.isfinite(minutes)):
        raise ValueError(f"minutes = {minutes!r}: must be > 0 [min]")
    if not (warmup_minutes >= 0 and math.isfinite(warmup_minutes)):
        raise ValueError(f"warmup_minutes = {warmup_minutes!r}: must be >= 0 [min]")
    to_rate = building.total_population / 100.0 / SLOT_S          # % per 5 min -> persons/s
    w0, t_end = 60.0 * warmup_minutes, 60.0 * (warmup_minutes + minutes)
    if profile is None:
        rates = [traffic.arrival_rate_pct_5min]
    else:
        rates = list(profile)
    n_slots = math.ceil(round(60.0 * minutes / SLOT_S, 9))
    stretches = []
    if w0 > 0:
        stretches.append(Stretch(0.0, w0, rates[0] * to_rate))
    for k in range(n_slots):
        a = w0 + k * SLOT_S
        b = min(w0 + (k + 1) * SLOT_S, t_end)
        pct = rates[min(k, len(rates) - 1)] if profile is not None else rates[0]
        stretches.append(Stretch(a, b, pct * to_rate))
    tail_pct = rates[min(n_slots - 1, len(rates) - 1)] if profile is not None else rates[0]
    if tail_minutes > 0:
        stretches.append(Stretch(t_end, t_end + 60.0 * tail_minutes, tail_pct * to_rate))
    merged = [stretches[0]]                       # one stretch per constant rate
    for s in stretches[1:]:
        if s.rate_persons_per_s == merged[-1].rate_persons_per_s:
            merged[-1] = Stretch(merged[-1].start_s, s.end_s, s.rate_persons_per_s)
        else:
            merged.append(s)
    return PeakPeriod(tuple(merged), w0, t_end)


def draw_arrivals(rng: np.random.Generator, period: PeakPeriod, sampler):
    """One replication's arrivals: (times [s], ascending; destination floors).

    ``sampler`` is a :class:`roundtrip.montecarlo.PassengerSampler` of the
    building and its (incoming) traffic mix.
    """
    times = []
    for s in period.stretches:
        n = int(rng.poisson(s.rate_persons_per_s * (s.end_s - s.start_s)))
        times.append(np.sort(s.start_s + (s.end_s - s.start_s) * rng.random(n)))
    t = np.concatenate(times) if times else np.empty(0)
    _, dest = sampler.cells(rng.random(t.size))
    return np.ascontiguousarray(t), np.ascontiguousarray(dest, dtype=np.int64)
