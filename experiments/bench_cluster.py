"""Benchmark of studies on a Dask cluster: `python -m experiments.bench_cluster`.

A sizing study of the demo building (``liftsort size``: the peak sizing, then the
round-trip screen; a grid of cars, rated loads and speeds, see :data:`STUDY`) is run

(i)   in this process, as `liftsort size` runs it by default (kernels on every core),
      and again on one thread (as a worker runs it), each task timed;
(ii)  on a local Dask cluster of ``--workers`` processes (one thread each), the cluster
      started beforehand and its start-up timed apart, and on a cluster of one worker (the
      cluster's own cost, and the scaling from one worker to ``--workers``); every result
      is checked to equal (i) exactly;
(iii) the machine's parallelism as this run finds it: pure-Python arithmetic in one
      process, then in ``--workers`` processes at once (what the cores give when other
      work shares them; the speed-up of (ii) is bounded by it);
(iv)  on the same cluster, ``--trivial`` tasks that do nothing, all in one wave (the
      scheduling overhead per task, amortised over the workers) and one at a time (the
      latency of one wave, which a cheapest-first search pays once per wave).

It prints the seconds of (i) and (ii), the speed-up (ii) over (i) with and without
the cluster's start-up, the overhead per task, the per-task times of the study, and
an **estimate** (not a measurement) for a cluster of ``--estimate-workers`` workers:
each search in waves of :data:`experiments.tasks.LOOKAHEAD_PER_WORKER` tasks per worker
(the cluster's window slides; waves are the simpler, pessimistic model), a wave taking max(its longest task, its work / workers) + the wave latency + its tasks x
the overhead per task, from the one-thread per-task times measured in (i), scaled by how
much slower the one-worker cluster of (ii) ran the whole study than one thread in process
(candidates the in-process
search did not need, which a wider wave computes on the side, counted at the median task
time). The kernels are compiled before anything is timed. Speed is measured here, never
in timed tests.
"""
from __future__ import annotations

import argparse
import json
import math
import statistics
import time

#: The sizing study: the demo building, cars 1 ... 9, four rated loads and four speeds,
#: the peak sizing with 200 replications per candidate and the round-trip screen to a
#: 0.2 % interval, so that it takes the better part of a minute in process on two cores.
STUDY = dict(cars_list=list(range(1, 10)), loads=[13, 16, 17, 21], speeds=[1.6, 2.0, 2.5, 3.0],
             replications=200, ci_target_pct=0.2)
#: A small study that compiles every kernel the study calls.
WARM = dict(cars_list=[4, 5], loads=[16], speeds=[2.0], replications=2, trials=200)


def _nothing(x):
    return x


def _arithmetic(n: int) -> float:
    """Seconds of n multiply-adds in pure Python (no library, no memory traffic)."""
    start = time.perf_counter()
    s = 0
    for i in range(n):
        s += i * i
    return time.perf_counter() - start


def machine_parallelism(processes: int, n: int = 10_000_000) -> float:
    """How many processes' worth of arithmetic the machine gives at once: processes x the
    time of one alone / the time of ``processes`` at once."""
    from concurrent.futures import ProcessPoolExecutor
    one = _arithmetic(n)
    with ProcessPoolExecutor(processes) as pool:
        list(pool.map(_arithmetic, [1000] * processes))
        start = time.perf_counter()
        list(pool.map(_arithmetic, [n] * processes))
        together = time.perf_counter() - start
    return processes * one / together


class _Timed:
    """An executor that runs each task on ``inner`` and records (key, seconds) of each
    (in process: the task's own time)."""

    def __init__(self, inner):
        self.inner = inner
        self.lookahead = inner.lookahead
        self.threads = inner.threads
        self.times: list[tuple[tuple, float]] = []

    def run(self, tasks, on_done=None):
        out = []
        for t in tasks:
            start = time.perf_counter()
            out += self.inner.run([t], on_done)
            self.times.append((t.key, time.perf_counter() - start))
        return out


