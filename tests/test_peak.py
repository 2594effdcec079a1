"""The peak simulation checked against its plain twin, queueing theory and the round trip.

* the compiled event loop equals tests/reference_peak.py to the bit, for every control;
* one car of rated load 1 is an M/G/1 queue: the Pollaczek-Khinchine mean wait;
* Little's law; conservation of passengers; saturation against the round-trip Monte Carlo;
* immediate allocation to the earliest-leaving car is conventional control;
* the published up-peak relation of waiting time to interval and car load;
* properties that hold for any run (hypothesis).
"""
from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from allocation.registry import POLICIES, RULES, get_policy, get_rule
from peak import statistics as S
from peak.arrivals import peak_period
from peak.simulation import (_tables, arrival_streams, control_names, resolve_controls, run_rows,
                             simulate_peak)
from roundtrip.building import Building, LiftGroup, Traffic
from roundtrip.inputfile import load_scenario
from roundtrip.kinematics import flight_time_s
from roundtrip.montecarlo import simulate_trips
from roundtrip.schedule import schedule_of, trip_timing

from .reference_peak import ReferencePeak, Times

DEMO = load_scenario(__import__("experiments.data", fromlist=["x"]).demo_building_path())
GROUP = LiftGroup(cars=3, rated_load_persons=8, rated_speed_mps=1.6, acceleration_mps2=1.0,
                  jerk_mps3=1.5, door_open_s=1.8, door_close_s=2.9, start_delay_s=0.5,
                  transfer_in_s=1.2, transfer_out_s=1.2, capacity_factor=0.8)
ALL_CONTROLS = control_names()


def twin(building, group, control, arrivals, window_s, cars_open=None):
    timing = trip_timing(building, group)
    times = Times(timing.flight_s.tolist(), group.door_open_s, group.door_close_s,
                  group.start_delay_s, group.transfer_in_s, group.transfer_out_s,
                  group.departure_load_persons, group.lobby_dwell_s)
    _, rule_table, _, policy_table = _tables(control, building, group, group.cars)
    kw = {}
    if control.kind == "delayed":
        kw = dict(rule=get_rule(control.name).function, rule_table=rule_table)
    elif control.kind == "immediate":
        kw = dict(policy=get_policy(control.name).function, policy_table=policy_table)
    return ReferencePeak(arrivals[0], arrivals[1], group.cars, times, control.kind,
                         timing=timing, window_s=window_s, cars_open=cars_open, **kw).run()


# ---------------------------------------------------------------- the loop == its twin
@st.composite
def peak_cases(draw):
    n = draw(st.integers(1, 12))
    rises = draw(st.lists(st.floats(2.8, 5.0), min_size=n, max_size=n))
    pops = draw(st.lists(st.integers(0, 80), min_size=n, max_size=n).filter(lambda p: sum(p) > 0))
    building = Building("P", tuple(rises), tuple(float(p) for p in pops),
                        draw(st.sampled_from([0.0, 0.0, 15.0])))
    group = replace(GROUP, cars=draw(st.integers(1, 4)), rated_load_persons=draw(st.integers(1, 10)),
                    capacity_factor=draw(st.sampled_from([0.5, 0.8, 1.0])),
                    lobby_dwell_s=draw(st.sampled_from([0.0, 4.0, 10.0, 25.0])),
                    rated_speed_mps=draw(st.sampled_from([1.0, 2.5])))
    pct = draw(st.floats(2.0, 30.0))
    return building, group, Traffic(pct), draw(st.integers(0, 2**32 - 1)), \
        draw(st.sampled_from(ALL_CONTROLS)), draw(st.sampled_from([1.0, 5.0, 12.0]))


def arrivals_of(building, traffic, seed, minutes=15.0):
    period = peak_period(building, traffic, minutes=minutes, warmup_minutes=2.0, tail_minutes=2.0)
    return period, arrival_streams(building, traffic, period, seed, 0, 1)[0]


@settings(max_examples=60)
@given(case=peak_cases())
def test_event_loop_equals_the_plain_twin_exactly(case):
    """Every control, any small group and demand: the same rows to the bit as the twin
    (who is committed to which trip and when, ready, boarding and alighting moments, and
    every trip's load, doors-open, departure and return)."""
    building, group, traffic, seed, name, window = case
    assert_equals_twin(building, group, traffic, seed, name, window)


