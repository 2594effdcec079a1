"""The building, the lift group and the traffic they serve.

Plain, immutable records. They hold validated parameters and derive the
quantities every estimator needs (floor levels, population shares, the
arrival rate in persons per second); they contain no traffic model.

Floor numbering: the main lobby is floor 0; the served floors above it are
1 ... N. The level of served floor k above the lobby is

    level_k = express_m + sum(floor_rises_m[0:k])

so ``floor_rises_m[k-1]`` is the rise into floor k from the floor below and
``express_m`` is an unserved rise between the lobby and floor 1 (an express
zone).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np


@dataclass(frozen=True)
class Building:
    """A single-entrance building served from its main lobby.

    Parameters
    ----------
    name : str
        Free text shown in outputs.
    floor_rises_m : tuple of float
        Rise into each served floor from the one below [m], length N.
    populations : tuple of float
        Persons on each served floor [persons], length N.
    express_m : float
        Unserved rise between the lobby and the first served floor [m].
    """

    name: str
    floor_rises_m: tuple[float, ...]
    populations: tuple[float, ...]
    express_m: float = 0.0

    @property
    def floors(self) -> int:
        """Number of served floors above the lobby, N."""
        return len(self.floor_rises_m)

    @property
    def levels_m(self) -> np.ndarray:
        """Level of floors 0 ... N above the lobby [m] (index 0 is the lobby)."""
        rises = np.asarray(self.floor_rises_m, dtype=float)
        levels = np.empty(self.floors + 1)
        levels[0] = 0.0
        levels[1:] = self.express_m + np.cumsum(rises)
        return levels

    @property
    def total_population(self) -> float:
        """Persons on all served floors, U [persons]."""
        return float(sum(self.populations))

    @property
    def population_shares(self) -> np.ndarray:
        """Share of the building population on each served floor, U_i / U [-]."""
        pops = np.asarray(self.populations, dtype=float)
        return pops / pops.sum()

    @property
    def average_interfloor_height_m(self) -> float:
        """Average rise between served floors, d_f = (level_N - express) / N [m]."""
        return float(sum(self.floor_rises_m)) / self.floors


@dataclass(frozen=True)
class LiftGroup:
    """A group of identical cars serving every floor of the building.

    All times in seconds, speeds in m/s, acceleration in m/s^2, jerk in m/s^3.
    ``lobby_dwell_s`` is how long a car waits at the main lobby, from its first
    passenger's boarding, before it leaves with fewer than its departure load
    (the time-based peak simulation uses it). ``times_scale_with_car_size``: when a
    sizing search tries other car sizes, their door and transfer times scale with the
    standard door width of the car size (see ``experiments.sizing.candidate_group``);
    otherwise every candidate keeps these times.
    """

    cars: int
    rated_load_persons: int
    rated_speed_mps: float
    acceleration_mps2: float
    jerk_mps3: float
    door_open_s: float
    door_close_s: float
    start_delay_s: float = 0.0
    transfer_in_s: float = 1.2
    transfer_out_s: float = 1.2
    capacity_factor: float = 0.8
    lobby_dwell_s: float = 10.0
    times_scale_with_car_size: bool = False

    @property
    def design_load_persons(self) -> float:
        """Design car load, capacity_factor x rated load [persons]."""
        return self.capacity_factor * self.rated_load_persons

    @property
    def departure_load_persons(self) -> int:
        """Passengers with whom a car leaves the lobby at once: the design load rounded up,
        ceil(capacity_factor x rated load) [persons] (at least 1)."""
        return max(1, math.ceil(round(self.capacity_factor * self.rated_load_persons, 9)))

    @property
    def stop_overhead_s(self) -> float:
        """Door and start time spent at every stop, t_o + t_c + t_sd [s]."""
        return self.door_open_s + self.door_close_s + self.start_delay_s

    @property
    def transfer_s(self) -> float:
        """Mean single-passenger transfer time t_p = (t_in + t_out) / 2 [s]."""
        return 0.5 * (self.transfer_in_s + self.transfer_out_s)


@dataclass(frozen=True)
class Traffic:
    """Design demand and traffic mix.

    Parameters
    ----------
    arrival_rate_pct_5min : float
        Persons arriving in five minutes, % of the building population: the design
        demand (with a profile, its highest five minutes unless given).
    incoming, outgoing, interfloor : float
        Shares of the traffic mix (sum to 1).
    profile_pct_5min : tuple of float, optional
        The arrival rate of each successive 5-minute slot of the peak period [% of
        population per 5 min]; the time-based peak simulation uses it in place of the
        constant rate.
    """

    arrival_rate_pct_5min: float
    incoming: float = 1.0
    outgoing: float = 0.0
    interfloor: float = 0.0
    profile_pct_5min: tuple[float, ...] | None = None

    def arrival_rate_persons_per_s(self, building: Building) -> float:
        """Arrival rate lambda = pct/100 x U / 300 s [persons/s]."""
        return self.arrival_rate_pct_5min / 100.0 * building.total_population / 300.0


@dataclass(frozen=True)
class Scenario:
    """What an input file describes: a building, its lift group, its demand."""

    building: Building
    group: LiftGroup
    traffic: Traffic | None = None
    source: str = field(default="", compare=False)
