"""Ideal jerk-limited lift kinematics: flight time and motion profile.

A car moves from rest to rest over a distance d with speed, acceleration and
jerk limited by the rated speed v, the acceleration a and the jerk j. The
time-optimal motion has seven phases (jerk +j, 0, -j, cruise, -j, 0, +j) and
falls in one of three regimes:

1. rated speed reached (d >= v^2/a' + v a'/j with a' = min(a, sqrt(v j))):
       t_f = d/v + v/a' + a'/j
2. acceleration a reached but not rated speed (2 a^3/j^2 <= d < that):
       t_f = a/j + sqrt(a^2/j^2 + 4 d/a)
3. neither reached (d < 2 a^3/j^2):
       t_f = (32 d / j)^(1/3)

``a' < a`` happens when the rated speed is reached before the acceleration
ramp completes (v < a^2/j); then regime 2 cannot occur.

References
----------
.. [1] ISO 8100-32:2020, Lifts for the transport of persons and goods -
   Part 32: Planning and selection of passenger lifts to be installed in
   office, hotel and residential buildings, Annex on ideal kinematics
   (flight time formulae; clause number from memory).
.. [2] "Ideal lift kinematics: derivation of formulae for the equations of
   lift motion", Elevator Technology 6, IAEE Publications, 1995 (from memory).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np


def _peak_acceleration_mps2(v: float, a: float, j: float) -> float:
    """a' = min(a, sqrt(v j)): the largest acceleration used when speed v is reached."""
    return min(a, float(np.sqrt(v * j)))


def regime_boundaries_m(rated_speed_mps: float, acceleration_mps2: float,
                        jerk_mps3: float) -> tuple[float, float]:
    """Distances at which the motion changes regime [m].

    Returns
    -------
    (d_speed, d_accel)
        ``d_speed = v^2/a' + v a'/j``: the shortest flight that reaches rated
        speed; ``d_accel = 2 a^3 / j^2``: the shortest flight that reaches the
        acceleration a (equal to or above ``d_speed`` when a' < a).
    """
    v, a, j = rated_speed_mps, acceleration_mps2, jerk_mps3
    ap = _peak_acceleration_mps2(v, a, j)
    return v * v / ap + v * ap / j, 2.0 * a ** 3 / j ** 2


def flight_time_s(distance_m, rated_speed_mps: float, acceleration_mps2: float,
                  jerk_mps3: float):
    """Ideal flight time of a jerk-limited run over ``distance_m``, rest to rest.

    Parameters
    ----------
    distance_m : float or array_like
        Distance travelled [m], >= 0.
    rated_speed_mps : float
        Rated (contract) speed v [m/s], > 0.
    acceleration_mps2 : float
        Acceleration limit a [m/s^2], > 0.
    jerk_mps3 : float
        Jerk limit j [m/s^3], > 0.

    Returns
    -------
    float or ndarray
        Flight time t_f [s]; 0 for a zero distance.

    Notes
    -----
    Regime 1: t_f = d/v + v/a' + a'/j; regime 2: t_f = a/j + sqrt(a^2/j^2 + 4d/a);
    regime 3: t_f = (32 d/j)^(1/3). See the module docstring and [1], [2]
    there. The three forms meet continuously at the regime boundaries.
    """
    v, a, j = float(rated_speed_mps), float(acceleration_mps2), float(jerk_mps3)
    d = np.asarray(distance_m, dtype=float)
    if np.any(d < 0) or not np.all(np.isfinite(d)):
        raise ValueError(f"distance_m = {distance_m!r}: must be finite and >= 0")
    ap = _peak_acceleration_mps2(v, a, j)
    d_speed, d_accel = regime_boundaries_m(v, a, j)
    with np.errstate(invalid="ignore", divide="ignore"):
        t1 = d / v + v / ap + ap / j                              # regime 1
        t2 = a / j + np.sqrt(a * a / (j * j) + 4.0 * d / a)       # regime 2
        t3 = np.cbrt(32.0 * d / j)                                # regime 3
    t = np.where(d >= d_speed, t1, np.where(d >= d_accel, t2, t3))
    t = np.where(d > 0, t, 0.0)
    return float(t) if t.ndim == 0 else t


