"""Benchmark of the Monte Carlo kernels: `python -m experiments.bench`.

Everything is measured in one run on this machine and reported as ratios, so the
figures travel between machines better than seconds do:

(i)   numpy ``Generator(PCG64).random`` uniforms per second;
(ii)  the kernel's trips per second (passenger sampling from given uniforms plus
      the trip model) on one thread and on all threads, for the reference up-peak
      case: 16 floors of 3.6 m, 2.5 m/s, P = 12 fixed;
(iii) the kernel's fraction of the random-number bound, trips/s / (uniforms/s / P);
(iv)  its speed-up over a plain vectorised numpy Monte Carlo of the same trip model
      (kept here as the baseline);
(v)   the first-call compile time (fresh cache, in a child process), the time of a
      second process with the cache warm, and a converged demand-mode estimate
      (0.5 % interval) with a warm cache;
(vi)  with the allocation rules: trips per second per rule for a 4-car batch of the
      reference case, and its fraction of the random-number bound;
(vii) the peak simulation: simulated passengers per second on one thread for the demo
      building at 12 % of its population per 5 minutes, for conventional control and for
      `sorted` with delayed allocation - the event loop alone (arrivals drawn
      beforehand), and whole replications (drawing the arrivals, the loop and the figures).
"""
from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time

import numpy as np

REFERENCE_FLOORS = 16
REFERENCE_RISE_M = 3.6
REFERENCE_SPEED_MPS = 2.5
REFERENCE_P = 12


def reference_case():
    from roundtrip.building import Building, LiftGroup, Traffic
    b = Building("bench", (REFERENCE_RISE_M,) * REFERENCE_FLOORS, (100.0,) * REFERENCE_FLOORS)
    g = LiftGroup(cars=4, rated_load_persons=16, rated_speed_mps=REFERENCE_SPEED_MPS,
                  acceleration_mps2=1.0, jerk_mps3=1.5, door_open_s=1.8, door_close_s=2.9,
                  start_delay_s=0.5, transfer_in_s=1.2, transfer_out_s=1.2)
    return b, g, Traffic(12.0)


def best_of(fn, repeats: int = 5) -> float:
    times = []
    for _ in range(repeats):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return min(times)


def uniforms_per_s(n: int) -> float:
    rng = np.random.Generator(np.random.PCG64(1))
    out = np.empty(n)
    rng.random(out=out)
    return n / best_of(lambda: rng.random(out=out))


def numpy_baseline_trips(u, P, shares, flight_s, group):
    """Plain vectorised numpy Monte Carlo of the up-peak trip model (no capacity limit
    reached: P below rated load). The baseline the kernel is compared with."""
    n = u.size // P
    cum = np.cumsum(shares)
    dest = np.minimum(np.searchsorted(cum, u.reshape(n, P), side="right"), shares.size - 1) + 1
    mask = np.zeros((n, shares.size + 1), dtype=bool)
    mask[np.arange(n)[:, None], dest] = True
    rows, cols = np.nonzero(mask)
    first = np.r_[True, rows[1:] != rows[:-1]]
    prev = np.where(first, 0, np.r_[0, cols[:-1]])
    flights = np.bincount(rows, weights=flight_s[prev, cols], minlength=n)
    last = np.r_[rows[1:] != rows[:-1], True]
    flights += np.bincount(rows[last], weights=flight_s[cols[last], 0], minlength=n)
    stops = np.bincount(rows, minlength=n)
    return flights + (stops + 1) * group.stop_overhead_s + P * (group.transfer_in_s + group.transfer_out_s)


def kernel_trips(sampler, timing, stream):
    """The kernel as simulate_trips runs it: passengers sampled from given uniforms and timed
    (for this up-peak case, the up-peak kernel)."""
    out = {}

    def run():
        out["sample"] = sampler.sampled_trips(timing, stream)
    return run, out


def rule_figures(building, group, P, n_batches, bound):
    """Trips/s of each rule on one thread for batches of cars x P (the group kernel:
    passenger sampling, allocation, timing of every car), and the fraction of the
    random-number bound."""
    from allocation.registry import RULES
    from batchrounds.montecarlo import group_sample
    from roundtrip.montecarlo import PassengerSampler
    from roundtrip.schedule import TripStream, trip_timing

    L = group.cars
    sampler = PassengerSampler(building)
    timing = trip_timing(building, group)
    u = np.random.default_rng(5).random(n_batches * L * P)
    stream = TripStream(u, np.arange(0, u.size + 1, L * P, dtype=np.int64))
    out = {}
    rng = np.random.Generator(np.random.PCG64(1))
    fresh = np.empty(u.size)
    for name, rule in RULES.items():
        if rule.max_batch is not None:
            continue
        table = rule.table(building, group, [L], P)

        def run():
            group_sample(rule, table, sampler, timing, L, L, stream)
        run()
        # the rule and the random-number bound timed in turn, best of each, so that a
        # change in the machine's speed during the run moves both
        rule_s, rng_s = [], []
        for _ in range(5):
            rule_s.append(best_of(run, 1))
            rng_s.append(best_of(lambda: rng.random(out=fresh), 1))
        trips_per_s = n_batches * L / min(rule_s)
        local_bound = u.size / min(rng_s) / P
        out[f"rule_{name}_trips_per_s_1_thread"] = trips_per_s
        out[f"rule_{name}_fraction_of_rng_bound"] = trips_per_s / max(local_bound, bound)
    return out


