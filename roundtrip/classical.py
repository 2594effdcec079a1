"""The classical up-peak round-trip-time calculation.

Pure functions, one published formula each, every input an explicit argument;
:func:`uppeak_calculation` and :func:`demand_calculation` chain them for a
:class:`~roundtrip.building.Building` and :class:`~roundtrip.building.LiftGroup`.

The round-trip time of one car in up-peak (all passengers board at the main
lobby and travel up) is

    RTT = 2 H t_v + 2 d_x / v + (S + 1) t_s + 2 P t_p                   (1)

with S the expected number of stops above the lobby, H the expected highest
reversal floor, t_v = d_f / v the time to pass one average floor d_f at rated
speed v, d_x the express-zone rise (the extra distance run at rated speed each
way; the term vanishes without an express zone), t_s = t_f(d_f) - t_v + t_o +
t_c + t_sd the time lost at each stop (flight-time overhead of a one-floor
jump plus door opening, door closing and start delay), and t_p the mean
single-passenger transfer time.

Assumptions (those of the standard): P passengers per trip, destinations
independent with probability U_i / U; rated speed reached in a one-floor jump
(so that t_f(k d_f) = k t_v + t_f(d_f) - t_v); equal floor heights (the
average d_f stands in for unequal ones); cars loaded at random.

References
----------
.. [1] ISO 8100-32:2020, Lifts for the transport of persons and goods -
   Part 32: Planning and selection of passenger lifts to be installed in
   office, hotel and residential buildings, clause on the up-peak round-trip
   time calculation (equations for S, H and RTT; clause number from memory).
.. [2] CIBSE Guide D: Transportation systems in buildings, Chartered
   Institution of Building Services Engineers, 2015, chapter on traffic
   planning and selection of equipment (up-peak RTT equation, S and H for
   unequal populations, waiting-time estimate; from memory).
"""
from __future__ import annotations

import math
from dataclasses import asdict, dataclass

import numpy as np

from .building import Building, LiftGroup, Traffic
from .kinematics import flight_time_s, regime_boundaries_m


# ---------------------------------------------------------------- S and H
def expected_stops(shares, passengers: float) -> float:
    """Expected number of stops above the lobby, fixed passengers per trip.

    S = sum_i [1 - (1 - U_i/U)^P]                                  [1], [2]

    Parameters
    ----------
    shares : array_like
        Population share of each served floor, U_i / U [-], summing to 1.
    passengers : float
        Passengers per trip P [persons], >= 0.
    """
    u = np.asarray(shares, dtype=float)
    return float(np.sum(1.0 - (1.0 - u) ** passengers))


def highest_reversal_floor(shares, passengers: float) -> float:
    """Expected highest reversal floor, fixed passengers per trip.

    H = N - sum_{j=1}^{N-1} (sum_{i<=j} U_i/U)^P                   [1], [2]

    Valid for P >= 1 (the car always goes up); for real P it interpolates.
    """
    u = np.asarray(shares, dtype=float)
    cum = np.cumsum(u)[:-1]
    return float(len(u) - np.sum(np.clip(cum, 0.0, 1.0) ** passengers))


def expected_stops_poisson(shares, mean_passengers: float) -> float:
    """Expected stops when passengers per trip are Poisson with mean P.

    E[(1 - u)^X] = exp(-P u) for X ~ Poisson(P), so
    S = sum_i [1 - exp(-P U_i/U)].
    """
    u = np.asarray(shares, dtype=float)
    return float(np.sum(-np.expm1(-mean_passengers * u)))


def highest_reversal_floor_poisson(shares, mean_passengers: float) -> float:
    """Expected highest reversal floor, Poisson passengers per trip.

    H = sum_{j=0}^{N-1} Pr(highest destination > j)
      = N - sum_{j=0}^{N-1} exp(-P (1 - F_j)),  F_j = sum_{i<=j} U_i/U, F_0 = 0.

    The j = 0 term, exp(-P), is the chance of a trip with no passenger
    (H = 0 for that trip): the zero-passenger term.
    """
    u = np.asarray(shares, dtype=float)
    cum = np.concatenate(([0.0], np.cumsum(u)[:-1]))
    return float(len(u) - np.sum(np.exp(-mean_passengers * np.clip(1.0 - cum, 0.0, 1.0))))