@dataclass(frozen=True)
class MotionProfile:
    """The seven-phase jerk-limited run over one distance.

    Attributes
    ----------
    distance_m : float
    regime : int
        1 rated speed reached, 2 acceleration reached only, 3 neither.
    peak_acceleration_mps2, peak_speed_mps : float
    phase_durations_s : tuple of 7 floats
        Jerk +j, 0, -j, cruise, -j, 0, +j.
    jerk_mps3 : float
    """

    distance_m: float
    regime: int
    peak_acceleration_mps2: float
    peak_speed_mps: float
    phase_durations_s: tuple[float, ...]
    jerk_mps3: float

    @property
    def flight_time_s(self) -> float:
        return float(sum(self.phase_durations_s))

    def state(self, times_s):
        """Position [m], speed [m/s] and acceleration [m/s^2] at ``times_s``.

        Integrates the piecewise-constant jerk in closed form, phase by phase.
        """
        t = np.asarray(times_s, dtype=float)
        j = self.jerk_mps3
        jerks = (j, 0.0, -j, 0.0, -j, 0.0, j)
        x = np.zeros_like(t)
        vel = np.zeros_like(t)
        acc = np.zeros_like(t)
        x0 = v0 = a0 = 0.0
        start = 0.0
        for dur, jk in zip(self.phase_durations_s, jerks):
            end = start + dur
            tau = np.clip(t - start, 0.0, dur)
            inside = (t >= start) & ((t < end) | (end == self.flight_time_s))
            xs = x0 + v0 * tau + a0 * tau ** 2 / 2 + jk * tau ** 3 / 6
            vs = v0 + a0 * tau + jk * tau ** 2 / 2
            acs = a0 + jk * tau
            x = np.where(inside, xs, x)
            vel = np.where(inside, vs, vel)
            acc = np.where(inside, acs, acc)
            x0, v0, a0 = (x0 + v0 * dur + a0 * dur ** 2 / 2 + jk * dur ** 3 / 6,
                          v0 + a0 * dur + jk * dur ** 2 / 2, a0 + jk * dur)
            start = end
        after = t >= self.flight_time_s
        x = np.where(after, self.distance_m, x)
        vel = np.where(after, 0.0, vel)
        acc = np.where(after, 0.0, acc)
        return x, vel, acc


def motion_profile(distance_m: float, rated_speed_mps: float, acceleration_mps2: float,
                   jerk_mps3: float) -> MotionProfile:
    """The time-optimal jerk-limited run over ``distance_m`` [m] (see module notes).

    Phase durations: t_j = a_p/j (jerk phases), t_a = v_p/a_p - a_p/j
    (constant acceleration), t_c = (d - v_p (v_p/a_p + a_p/j)) / v_p (cruise),
    where a_p and v_p are the peak acceleration and speed of the regime.
    """
    d, v, a, j = float(distance_m), float(rated_speed_mps), float(acceleration_mps2), float(jerk_mps3)
    if d < 0:
        raise ValueError(f"distance_m = {d}: must be >= 0")
    d_speed, d_accel = regime_boundaries_m(v, a, j)
    if d >= d_speed:
        regime, ap, vp = 1, _peak_acceleration_mps2(v, a, j), v
    elif d >= d_accel:
        regime, ap = 2, a
        vp = 0.5 * a * (-a / j + np.sqrt(a * a / (j * j) + 4.0 * d / a))
    else:
        regime = 3
        ap = (d * j * j / 2.0) ** (1.0 / 3.0)
        vp = ap * ap / j
    if d == 0:
        return MotionProfile(0.0, 3, 0.0, 0.0, (0.0,) * 7, j)
    tj = ap / j
    ta = max(vp / ap - ap / j, 0.0)
    tc = max((d - vp * (vp / ap + ap / j)) / vp, 0.0) if regime == 1 else 0.0
    return MotionProfile(d, regime, float(ap), float(vp), (tj, ta, tj, tc, tj, ta, tj), j)


def flight_table_s(levels_m, rated_speed_mps: float, acceleration_mps2: float,
                   jerk_mps3: float) -> np.ndarray:
    """Ideal flight time between every pair of floor levels [s].

    Parameters
    ----------
    levels_m : array_like
        Level of each floor above the lobby [m], floor 0 first.
    rated_speed_mps, acceleration_mps2, jerk_mps3 : float
        As :func:`flight_time_s`.

    Returns
    -------
    ndarray, shape (floors + 1, floors + 1)
        ``t[a, b] = t_f(|level_a - level_b|)``, C-contiguous (the compiled trip
        model reads it row by row).
    """
    levels = np.asarray(levels_m, dtype=float)
    dist = np.abs(levels[:, None] - levels[None, :])
    return np.ascontiguousarray(flight_time_s(dist, rated_speed_mps, acceleration_mps2, jerk_mps3))
