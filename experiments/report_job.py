"""The main job: every estimate for one building, its charts, and the client report.

:func:`run_job` answers "is destination control worth specifying here?" for one
input file. It runs, in order: the classical up-peak calculation; the Monte
Carlo demand fixed point under conventional control; all rules compared at
that load on common batches; a demand sweep around the design demand; a sweep
of the cars open to allocation; the sizing search; then draws the charts and
writes one self-contained HTML report.
"""
from __future__ import annotations

import contextlib
import datetime as _dt
import hashlib
import math
from dataclasses import replace
from pathlib import Path

import numpy as np

from roundtrip import __version__
from roundtrip.building import Scenario, Traffic

from .outputs import write_atomic
from .wording import CAUTION, client_name, client_source, count_of

SWEEP_POINTS = 15


def demand_points(demand_pct: float, n: int = SWEEP_POINTS) -> list[float]:
    """n demand points from half to one and a half times the design demand."""
    return [round(float(x), 2) for x in np.linspace(0.5 * demand_pct, 1.5 * demand_pct, n)]


def input_rows(scenario: Scenario) -> list[tuple[str, str, str]]:
    b, g, t = scenario.building, scenario.group, scenario.traffic
    rises = sorted(set(b.floor_rises_m))
    rows = [("building", "name", b.name), ("building", "floors", str(b.floors)),
            ("building", "floor rises [m]", ", ".join(f"{x:g}" for x in b.floor_rises_m)
             if len(rises) > 1 else f"{rises[0]:g} (uniform)"),
            ("building", "express rise [m]", f"{b.express_m:g}"),
            ("building", "population [persons]", ", ".join(f"{x:g}" for x in b.populations)
             + f" (total {b.total_population:g})")]
    for key in ("cars", "rated_load_persons", "rated_speed_mps", "acceleration_mps2", "jerk_mps3",
                "door_open_s", "door_close_s", "start_delay_s", "transfer_in_s",
                "transfer_out_s", "capacity_factor"):
        rows.append(("group", key, f"{getattr(g, key):g}"))
    if t is not None:
        for key in ("arrival_rate_pct_5min", "incoming", "outgoing", "interfloor"):
            rows.append(("traffic", key, f"{getattr(t, key):g}"))
    return rows


def _p(x) -> str:
    """A headline figure to one decimal; "n/a" when it could not be estimated."""
    return f"{x:.1f}" if isinstance(x, (int, float)) and math.isfinite(x) else "n/a"


def run_job(scenario: Scenario, input_path: str | Path, out_dir: Path, *, seed: int = 2026,
            ci_target_pct: float = 0.5, trials: int | None = None,
            max_trials: int = 1_000_000, quiet: bool = True, threads=None, stages=None,
            destination_control: str | None = None, criterion=None, ex=None) -> dict:
    """Run the whole job and write ``report.html`` (and the charts, sweep.csv) into out_dir.

    ``out_dir`` should be a folder of this run alone (the command line gives the private
    folder of :func:`experiments.outputs.output_set`): the report embeds the charts this
    run drew there. Adaptive runs stop at ``max_trials`` (the sweeps at 400,000) or at the
    run limits (:func:`experiments.limits.trial_cap`). ``stages(text)`` is told each stage
    as it begins (see :class:`experiments.progress.Stages`). ``destination_control``: the
    control the decision is stated for (default: the registry's declared one,
    :func:`allocation.registry.headline_control`); ``criterion``: the service criterion
    (default :class:`experiments.decision.ServiceCriterion`). ``ex``: the executor of the
    studies' tasks (the sweeps, the sensitivity study, the sizing; default in process,
    :mod:`experiments.tasks`); the report is the same either way.
    """
    from .progress import no_stages
    stages = no_stages if stages is None else stages
    with _chart_worker() as worker:
        return _run_job(scenario, input_path, out_dir, worker, seed=seed,
                        ci_target_pct=ci_target_pct, trials=trials, max_trials=max_trials,
                        quiet=quiet, threads=threads, stages=stages,
                        destination_control=destination_control, criterion=criterion,
                        ex=ex)