# ---------------------------------------------------------------- times
def stop_time_s(single_floor_flight_s: float, t_v_s: float, door_open_s: float,
                door_close_s: float, start_delay_s: float) -> float:
    """Time lost at each stop, t_s = t_f(1) - t_v + t_o + t_c + t_sd [s]  [1]."""
    return single_floor_flight_s - t_v_s + door_open_s + door_close_s + start_delay_s


def round_trip_time_s(S: float, H: float, P: float, t_v_s: float, t_s_s: float,
                      t_p_s: float, express_time_s: float = 0.0) -> float:
    """RTT = 2 H t_v + (S + 1) t_s + 2 P t_p + 2 t_x [s]  (Eq. 1 of the module; [1], [2]).

    ``express_time_s`` is t_x = d_x / v, the one-way time to run the express rise.
    """
    return 2.0 * H * t_v_s + (S + 1.0) * t_s_s + 2.0 * P * t_p_s + 2.0 * express_time_s


def average_waiting_time_s(interval_s: float, car_load_fraction: float) -> float:
    """Up-peak average waiting time estimate from interval and car load.

    AWT = 0.4 INT                                   for car load <= 50 %
    AWT = [0.4 + (1.8 P/CC - 0.77)^2] INT           for 50 % < car load <= 80 %

    Source: CIBSE Guide D (2015), up-peak passenger waiting time estimate
    (from memory). Beyond 80 % the relation is outside its published range;
    it is still evaluated (see :func:`awt_within_range`).
    """
    x = car_load_fraction
    if x <= 0.5:
        return 0.4 * interval_s
    return (0.4 + (1.8 * x - 0.77) ** 2) * interval_s


def awt_within_range(car_load_fraction: float) -> bool:
    """Whether the car load lies in the waiting-time estimate's range (<= 80 %)."""
    return car_load_fraction <= 0.8 + 1e-12


def average_transit_time_s(S: float, H: float, P: float, t_v_s: float, t_s_s: float,
                           t_p_s: float, express_time_s: float = 0.0) -> float:
    """Up-peak average transit time, car leaves lobby to passenger alights [s].

    ATT = 0.5 H t_v + 0.5 S t_s + P t_p (+ t_x for an express zone)

    Source: CIBSE Guide D (2015), up-peak average travel time estimate
    (from memory): the mean passenger rides half the journey up (half the
    floors passed and half the stops) and shares the loading and unloading.
    """
    return 0.5 * H * t_v_s + 0.5 * S * t_s_s + P * t_p_s + express_time_s


# ---------------------------------------------------------------- the chain
#: Formula and exact expectation this far apart [%] earn the rated-speed note.
RATED_SPEED_NOTE_PCT = 1.0


@dataclass(frozen=True)
class ClassicalResult:
    """Every figure of one classical calculation (units in the names).

    ``traffic_mix`` is "up-peak" (the up-peak formula of this module), or
    "down-peak", "interfloor" or "mixed" (the general analysis of
    :mod:`roundtrip.general_analysis`). The car load is
    the mean load on the busiest stretch of the trip (up-peak: P, everyone rides
    up from the lobby), and the design load limits it (so a lunch-time trip may
    carry more passengers than the design load, never more at once). Waiting and
    transit times are the up-peak estimates, given only for up-peak traffic at a
    load the group carries; otherwise None (the peak simulation gives them).
    """

    mode: str
    traffic_mix: str
    passenger_model: str
    passengers_per_trip: float
    expected_stops: float
    expected_up_stops: float
    expected_down_stops: float
    highest_reversal_floor: float
    lowest_reversal_floor: float
    average_interfloor_height_m: float
    t_v_s: float
    single_floor_flight_s: float
    t_s_s: float
    t_p_s: float
    express_time_s: float
    round_trip_time_s: float
    exact_round_trip_time_s: float
    interval_s: float
    handling_capacity_persons_5min: float
    handling_capacity_pct_5min: float
    car_load_persons: float
    car_load_pct: float
    design_load_persons: float
    average_waiting_time_s: float | None
    average_waiting_time_in_range: bool
    average_transit_time_s: float | None
    average_time_to_destination_s: float | None
    rated_speed_reached_in_one_floor: bool
    rated_speed_note: bool
    saturated: bool
    demand_persons_5min: float | None = None
    demand_pct_5min: float | None = None

    def to_dict(self) -> dict:
        return asdict(self)


