"""What a destination-control figure rests on: its *basis*, stated wherever it appears.

A figure for destination control is one of three kinds, never presented as another:

``peak``
    Simulated in time by the peak simulation (:mod:`peak.simulation`): passengers
    arrive one by one, are given a car when they register, and cars leave when
    loaded or when their lobby dwell has run. The answer.
``realisable-bound``
    The round-trip Monte Carlo of batches (:mod:`batchrounds.montecarlo`) with
    :data:`REALISABLE_CARS_OPEN` cars sharing each allocation (the car loading at the
    lobby and the next one, the value argued in ``docs/rules.md``), every passenger
    of the batch known at once: an upper bound a real control may approach.
``ideal-bound``
    The same with more cars open than that, up to every car of the group, each
    round known in full before any car leaves: an upper bound no real control
    reaches.

Conventional control needs no basis: its round-trip figures are not bounds.
"""
from __future__ import annotations

PEAK = "peak"
REALISABLE = "realisable-bound"
IDEAL = "ideal-bound"
BASES = (PEAK, REALISABLE, IDEAL)

#: Cars open to one allocation in the realisable bound (see ``docs/rules.md``).
REALISABLE_CARS_OPEN = 2

WORDS = {PEAK: "simulated in time (peak simulation)",
         REALISABLE: f"realisable round-trip bound ({REALISABLE_CARS_OPEN} cars open to each "
                     f"allocation)",
         IDEAL: "ideal round-trip bound (every car open, each round known in full)"}


def round_trip_basis(cars_open: int, cars: int) -> str:
    """The basis of a round-trip batch figure of destination grouping with ``cars_open``
    of ``cars`` cars open: realisable up to :data:`REALISABLE_CARS_OPEN`, else ideal
    (it assumes more cars within reach of one registration than a real group has)."""
    return REALISABLE if min(cars_open, cars) <= REALISABLE_CARS_OPEN else IDEAL


def label(basis: str) -> str:
    """The words for ``basis`` in a table, chart or report."""
    if basis not in WORDS:
        raise ValueError(f"basis = {basis!r}: must be one of {', '.join(BASES)}")
    return WORDS[basis]