def _study(ex, *, cars_list, loads, speeds, replications, trials=None, ci_target_pct=0.5,
           threads=None, seed=2026):
    """Both searches of `liftsort size` for the demo building on the executor ``ex``:
    (result, seconds)."""
    from allocation.registry import default_rules, headline_control
    from experiments.data import demo_building_path
    from experiments.decision import ServiceCriterion
    from experiments.sizing import default_criteria, size_by_service, size_group
    from experiments.tasks import file_digest
    from roundtrip.inputfile import load_scenario
    path = demo_building_path()
    scenario = load_scenario(path)
    digest = file_digest(path.read_bytes())
    start = time.perf_counter()
    service = size_by_service(scenario, headline_control(), ServiceCriterion(), cars_list,
                              loads, speeds, seed=seed, replications=replications, ex=ex,
                              building_file_sha256=digest)
    screen = size_group(scenario, default_rules(), default_criteria(scenario), cars_list,
                        loads, speeds, trials=trials, ci_target_pct=ci_target_pct,
                        max_trials=2_000_000, seed=seed, threads=threads, ex=ex,
                        building_file_sha256=digest)
    return {"service": service, "screen": screen}, time.perf_counter() - start


def estimate(times_by_search: dict, candidates: int, workers: int, latency_s: float,
             overhead_s: float) -> float:
    """The estimated seconds of the study on ``workers`` workers (see the module notes)."""
    from experiments.tasks import LOOKAHEAD_PER_WORKER
    wave = LOOKAHEAD_PER_WORKER * workers
    total = 0.0
    for times in times_by_search.values():
        median = statistics.median(times)
        done = 0
        while done < len(times):
            chunk = times[done:done + wave]
            extra = max(0, min(wave, candidates - done) - len(chunk))   # look-ahead
            work = sum(chunk) + extra * median
            total += max(max(chunk), work / workers) + latency_s + \
                (len(chunk) + extra) * overhead_s
            done += len(chunk)
    return total


