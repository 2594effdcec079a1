"""Ideal jerk-limited kinematics checked against an independent numerical run.

The reference below does not use the closed forms of ``roundtrip.kinematics``.
It builds the rest-to-rest run from the limits alone: the car ramps up from
rest to a peak speed w (jerk +j, hold, jerk -j, the acceleration never above
a), optionally cruises at w, and ramps down again by the time-reversed
schedule. Each ramp is integrated numerically with ``scipy.integrate.solve_ivp``
(DOP853, tight tolerances), and when the rated speed cannot be reached the peak
speed that covers the distance is found with ``scipy.optimize.brentq``.

Sources named beside the checks:
- "scipy reference": the numerical construction above (solve_ivp + brentq).
- ISO 8100-32:2020, annex on ideal kinematics (flight time with rated speed
  reached; from memory).
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp
from scipy.optimize import brentq

from roundtrip.kinematics import flight_time_s, motion_profile, regime_boundaries_m

#: The seven phases' jerk signs: +j, 0, -j, cruise, -j, 0, +j.
JERK_SIGNS = (1.0, 0.0, -1.0, 0.0, -1.0, 0.0, 1.0)


# ------------------------------------------------------------- the reference
def _integrate(durations, jerks):
    """(position, speed, acceleration) at the end of piecewise-constant jerk, by solve_ivp."""
    y = np.zeros(3)
    for dur, jk in zip(durations, jerks):
        if dur <= 0.0:
            continue
        sol = solve_ivp(lambda t, s, jk=jk: (s[1], s[2], jk), (0.0, dur), y,
                        method="DOP853", rtol=1e-13, atol=1e-15)
        y = sol.y[:, -1]
    return y


def _ramp_schedule(w, a, j):
    """Jerk phase and hold durations that take a car from rest to speed w.

    A ramp with jerk phases of length t_j and a hold of length t_h gains the
    speed j t_j (t_j + t_h); its acceleration peaks at j t_j, which may not
    exceed a. The shortest ramp uses the longest admissible jerk phase.
    """
    tj = min(a / j, math.sqrt(w / j))
    th = max(w / (j * tj) - tj, 0.0)
    return tj, th


def _ramp(w, a, j):
    """(duration, distance, speed reached) of the ramp from rest to w, integrated."""
    tj, th = _ramp_schedule(w, a, j)
    x, vel, _ = _integrate((tj, th, tj), (j, 0.0, -j))
    return 2 * tj + th, x, vel


def reference_run(d, v, a, j):
    """Independent rest-to-rest run over d: (time, rated speed reached, acceleration reached)."""
    t_ramp, x_ramp, _ = _ramp(v, a, j)
    if 2 * x_ramp <= d:
        tj, th = _ramp_schedule(v, a, j)
        return 2 * t_ramp + (d - 2 * x_ramp) / v, True, th > 0 or math.isclose(tj * j, a)
    w = brentq(lambda w: 2 * _ramp(w, a, j)[1] - d, 1e-12, v, xtol=1e-15, rtol=1e-15)
    tj, th = _ramp_schedule(w, a, j)
    return 2 * _ramp(w, a, j)[0], False, th > 1e-12


# Lift parameter sets (v [m/s], a [m/s^2], j [m/s^3]), invented but typical of
# the trade (common practice). The last two have v < a^2/j: the rated speed is
# reached before the acceleration ramp completes, so a is never reached.
LIFTS = {
    "mid-rise 1.6 m/s": (1.6, 1.0, 1.5),
    "high-rise 6 m/s": (6.0, 1.2, 1.8),
    "slow 0.63 m/s, v < a^2/j": (0.63, 1.0, 1.0),
    "1.0 m/s, v < a^2/j": (1.0, 1.2, 1.2),
}


def _cases():
    """(lift, distance, expected regime) covering every regime each lift can have."""
    out = []
    for name, (v, a, j) in LIFTS.items():
        d_speed, d_accel = regime_boundaries_m(v, a, j)
        if v >= a * a / j:
            dists = [(0.4 * d_accel, 3), (0.9 * d_accel, 3), (0.5 * (d_accel + d_speed), 2),
                     (0.99 * d_speed, 2), (1.5 * d_speed, 1), (40.0, 1)]
        else:
            dists = [(0.3 * d_speed, 3), (0.95 * d_speed, 3), (1.2 * d_speed, 1), (25.0, 1)]
        for d, regime in dists:
            out.append(pytest.param(name, d, regime, id=f"{name}, d={d:.3f} m, regime {regime}"))
    return out


# ------------------------------------------------------------- flight time
@pytest.mark.parametrize("lift, d, regime", _cases())
def test_flight_time_matches_numerical_run(lift, d, regime):
    # Source: scipy reference (solve_ivp integration of the jerk schedule, brentq
    # for the peak speed); independent of the closed forms under test.
    v, a, j = LIFTS[lift]
    t_ref, speed_reached, accel_reached = reference_run(d, v, a, j)
    assert flight_time_s(d, v, a, j) == pytest.approx(t_ref, rel=1e-10)
    # The regime label agrees with what the numerical run reached.
    expected_regime = 1 if speed_reached else (2 if accel_reached else 3)
    assert expected_regime == regime
    prof = motion_profile(d, v, a, j)
    assert prof.regime == regime
    assert prof.flight_time_s == pytest.approx(t_ref, rel=1e-10)


def test_acceleration_never_reached_when_v_below_a2_over_j():
    # Source: scipy reference. With v < a^2/j even a very long run peaks below a:
    # the ramp reaches v with a triangular acceleration of peak sqrt(v j) < a.
    v, a, j = LIFTS["slow 0.63 m/s, v < a^2/j"]
    d_speed, d_accel = regime_boundaries_m(v, a, j)
    assert d_accel > d_speed                       # regime 2 is empty
    for d in np.linspace(0.05, 3 * d_speed, 25):
        assert motion_profile(d, v, a, j).regime in (1, 3)
        assert motion_profile(d, v, a, j).peak_acceleration_mps2 <= math.sqrt(v * j) * (1 + 1e-12)
    t_ref, _, accel_reached = reference_run(10.0, v, a, j)
    assert not accel_reached
    assert flight_time_s(10.0, v, a, j) == pytest.approx(t_ref, rel=1e-10)


@pytest.mark.parametrize("lift", list(LIFTS))
def test_flight_time_continuous_at_regime_boundaries(lift):
    # Source: scipy reference at the boundary itself, and continuity of the
    # minimum-time run in its distance (a limit of the closed forms): just below
    # and just above a boundary the times differ by no more than the slope times
    # the step, and the regime label changes there.
    v, a, j = LIFTS[lift]
    d_speed, d_accel = regime_boundaries_m(v, a, j)
    boundaries = [(d_speed, 2 if v >= a * a / j else 3, 1)]
    if v >= a * a / j:
        boundaries.append((d_accel, 3, 2))
    eps = 1e-9
    for b, below, above in boundaries:
        lo, hi = b * (1 - eps), b * (1 + eps)
        t_lo, t_b, t_hi = (flight_time_s(x, v, a, j) for x in (lo, b, hi))
        # dt/dd is at most a few s/m here; 2 eps b times that bounds the jump.
        assert abs(t_hi - t_lo) < 10 * 2 * eps * b + 1e-12
        assert t_lo <= t_b <= t_hi
        assert t_b == pytest.approx(reference_run(b, v, a, j)[0], rel=1e-10)
        assert motion_profile(lo, v, a, j).regime == below
        assert motion_profile(hi, v, a, j).regime == above


@pytest.mark.parametrize("lift", list(LIFTS))
def test_a_run_exactly_at_a_boundary_reaches_what_the_boundary_names(lift):
    # Source: scipy reference (reference_run at the boundary distance itself). The
    # shortest run that reaches the acceleration (d = 2 a^3 / j^2: four jerk phases of
    # a/j each, worked out by integrating the jerk schedule) does reach it, and the
    # shortest run that reaches rated speed does reach it: at the boundary the profile
    # is labelled with the regime the boundary names, with its peak values.
    v, a, j = LIFTS[lift]
    d_speed, d_accel = regime_boundaries_m(v, a, j)
    at_speed = motion_profile(d_speed, v, a, j)
    assert at_speed.regime == 1
    assert at_speed.peak_speed_mps == pytest.approx(v, rel=1e-12)
    if v >= a * a / j:
        assert d_accel == pytest.approx(2 * a ** 3 / j ** 2, rel=1e-15)
        at_accel = motion_profile(d_accel, v, a, j)
        assert at_accel.regime == 2
        assert at_accel.peak_acceleration_mps2 == pytest.approx(a, rel=1e-12)
        assert at_accel.flight_time_s == pytest.approx(reference_run(d_accel, v, a, j)[0],
                                                       rel=1e-10)


def test_a_run_over_no_distance_is_no_run():
    # A limit: no distance, no time, no speed, no acceleration (every field a number).
    prof = motion_profile(0.0, *LIFTS["mid-rise 1.6 m/s"])
    assert prof.distance_m == 0.0 and prof.flight_time_s == 0.0
    assert prof.peak_speed_mps == 0.0 and prof.peak_acceleration_mps2 == 0.0
    assert prof.phase_durations_s == (0.0,) * 7


@pytest.mark.parametrize("lift", list(LIFTS))
def test_flight_time_increases_and_never_beats_rated_speed(lift):
    # Common practice (a limit): a rest-to-rest run over d cannot take less
    # than d/v, and a longer run never takes less time.
    v, a, j = LIFTS[lift]
    d_speed, _ = regime_boundaries_m(v, a, j)
    d = np.linspace(0.0, 3 * d_speed + 10, 2001)
    t = flight_time_s(d, v, a, j)
    assert np.all(np.diff(t) > 0)
    assert np.all(t >= d / v)
    assert t[0] == 0.0


def test_flight_time_accepts_arrays_like_scalars():
    # Plumbing: the vectorised call equals element-wise scalar calls.
    v, a, j = LIFTS["mid-rise 1.6 m/s"]
    d = np.array([0.0, 0.3, 1.5, 3.0, 7.2, 30.0])
    np.testing.assert_array_equal(flight_time_s(d, v, a, j),
                                  [flight_time_s(float(x), v, a, j) for x in d])
    assert isinstance(flight_time_s(3.0, v, a, j), float)


@pytest.mark.parametrize("bad", [-0.1, float("nan"), float("inf")])
def test_flight_time_refuses_bad_distance(bad):
    # Input validation: distances must be finite and >= 0.
    with pytest.raises(ValueError, match="distance_m"):
        flight_time_s(bad, 1.6, 1.0, 1.5)


def test_motion_profile_refuses_negative_distance():
    # Input validation: a run covers a distance >= 0.
    with pytest.raises(ValueError, match="distance_m"):
        motion_profile(-1.0, 1.6, 1.0, 1.5)


def test_zero_distance_is_no_run():
    # Limit: no distance, no time, no motion.
    prof = motion_profile(0.0, 1.6, 1.0, 1.5)
    assert prof.flight_time_s == 0.0
    assert flight_time_s(0.0, 1.6, 1.0, 1.5) == 0.0
    x, vel, acc = prof.state([0.0, 1.0])
    np.testing.assert_array_equal(x, [0.0, 0.0])
    np.testing.assert_array_equal(vel, [0.0, 0.0])


# ------------------------------------------------------------- handbook value
def test_handbook_flight_time_with_rated_speed_reached():
    # Source: ISO 8100-32:2020, annex on ideal kinematics (from memory): with
    # rated speed reached (and v >= a^2/j), t_f = d/v + v/a + a/j.
    # A 20 m run at v = 1.6 m/s, a = 1.0 m/s^2, j = 1.5 m/s^3:
    #   t_f = 20/1.6 + 1.6/1.0 + 1.0/1.5 = 12.5 + 1.6 + 0.666667 = 14.766667 s
    assert flight_time_s(20.0, 1.6, 1.0, 1.5) == pytest.approx(14.766667, abs=5e-7)
    for d, v, a, j in [(20.0, 1.6, 1.0, 1.5), (60.0, 4.0, 1.0, 1.2), (3.5, 1.0, 0.8, 1.2)]:
        assert regime_boundaries_m(v, a, j)[0] <= d and v >= a * a / j
        assert flight_time_s(d, v, a, j) == pytest.approx(d / v + v / a + a / j, rel=1e-14)


# ------------------------------------------------------------- the motion profile
def _state_reference(prof, times):
    """x, v, a of the profile's own jerk schedule, by solve_ivp with dense output."""
    j = prof.jerk_mps3
    out = np.zeros((3, len(times)))
    y = np.zeros(3)
    start = 0.0
    for dur, sign in zip(prof.phase_durations_s, JERK_SIGNS):
        end = start + dur
        if dur > 0:
            sol = solve_ivp(lambda t, s, jk=sign * j: (s[1], s[2], jk), (start, end), y,
                            method="DOP853", rtol=1e-13, atol=1e-15, dense_output=True)
            inside = (times >= start) & (times <= end)
            if inside.any():
                out[:, inside] = sol.sol(times[inside])
            y = sol.y[:, -1]
        start = end
    return out, y


