"""The random stream of a Monte Carlo run, chunk by chunk: its definition.

Both round-trip Monte Carlo engines (one car, :mod:`roundtrip.montecarlo`; a
group, :mod:`batchrounds.montecarlo`) read their passengers from this stream,
and its chunking is part of what a seed means:

* **Trips.** The stream is a sequence of car trips. Trip t's new passengers
  are those arriving during its interval: a count (Poisson with mean P, the
  usual assumption of arrivals at random; or fixed, P or, for a real P, one of
  the two nearest integers with mean P), then one uniform each, in arrival
  order, that picks the origin and destination (:mod:`roundtrip.passengers`).
  A group round of L cars is L consecutive trips, one per car in departure
  order.
* **Chains.** Consecutive trips form chains of :data:`CHAIN_TRIPS` trips (a
  group: :data:`CHAIN_ROUNDS` rounds). A chain starts with nobody waiting;
  within it whoever a car leaves behind waits for the next car. Chains are
  independent, which is what lets them run on any number of threads with the
  same result.
* **Chunks.** Chains are drawn in chunks of :data:`CHUNK_TRIPS` trips (a group:
  :data:`CHUNK_ROUNDS` rounds); a run takes chunks 0, 1, 2, ... until it has
  its trials (the last chunk cut to the remainder) or meets its interval
  target. Chunk j is drawn by its own generator,
  ``Generator(PCG64(SeedSequence(seed, spawn_key=(j,))))``: first one uniform
  per trip for the counts (none for a whole fixed P), the counts by
  inversion of their distribution (:func:`count_table`), then one uniform
  per passenger (``Generator.random``). A chunk never depends on another, so
  chunks may be drawn ahead of time, or two at once, without changing a
  number.

Memory is bounded by the chunk: estimates keep running sums, never a trip's
own figures unless a caller asks for the sample.
"""
from __future__ import annotations

import math
from typing import NamedTuple

import numpy as np

from .schedule import TripStream

#: Trips of one car's chain (one-car Monte Carlo).
CHAIN_TRIPS = 1024
#: Trips per chunk (one-car Monte Carlo): 32 chains.
CHUNK_TRIPS = 32 * CHAIN_TRIPS
#: Rounds of a group's chain (group Monte Carlo).
CHAIN_ROUNDS = 256
#: Rounds per chunk (group Monte Carlo): 16 chains.
CHUNK_ROUNDS = 16 * CHAIN_ROUNDS


class CountTable(NamedTuple):
    """How a uniform becomes a passenger count (see :func:`count_table`)."""

    cdf: np.ndarray            # float64: Pr(count <= k), the last entry 1
    guide: np.ndarray          # int64: the count at u = g / len(guide)
    fixed_base: int            # fixed counts: floor(P)
    fixed_fraction: float      # fixed counts: P - floor(P)
    poisson: bool


def count_table(mean_passengers: float, poisson: bool) -> CountTable:
    """The count distribution of one trip's new passengers.

    Poisson: the CDF of Poisson(P) from its probabilities
    exp(k ln P - P - ln k!), up to where 1 - CDF is below 1e-16, with a guide
    table of 256 entries (inversion by guide table, a standard method of
    discrete random variate generation). Fixed: floor(P), plus one when the
    trip's uniform is below P - floor(P).
    """
    P = float(mean_passengers)
    if not (P >= 0 and math.isfinite(P)):
        raise ValueError(f"passengers = {mean_passengers!r}: must be a finite number >= 0")
    base = math.floor(P)
    if not poisson:
        return CountTable(np.ones(1), np.zeros(1, np.int64), base, P - base, False)
    if P == 0:
        cdf = np.ones(1)
    else:
        top = int(P + 12.0 * math.sqrt(P) + 30)
        k = np.arange(top + 1)
        log_pmf = k * math.log(P) - P - np.array([math.lgamma(x + 1.0) for x in k])
        cdf = np.cumsum(np.exp(log_pmf))
        cut = int(np.searchsorted(cdf, 1.0 - 1e-16)) + 1
        cdf = cdf[:min(cut, top + 1)].copy()
        cdf[-1] = 1.0
    G = 256
    guide = np.searchsorted(cdf, np.arange(G) / G, side="left").astype(np.int64)
    return CountTable(cdf, np.minimum(guide, cdf.size - 1), base, 0.0, True)


def chunk_generator(seed: int, chunk: int) -> np.random.Generator:
    """The generator of chunk ``chunk`` of the run seeded ``seed``."""
    return np.random.Generator(np.random.PCG64(np.random.SeedSequence(seed, spawn_key=(chunk,))))


def chunk_sizes(total: int, chunk: int) -> list[int]:
    """Sizes of the chunks that make ``total``: whole chunks, then the remainder."""
    whole, rest = divmod(int(total), int(chunk))
    return [chunk] * whole + ([rest] if rest else [])


def draw_chunk(seed: int, chunk: int, trips: int, counts: CountTable) -> TripStream:
    """Chunk ``chunk`` of the stream: ``trips`` trips' counts, then their uniforms."""
    from ._chain_kernel import counts_by_inversion
    rng = chunk_generator(seed, chunk)
    if counts.poisson:
        n = np.empty(trips, np.int64)
        counts_by_inversion(rng.random(trips), counts.cdf, counts.guide, n)
    else:
        n = np.full(trips, counts.fixed_base, np.int64)
        if counts.fixed_fraction > 0:
            n += rng.random(trips) < counts.fixed_fraction
    offsets = np.zeros(trips + 1, np.int64)
    np.cumsum(n, out=offsets[1:])
    return TripStream(rng.random(int(offsets[-1])), offsets)


_PREFETCH = None


def _prefetcher():
    """One helper thread that draws the next chunk while the kernels time this one
    (numpy releases the GIL while it fills arrays, the kernels while they run)."""
    global _PREFETCH
    if _PREFETCH is None:
        from concurrent.futures import ThreadPoolExecutor
        _PREFETCH = ThreadPoolExecutor(1, thread_name_prefix="liftsort-stream")
    return _PREFETCH


def adaptive_sizes(chunk: int, max_units: int):
    """Whole chunks up to ``max_units`` (the last cut to fit): the sizes of a run that
    stops on its interval target."""
    done = 0
    while done < max_units:
        size = min(chunk, max_units - done)
        done += size
        yield size


def chunks(seed: int, counts: CountTable, sizes, trips_per_unit: int = 1):
    """Chunks 0, 1, 2, ... of the stream as (units, :class:`TripStream`), in order.

    ``sizes`` gives each chunk's units (trips, or rounds of ``trips_per_unit`` trips);
    chunk j + 1 is drawn while chunk j is used. The caller may stop at any chunk.
    """
    pool = _prefetcher()
    it = iter(enumerate(sizes))
    item = next(it, None)
    future = (pool.submit(draw_chunk, seed, item[0], item[1] * trips_per_unit, counts)
              if item is not None else None)
    while future is not None:
        units = item[1]
        stream = future.result()
        item = next(it, None)
        future = (pool.submit(draw_chunk, seed, item[0], item[1] * trips_per_unit, counts)
                  if item is not None else None)
        yield units, stream