def main(argv=None) -> dict:
    ap = argparse.ArgumentParser(prog="python -m experiments.bench_cluster",
                                 description=__doc__.split("\n")[0])
    ap.add_argument("--workers", type=int, default=2, help="local cluster size (default 2)")
    ap.add_argument("--trivial", type=int, default=400,
                    help="trivial tasks for the overhead per task (default 400)")
    ap.add_argument("--estimate-workers", type=int, default=64,
                    help="the cluster size of the estimate (default 64)")
    ap.add_argument("--lookahead", type=int, default=None,
                    help="candidates in flight per worker (default: "
                         "experiments.tasks.LOOKAHEAD_PER_WORKER)")
    opts = ap.parse_args(argv)
    import experiments.tasks as tasks_module
    if opts.lookahead is not None:
        tasks_module.LOOKAHEAD_PER_WORKER = opts.lookahead

    from experiments.tasks import InProcess, Task, executor

    _study(InProcess(), **WARM)          # compile every kernel, outside the timings

    import numba
    timed = _Timed(InProcess())
    here, here_s = _study(timed, **STUDY)
    cores = numba.get_num_threads()
    numba.set_num_threads(1)
    single = _Timed(InProcess(1))
    here_1, here_1_s = _study(single, **STUDY, threads=1)
    numba.set_num_threads(cores)

    start = time.perf_counter()
    with executor(workers=opts.workers) as ex:
        startup_s = time.perf_counter() - start
        # the workers compile (from numba's disk cache) on their first tasks: warm them
        _study(ex, **WARM)
        there, there_s = _study(ex, **STUDY)
        n = opts.trivial
        start = time.perf_counter()
        ex.run([Task(("trivial", i), _nothing, {"x": i}) for i in range(n)])
        overhead_s = (time.perf_counter() - start) / n
        start = time.perf_counter()
        for i in range(20):
            ex.run([Task(("one", i), _nothing, {"x": i})])
        latency_s = (time.perf_counter() - start) / 20
    with executor(workers=1) as ex:      # the same on one worker: the cluster's own cost
        _study(ex, **WARM)
        there_1, there_1_s = _study(ex, **STUDY)
    parallel = machine_parallelism(opts.workers)
    same = len({json.dumps(r, sort_keys=True, default=str)
                for r in (here, there, here_1, there_1)}) == 1

    by_search: dict = {}
    for key, seconds in single.times:
        by_search.setdefault(key[1], []).append(seconds)
    all_times = [s for _, s in single.times]
    candidates = len(STUDY["cars_list"]) * len(STUDY["loads"]) * len(STUDY["speeds"])
    # a task on a worker takes as long as on one worker of (ii), not as in process
    slowdown = max(1.0, there_1_s / here_1_s)
    by_search = {k: [t * slowdown for t in v] for k, v in by_search.items()}
    guess = estimate(by_search, candidates, opts.estimate_workers, latency_s, overhead_s)
    figures = {
        "in_process_s": here_s,
        "in_process_cores": cores,
        "in_process_one_thread_s": here_1_s,
        "workers": opts.workers,
        "lookahead_per_worker": tasks_module.LOOKAHEAD_PER_WORKER,
        "cluster_s": there_s,
        "cluster_startup_s": startup_s,
        "one_worker_s": there_1_s,
        "scaling_one_to_workers": there_1_s / there_s,
        "speed_up": here_s / there_s,
        "speed_up_over_one_thread": here_1_s / there_s,
        "speed_up_with_startup": here_s / (there_s + startup_s),
        "same_result": same,
        "machine_parallelism": parallel,
        "overhead_per_task_ms": 1000 * overhead_s,
        "wave_latency_ms": 1000 * latency_s,
        "tasks": len(all_times),
        "tasks_per_search": {k: len(v) for k, v in by_search.items()},
        "task_s_min": min(all_times),
        "task_s_median": statistics.median(all_times),
        "task_s_max": max(all_times),
        "task_s_total": sum(all_times),
        "worker_slowdown": slowdown,
        "estimate_workers": opts.estimate_workers,
        "estimate_s": guess,
        "estimate_speed_up": here_s / guess,
        "estimate_s_per_task_overhead_part": overhead_s * candidates * len(by_search),
    }
    print(f"sizing study of the demo building ({STUDY}):")
    print(f"  in process ({cores} threads, the default): {here_s:8.1f} s")
    print(f"  in process (1 thread):            {here_1_s:8.1f} s")
    print(f"  --workers {opts.workers} (cluster running):   {there_s:8.1f} s   speed-up "
          f"{figures['speed_up']:.2f}x over the default, "
          f"{figures['speed_up_over_one_thread']:.2f}x over one thread "
          f"(look-ahead {tasks_module.LOOKAHEAD_PER_WORKER} per worker)")
    print(f"  cluster start-up:                 {startup_s:8.1f} s   speed-up with it "
          f"{figures['speed_up_with_startup']:.2f}x")
    print(f"  --workers 1:                      {there_1_s:8.1f} s   (1 -> {opts.workers} "
          f"workers: {figures['scaling_one_to_workers']:.2f}x)")
    print(f"  same result as in process:        {same}")
    print(f"  machine parallelism now: {parallel:.2f} of {opts.workers} processes' worth "
          f"(the bound on the speed-up here)")
    print(f"  overhead per task ({n} trivial tasks, one wave): "
          f"{figures['overhead_per_task_ms']:.2f} ms; one-task wave: "
          f"{figures['wave_latency_ms']:.1f} ms")
    print(f"  tasks: {len(all_times)} ({', '.join(f'{k}: {v}' for k, v in figures['tasks_per_search'].items())}); "
          f"per task min {figures['task_s_min']:.2f} s, median {figures['task_s_median']:.2f} s, "
          f"max {figures['task_s_max']:.2f} s, total {figures['task_s_total']:.1f} s")
    print(f"  ESTIMATE (not measured) for {opts.estimate_workers} workers, from the per-task "
          f"times above x {slowdown:.2f} (one worker against one thread in process): "
          f"{guess:.1f} s, {figures['estimate_speed_up']:.1f}x over in process "
          f"(bounded by the longest task, {figures['task_s_max']:.2f} s, per wave)")
    if not math.isfinite(guess):
        raise SystemExit("the estimate is not finite")
    return figures


if __name__ == "__main__":
    main()
