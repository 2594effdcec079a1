"""Benchmark of the Monte Carlo kernels and of what a user waits for: `python -m experiments.bench`.

Everything is measured in one run on this machine and reported as ratios, so the
figures travel between machines better than seconds do (``--runs 3`` repeats the
whole set and prints the median of each figure):

(i)    numpy ``Generator(PCG64).random`` uniforms per second, and the random-number
       bound: uniforms per second / P trips per second;
(ii)   the kernel's trips per second (passenger sampling from given uniforms plus the
       trip model, chains of trips with carry-over, running sums) on one thread and on
       all threads, for the reference up-peak case: 16 floors of 3.6 m, 2.5 m/s,
       P = 12 fixed; its fraction of the random-number bound and the two-thread
       speed-up;
(iii)  its speed-up over a plain vectorised numpy Monte Carlo of the same trip model
       (kept here as the baseline);
(iv)   end to end: ``simulate_trips(trials=N)`` in process with a warm cache (drawing
       the stream in chunks, the kernel, the estimates), its trips per second and its
       ratio to the kernel-only rate on the same threads;
(v)    peak resident memory of a process running ``simulate_trips`` with 10 thousand
       and with 10 million trips, and the growth between them;
(vi)   the first-call compile time (fresh cache, in a child process), the time of a
       second process with the cache warm, and a converged demand-mode estimate
       (0.5 % interval) with a warm cache;
(vii)  with the allocation rules: trips per second per rule for rounds of 4 cars x P
       of the reference case, every car timed, on one thread (its fraction of the
       random-number bound) and the two-thread speed-up;
(viii) ``liftsort demo`` spawned twice with a fresh ``NUMBA_CACHE_DIR``: cold (every
       kernel compiled) and warm;
(ix)   the peak simulation: simulated passengers per second on one thread for the demo
       building at 12 % of its population per 5 minutes, for conventional control and for
       `sorted` with delayed allocation - the event loop alone (arrivals drawn
       beforehand), and whole replications (drawing the arrivals, the loop and the
       figures) - and the loop's two-thread speed-up.
"""
from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
import time

import numpy as np

REFERENCE_FLOORS = 16
REFERENCE_RISE_M = 3.6
REFERENCE_SPEED_MPS = 2.5
REFERENCE_P = 12
MEMORY_TRIPS = (10_000, 10_000_000)


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


def with_numba_threads(t: int, fn):
    import numba
    old = numba.get_num_threads()
    numba.set_num_threads(t)
    try:
        return fn()
    finally:
        numba.set_num_threads(old)


def kernel_figures(b, g, n: int, bound: float, threads: int) -> dict:
    """The chain kernel on a given stream (what simulate_trips runs per chunk), and
    simulate_trips end to end, on one and on all threads."""
    from roundtrip.montecarlo import PassengerSampler, chain_sums, simulate_trips
    from roundtrip.schedule import TripStream, trip_timing
    from roundtrip.stream import CHUNK_TRIPS

    P = REFERENCE_P
    sampler = PassengerSampler(b)
    timing = trip_timing(b, g)
    # the kernel-only rate is measured chunk by chunk, as simulate_trips feeds it
    m = min(n, CHUNK_TRIPS)
    u = np.random.default_rng(3).random(m * P)
    stream = TripStream(u, np.arange(0, m * P + 1, P, dtype=np.int64))
    out = {}
    for label, t in (("1_thread", 1), (f"{threads}_threads", threads)):
        def run():
            chain_sums(sampler, timing, stream)
        with_numba_threads(t, run)
        out[f"kernel_trips_per_s_{label}"] = m / with_numba_threads(t, lambda: best_of(run, 7))
        simulate_trips(b, g, P, poisson=False, trials=m, seed=1, threads=t)
        e2e = n / with_numba_threads(t, lambda: best_of(
            lambda: simulate_trips(b, g, P, poisson=False, trials=n, seed=1, threads=t), 3))
        out[f"end_to_end_trips_per_s_{label}"] = e2e
        out[f"end_to_end_over_kernel_{label}"] = e2e / out[f"kernel_trips_per_s_{label}"]
    out["fraction_of_rng_bound_1_thread"] = out["kernel_trips_per_s_1_thread"] / bound
    out["kernel_speedup_2_threads"] = (out[f"kernel_trips_per_s_{threads}_threads"]
                                       / out["kernel_trips_per_s_1_thread"])
    # the numpy baseline on the same uniforms
    base = numpy_baseline_trips(u, P, b.population_shares, timing.flight_s, g)
    out["baseline_mean_rtt_s"] = float(base.mean())
    sample = simulate_trips(b, g, P, poisson=False, trials=m, seed=1)
    out["kernel_mean_rtt_s"] = sample.round_trip_time.mean
    out["numpy_baseline_trips_per_s"] = m / best_of(
        lambda: numpy_baseline_trips(u, P, b.population_shares, timing.flight_s, g), 3)
    out["speedup_over_numpy_1_thread"] = (out["kernel_trips_per_s_1_thread"]
                                          / out["numpy_baseline_trips_per_s"])
    return out