@settings(max_examples=40)
@given(case=peak_cases(), cars_open=st.integers(1, 3))
def test_cars_open_equals_the_plain_twin_exactly(case, cars_open):
    """With at most K cars offered to an allocation (an immediate policy sees the K that
    leave soonest, a delayed round the K that open first), the same rows as the twin."""
    building, group, traffic, seed, name, window = case
    assert_equals_twin(building, group, traffic, seed, name, window, cars_open)


def assert_equals_twin(building, group, traffic, seed, name, window, cars_open=None):
    _, arr = arrivals_of(building, traffic, seed)
    control = resolve_controls([name])[-1]
    (rows, trips), = run_rows(building, group, control, [arr], window_s=window,
                              cars_open=cars_open)
    ref = twin(building, group, control, arr, window, cars_open)
    for key, expect in (("alloc_s", ref.alloc), ("ready_s", ref.ready), ("board_s", ref.board),
                        ("alight_s", ref.alight)):
        np.testing.assert_array_equal(rows[key], np.array(expect, dtype=float), err_msg=key)
    assert rows["car"].tolist() == ref.car_of
    assert rows["trip"].tolist() == ref.trip_of
    assert trips["car"].tolist() == [t.car for t in ref.trips]
    np.testing.assert_array_equal(trips["open_s"], [t.open_s for t in ref.trips])
    np.testing.assert_array_equal(trips["depart_s"], [t.depart_s for t in ref.trips])
    np.testing.assert_array_equal(trips["return_s"], [t.return_s for t in ref.trips])
    assert trips["load"].tolist() == [len(t.passengers) if math.isfinite(t.depart_s) else 0
                                      for t in ref.trips]


def test_earliest_leaving_allocation_is_conventional_control():
    """Destination control allocating each passenger, as they register, to the car with room
    that leaves first gives every passenger the car, and every moment, of conventional
    control on the same arrivals: light traffic, busy, and saturated (twice the capacity).
    (Only the moment of commitment differs by definition - registration against stepping
    in - and with it the order in which future trips are numbered.)"""
    b, g = DEMO.building, DEMO.group
    for pct in (4.0, 9.0, 24.0):
        _, arr = arrivals_of(b, Traffic(pct), 11, minutes=30)
        (conv, ct), (early, et) = (run_rows(b, g, c, [arr])[0]
                                   for c in resolve_controls(["earliest-leaving"]))
        for key in ("car", "ready_s", "board_s", "alight_s"):
            np.testing.assert_array_equal(conv[key], early[key], err_msg=f"{pct} {key}")
        left = np.isfinite(ct["depart_s"])
        assert sorted(zip(ct["depart_s"][left], ct["car"][left], ct["load"][left])) == \
            sorted(zip(et["depart_s"][np.isfinite(et["depart_s"])],
                       et["car"][np.isfinite(et["depart_s"])],
                       et["load"][np.isfinite(et["depart_s"])]))


def test_same_seed_same_rows_on_one_and_two_threads():
    b, g = DEMO.building, DEMO.group
    period = peak_period(b, Traffic(11.0), minutes=20)
    streams = arrival_streams(b, Traffic(11.0), period, 5, 0, 6)
    for name in ("conventional", "sorted", "least-added-time"):
        control = resolve_controls([name])[-1]
        one = run_rows(b, g, control, streams, threads=1)
        two = run_rows(b, g, control, streams, threads=2)
        for (r1, t1), (r2, t2) in zip(one, two):
            assert r1.tobytes() == r2.tobytes() and t1.tobytes() == t2.tobytes()


def test_a_run_worked_by_hand():
    """docs/peak_model.md, "A run worked by hand": one car of rated load 2 (departure load
    2), A at 1 s for floor 2, B at 4 s for floor 3: no waits, the trip leaves at 8.6 s, A out
    at 20.767 s, B at 32.333 s, the car back at 48.4 s."""
    building = Building("hand", (4.0, 3.5, 3.5), (1.0, 1.0, 1.0))
    group = LiftGroup(cars=1, rated_load_persons=2, rated_speed_mps=1.0, acceleration_mps2=1.0,
                      jerk_mps3=1.5, door_open_s=1.8, door_close_s=2.9, start_delay_s=0.5,
                      capacity_factor=1.0)
    arr = (np.array([1.0, 4.0]), np.array([2, 3], dtype=np.int64))
    (rows, trips), = run_rows(building, group, resolve_controls([])[0], [arr])
    assert rows["ready_s"].tolist() == [1.0, 4.0]
    assert rows["board_s"].tolist() == [1.0, 4.0]
    assert rows["alight_s"] == pytest.approx([20.7667, 32.3333], abs=1e-4)
    assert trips["depart_s"][0] == pytest.approx(8.6, abs=1e-12)
    assert trips["return_s"][0] == pytest.approx(48.4, abs=1e-9)
    assert trips["load"][0] == 2
    assert trips["open_s"][1] == pytest.approx(50.2, abs=1e-9)


