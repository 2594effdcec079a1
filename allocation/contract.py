"""The allocation contract: what a rule is given and what it must return.

Both engines (the round-trip Monte Carlo of a group, :mod:`batchrounds`, and
the peak simulation in time, :mod:`peak`) and every rule import this module;
no rule imports an engine. There are two kinds of allocation:

**Batch rules** share a batch of registered passengers between the cars open
to allocation. A rule is one plain, numba-compatible function::

    rule(origins, destinations, cars, timing, table, scratch, car_out) -> None

origins, destinations : int64 arrays, one entry per passenger of the batch, in
    arrival order (floor 0 is the lobby)
cars : the car view (:data:`CAR_VIEW`), one record per car open to this batch,
    numbered 0 ... k - 1: ``room`` (the most passengers the car may take from
    this batch), ``load`` (passengers already committed to its next trip),
    ``up_stops`` and ``down_stops`` (masks of the floors it is already due to
    stop at, bit f for floor f), ``leaves_in_s`` (estimated seconds until it
    leaves the lobby) and ``opens_in_s`` (seconds until its doors are open at
    the lobby; 0 or less when they are open now). The round-trip Monte Carlo
    gives empty cars at the lobby (load 0, no stops, times 0) whose room is the
    number of passengers conventional control would give the car (their sum is
    the batch); the peak simulation gives the cars' real state.
timing : :class:`roundtrip.schedule.TripTiming`, what times a trip (flight
    table, stop overhead, transfer times, rated load)
table : int64 2-d array, the rule's own table made once per run by its
    ``prepare`` hook; row k is for k cars open (zeros when it has none)
scratch : int64 array, working space the rule may overwrite, at least
    :func:`scratch_size` (n, k) entries (so that a rule inside a kernel need
    not allocate memory for every batch)
car_out : int64 array, written by the rule: each passenger's car, or -1 for a
    passenger the rule leaves for a later batch

The engine only gives a rule a batch that fits (at most the sum of the cars'
room), so a rule places every passenger in a car with room.

**Immediate policies** allocate one passenger as they register, irrevocably::

    policy(origin, destination, cars, timing, table) -> car (int64)

with ``cars`` the view of every car of the group and ``table`` as above; the
returned car must have room (or -1 when none has).

The registry (:mod:`allocation.registry`) compiles each function once: a
batch rule into a ``numba.cfunc`` that allocates many batches per call
(:data:`BATCH_DRIVER_SIGNATURE`, :class:`RuleBatches`), a policy into a
``cfunc`` of :data:`POLICY_SIGNATURE`. One compiled engine kernel then serves
every rule, and the same function runs as plain Python in tests and diagrams.
"""
from __future__ import annotations

from typing import NamedTuple

import numba
import numpy as np
from numba import types

from roundtrip.schedule import (BOARDED, HIGHEST, LEFT_BEHIND, LOWEST, N_COUNTS, OFFERED,
                                PEAK_LOAD, STOPS, TripTiming)

__all__ = ["CAR_VIEW", "RuleBatches", "empty_cars", "scratch_size", "car_limit",
           "RULE_SCRATCH_FIXED", "BATCH_DRIVER_SIGNATURE", "POLICY_SIGNATURE", "TripTiming",
           "STOPS", "HIGHEST", "LOWEST", "BOARDED", "PEAK_LOAD", "LEFT_BEHIND", "OFFERED",
           "N_COUNTS"]

#: One car as a rule sees it (see the module notes).
CAR_VIEW = np.dtype([("room", np.int64), ("load", np.int64), ("up_stops", np.uint64),
                     ("down_stops", np.uint64), ("leaves_in_s", np.float64),
                     ("opens_in_s", np.float64)], align=True)

RULE_SCRATCH_FIXED = 2 * 64 + 2
"""Working space a rule gets beyond 4 entries per passenger and 5 per car."""


class RuleBatches(NamedTuple):
    """Many batches for one call of a compiled batch rule.

    Batch b's passengers are origins/destinations[offsets[b]:offsets[b+1]] and
    their cars are written to car_out[offsets[b]:offsets[b+1]]; its cars are
    cars[car_start[b]:car_stop[b]] (batches may share one view of identical cars).
    """

    origins: np.ndarray        # int64
    destinations: np.ndarray   # int64
    offsets: np.ndarray        # int64, batches + 1
    cars: np.ndarray           # CAR_VIEW
    car_start: np.ndarray      # int64, batches
    car_stop: np.ndarray       # int64, batches


def empty_cars(k: int, room: int) -> np.ndarray:
    """The view of ``k`` empty cars at the lobby, each with ``room`` places."""
    cars = np.zeros(int(k), dtype=CAR_VIEW)
    cars["room"] = room
    return cars


def scratch_size(batch: int, cars_open: int) -> int:
    """Entries of the working space a rule is given: 4 n + 5 cars + 2 x 64 + 2."""
    return 4 * batch + 5 * cars_open + RULE_SCRATCH_FIXED


def car_limit(batch: int, cars_open: int, rated_load_persons: int) -> int:
    """An equal per-car limit for a batch: min(rated load, ceil(batch / cars open)) (for
    plain calls of a rule on one batch, in tests and examples; the round-trip Monte
    Carlo gives each car its own room, see :mod:`batchrounds._kernel`)."""
    return min(rated_load_persons, -(-batch // cars_open))


_CAR_ARRAY = types.Array(numba.from_dtype(CAR_VIEW), 1, "C")
_INTS = types.int64[::1]
_TIMING = types.NamedTuple((types.float64[:, ::1], types.float64, types.float64, types.float64,
                            types.float64, types.int64), TripTiming)
_TABLE = types.int64[:, ::1]

#: The compiled form of a batch rule: many batches per call (see :class:`RuleBatches`).
BATCH_DRIVER_SIGNATURE = types.void(
    types.NamedTuple((_INTS, _INTS, _INTS, _CAR_ARRAY, _INTS, _INTS), RuleBatches), _TIMING, _TABLE,
    _INTS, _INTS)
#: The compiled form of an immediate policy.
POLICY_SIGNATURE = types.int64(types.int64, types.int64, _CAR_ARRAY, _TIMING, _TABLE)