def rule_figures(building, group, P, n_rounds, bound, threads: int) -> dict:
    """Trips/s of each rule for rounds of cars x P (the group kernel: passenger sampling,
    conventional loading, allocation, timing of every car), on one thread with its
    fraction of the random-number bound, and the speed-up on all threads."""
    from allocation.registry import RULES
    from batchrounds.montecarlo import group_sample
    from roundtrip.montecarlo import PassengerSampler
    from roundtrip.schedule import TripStream, trip_timing

    L = group.cars
    sampler = PassengerSampler(building)
    timing = trip_timing(building, group)
    u = np.random.default_rng(5).random(n_rounds * L * P)
    stream = TripStream(u, np.arange(0, u.size + 1, P, dtype=np.int64))
    out = {}
    rng = np.random.Generator(np.random.PCG64(1))
    fresh = np.empty(u.size)
    for name, rule in RULES.items():
        if rule.max_batch is not None:
            continue
        table = rule.table(building, group, [L], P)

        buffers = {}                 # the output arrays lent from call to call, as compare does

        def run():
            group_sample(rule, table, sampler, timing, L, L, stream, buffers=buffers)
        with_numba_threads(1, run)
        # the rule and the random-number bound timed in turn, best of each, so that a
        # change in the machine's speed during the run moves both
        rule_s, rng_s = [], []
        for _ in range(5):
            rule_s.append(with_numba_threads(1, lambda: best_of(run, 1)))
            rng_s.append(best_of(lambda: rng.random(out=fresh), 1))
        trips_per_s = n_rounds * L / min(rule_s)
        local_bound = u.size / min(rng_s) / P
        out[f"rule_{name}_trips_per_s_1_thread"] = trips_per_s
        out[f"rule_{name}_fraction_of_rng_bound"] = trips_per_s / max(local_bound, bound)
        with_numba_threads(threads, run)
        two = n_rounds * L / with_numba_threads(threads, lambda: best_of(run, 3))
        out[f"rule_{name}_speedup_{threads}_threads"] = two / trips_per_s
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

MEMORY_CHILD = ("import resource, sys\n"
                "from experiments.bench import reference_case\n"
                "from roundtrip.montecarlo import simulate_trips\n"
                "b, g, _ = reference_case()\n"
                "simulate_trips(b, g, 12, poisson=False, trials=int(sys.argv[1]), seed=1)\n"
                "print(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)\n")


def peak_memory_mb(trips: int) -> float:
    """Peak resident memory [MB] of a process running simulate_trips(trials=trips)."""
    out = subprocess.run([sys.executable, "-c", MEMORY_CHILD, str(trips)], check=True,
                         capture_output=True, text=True)
    return int(out.stdout.split()[-1]) / 1024.0


def demo_seconds() -> tuple[float, float]:
    """`liftsort demo` twice in fresh processes sharing a fresh NUMBA_CACHE_DIR: (cold, warm)."""
    times = []
    with tempfile.TemporaryDirectory() as cache, tempfile.TemporaryDirectory() as out:
        env = dict(os.environ, NUMBA_CACHE_DIR=cache)
        for _ in range(2):
            t = time.perf_counter()
            subprocess.run([sys.executable, "-m", "experiments.cli", "demo", "--out", out],
                           check=True, env=env, stdout=subprocess.DEVNULL)
            times.append(time.perf_counter() - t)
    return times[0], times[1]


def measure(n: int, compile_times: bool, demo: bool) -> dict:
    import numba

    from roundtrip.montecarlo import simulate_demand

    b, g, traffic = reference_case()
    P = REFERENCE_P
    figures: dict[str, float] = {}
    if compile_times:
        with tempfile.TemporaryDirectory() as cache:
            figures["first_call_process_s"] = _child_time(CHILD, cache)
            figures["warm_cache_process_s"] = _child_time(CHILD, cache)
    ups = uniforms_per_s(n * P)
    figures["uniforms_per_s"] = ups
    bound = ups / P
    figures["rng_bound_trips_per_s"] = bound
    threads = numba.config.NUMBA_NUM_THREADS
    figures.update(kernel_figures(b, g, n, bound, threads))
    simulate_demand(b, g, traffic, seed=1)
    figures["demand_estimate_warm_s"] = best_of(lambda: simulate_demand(b, g, traffic, seed=1), 3)
    figures.update(rule_figures(b, g, P, n // 16, bound, threads))
    numba.set_num_threads(1)
    figures.update(peak_figures())
    numba.set_num_threads(threads)
    small, big = (peak_memory_mb(t) for t in MEMORY_TRIPS)
    figures["peak_memory_10k_trips_mb"] = small
    figures["peak_memory_10M_trips_mb"] = big
    figures["memory_growth_10k_to_10M_mb"] = big - small
    if demo:
        cold, warm = demo_seconds()
        figures["demo_cold_s"] = cold
        figures["demo_warm_s"] = warm
    return figures


def main(argv=None) -> dict:
    ap = argparse.ArgumentParser(prog="python -m experiments.bench", description=__doc__.split("\n")[0])
    ap.add_argument("--trials", type=int, default=2_000_000,
                    help="trips of the end-to-end timing (default 2,000,000)")
    ap.add_argument("--runs", type=int, default=1, help="repeat everything and print medians")
    ap.add_argument("--no-compile", action="store_true", help="skip the compile-time child processes")
    ap.add_argument("--no-demo", action="store_true", help="skip the two `liftsort demo` processes")
    args = ap.parse_args(argv)

    import numba
    runs = [measure(args.trials, not args.no_compile, not args.no_demo) for _ in range(args.runs)]
    figures = {k: statistics.median(r[k] for r in runs) for k in runs[0]}
    width = max(len(k) for k in figures)
    print(f"reference case: {REFERENCE_FLOORS} floors x {REFERENCE_RISE_M} m, "
          f"{REFERENCE_SPEED_MPS} m/s, P = {REFERENCE_P} fixed; {args.trials:,} trips end to end; "
          f"{numba.config.NUMBA_NUM_THREADS} threads available; "
          f"{'median of ' + str(args.runs) + ' runs' if args.runs > 1 else 'one run'}")
    for k, v in figures.items():
        print(f"{k:<{width}}  {v:,.4g}")
    return figures


if __name__ == "__main__":
    main()