# ---------------------------------------------------------------- queueing theory
def _one_car_queue(floors: int):
    rises = tuple([4.0] + [3.5] * (floors - 1))
    pops = tuple(float(30 + 10 * k) for k in range(floors))
    building = Building("Queue House", rises, pops)
    group = replace(GROUP, cars=1, rated_load_persons=1, capacity_factor=1.0)
    return building, group


def _service_moments(building, group):
    """A lone passenger's round trip, S(d) = t_f(0, d) + t_f(d, 0) + 2 (t_o + t_c + t_sd)
    + t_in + t_out (docs/trip_model.md), and its first two moments over the destinations."""
    levels = building.levels_m
    w = building.population_shares
    s = np.array([2 * flight_time_s(levels[d], group.rated_speed_mps, group.acceleration_mps2,
                                    group.jerk_mps3) + 2 * group.stop_overhead_s
                  + group.transfer_in_s + group.transfer_out_s for d in range(1, building.floors + 1)])
    return float(np.sum(w * s)), float(np.sum(w * s * s))


@pytest.mark.slow
@pytest.mark.parametrize("floors", [1, 6])
@pytest.mark.parametrize("rho", [0.3, 0.6, 0.85])
def test_one_car_of_rated_load_one_is_the_pollaczek_khinchine_queue(floors, rho):
    """One car that carries one passenger a trip, up-peak, conventional control: passengers
    wait in arrival order for a single server whose service time is the lone passenger's
    round trip, so the mean wait is the Pollaczek-Khinchine mean of the M/G/1 queue,
    W = lambda E[S^2] / (2 (1 - lambda E[S])) ("Queueing Systems, Volume 1: Theory",
    Wiley, 1975, section 5.6). Replications of 8 h follow a warm-up of four relaxation
    times E[S] / (1 - sqrt(rho))^2 (the M/M/1 relaxation time, same source, section 2.2,
    from memory), leaving a start-up bias far below the tolerance. The simulated mean must
    lie within 3 of its standard errors of the formula; with the standard error at most
    0.4 % of W, a bias of 1.7 % would be seen with 90 % power."""
    building, group = _one_car_queue(floors)
    es, es2 = _service_moments(building, group)
    lam = rho / es
    exact = lam * es2 / (2 * (1 - rho))
    pct = lam * 300.0 / building.total_population * 100.0
    relax_min = es / (1 - math.sqrt(rho)) ** 2 / 60.0
    study = simulate_peak(building, group, Traffic(pct), ["conventional"], minutes=480.0,
                          warmup_minutes=max(10.0, 4 * relax_min), seed=int(rho * 100) + floors,
                          replications={0.3: 4000, 0.6: 5000, 0.85: 10000}[rho])
    w = study.run("conventional").summary["average_waiting_time_s"]
    se = w.ci95 / S.t975(w.n - 1)
    assert abs(w.mean - exact) < 3 * se, (w.mean, exact, se)
    assert se <= 0.004 * exact, se / exact


def test_littles_law_holds_for_every_control():
    """Little's law, L = lambda W ("A proof for the queuing formula L = lambda W",
    Operations Research, 1961), for the lobby queue: the time-average number waiting equals
    the arrival rate times the mean wait, replication by replication up to the passengers
    waiting across the period's two ends, and within the intervals over replications."""
    b, g = DEMO.building, DEMO.group
    study = simulate_peak(b, g, Traffic(10.0), ["sorted", "same-floor-first"], replications=10,
                          seed=8)
    for run in study.runs:
        for f in run.per_replication:
            lw = f["arrival_rate_persons_per_s"] * f["average_waiting_time_s"]
            assert f["mean_lobby_queue_persons"] == pytest.approx(lw, rel=0.05, abs=0.2)
        s = run.summary
        lam = s["arrival_rate_persons_per_s"].mean
        q, w = s["mean_lobby_queue_persons"], s["average_waiting_time_s"]
        assert abs(q.mean - lam * w.mean) <= q.ci95 + lam * w.ci95 + 0.02 * q.mean