def _bounds_from_sweep(opens, rule: str, cars: int) -> tuple:
    """The realisable and ideal round-trip bounds of ``rule`` at design load, read from the
    cars-open sweep (cars open 1 ... cars at the design demand)."""
    from .basis import IDEAL, REALISABLE, REALISABLE_CARS_OPEN
    from .decision import Figure
    out = []
    for k, basis in ((min(REALISABLE_CARS_OPEN, cars), REALISABLE), (cars, IDEAL)):
        row = opens[(opens["rule"] == rule) & (opens["cars_open"] == k)].iloc[0]
        hc = float(row["design_load_handling_capacity_pct_5min"])
        rtt = float(row["design_load_round_trip_time_s"])
        ci = hc * float(row["design_load_ci95_s"]) / rtt if rtt > 0 else math.nan
        out.append(Figure(f"handling capacity at design load, {rule}, {k} of {cars} cars open",
                          hc, ci, "% of population per 5 min", basis, k))
    return tuple(out)


def sizing_candidates(group, extra_cars: int = 3) -> dict:
    """The sizing grid of the job: 1 ... cars + ``extra_cars`` cars, the file's car size and
    speed with their standard neighbours (:func:`experiments.sizing.neighbours`)."""
    from .sizing import STANDARD_LOADS_PERSONS, STANDARD_SPEEDS_MPS, neighbours
    return {"cars_list": list(range(1, group.cars + extra_cars + 1)),
            "loads": neighbours(group.rated_load_persons, STANDARD_LOADS_PERSONS),
            "speeds": neighbours(group.rated_speed_mps, STANDARD_SPEEDS_MPS)}