#: The up-peak result is the classical result of up-peak traffic (the former name).
UppeakResult = ClassicalResult


def is_uppeak(traffic: Traffic | None) -> bool:
    """Up-peak traffic: every passenger enters at the lobby (None means up-peak)."""
    return traffic is None or (traffic.incoming == 1.0 and traffic.outgoing == 0.0
                               and traffic.interfloor == 0.0)


def traffic_mix_name(traffic: Traffic | None) -> str:
    """"up-peak", "down-peak" (all outgoing), "interfloor" (all interfloor) or "mixed"."""
    if is_uppeak(traffic):
        return "up-peak"
    if traffic.outgoing == 1.0:
        return "down-peak"
    if traffic.interfloor == 1.0:
        return "interfloor"
    return "mixed"


def _exact_round_trip_time_s(building: Building, group: LiftGroup, od, passengers: float,
                             poisson: bool) -> float:
    """The trip model's exact expected round-trip time (everyone boards) [s]: the
    general analysis on the real levels, with each short flight's own time
    (:func:`roundtrip.general_analysis.exact_flight_time_s`). A real fixed P is the
    model's mix of the two nearest integers."""
    from .general_analysis import exact_flight_time_s, general_trip
    from .kinematics import flight_table_s
    v, a, j = group.rated_speed_mps, group.acceleration_mps2, group.jerk_mps3
    levels = building.levels_m
    table = flight_table_s(levels, v, a, j)
    d_speed = regime_boundaries_m(v, a, j)[0]
    cruise = float(flight_time_s(d_speed, v, a, j)) - d_speed / v

    def at(p: float) -> float:
        trip = general_trip(od, levels, p, poisson)
        return (exact_flight_time_s(od, levels, table, p, poisson, trip, v, cruise, d_speed)
                + trip.stop_events * group.stop_overhead_s
                + p * (group.transfer_in_s + group.transfer_out_s))

    if poisson or float(passengers).is_integer():
        return at(passengers)
    base = math.floor(passengers)
    frac = passengers - base
    return (1.0 - frac) * at(base) + frac * at(base + 1)


def round_trip_calculation(building: Building, group: LiftGroup, passengers: float,
                           poisson: bool = True, traffic: Traffic | None = None,
                           mode: str = "given load", saturated: bool | None = None) -> ClassicalResult:
    """The classical round trip at a given load, for any traffic mix.

    Up-peak traffic (``traffic`` None or all incoming) uses the up-peak formula
    (:func:`uppeak_calculation`); any other mix the general analysis
    (:mod:`roundtrip.general_analysis`). ``saturated`` None: the load is above the
    design load (car load on the busiest stretch above capacity_factor x rated
    load).
    """
    if is_uppeak(traffic):
        return uppeak_calculation(building, group, passengers, poisson, mode=mode,
                                  saturated=saturated, traffic=traffic)
    return _general_calculation(building, group, passengers, poisson, traffic, mode, saturated)


def _times(building: Building, group: LiftGroup):
    v, a, j = group.rated_speed_mps, group.acceleration_mps2, group.jerk_mps3
    d_f = building.average_interfloor_height_m
    t_v = d_f / v
    t_f1 = flight_time_s(d_f, v, a, j)
    t_s = stop_time_s(t_f1, t_v, group.door_open_s, group.door_close_s, group.start_delay_s)
    return d_f, t_v, t_f1, t_s


def _demand(building: Building, traffic: Traffic | None):
    if traffic is None:
        return None, None
    return traffic.arrival_rate_pct_5min / 100.0 * building.total_population, \
        traffic.arrival_rate_pct_5min


def _overloaded(car_load: float, group: LiftGroup) -> bool:
    return car_load > group.design_load_persons * (1.0 + 1e-9)