def test_every_passenger_who_arrived_is_delivered_waiting_or_riding():
    """Conservation at the end of the period, counted from the rows: arrived = delivered +
    still waiting + still riding; and after the run everyone is delivered."""
    b, g = DEMO.building, DEMO.group
    period, arr = arrivals_of(b, Traffic(14.0), 4, minutes=30)
    for control in resolve_controls(["sorted", "least-added-time"]):
        (rows, _), = run_rows(b, g, control, [arr])
        end = period.measure_end_s
        t = arr[0]
        arrived = np.sum(t <= end)
        delivered = np.sum(rows["alight_s"] <= end)
        waiting = np.sum((t <= end) & (rows["board_s"] > end))
        riding = np.sum((rows["board_s"] <= end) & (rows["alight_s"] > end))
        assert arrived == delivered + waiting + riding
        assert waiting > 0 or riding > 0
        assert np.all(np.isfinite(rows["alight_s"]))


@pytest.mark.slow
def test_saturated_conventional_capacity_is_the_round_trip_at_the_departure_load():
    """At twice its capacity the lobby never empties: every car leaves with its departure
    load at once, so the handling capacity delivered is the round-trip Monte Carlo's at that
    fixed load (docs/trip_model.md: 300 x load x cars / RTT), within 5 %."""
    b, g = DEMO.building, DEMO.group
    mc = simulate_trips(b, g, g.departure_load_persons, poisson=False, trials=60_000, seed=3)
    capacity_pct = 100 * 300 * g.departure_load_persons * g.cars / mc.round_trip_time.mean \
        / b.total_population
    study = simulate_peak(b, g, Traffic(2 * capacity_pct), ["conventional"], replications=8,
                          seed=2)
    run = study.run("conventional")
    assert run.saturated
    hc = run.summary["handling_capacity_pct_5min"].mean
    assert hc == pytest.approx(capacity_pct, rel=0.05)
    assert run.summary["mean_departure_load_persons"].mean == pytest.approx(
        g.departure_load_persons, abs=0.05)


@pytest.mark.slow
def test_conventional_wait_follows_the_published_up_peak_relation():
    """CIBSE Guide D (2015), up-peak waiting time from interval and car load (from memory):
    AWT = 0.4 INT up to 50 % car load, [0.4 + (1.8 P/CC - 0.77)^2] INT to 80 %. That
    relation was fitted to simulations of conventional up-peak with other lobby rules, so
    it is a band here, not an identity: on the demo building, for demands giving car loads
    of 25-70 %, the simulated conventional wait (interval = the period / trips) lies within
    a factor of two of it, and the ratio AWT / INT rises with car load as the relation's
    does. (It lies lower at light load, where a parked car with its doors open takes a
    passenger at once, and higher close to the departure load, where every car leaves full
    and the formula's cars still have room.)"""
    from roundtrip.classical import average_waiting_time_s
    b, g = DEMO.building, DEMO.group
    ratios = []
    for pct in (5.0, 6.0, 7.0, 8.0, 9.0):
        study = simulate_peak(b, g, Traffic(pct), ["conventional"], replications=8, seed=4)
        f = study.run("conventional").per_replication
        wait = float(np.mean([r["average_waiting_time_s"] for r in f]))
        load = float(np.mean([r["mean_departure_load_persons"] for r in f])) / g.rated_load_persons
        interval = float(np.mean([300.0 * r["mean_departure_load_persons"]
                                  / r["handling_capacity_persons_5min"] for r in f]))
        assert 0.25 <= load <= 0.70, load
        assert 0.5 <= wait / average_waiting_time_s(interval, load) <= 2.0, (pct, load, wait)
        ratios.append(wait / interval)
    assert all(x < y for x, y in zip(ratios, ratios[1:])), ratios


