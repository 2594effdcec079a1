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
* **Chunks and parts.** Chains are drawn in chunks of :data:`CHUNK_TRIPS`
  trips (a group: :data:`CHUNK_ROUNDS` rounds), each of four parts of
  :data:`PART_TRIPS` trips (:data:`PART_ROUNDS` rounds); a run takes chunks
  0, 1, 2, ... until it has its trials (the last chunk cut to the remainder,
  parts filled in order) or meets its interval target, checked after each
  chunk. Part p of chunk j is drawn by its own generator,
  ``Generator(PCG64(SeedSequence(seed, spawn_key=(j, p))))``: first one
  uniform per trip for the counts (none for a whole fixed P), the counts by
  inversion of their distribution (:func:`count_table`), then one uniform
  per passenger (``Generator.random``). A part never depends on another, so
  parts may be drawn ahead of time, or on several threads at once, each
  thread drawing and timing its own part (:func:`run_stream`), without
  changing a number.

Memory is bounded by the chunk: estimates keep running sums, never a trip's
own figures unless a caller asks for the sample.
"""
from __future__ import annotations

import math
import threading
from typing import NamedTuple

import numpy as np

from .schedule import TripStream

#: Trips of one car's chain (one-car Monte Carlo).
CHAIN_TRIPS = 1024
#: Trips per part of a chunk, each drawn by its own generator: 16 chains.
PART_TRIPS = 16 * CHAIN_TRIPS
#: Trips per chunk (one-car Monte Carlo): 4 parts; estimates are checked after each chunk.
CHUNK_TRIPS = 4 * PART_TRIPS
#: Rounds of a group's chain (group Monte Carlo).
CHAIN_ROUNDS = 256
#: Rounds per part of a chunk: 4 chains.
PART_ROUNDS = 4 * CHAIN_ROUNDS
#: Rounds per chunk (group Monte Carlo): 4 parts.
CHUNK_ROUNDS = 4 * PART_ROUNDS


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


def part_generator(seed: int, chunk: int, part: int) -> np.random.Generator:
    """The generator of part ``part`` of chunk ``chunk`` of the run seeded ``seed``."""
    return np.random.Generator(np.random.PCG64(
        np.random.SeedSequence(seed, spawn_key=(chunk, part))))


def chunk_sizes(total: int, chunk: int) -> list[int]:
    """Sizes of the chunks that make ``total``: whole chunks, then the remainder."""
    whole, rest = divmod(int(total), int(chunk))
    return [chunk] * whole + ([rest] if rest else [])


class Buffer:
    """A reusable array for a part's uniforms, so that drawing touches no new memory
    (fresh pages cost a tenth of a part's drawing); it grows when a part needs more."""

    def __init__(self):
        self.array = np.empty(0)

    def take(self, n: int) -> np.ndarray:
        if self.array.size < n:
            self.array = np.empty(int(n * 1.25) + 1024)
        return self.array[:n]


def draw_part(seed: int, chunk: int, part: int, trips: int, counts: CountTable,
              buffer: Buffer | None = None) -> TripStream:
    """Part ``part`` of chunk ``chunk`` of the stream: ``trips`` trips' counts, then their
    uniforms (into ``buffer`` when given: the stream is then valid until its next use)."""
    from ._chain_kernel import counts_by_inversion
    rng = part_generator(seed, chunk, part)
    if counts.poisson:
        n = np.empty(trips, np.int64)
        counts_by_inversion(rng.random(trips), counts.cdf, counts.guide, n)
    else:
        n = np.full(trips, counts.fixed_base, np.int64)
        if counts.fixed_fraction > 0:
            n += rng.random(trips) < counts.fixed_fraction
    offsets = np.zeros(trips + 1, np.int64)
    np.cumsum(n, out=offsets[1:])
    total = int(offsets[-1])
    if buffer is None:
        return TripStream(rng.random(total), offsets)
    uniforms = buffer.take(total)
    rng.random(out=uniforms)
    return TripStream(uniforms, offsets)


def adaptive_sizes(chunk: int, max_units: int):
    """Whole chunks up to ``max_units`` (the last cut to fit): the sizes of a run that
    stops on its interval target."""
    done = 0
    while done < max_units:
        size = min(chunk, max_units - done)
        done += size
        yield size


def part_sizes(units: int, part: int) -> list[int]:
    """A chunk of ``units`` as its parts: whole parts, then the remainder."""
    return chunk_sizes(units, part)


def run_stream(seed: int, counts: CountTable, sizes, part_units: int, work, merge,
               trips_per_unit: int = 1) -> None:
    """Chunks 0, 1, 2, ... of ``sizes`` units, each cut into parts of ``part_units``.

    ``work(stream)`` times one part and returns its figures; ``merge(results)`` takes
    a chunk's results in part order and returns True to stop. With one thread the
    next part is drawn on a helper thread while this one is timed; with T threads
    each of T workers draws and times its own parts, so that no more threads are
    busy than asked for. Either way the numbers are the same.
    """
    from .threads import pool, thread_count
    threads = thread_count()

    def chunk_parts():
        for j, units in enumerate(sizes):
            yield j, part_sizes(units, part_units)

    local = threading.local()

    def draw(j, p, n, buffer=None):
        if buffer is None:                      # each worker reuses its own buffer
            buffer = getattr(local, "buffer", None)
            if buffer is None:
                buffer = local.buffer = Buffer()
        return draw_part(seed, j, p, n * trips_per_unit, counts, buffer)

    if threads == 1:
        def flat():
            for j, parts in chunk_parts():
                for p, n in enumerate(parts):
                    yield j, p, n, p == len(parts) - 1

        helper = _prefetcher()
        buffers = (Buffer(), Buffer())             # one being drawn, one being timed
        items = flat()
        item = next(items, None)
        turn = 0
        pending = helper.submit(draw, *item[:3], buffers[turn]) if item is not None else None
        results = []
        while item is not None:
            stream = pending.result()
            last = item[3]
            item = next(items, None)              # the next part, drawn while this one runs
            turn = 1 - turn
            pending = (helper.submit(draw, *item[:3], buffers[turn]) if item is not None
                       else None)
            results.append(work(stream))
            if last:
                if merge(results):
                    return
                results = []
        return
    workers = pool()
    for j, parts in chunk_parts():
        futures = [workers.submit(lambda j=j, p=p, n=n: work(draw(j, p, n)))
                   for p, n in enumerate(parts)]
        if merge([f.result() for f in futures]):
            return


_PREFETCH = None


def _prefetcher():
    """One helper thread that draws the next part while the kernel times this one
    (numpy releases the GIL while it fills arrays, the kernels while they run)."""
    global _PREFETCH
    if _PREFETCH is None:
        from concurrent.futures import ThreadPoolExecutor
        _PREFETCH = ThreadPoolExecutor(1, thread_name_prefix="liftsort-stream")
    return _PREFETCH
