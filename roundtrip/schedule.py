"""The trip schedule: one car's round trip, stop by stop, on the real floor levels.

This is the bottom of the house that both engines stand on: the round-trip
Monte Carlo sums a trip into its round-trip time (:func:`car_trip`), and the
peak simulation places the same trip in time, stop by stop
(:func:`trip_schedule`). The model is written down, with a trip worked by
hand, in ``docs/trip_model.md``; :func:`schedule_of` is the plain Python way
to look at one trip.

Records
-------
:class:`TripTiming`
    What times a trip: the flight-time table between every pair of floors, the
    stop overhead, the door opening time, the transfer times and the rated
    load. Made once per building and group by :func:`trip_timing`.
:class:`TripStream`
    The random stream of many trips: one uniform per passenger, trip t's
    passengers at ``uniforms[offsets[t]:offsets[t + 1]]``.
:class:`TripOut`
    Per-trip results: round-trip time [s] and the integer counts (columns
    :data:`STOPS`, :data:`HIGHEST`, :data:`LOWEST`, :data:`BOARDED`,
    :data:`PEAK_LOAD`, :data:`LEFT_BEHIND`, :data:`OFFERED`).

The compiled functions (:func:`car_trip` and its up-peak form
:func:`lobby_trip_of_mask`, :func:`trip_schedule`, the alias draw
:func:`draw_cell` and :func:`sample_cells` (and the up-peak form of the draw,
:func:`draw_destination` on the columns of :func:`destination_table`), :func:`new_scratch`,
:func:`new_schedule`) live in :mod:`roundtrip._trip_kernel` and are public
here; they can be called from other compiled code and, slowly, from Python.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import NamedTuple

import numpy as np

from ._trip_kernel import (BOARDED, HIGHEST, LEFT_BEHIND, LOWEST, N_COUNTS, OFFERED, PEAK_LOAD,
                           STOPS, ScheduleOut, TripScratch, car_trip, destination_table,
                           draw_cell, draw_destination, lobby_trip_of_mask, new_schedule,
                           new_scratch, sample_cells, trip_schedule, trip_time_s)
from .building import Building, LiftGroup
from .kinematics import flight_table_s

__all__ = ["TripTiming", "TripStream", "TripOut", "TripSchedule", "trip_timing", "schedule_of",
           "car_trip", "lobby_trip_of_mask", "trip_schedule", "trip_time_s", "new_scratch",
           "new_schedule", "sample_cells", "draw_cell", "destination_table", "draw_destination",
           "TripScratch", "ScheduleOut", "STOPS", "HIGHEST", "LOWEST", "BOARDED", "PEAK_LOAD",
           "LEFT_BEHIND", "OFFERED", "N_COUNTS", "COUNT_NAMES"]

#: Names of the count columns, in column order.
COUNT_NAMES = ("stops", "highest", "lowest", "boarded", "peak_load", "left_behind", "offered")


class TripTiming(NamedTuple):
    """What times a trip (see :func:`trip_timing`). Units in the names."""

    flight_s: np.ndarray          # (floors + 1) x (floors + 1) ideal flight times [s]
    stop_overhead_s: float        # door open + door close + start delay [s]
    door_open_s: float            # [s]
    transfer_in_s: float          # per boarding passenger [s]
    transfer_out_s: float         # per alighting passenger [s]
    rated_load: int               # persons the car may carry


class TripStream(NamedTuple):
    """Uniforms of many trips: trip t's passengers are uniforms[offsets[t]:offsets[t+1]]."""

    uniforms: np.ndarray          # float64
    offsets: np.ndarray           # int64, trials + 1


class TripOut(NamedTuple):
    """Per-trip results written by the kernels."""

    rtt_s: np.ndarray             # float64, one per trip [s]
    counts: np.ndarray            # int64, trips x N_COUNTS

    @classmethod
    def empty(cls, trips: int) -> "TripOut":
        return cls(np.empty(trips), np.empty((trips, N_COUNTS), dtype=np.int64))


def trip_timing(building: Building, group: LiftGroup, *, rated_load: int | None = None,
                flight_s: np.ndarray | None = None) -> TripTiming:
    """The timing record of ``group``'s cars in ``building``.

    ``rated_load`` overrides the group's rated load (a rule may time a car at
    its limit); ``flight_s`` reuses a flight table already made.
    """
    table = flight_table_s(building.levels_m, group.rated_speed_mps, group.acceleration_mps2,
                           group.jerk_mps3) if flight_s is None else flight_s
    return TripTiming(np.ascontiguousarray(table, dtype=np.float64), float(group.stop_overhead_s),
                      float(group.door_open_s), float(group.transfer_in_s),
                      float(group.transfer_out_s),
                      int(group.rated_load_persons if rated_load is None else rated_load))


@dataclass(frozen=True)
class TripSchedule:
    """One trip, stop by stop (from :func:`schedule_of`). Times in seconds from the
    start of the lobby stop; entry 0 is the start at the lobby, the last entry the
    return to it."""

    stop_floors: tuple[int, ...]
    arrive_s: tuple[float, ...]
    depart_s: tuple[float, ...]
    boarded: tuple[int, ...]
    alighted: tuple[int, ...]
    board_stop: tuple[int, ...]        # per passenger, -1 left behind
    alight_stop: tuple[int, ...]       # per passenger, -1 left behind
    alight_s: tuple[float, ...]        # per passenger, nan left behind
    round_trip_time_s: float

    @property
    def stops(self) -> int:
        """Stops above the lobby, S."""
        return len(self.stop_floors) - 2


def schedule_of(passengers, building: Building, group: LiftGroup) -> TripSchedule:
    """The schedule of one car's trip with ``passengers``, a list of (origin, destination)
    in arrival order (plain Python; see :func:`trip_schedule` for the model)."""
    orig = np.array([p[0] for p in passengers], dtype=np.int64).reshape(-1)
    dest = np.array([p[1] for p in passengers], dtype=np.int64).reshape(-1)
    top = building.floors
    if np.any((orig < 0) | (orig > top) | (dest < 0) | (dest > top) | (orig == dest)):
        raise ValueError(f"passengers = {passengers!r}: each must be (origin, destination) "
                         f"of two different floors 0 ... {top}")
    timing = trip_timing(building, group)
    n_levels = top + 1
    out = new_schedule(orig.size, n_levels)
    entries, rtt = trip_schedule(orig, dest, orig.size, timing, new_scratch(orig.size, n_levels), out)
    n = orig.size
    return TripSchedule(
        stop_floors=tuple(int(x) for x in out.stop_floor[:entries]),
        arrive_s=tuple(float(x) for x in out.arrive_s[:entries]),
        depart_s=tuple(float(x) for x in out.depart_s[:entries]),
        boarded=tuple(int(x) for x in out.boarded[:entries]),
        alighted=tuple(int(x) for x in np.bincount(out.alight_stop[:n][out.alight_stop[:n] >= 0],
                                                   minlength=entries)[:entries]),
        board_stop=tuple(int(x) for x in out.board_stop[:n]),
        alight_stop=tuple(int(x) for x in out.alight_stop[:n]),
        alight_s=tuple(float(x) for x in out.alight_s[:n]),
        round_trip_time_s=float(rtt))