# ---------------------------------------------------------------- properties of any run
@settings(max_examples=40)
@given(case=peak_cases())
def test_nobody_is_dropped_and_every_passenger_alights_at_their_floor(case):
    """Nobody is dropped (everyone who arrives is delivered), no car leaves above its rated
    load, waits and rides are never negative, each passenger is out at the moment the trip
    schedule of their own trip gives for their floor, and delayed allocation never gives a
    passenger a car that has already left (nor one not open or due within the window)."""
    building, group, traffic, seed, name, window = case
    _, arr = arrivals_of(building, traffic, seed)
    control = resolve_controls([name])[-1]
    (rows, trips), = run_rows(building, group, control, [arr], window_s=window)
    t = arr[0]
    assert np.all(np.isfinite(rows["alight_s"]))
    assert np.all(rows["ready_s"] >= t) and np.all(rows["board_s"] >= rows["ready_s"])
    assert np.all(rows["alight_s"] > rows["board_s"])
    assert np.all(trips["load"] <= group.departure_load_persons)
    assert group.departure_load_persons <= group.rated_load_persons
    for tr in np.unique(rows["trip"]):
        mine = np.flatnonzero(rows["trip"] == tr)
        dests = [int(arr[1][i]) for i in mine]
        s = schedule_of([(0, d) for d in dests], building, group)
        dep = trips["depart_s"][tr]
        np.testing.assert_allclose(rows["alight_s"][mine] - dep,
                                   np.array(s.alight_s) - s.depart_s[0], rtol=0, atol=1e-6)
        # committed before the car left, and (delayed) open or due within the window
        close = dep - group.door_close_s - group.start_delay_s
        assert np.all(rows["alloc_s"][mine] <= close + 1e-9)
        if control.kind == "delayed":
            assert np.all(trips["open_s"][tr] <= rows["alloc_s"][mine] + window + 1e-9)


# ---------------------------------------------------------------- figures and contract
def test_student_t_quantiles_match_scipy():
    """The tabulated and expanded 0.975 quantiles of Student's t against scipy.stats.t."""
    from scipy.stats import t
    for df in list(range(1, 41)) + [60, 120, 500]:
        assert S.t975(df) == pytest.approx(t.ppf(0.975, df), abs=6e-4)


def test_controls_are_named_and_refused_clearly():
    assert control_names()[0] == "conventional"
    assert set(RULES) - {"best"} <= set(control_names())
    assert set(POLICIES) <= set(control_names())
    with pytest.raises(ValueError, match="did you mean 'sorted'"):
        resolve_controls(["sortd"])
    with pytest.raises(ValueError, match="not a control"):
        resolve_controls(["best"])
    with pytest.raises(ValueError, match="up-peak"):
        simulate_peak(DEMO.building, DEMO.group, Traffic(10.0, 0.5, 0.5, 0.0), replications=2)


def test_a_profile_sets_the_demand_of_each_five_minutes():
    """With traffic.profile_pct_5min each slot's arrivals follow its own rate (mean of the
    Poisson counts within 4 standard errors over 40 replications)."""
    profile = (4.0, 12.0, 8.0)
    period = peak_period(DEMO.building, Traffic(12.0, profile_pct_5min=profile))
    assert period.measured_s == 15 * 60
    streams = arrival_streams(DEMO.building, Traffic(12.0, profile_pct_5min=profile), period,
                              3, 0, 40)
    U = DEMO.building.total_population
    for k, pct in enumerate(profile):
        lo = period.measure_start_s + 300 * k
        counts = [np.sum((t >= lo) & (t < lo + 300)) for t, _ in streams]
        expect = pct / 100 * U
        assert abs(np.mean(counts) - expect) < 4 * math.sqrt(expect / len(counts))


@pytest.mark.parametrize("name", [p for p in ALL_CONTROLS
                                  if resolve_controls([p])[-1].kind == "immediate"])
def test_with_one_car_open_every_immediate_policy_is_conventional_control(name):
    """A fact of the trade: with one car open to each allocation there is nothing to
    choose, so destination control loads the cars as conventional control does. Offered
    only the car that leaves the lobby soonest, every immediate policy gives the very
    rows of conventional control (it meets the earliest-leaving car with room)."""
    b, g = DEMO.building, replace(DEMO.group, cars=4)
    _, arr = arrivals_of(b, Traffic(11.0), 3, minutes=20.0)
    conv, = run_rows(b, g, resolve_controls(["conventional"])[-1], [arr])
    one, = run_rows(b, g, resolve_controls([name])[-1], [arr], cars_open=1)
    for key in ("car", "ready_s", "board_s", "alight_s"):      # (trip ids are bookkeeping)
        np.testing.assert_array_equal(one[0][key], conv[0][key], err_msg=key)