def peak_figures(replications: int = 200) -> dict:
    """Simulated passengers per second of the peak simulation on one thread (see (vii)):
    the event loop alone on arrivals drawn beforehand, and whole replications (drawing the
    arrivals, the loop, the per-replication figures and the slot table)."""
    from experiments.data import demo_building_path
    from peak import statistics as S
    from peak.arrivals import peak_period
    from peak.simulation import arrival_streams, resolve_controls, run_rows
    from roundtrip.inputfile import load_scenario

    scenario = load_scenario(demo_building_path())
    b, g, traffic = scenario.building, scenario.group, scenario.traffic
    period = peak_period(b, traffic)
    streams = arrival_streams(b, traffic, period, 1, 0, replications)
    n = sum(t.size for t, _ in streams)
    out = {"peak_passengers_per_replication": n / replications}
    for control in resolve_controls(["sorted"]):             # conventional, then sorted
        run_rows(b, g, control, streams[:2])                  # compiled, tables made

        def whole():
            fresh = arrival_streams(b, traffic, period, 2, 0, replications)
            for (t, _), (rows, trips) in zip(fresh, run_rows(b, g, control, fresh, threads=1)):
                S.replication_figures(t, rows, trips, period.measure_start_s,
                                      period.measure_end_s, b.total_population, g.door_open_s)
                S.slot_figures(t, rows, period.measure_start_s, period.measure_end_s)
        loop = n / best_of(lambda: run_rows(b, g, control, streams, threads=1), 3)
        out[f"peak_{control.name}_loop_passengers_per_s_1_thread"] = loop
        out[f"peak_{control.name}_loop_two_thread_speedup"] = n / best_of(
            lambda: run_rows(b, g, control, streams, threads=2), 3) / loop
        out[f"peak_{control.name}_replication_passengers_per_s_1_thread"] = n / best_of(whole, 3)
    out["peak_conventional_simulated_hour_ms"] = 1e3 * (n / replications) / out[
        "peak_conventional_replication_passengers_per_s_1_thread"] * 3600.0 / period.measured_s
    return out


def _child_time(code: str, cache_dir: str) -> float:
    env = dict(os.environ, NUMBA_CACHE_DIR=cache_dir)
    t = time.perf_counter()
    subprocess.run([sys.executable, "-c", code], check=True, env=env)
    return time.perf_counter() - t


CHILD = ("from experiments.bench import reference_case\n"
         "from roundtrip.montecarlo import simulate_trips\n"
         "b, g, _ = reference_case()\n"
         "simulate_trips(b, g, 12, poisson=False, trials=1000, seed=1)\n")


def main(argv=None) -> dict:
    ap = argparse.ArgumentParser(prog="python -m experiments.bench", description=__doc__.split("\n")[0])
    ap.add_argument("--trials", type=int, default=400_000, help="trips per timing (default 400,000)")
    ap.add_argument("--no-compile", action="store_true", help="skip the compile-time child processes")
    args = ap.parse_args(argv)

    import numba

    from roundtrip.montecarlo import PassengerSampler, simulate_demand
    from roundtrip.schedule import TripStream, trip_timing

    b, g, traffic = reference_case()
    P, n = REFERENCE_P, args.trials
    figures: dict[str, float] = {}
    if not args.no_compile:
        with tempfile.TemporaryDirectory() as cache:
            figures["first_call_process_s"] = _child_time(CHILD, cache)
            figures["warm_cache_process_s"] = _child_time(CHILD, cache)

    ups = uniforms_per_s(n * P)
    figures["uniforms_per_s"] = ups
    bound = ups / P
    sampler = PassengerSampler(b)
    timing = trip_timing(b, g)
    rng = np.random.default_rng(3)
    u = rng.random(n * P)
    stream = TripStream(u, np.arange(0, n * P + 1, P, dtype=np.int64))
    threads = numba.config.NUMBA_NUM_THREADS
    for label, t in (("1_thread", 1), (f"{threads}_threads", threads)):
        numba.set_num_threads(t)
        run, _ = kernel_trips(sampler, timing, stream)
        run()
        figures[f"kernel_trips_per_s_{label}"] = n / best_of(run)
    numba.set_num_threads(threads)
    base = numpy_baseline_trips(u, P, b.population_shares, timing.flight_s, g)
    run1, out1 = kernel_trips(sampler, timing, stream)
    run1()
    rtt1 = out1["sample"].rtt_s
    # the kernel samples by the alias method, the baseline by inversion: compare their means
    figures["baseline_mean_rtt_s"] = float(base.mean())
    figures["kernel_mean_rtt_s"] = float(rtt1.mean())
    figures["numpy_baseline_trips_per_s"] = n / best_of(
        lambda: numpy_baseline_trips(u, P, b.population_shares, timing.flight_s, g), 3)
    figures["fraction_of_rng_bound_1_thread"] = figures["kernel_trips_per_s_1_thread"] / bound
    figures["speedup_over_numpy_1_thread"] = (figures["kernel_trips_per_s_1_thread"]
                                              / figures["numpy_baseline_trips_per_s"])
    simulate_demand(b, g, traffic, seed=1)
    figures["demand_estimate_warm_s"] = best_of(lambda: simulate_demand(b, g, traffic, seed=1), 3)

    numba.set_num_threads(1)
    figures.update(rule_figures(b, g, P, n // 4, bound))
    figures.update(peak_figures())
    numba.set_num_threads(threads)

    width = max(len(k) for k in figures)
    print(f"reference case: {REFERENCE_FLOORS} floors x {REFERENCE_RISE_M} m, "
          f"{REFERENCE_SPEED_MPS} m/s, P = {P} fixed; {n:,} trips per timing; "
          f"{threads} threads available")
    for k, v in figures.items():
        print(f"{k:<{width}}  {v:,.4g}")
    return figures


if __name__ == "__main__":
    main()