def uppeak_calculation(building: Building, group: LiftGroup, passengers: float,
                       poisson: bool = False, mode: str = "given load",
                       saturated: bool | None = None,
                       traffic: Traffic | None = None) -> ClassicalResult:
    """The classical up-peak calculation at a given mean car load.

    Parameters
    ----------
    passengers : float
        Passengers per trip P [persons], >= 0.
    poisson : bool
        Use the Poisson forms of S and H (passenger counts Poisson with mean P).
    saturated : bool, optional
        Whether the group is saturated; None: P is above the design load.
    """
    if not (passengers >= 0 and math.isfinite(passengers)):
        raise ValueError(f"passengers = {passengers!r}: must be a finite number >= 0")
    u = building.population_shares
    if poisson:
        S = expected_stops_poisson(u, passengers)
        H = highest_reversal_floor_poisson(u, passengers)
    else:
        S = expected_stops(u, passengers)
        H = highest_reversal_floor(u, passengers)
    d_f, t_v, t_f1, t_s = _times(building, group)
    t_p = group.transfer_s
    t_x = building.express_m / group.rated_speed_mps
    rtt = round_trip_time_s(S, H, passengers, t_v, t_s, t_p, t_x)
    from .passengers import od_matrix
    exact = _exact_round_trip_time_s(building, group, od_matrix(building), passengers, poisson)
    interval = rtt / group.cars
    hc = 300.0 * passengers / interval
    load = passengers / group.rated_load_persons
    saturated = _overloaded(passengers, group) if saturated is None else saturated
    awt = None if saturated else average_waiting_time_s(interval, load)
    att = average_transit_time_s(S, H, passengers, t_v, t_s, t_p, t_x)
    demand, demand_pct = _demand(building, traffic)
    return ClassicalResult(
        mode=mode, traffic_mix="up-peak", passenger_model="poisson" if poisson else "fixed",
        passengers_per_trip=float(passengers), expected_stops=S, expected_up_stops=S,
        expected_down_stops=0.0, highest_reversal_floor=H, lowest_reversal_floor=0.0,
        average_interfloor_height_m=d_f, t_v_s=t_v, single_floor_flight_s=t_f1, t_s_s=t_s,
        t_p_s=t_p, express_time_s=t_x, round_trip_time_s=rtt, exact_round_trip_time_s=exact,
        interval_s=interval, handling_capacity_persons_5min=hc,
        handling_capacity_pct_5min=100.0 * hc / building.total_population,
        car_load_persons=float(passengers), car_load_pct=100.0 * load,
        design_load_persons=group.design_load_persons, average_waiting_time_s=awt,
        average_waiting_time_in_range=awt_within_range(load),
        average_transit_time_s=att,
        average_time_to_destination_s=None if awt is None else awt + att,
        rated_speed_reached_in_one_floor=bool(d_f >= regime_boundaries_m(
            group.rated_speed_mps, group.acceleration_mps2, group.jerk_mps3)[0]),
        rated_speed_note=bool(abs(rtt / exact - 1.0) * 100.0 > RATED_SPEED_NOTE_PCT)
        if exact > 0 else False,
        saturated=bool(saturated), demand_persons_5min=demand, demand_pct_5min=demand_pct)


