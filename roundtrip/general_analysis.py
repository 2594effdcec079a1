"""The classical round trip for any mix of incoming, outgoing and interfloor traffic.

The general analysis of the round-trip time extends the up-peak calculation to
any traffic: the expected stops going up and going down, the expected highest
and lowest reversal floors, all from the origin-destination rates, and

    RTT = 2 (H - L) t_v + F (t_f(d_f) - t_v) + K (t_o + t_c + t_sd) + 2 P t_p      (1)

with H and L the levels of the highest and lowest reversal floors [m] over v,
K the stops per trip (those above the lobby, S, plus the lobby stop when the
trip has lobby traffic), F the flights per trip (K, less one for a trip with
nobody) and P the passengers per trip; for up-peak traffic with P >= 1 it is
the up-peak formula of :mod:`roundtrip.classical` (L = 0, K = F = S + 1). The
structure (up and down stops, two reversal floors, the round trip 2 (H - L)
t_v + (S + 1) t_s + 2 P t_p) is that of the published general analysis of the
round-trip time for any traffic condition (Building Services Engineering
Research and Technology, around 2010; CIBSE Guide D, 2015, chapter on traffic
analysis; venue, year and chapter from memory, the paper's title not checked).

The probabilities here are derived for the trip model of ``docs/trip_model.md``
exactly, with the passengers of a trip independent over the cells of the
origin-destination matrix p (:func:`roundtrip.passengers.od_matrix`):

* Poisson arrivals (mean P per trip): cell (i, j) holds Poisson(P p_ij)
  passengers, independently, so no passenger falls in a set of cells of total
  probability q with probability g(q) = exp(-P q);
* a fixed count P: g(q) = (1 - q)^P (for a real P the same expression, as the
  up-peak forms do).

Each expectation below is a sum of such g over sets of cells (inclusion and
exclusion); the stop rules are the model's: a floor is an up stop when an
up-travelling passenger boards or alights there, a down stop likewise; the
highest up stop and the highest down stop are one stop when they are the same
floor; a trip with lobby traffic starts and ends at the lobby, any other at
its lowest stop L, counted once. Everyone boards (the formulae know no rated
load).

Equation (1) charges each flight of distance d the time d / v + (t_f(d_f) -
t_v): exact when every jump reaches rated speed, the assumption of the
classical formulae (``tests/test_general_analysis.py`` checks the expectation
against exact enumeration and against the Monte Carlo there).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np


def _no_passenger(q, passengers: float, poisson: bool):
    """g(q): the chance that no passenger of a trip falls in cells of probability q."""
    q = np.clip(np.asarray(q, dtype=float), 0.0, 1.0)
    if poisson:
        return np.exp(-passengers * q)
    rest = 1.0 - q
    # a set holding every cell sums to 1 only up to rounding, which a power P < 1 would
    # magnify (1e-16 ** 0.5 = 1e-8): such a remainder is zero
    return np.power(np.where(rest < 1e-12, 0.0, rest), passengers)


def _either(g, z, x, y):
    """Pr(cells Z empty, cells X not empty, cells Y not empty) for disjoint X, Y, Z of
    probabilities x, y, z: g(z) - g(z + x) - g(z + y) + g(z + x + y)."""
    return g(z) - g(z + x) - g(z + y) + g(z + x + y)


@dataclass(frozen=True)
class GeneralTrip:
    """Expectations of one trip under the general analysis (floors 0 ... N)."""

    up_stops: float                 # expected up stops above the lobby
    down_stops: float               # expected down stops above the lobby
    expected_stops: float           # S: stops above the lobby, merges counted once
    lobby_stop: float               # probability of a lobby stop (lobby traffic or no passenger)
    flights: float                  # F: expected flights per trip
    highest_reversal_floor: float   # E[H] [floor]
    lowest_reversal_floor: float    # E[L] [floor]
    highest_level_m: float          # E[level of H] [m]
    lowest_level_m: float           # E[level of L] [m]
    passengers: float               # passengers per trip (everyone boards)
    busiest_stretch_load: float     # mean load on the busiest stretch of the trip [persons]

    @property
    def stop_events(self) -> float:
        """K: stops per trip, the lobby stop included."""
        return self.expected_stops + self.lobby_stop


def stretch_loads(od: np.ndarray, passengers: float) -> tuple[np.ndarray, np.ndarray]:
    """Mean load on each stretch of the shaft [persons].

    ``up[f]``: passengers riding up between floors f and f + 1, sum over i <= f < j of
    P p_ij; ``down[f]``: riding down between f + 1 and f, sum over j <= f < i.
    Expectations are linear, so the same for Poisson and fixed counts.
    """
    p = np.asarray(od, dtype=float)
    n = p.shape[0]
    up = np.zeros(n - 1)
    down = np.zeros(n - 1)
    for f in range(n - 1):
        up[f] = p[:f + 1, f + 1:].sum()
        down[f] = p[f + 1:, :f + 1].sum()
    return passengers * up, passengers * down


def busiest_stretch_share(od: np.ndarray) -> float:
    """Share of a trip's passengers riding its busiest stretch: the car load per
    passenger per trip (1 in up-peak, where everyone rides the first stretch)."""
    up, down = stretch_loads(od, 1.0)
    return float(max(up.max(initial=0.0), down.max(initial=0.0)))


def general_trip(od: np.ndarray, levels_m, passengers: float, poisson: bool) -> GeneralTrip:
    """Expected stops, reversal floors and flights of a trip (see the module notes).

    Parameters
    ----------
    od : (N + 1, N + 1) array
        Origin-destination probabilities, floor 0 the lobby.
    levels_m : array_like
        Level of each floor [m], the lobby first.
    passengers : float
        Mean passengers per trip P (Poisson) or passengers per trip (fixed) [persons].
    poisson : bool
        Poisson arrivals (True) or a fixed count.
    """
    p = np.asarray(od, dtype=float)
    p = p / p.sum()
    n = p.shape[0]
    levels = np.asarray(levels_m, dtype=float)
    P = float(passengers)

    def g(q):
        return _no_passenger(q, P, poisson)

    i_idx, j_idx = np.indices(p.shape)
    up = np.where(j_idx > i_idx, p, 0.0)
    down = np.where(j_idx < i_idx, p, 0.0)
    lo = np.minimum(i_idx, j_idx)
    hi = np.maximum(i_idx, j_idx)
    up_stops = down_stops = merges = 0.0
    reach_high = np.zeros(n)        # Pr(H >= f)
    reach_low = np.zeros(n)         # Pr(L >= f), trips without lobby traffic
    empty = float(g(1.0))
    for f in range(1, n):
        touch_up = up[f, :].sum() + up[:, f].sum()
        touch_down = down[f, :].sum() + down[:, f].sum()
        up_stops += 1.0 - g(touch_up)
        down_stops += 1.0 - g(touch_down)
        # the highest up stop and the highest down stop both at f: one stop
        merges += _either(g, p[hi > f].sum(), up[:f, f].sum(), down[f, :f].sum())
        # the terminal floor L = f of a trip without lobby traffic: one stop
        merges += _either(g, p[lo < f].sum(), up[f, f + 1:].sum(), down[f + 1:, f].sum())
        reach_high[f] = 1.0 - g(p[hi >= f].sum())
        reach_low[f] = g(p[lo < f].sum()) - empty
    lobby = p[0, :].sum() + p[:, 0].sum() - p[0, 0]
    lobby_stop = float(1.0 - g(lobby) + empty)
    S = up_stops + down_stops - merges
    rises = np.diff(levels)
    up_loads, down_loads = stretch_loads(p, P)
    return GeneralTrip(
        up_stops=float(up_stops), down_stops=float(down_stops), expected_stops=float(S),
        lobby_stop=lobby_stop, flights=float(S + lobby_stop - empty),
        highest_reversal_floor=float(reach_high[1:].sum()),
        lowest_reversal_floor=float(reach_low[1:].sum()),
        highest_level_m=float(np.sum(rises * reach_high[1:])),
        lowest_level_m=float(np.sum(rises * reach_low[1:])),
        passengers=P,
        busiest_stretch_load=float(max(up_loads.max(initial=0.0), down_loads.max(initial=0.0))))


def general_round_trip_time_s(trip: GeneralTrip, rated_speed_mps: float,
                              one_floor_overhead_s: float, stop_overhead_s: float,
                              transfer_in_s: float, transfer_out_s: float) -> float:
    """Eq. (1) of the module: 2 (E[level H] - E[level L]) / v + F (t_f(d_f) - t_v)
    + K (t_o + t_c + t_sd) + P (t_in + t_out) [s].

    ``one_floor_overhead_s`` is t_f(d_f) - t_v, what a flight takes beyond its run
    at rated speed (exact for every flight that reaches rated speed).
    """
    return (2.0 * (trip.highest_level_m - trip.lowest_level_m) / rated_speed_mps
            + trip.flights * one_floor_overhead_s + trip.stop_events * stop_overhead_s
            + trip.passengers * (transfer_in_s + transfer_out_s))


# ---------------------------------------------------------------- the exact flight time
def _conjunction(g, p, empty, nonempty) -> float:
    """Pr(every cell set in ``empty`` holds no passenger and every set in ``nonempty``
    holds one at least), sets given as boolean masks over the cells of ``p``:
    inclusion and exclusion over the non-empty conditions."""
    base = np.zeros(p.shape, dtype=bool)
    for m in empty:
        base |= m
    total = 0.0
    k = len(nonempty)
    for bits in range(1 << k):
        mask = base.copy()
        sign = 1.0
        for b in range(k):
            if bits >> b & 1:
                mask |= nonempty[b]
                sign = -sign
        total += sign * float(g(p[mask].sum()))
    return total


def flight_probabilities(od: np.ndarray, passengers: float, poisson: bool, pairs=None):
    """Pr(the trip flies from floor a to floor b) for the requested ordered pairs.

    Going up the car visits A = {L} + the up stops above L + {H}; going down
    D = {H} + the down stops above L + {L} (docs/trip_model.md), so it flies a -> b
    (a < b) when a and b are consecutive in A, and b -> a when they are
    consecutive in D. With the cells' passengers independent each event is a
    conjunction of cell sets being empty or not (:func:`_conjunction`).

    Returns a dict {(a, b): probability}; ``pairs`` defaults to every ordered pair.
    Their sum over all pairs is the expected number of flights.
    """
    p = np.asarray(od, dtype=float)
    p = p / p.sum()
    n = p.shape[0]
    P = float(passengers)

    def g(q):
        return _no_passenger(q, P, poisson)

    i, j = np.indices(p.shape)
    up = j > i
    down = j < i
    lo = np.minimum(i, j)
    hi = np.maximum(i, j)
    lobby = (i == 0) | (j == 0)
    if pairs is None:
        pairs = [(a, b) for a in range(n) for b in range(n) if a != b]
    out = {}
    for a, b in pairs:
        going_up = a < b
        low, high = min(a, b), max(a, b)
        travel = up if going_up else down
        touch_low = travel & ((i == low) | (j == low))
        touch_high = travel & ((i == high) | (j == high))
        between = travel & (((i > low) & (i < high)) | ((j > low) & (j < high)))
        top_empty = [hi > high]
        top_here = [hi == high]
        if low == 0:
            cases = [([between], [lobby])]                     # L = 0: lobby traffic
        else:
            cases = [([lo < low, between], [lo == low]),       # L = low
                     ([between], [lo < low, touch_low])]       # a stop above L
        prob = 0.0
        for empty, nonempty in cases:
            # Pr(case and (the car stops at `high` in this direction, or `high` is H))
            prob += (_conjunction(g, p, empty, nonempty)
                     - _conjunction(g, p, empty + [touch_high], nonempty)
                     + _conjunction(g, p, empty + [touch_high] + top_empty, nonempty + top_here))
        out[(a, b)] = prob
    return out


def exact_flight_time_s(od: np.ndarray, levels_m, flight_s: np.ndarray, passengers: float,
                        poisson: bool, trip: GeneralTrip, rated_speed_mps: float,
                        cruise_overhead_s: float, speed_distance_m: float) -> float:
    """The exact expected flight time of a trip [s] on the real kinematics.

    A flight over d >= ``speed_distance_m`` (the shortest that reaches rated speed)
    takes d / v + c, c = ``cruise_overhead_s``; so the expected flight time is
    2 (E[level H] - E[level L]) / v + F c plus, over the shorter flights only, their
    probability times t_f(d) - d / v - c (:func:`flight_probabilities`).
    """
    levels = np.asarray(levels_m, dtype=float)
    n = levels.size
    short = [(a, b) for a in range(n) for b in range(n)
             if a != b and abs(levels[a] - levels[b]) < speed_distance_m]
    total = (2.0 * (trip.highest_level_m - trip.lowest_level_m) / rated_speed_mps
             + trip.flights * cruise_overhead_s)
    if short:
        for (a, b), prob in flight_probabilities(od, passengers, poisson, short).items():
            d = abs(levels[a] - levels[b])
            total += prob * (flight_s[a, b] - d / rated_speed_mps - cruise_overhead_s)
    return float(total)