@pytest.mark.parametrize("lift, d, regime", _cases())
def test_motion_profile_state_matches_integrated_jerk(lift, d, regime):
    # Source: scipy reference (solve_ivp integration of the profile's own jerk);
    # and the limits of the run: |v| <= rated speed, |a| <= acceleration, and
    # the run ends at rest at the distance (common practice: the definition of
    # an ideal rest-to-rest flight).
    v, a, j = LIFTS[lift]
    prof = motion_profile(d, v, a, j)
    T = prof.flight_time_s
    times = np.linspace(0.0, T, 301)
    x, vel, acc = prof.state(times)
    ref, end_state = _state_reference(prof, times)
    np.testing.assert_allclose(x, ref[0], rtol=0, atol=1e-9 * max(d, 1.0))
    np.testing.assert_allclose(vel, ref[1], rtol=0, atol=1e-9)
    np.testing.assert_allclose(acc, ref[2], rtol=0, atol=1e-9)
    # The integrated schedule itself ends at rest at the distance.
    np.testing.assert_allclose(end_state, [d, 0.0, 0.0], atol=1e-9 * max(d, 1.0))
    # Limits on a fine grid of the closed-form state.
    fine = np.linspace(0.0, T, 5001)
    xf, vf, af = prof.state(fine)
    assert np.all(vf <= v * (1 + 1e-12)) and np.all(vf >= -1e-12)
    assert np.all(np.abs(af) <= a * (1 + 1e-12))
    assert np.all(np.diff(xf) >= -1e-12)
    # After the run the car stays at rest at the distance.
    xe, ve, ae = prof.state([T, T + 5.0])
    np.testing.assert_allclose(xe, [d, d], rtol=1e-12)
    np.testing.assert_array_equal(ve, [0.0, 0.0])
    np.testing.assert_array_equal(ae, [0.0, 0.0])
    # Peak values reported by the profile are reached (the acceleration at the
    # end of the first jerk phase, the speed at the end of the ramp), and are
    # those of its regime.
    t_jerk, t_hold = prof.phase_durations_s[:2]
    _, v_ramp, a_jerk = prof.state([t_jerk, 2 * t_jerk + t_hold])
    assert a_jerk[0] == pytest.approx(prof.peak_acceleration_mps2, rel=1e-9)
    assert v_ramp[1] == pytest.approx(prof.peak_speed_mps, rel=1e-9)
    assert vf.max() <= prof.peak_speed_mps * (1 + 1e-12)
    if regime == 1:
        assert prof.peak_speed_mps == v
    if regime == 2:
        assert prof.peak_acceleration_mps2 == a and prof.peak_speed_mps < v
    if regime == 3:
        assert prof.peak_acceleration_mps2 < a and prof.peak_speed_mps < v