def _run_job(scenario, input_path, out_dir, worker, *, seed, ci_target_pct, trials, max_trials,
             quiet, threads, stages, destination_control, criterion, ex=None):
    from allocation.registry import default_rules, headline_control
    from batchrounds.montecarlo import compare_rules
    from roundtrip.classical import demand_calculation, is_uppeak
    from roundtrip.montecarlo import simulate_demand

    from .decision import BOUND_RULE, ServiceCriterion, decide
    from .estimates import peak_study
    from .limits import trial_cap
    from .report import write_report
    from .sizing import size_by_service
    from .sweep import demand_sweep
    from .tasks import InProcess, file_digest

    ex = InProcess(threads) if ex is None else ex
    digest = file_digest(Path(input_path).read_bytes())
    b, g = scenario.building, scenario.group
    rules = default_rules()
    traffic = scenario.traffic or Traffic(12.0)
    demand = traffic.arrival_rate_pct_5min
    dc = destination_control or headline_control()
    criterion = criterion or ServiceCriterion()
    uppeak = is_uppeak(traffic)
    run = dict(ci_target_pct=ci_target_pct, trials=trials, seed=seed, threads=threads)
    job = replace(scenario, traffic=traffic)
    sweep_cap = min(max_trials, 400_000)
    warm = worker.submit(_warm_peak) if uppeak else None   # compile the peak kernels there

    stages("classical calculation")
    classical = demand_calculation(b, g, traffic, poisson=True)
    stages("Monte Carlo round trips at the demand (a first run compiles the kernels, "
           "about 10 s)")
    mc = simulate_demand(b, g, traffic, **run, max_trials=trial_cap(
        max_trials, passengers_per_car=g.design_load_persons))
    stages(f"round-trip bounds: allocation rules on common passengers ({', '.join(rules)})")
    comparison = compare_rules(b, g, rules, mc.passengers_per_trip, traffic=traffic, **run,
                               max_trials=trial_cap(max_trials, cars=g.cars, rules=len(rules),
                                                    passengers_per_car=mc.passengers_per_trip))
    stages(f"round-trip bounds: demand sweep, {SWEEP_POINTS} points")
    sweep = demand_sweep(job, demand_points(demand), rules, max_trials=sweep_cap,
                         quiet=quiet, ex=ex, building_file_sha256=digest, **run)
    stages(f"round-trip bounds: cars open to allocation, 1 to {g.cars}")
    opens = demand_sweep(job, [demand], rules, cars_open_list=list(range(1, g.cars + 1)),
                         max_trials=sweep_cap, quiet=quiet, ex=ex,
                         building_file_sha256=digest, **run)
    bounds = _bounds_from_sweep(opens, BOUND_RULE, g.cars)

    decision = study = service = None
    if uppeak:
        if warm is not None:
            warm.result()
        stages("peak simulation at the demand, every control")
        study = peak_study(job, None, seed=seed, threads=threads)
        stages(f"handling capacity at the service criterion and its sensitivity "
               f"(conventional and {dc})")
        decision = decide(job, dc, criterion, study=study if dc in
                          [r.control.name for r in study.runs] else None, bounds=bounds,
                          seed=seed, threads=threads, ex=ex, building_file_sha256=digest)
        stages("sizing on the service criterion (peak simulation)")
        service = size_by_service(job, dc, criterion, **sizing_candidates(g), seed=seed, ex=ex,
                                  building_file_sha256=digest)

    stages("charts and the report")
    at_demand = {r["rule"]: r for r in comparison.to_dict()["rules"]}
    design = opens[opens["cars_open"] == g.cars].set_index("rule")
    for name, r in at_demand.items():
        r["design_hc"] = float(design.loc[name, "design_load_handling_capacity_pct_5min"])
        if name != rules[0]:
            r["basis"] = "ideal-bound" if g.cars > 2 else "realisable-bound"

    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    write_atomic(out_dir / "sweep.csv", sweep.to_csv(index=False))
    name = b.name
    # half the charts in the helper process (already warm), half here, at the same time
    later = worker.submit(_later_charts, b, g, traffic, opens, comparison,
                          min(mc.passengers_per_trip, g.design_load_persons), seed, out_dir, name)
    from . import charts
    paths = []
    if decision is not None:
        from . import decision_charts as dch
        paths += dch.waiting_distribution_chart(study, out_dir, name,
                                                controls=("conventional", dc))
        paths += dch.service_vs_demand_chart(list(decision.capacities), out_dir, name, criterion,
                                             demand)
        paths += dch.tornado_chart(list(decision.sensitivity), decision.gain_pct_5min, out_dir,
                                   name, dc, decision.outcome)
    paths += charts.sweep_charts(sweep, out_dir, name)
    paths += later.result()
    captions = _captions(dc)
    figures = []
    for p in paths:
        if p.suffix == ".png":
            title, caption = captions.get(p.stem, (p.stem.replace("_", " "), ""))
            figures.append({"title": title, "caption": caption, "png": p})

    answer = _answer(decision, service, bounds, at_demand, mc, demand, g.cars, dc, traffic)
    digest = hashlib.sha256(Path(input_path).read_bytes()).hexdigest()
    stamp = {"liftsort_version": __version__, "seed": seed,
             "trials": f"{comparison.trials} batches at the design demand; adaptive runs to a "
                       f"{ci_target_pct:g} % interval elsewhere; peak simulation: "
                       f"{_replications(study)}" if trials is None else str(trials),
             "input_sha256": digest,
             "generated_at": _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%d %H:%M UTC")}
    context = {
        "title": f"{name}: is destination control worth specifying?",
        "building": name,
        "job": (f"Is {client_name(dc)}, worth specifying for this building, against "
                f"conventional control, at the design demand of {demand:g} % of the population "
                f"in 5 minutes?"),
        "headline": answer["headline"],
        "answer_points": answer["points"],
        "headline_numbers": answer["numbers"],
        "inputs": input_rows(scenario),
        "method": _method(dc, criterion),
        "assumptions": _assumptions() + ([] if scenario.traffic else [
            "The input gives no [traffic] section: a design demand of 12 % of the population "
            "in 5 minutes, up-peak, is assumed (common office practice)."]),
        "sources": _sources(),
        "tables": _tables(classical, mc, at_demand, decision, service, bounds, study, dc),
        "figures": figures,
        "caution": CAUTION,
        "stamp": stamp,
    }
    report = write_report(context, out_dir)
    stages(f"report written: {report}")
    result = {"report": str(report), "headline": answer["headline"],
              "headline_numbers": answer["numbers"],
              "figures": [str(p) for p in paths], "csv": str(out_dir / "sweep.csv"),
              "stamp": stamp, "destination_control": dc,
              "rules": list(at_demand.values()),
              "bounds": [f.to_dict() for f in bounds],
              "classical": classical.to_dict(), "monte_carlo": mc.to_dict()}
    if decision is not None:
        d = decision.to_dict(service)
        result.update({
            "peak": study.to_dict(),
            "capacity_at_criterion": d["capacity_at_criterion"],
            "decision": {k: v for k, v in d.items() if k != "capacity_at_criterion"},
            "sizing": {k: v for k, v in service.items() if k != "tried"},
        })
    else:
        result.update({"peak": None, "capacity_at_criterion": [], "decision": None,
                       "sizing": None})
    return result


def _replications(study) -> str:
    if study is None:
        return "not run (traffic is not up-peak)"
    reps = sorted({len(r.per_replication) for r in study.runs})
    return (f"{reps[0]} to {reps[-1]} replications of {study.period.measured_s / 60:g} min "
            f"per control at the demand" if len(reps) > 1 else
            f"{reps[0]} replications of {study.period.measured_s / 60:g} min per control")


def _answer(decision, service, bounds, at_demand, mc, demand, cars, dc, traffic) -> dict:
    """The headline in words, the points under it and the headline numbers."""
    from .basis import label
    from .decision import BOUND_RULE
    realisable, ideal = bounds
    name = client_name(dc)
    if decision is None:
        headline = (f"No answer from the peak simulation: it models up-peak traffic only, and "
                    f"this building's traffic is a mix (incoming {traffic.incoming:g}, outgoing "
                    f"{traffic.outgoing:g}, interfloor {traffic.interfloor:g}). The round-trip "
                    f"figures below are bounds for destination grouping, not an answer: "
                    f"{_p(realisable.value)} % of the population per 5 minutes with "
                    f"{realisable.cars_open} cars open (the realisable bound), "
                    f"{_p(ideal.value)} % with every car open (the ideal bound), against "
                    f"{_p(next(iter(at_demand.values()))['design_hc'])} % for conventional "
                    f"control at design load.")
        numbers = {"demand_pct_5min": demand,
                   "realisable_bound_hc_pct_5min": realisable.value,
                   "ideal_bound_hc_pct_5min": ideal.value}
        return {"headline": headline, "points": [], "numbers": numbers}
    v = decision.verdict(service)
    conv_run, dc_run = decision.study.runs[0], decision.study.run(dc)
    c, d = conv_run.summary, dc_run.summary
    diff, diff_ci = decision.ttd_difference()

    def peak_line(who, s, run):
        sat = " (saturated: the lobby queue grows through the hour)" if run.saturated else ""
        return (f"{who}, simulated in time at {demand:g} %: average waiting time "
                f"{s['average_waiting_time_s'].mean:.1f} s (95 % interval "
                f"± {s['average_waiting_time_s'].ci95:.1f} s), 95th-percentile wait "
                f"{s['waiting_time_p95_s'].mean:.1f} s, average time to destination "
                f"{s['average_time_to_destination_s'].mean:.1f} s, handling capacity "
                f"delivered {s['handling_capacity_pct_5min'].mean:.1f} %{sat}.")
    cap_c, cap_d = decision.capacity("conventional"), decision.capacity(dc)
    fmt = (lambda x: "none of the demands tried" if x is None else f"{x:.1f} %")
    points = [peak_line("Conventional control", c, conv_run),
              peak_line(name[0].upper() + name[1:], d, dc_run),
              f"Handling capacity at the service criterion (simulated in time): conventional "
              f"control {fmt(cap_c)}, destination control {fmt(cap_d)}"
              + (f", a gain of {v['gain_pct_5min']:+.1f} points." if v["gain_pct_5min"] is not None
                 else "."),
              f"Time to destination, destination control less conventional, on the same "
              f"arrivals: {diff:+.1f} s (95 % interval ± {diff_ci:.1f} s).",
              f"Round-trip bounds for destination grouping ('{BOUND_RULE}'), not answers: "
              f"{_p(realisable.value)} % at design load with {realisable.cars_open} cars open "
              f"({label(realisable.basis)}); {_p(ideal.value)} % with every car open "
              f"({label(ideal.basis)}); conventional control "
              f"{_p(next(iter(at_demand.values()))['design_hc'])} %."]
    turns = decision.turns_on()
    points.append("The answer turns on: " + ", ".join(turns) + "." if turns else
                  "No input moved by its step in the sensitivity study changes the answer.")
    numbers = {"demand_pct_5min": demand,
               "conventional_average_wait_s": c["average_waiting_time_s"].mean,
               "destination_average_wait_s": d["average_waiting_time_s"].mean,
               "conventional_hc_at_criterion_pct_5min": cap_c,
               "destination_hc_at_criterion_pct_5min": cap_d}
    if v["margin_pct_5min"] is not None:
        numbers["margin_pct_5min"] = v["margin_pct_5min"]
    if v["cars_saved"]:
        numbers["cars_saved"] = v["cars_saved"]
    numbers = {k: x for k, x in numbers.items() if x is not None}
    return {"headline": v["text"], "points": points, "numbers": numbers}


@contextlib.contextmanager
def _chart_worker():
    """A second process that draws half of the charts while this one draws the rest.

    Drawing dominates the job's time and matplotlib is single-threaded, so the
    charts are split over two processes; the helper starts at once and imports
    matplotlib and seaborn while the Monte Carlo runs. It is started with
    "spawn" (a clean interpreter: no threads inherited from the kernels).
    """
    import multiprocessing
    import signal
    from concurrent.futures import ProcessPoolExecutor
    # The helper starts with Ctrl-C blocked (the signal mask is inherited), so that it never
    # reports one of its own while it starts; here a Ctrl-C meanwhile waits, then ends the
    # job (and the helper with it). The pool is made first: making it starts
    # multiprocessing's resource tracker, which unblocks Ctrl-C when it has started.
    pool = ProcessPoolExecutor(1, mp_context=multiprocessing.get_context("spawn"),
                               initializer=_ignore_interrupts)
    block = hasattr(signal, "pthread_sigmask")
    previous = signal.pthread_sigmask(signal.SIG_BLOCK, {signal.SIGINT}) if block else None
    try:
        pool.submit(_warm_up)                     # starts the helper process now
    finally:
        if block:
            signal.pthread_sigmask(signal.SIG_SETMASK, previous)
    try:
        yield pool
    except BaseException:
        pool.shutdown(wait=True, cancel_futures=True)   # Ctrl-C or an error: drop queued charts
        raise
    pool.shutdown(wait=True)


def _ignore_interrupts() -> None:
    """The chart process leaves Ctrl-C to the main process, which ends the job (and this
    process with it), and ends itself should the main process end without it (a process
    pool's helper would otherwise wait for work for ever)."""
    import os
    import signal
    import threading
    import time
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    parent = os.getppid()

    def watch():
        while os.getppid() == parent:
            time.sleep(0.5)
        os._exit(0)

    threading.Thread(target=watch, daemon=True, name="liftsort-parent-watch").start()


def _warm_up() -> None:
    from . import charts  # noqa: F401
    import matplotlib.figure  # noqa: F401
    import seaborn  # noqa: F401


def _warm_peak() -> None:
    """Compile (or load) the peak simulation's kernels in the chart process, while the main
    process runs the round trips: both processes then share numba's disk cache."""
    from peak.simulation import warm_up
    warm_up()


def _later_charts(building, group, traffic, opens, comparison, passengers_per_car, seed,
                  out_dir, name):
    from allocation.registry import default_rules
    from roundtrip.classical import is_uppeak

    from . import charts
    paths = charts.cars_open_chart(opens, out_dir, name)
    paths += charts.distribution_charts(comparison, out_dir, name)
    paths += charts.batch_diagram(building, group, rules=tuple(default_rules()[:2]),
                                  passengers_per_car=passengers_per_car, seed=seed,
                                  out_dir=out_dir, building_name=name,
                                  design_traffic_is_uppeak=is_uppeak(traffic))
    return paths


def _captions(dc: str) -> dict:
    name = client_name(dc)
    return {
        "waiting_distribution": (
            "Waiting time: the shape of the trade (simulated in time)",
            f"Share of passengers who wait longer than a given time, at the design demand, "
            f"under conventional control and destination control ({name}). Destination "
            f"control groups passengers into fewer stops, so cars come back sooner, but it "
            f"may make some passengers wait for a later car."),
        "service_vs_demand": (
            "Service against demand (simulated in time)",
            "Average waiting time and average time to destination against demand for each "
            "control, with the service criterion; bands are 95 % intervals over replications. "
            "The dotted line of each control marks its handling capacity at the criterion: "
            "the highest demand at which the upper end of every interval still meets it."),
        "sensitivity_tornado": (
            "What the answer turns on (simulated in time)",
            "Destination control's gain in handling capacity at the criterion with each input "
            "moved down and up by the stated step; the grey band is the Monte Carlo error "
            "(the same inputs on another seed), apart from the inputs."),
        "rtt_interval_vs_demand": ("Round-trip time and interval against demand (ideal bound)",
                                   "Each rule at the car load conventional control needs for the "
                                   "demand, every car open to allocation and each round known "
                                   "in full: for destination rules an ideal bound, not an "
                                   "answer; bands are 95 % intervals."),
        "capacity_vs_demand": ("Handling capacity at design load against demand (ideal bound)",
                               "A rule carries the demand while its level lies above the demand "
                               "line; where they cross, it saturates. Destination rules with "
                               "every car open: the ideal bound."),
        "gain_vs_demand": ("Grouping gain against demand (ideal bound)",
                           "Gain of each destination rule over conventional control on the same "
                           "passengers, with paired 95 % intervals, every car open: the ideal "
                           "bound, which no real destination control reaches."),
        "gain_vs_cars_open": ("Gain against the cars open to allocation (the bounds)",
                              "With one car open every rule is conventional control; the gain "
                              "grows as more cars share the allocation. Two cars open is the "
                              "realisable bound (the car loading and the next), every car open "
                              "the ideal bound. With k cars open the group works in blocks of "
                              "k cars (and one smaller block when k does not divide the cars), "
                              "so such a k gains less than its neighbours suggest."),
        "stops_distribution": ("Stops per round trip (ideal bound)",
                               "Share of car trips by number of stops, every car open."),
        "reversal_distribution": ("Highest reversal floor (ideal bound)",
                                  "Share of car trips by the highest floor reached, every car "
                                  "open."),
        "batch_diagram": ("Who rode which car to which floor",
                          "One sampled up-peak round: conventional loading mixes destinations "
                          "in every car; destination grouping gives each car a few "
                          "neighbouring floors."),
    }


def _method(dc: str, criterion) -> list[str]:
    return [
        f"Peak simulation (the answer): passengers arrive one by one at random (a Poisson "
        f"process at the design demand) over a measured hour after a warm-up; each car "
        f"leaves the lobby when it has its departure load or when its lobby dwell has run, "
        f"flies the trip of its passengers stop by stop on the real floor levels with ideal "
        f"jerk-limited flights, door and transfer times, and returns. Under conventional "
        f"control passengers board the car at the lobby in arrival order; under destination "
        f"control ({client_name(dc)}) each passenger is given a car as they register. "
        f"Nobody is dropped: whoever does not fit waits for the next car. Independent "
        f"replications give each figure its 95 % interval; both controls see the same "
        f"arrivals.",
        f"Handling capacity at the service criterion: for each control, the highest demand at "
        f"which the simulation still meets the criterion ({criterion.describe()}), each "
        f"demand passing only if the upper end of every 95 % interval meets its limit; found "
        f"on a 1 % grid of demands and refined by bisection to 0.1 %.",
        "Sensitivity: the decision figures recomputed with each main input moved by a stated "
        "step (transfer and door times ±20 %, departure load ±1 person, demand ±2 points, "
        "lobby dwell ±50 %, the allocation window ±50 % for a batch rule, and the cars open "
        "to one allocation, from every car down to one fewer and to two); the Monte Carlo "
        "error (the same inputs on another seed) is shown apart.",
        "Sizing: groups are tried in the order a client pays for them (fewest cars, then the "
        "smaller installation, rated load times rated speed); a control's design is the first "
        "group at which it meets the criterion in the peak simulation. A saving of cars is "
        "claimed only from these simulated figures.",
        "Round-trip bounds: the classical up-peak round-trip time RTT = 2·H·t_v + (S+1)·t_s + "
        "2·P·t_p (ISO 8100-32), checked by a Monte Carlo of round trips; destination grouping "
        "is bounded by sharing each round's passengers, known in full, between the cars open "
        "to one allocation: two cars (the realisable bound) or every car (the ideal bound). "
        "These are upper bounds, never the answer.",
    ]


def _assumptions() -> list[str]:
    return [
        "Up-peak traffic for the peak simulation; passengers arrive independently, at random.",
        "Ideal kinematics: no levelling, re-levelling or passenger hesitation beyond the stated "
        "times; no interference between cars at the lobby.",
        "Cars leave the lobby with their departure load (the capacity factor times the rated "
        "load, rounded up) or when the lobby dwell has run since their first boarding.",
        "The round-trip bounds compare every rule at the same car load: each car carries the "
        "passengers conventional control would give it.",
        "No car ever holds more than its rated load; whoever does not fit waits for the next "
        "car.",
    ]


def _sources() -> list[str]:
    return [
        "ISO 8100-32:2020, Lifts for the transport of persons and goods - Part 32: Planning and "
        "selection of passenger lifts to be installed in office, hotel and residential buildings "
        "(up-peak round-trip time, S and H, ideal kinematics).",
        "CIBSE Guide D: Transportation systems in buildings, 2015 (round-trip time, "
        "waiting-time estimate, office up-peak planning criteria, destination control).",
        "\"An efficient method for generating discrete random variables with general "
        "distributions\", ACM Transactions on Mathematical Software, 1977 (alias sampling).",
        "The service criterion's limits (average wait 30 s, 95th-percentile wait 90 s) are "
        "common practice for office up-peak.",
    ]


def _ci(x) -> float:
    return x.ci95 if math.isfinite(x.ci95) else math.nan


def _tables(classical, mc, at_demand, decision, service, bounds, study, dc) -> list[dict]:
    from allocation.registry import RULES, get_policy, get_rule

    from .basis import label
    tables = []
    if decision is not None:
        runs = [study.runs[0], study.run(dc)]
        rows = []
        for text, unit, key in (("average waiting time", "s", "average_waiting_time_s"),
                                ("waiting time, 95th percentile", "s", "waiting_time_p95_s"),
                                ("average time to destination", "s",
                                 "average_time_to_destination_s"),
                                ("time to destination, 95th percentile", "s",
                                 "time_to_destination_p95_s"),
                                ("average transit time", "s", "average_transit_time_s"),
                                ("handling capacity delivered", "% / 5 min",
                                 "handling_capacity_pct_5min"),
                                ("mean departure load", "persons", "mean_departure_load_persons"),
                                ("mean round-trip time", "s", "round_trip_time_s")):
            row = [text, unit]
            for r in runs:
                row += [r.summary[key].mean, _ci(r.summary[key])]
            rows.append(row)
        rows.append(["saturated", "", *sum((["yes" if r.saturated else "no", ""] for r in runs),
                                           [])])
        tables.append({
            "title": f"Peak simulation at the design demand of {study.demand_pct_5min:g} % "
                     f"(simulated in time; {_replications(study)})",
            "columns": ["quantity", "unit", "conventional", "95 % interval, ±",
                        client_name(dc), "95 % interval, ±"],
            "rows": rows})
        caps = {c.control: c for c in decision.capacities}
        tables.append({
            "title": "Destination control's three figures, each with its basis",
            "columns": ["figure", "basis", "conventional [% / 5 min]",
                        "destination control [% / 5 min]", "95 % interval, ± [% / 5 min]"],
            "rows": [["handling capacity at the service criterion", label("peak"),
                      caps["conventional"].handling_capacity_pct_5min,
                      caps[dc].handling_capacity_pct_5min, "bisection to 0.1"],
                     *[[f"handling capacity at design load, {b.cars_open} cars open",
                        label(b.basis), at_demand[next(iter(at_demand))]["design_hc"],
                        b.value, b.ci95] for b in bounds]]})
        steps = [s for s in decision.sensitivity if not s.monte_carlo]
        mc_steps = [s for s in decision.sensitivity if s.monte_carlo]
        tables.append({
            "title": "Sensitivity of the decision (simulated in time): handling capacity at "
                     "the criterion with each input moved",
            "columns": ["input", "step", "conventional [% / 5 min]",
                        "destination control [% / 5 min]", "gain [points]",
                        "time to destination, difference [s]", "answer"],
            "rows": [["inputs as given", "", caps["conventional"].handling_capacity_pct_5min,
                      caps[dc].handling_capacity_pct_5min, decision.gain_pct_5min,
                      decision.ttd_difference()[0], decision.outcome]]
            + [[s.input, s.step, s.conventional_pct_5min, s.destination_pct_5min,
                s.hc_gain_pct_5min, s.ttd_difference_s, s.outcome] for s in steps]
            + [[f"Monte Carlo error (apart): {s.step}", "", s.conventional_pct_5min,
                s.destination_pct_5min, s.hc_gain_pct_5min, s.ttd_difference_s, s.outcome]
               for s in mc_steps]})
        tables.append({
            "title": f"Sizing on the service criterion (simulated in time, at "
                     f"{service['demand_pct_5min']:g} %; order: {service['cost_order']})",
            "columns": ["control", "cars", "rated load [persons]", "rated speed [m/s]",
                        "door open + close [s]", "average wait [s]", "95th-percentile wait [s]",
                        "time to destination [s]", "handling capacity [% / 5 min]"],
            "rows": [[client_name(d["control"], with_key=False),
                      d["cars"] if d["found"] else "none found",
                      d.get("rated_load_persons", ""), d.get("rated_speed_mps", ""),
                      (d["door_open_s"] + d["door_close_s"]) if d["found"] else "",
                      d.get("average_waiting_time_s", ""), d.get("waiting_time_p95_s", ""),
                      d.get("average_time_to_destination_s", ""),
                      d.get("handling_capacity_pct_5min", "")]
                     for d in service["designs"]]})
    c, m = classical.to_dict(), mc.to_dict()
    tables.append({
        "title": f"Conventional control at the design demand by round trips: classical formula "
                 f"and Monte Carlo ({c['passenger_model']} passenger counts, "
                 f"{c['traffic_mix']} traffic)",
        "columns": ["quantity", "classical", "Monte Carlo", "95 % interval, ±", "unit"],
        "rows": [["passengers per trip", c["passengers_per_trip"], m["passengers_per_trip"], "",
                  "persons"],
                 ["round-trip time", c["round_trip_time_s"], m["round_trip_time_s"], m["ci95_s"],
                  "s"],
                 ["interval", c["interval_s"], m["interval_s"], m["ci95_s"] / mc.cars, "s"],
                 ["stops", c["expected_stops"], m["expected_stops"], m["expected_stops_ci95"],
                  "stops"],
                 ["highest reversal floor", c["highest_reversal_floor"],
                  m["highest_reversal_floor"], m["highest_reversal_floor_ci95"], "floor"],
                 ["passengers carried per trip", c["passengers_per_trip"],
                  m["passengers_carried_per_trip"], m["passengers_carried_ci95"], "persons"],
                 ["car load", c["car_load_pct"], m["car_load_pct"], "", "% of rated load"],
                 ["handling capacity (carried)", c["handling_capacity_pct_5min"],
                  m["handling_capacity_pct_5min"], "", "% / 5 min"],
                 ["trips that leave someone behind", "", 100.0 * m["left_behind_share"], "", "%"],
                 ["saturated", "yes" if c["saturated"] else "no",
                  "yes" if m["saturated"] else "no", "", ""]]})
    tables.append({
        "title": f"Allocation rules at the design demand by round trips (the same passengers, "
                 f"{c['passenger_model']} passenger counts; destination rules with every car "
                 f"open: the ideal bound, not an answer)",
        "columns": ["rule", "basis", "round-trip time [s]", "95 % interval, ± [s]",
                    "interval [s]", "stops", "highest floor [floor]",
                    "handling-capacity gain [%]", "95 % interval, ± [%]",
                    "handling capacity at design load [% / 5 min]"],
        "rows": [[client_name(r["rule"]), label(r["basis"]) if r.get("basis") else "",
                  r["round_trip_time_s"], r["ci95_s"], r["interval_s"], r["expected_stops"],
                  r["highest_reversal_floor"], r["hc_gain_pct_vs_random"],
                  r["hc_gain_ci95_pct"], r["design_hc"]] for r in at_demand.values()]})
    entries = [get_rule(n) for n in at_demand]
    if decision is not None and dc not in at_demand:
        entries.append(get_rule(dc) if dc in RULES else get_policy(dc))
    tables.append({
        "title": "The controls",
        "columns": ["control", "what it does", "source"],
        "rows": [[client_name(e.name), e.summary, client_source(e.source)] for e in entries]})
    return tables