def _general_calculation(building, group, passengers, poisson, traffic, mode, saturated):
    """The general analysis at a given load (see :func:`round_trip_calculation`)."""
    from .general_analysis import general_round_trip_time_s, general_trip
    from .passengers import od_matrix
    if not (passengers >= 0 and math.isfinite(passengers)):
        raise ValueError(f"passengers = {passengers!r}: must be a finite number >= 0")
    od = od_matrix(building, traffic)
    trip = general_trip(od, building.levels_m, passengers, poisson)
    d_f, t_v, t_f1, t_s = _times(building, group)
    rtt = general_round_trip_time_s(trip, group.rated_speed_mps, t_f1 - t_v,
                                    group.stop_overhead_s, group.transfer_in_s,
                                    group.transfer_out_s)
    exact = _exact_round_trip_time_s(building, group, od, passengers, poisson)
    interval = rtt / group.cars
    hc = 300.0 * passengers / interval
    saturated = _overloaded(trip.busiest_stretch_load, group) if saturated is None else saturated
    demand, demand_pct = _demand(building, traffic)
    return ClassicalResult(
        mode=mode, traffic_mix=traffic_mix_name(traffic),
        passenger_model="poisson" if poisson else "fixed",
        passengers_per_trip=float(passengers), expected_stops=trip.expected_stops,
        expected_up_stops=trip.up_stops, expected_down_stops=trip.down_stops,
        highest_reversal_floor=trip.highest_reversal_floor,
        lowest_reversal_floor=trip.lowest_reversal_floor, average_interfloor_height_m=d_f,
        t_v_s=t_v, single_floor_flight_s=t_f1, t_s_s=t_s, t_p_s=group.transfer_s,
        express_time_s=building.express_m / group.rated_speed_mps, round_trip_time_s=rtt,
        exact_round_trip_time_s=exact, interval_s=interval,
        handling_capacity_persons_5min=hc,
        handling_capacity_pct_5min=100.0 * hc / building.total_population,
        car_load_persons=trip.busiest_stretch_load,
        car_load_pct=100.0 * trip.busiest_stretch_load / group.rated_load_persons,
        design_load_persons=group.design_load_persons, average_waiting_time_s=None,
        average_waiting_time_in_range=False, average_transit_time_s=None,
        average_time_to_destination_s=None,
        rated_speed_reached_in_one_floor=bool(d_f >= regime_boundaries_m(
            group.rated_speed_mps, group.acceleration_mps2, group.jerk_mps3)[0]),
        rated_speed_note=bool(abs(rtt / exact - 1.0) * 100.0 > RATED_SPEED_NOTE_PCT)
        if exact > 0 else False,
        saturated=bool(saturated), demand_persons_5min=demand, demand_pct_5min=demand_pct)


def design_passengers(building: Building, group: LiftGroup, traffic: Traffic | None) -> float:
    """Passengers per trip at which the car load on the busiest stretch reaches the
    design load: design load / (share of a trip's passengers on that stretch); the
    design load itself in up-peak."""
    if is_uppeak(traffic):
        return group.design_load_persons
    from .general_analysis import busiest_stretch_share
    from .passengers import od_matrix
    return group.design_load_persons / busiest_stretch_share(od_matrix(building, traffic))


def demand_passengers(building: Building, group: LiftGroup, traffic: Traffic,
                      poisson: bool = True, tol: float = 1e-12) -> tuple[float, bool]:
    """Passengers per trip that carry the demand: the root of P = lambda RTT(P) / L.

    lambda is the arrival rate [persons/s] and L the number of cars. RTT(P) rises
    with P and RTT(0) > 0, so g(P) = lambda RTT(P)/L - P is positive at 0; its
    root is found by bisection on [0, P_design], P_design the load at which the
    busiest stretch carries the design load (:func:`design_passengers`; the design
    load itself in up-peak).

    Returns
    -------
    (P, saturated)
        ``saturated`` is True when no root lies at or below P_design; P is then
        P_design.
    """
    lam = traffic.arrival_rate_persons_per_s(building)
    p_max = design_passengers(building, group, traffic)

    def g(p: float) -> float:
        return lam * round_trip_calculation(building, group, p, poisson, traffic,
                                            saturated=False).round_trip_time_s / group.cars - p

    if g(p_max) > 0:
        return p_max, True
    lo, hi = 0.0, p_max
    while hi - lo > tol * max(1.0, hi):
        mid = 0.5 * (lo + hi)
        if g(mid) > 0:
            lo = mid
        else:
            hi = mid
    return 0.5 * (lo + hi), False


def demand_calculation(building: Building, group: LiftGroup, traffic: Traffic,
                       poisson: bool = True) -> ClassicalResult:
    """The classical calculation at the car load the demand sets (see
    :func:`demand_passengers`), for any traffic mix; Poisson counts unless asked
    otherwise, the one passenger model of every command."""
    p, saturated = demand_passengers(building, group, traffic, poisson)
    return round_trip_calculation(building, group, p, poisson, traffic, mode="demand",
                                  saturated=saturated)
