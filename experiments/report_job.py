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
from .wording import CAUTION, count_of

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


def _headline(rule_rows: dict, demand: float, sizing: dict, cars: int) -> tuple[str, list, dict]:
    """The answer in plain words, from the figures."""
    base_name = next(iter(rule_rows))               # the baseline comes first
    grouping = max(list(rule_rows)[1:], key=lambda r: rule_rows[r]["design_hc"])
    g, base = rule_rows[grouping], rule_rows[base_name]
    nums = {"hc_gain_pct": g["hc_gain_pct_vs_random"], "hc_gain_ci95_pct": g["hc_gain_ci95_pct"],
            "rtt_gain_pct": g["rtt_gain_pct_vs_random"], "rtt_gain_ci95_pct": g["rtt_gain_ci95_pct"],
            "demand_pct_5min": demand, "random_design_hc_pct_5min": base["design_hc"],
            "grouping_design_hc_pct_5min": g["design_hc"]}
    designs = {d["rule"]: d for d in sizing["designs"]}
    saved = None
    if designs[base_name]["found"] and designs[grouping]["found"]:
        saved = designs[base_name]["cars"] - designs[grouping]["cars"]
        nums["cars_saved"] = int(saved)
    where = (f"at the design load (conventional control is saturated at this demand of "
             f"{_p(demand)} % of the population in 5 minutes)" if base["design_hc"] < demand
             else f"at this demand ({_p(demand)} % of the population in 5 minutes)")
    gains = (g["hc_gain_pct_vs_random"], g["hc_gain_ci95_pct"], g["rtt_gain_pct_vs_random"],
             g["rtt_gain_ci95_pct"])
    if all(math.isfinite(x) for x in gains):
        first = (f"Destination grouping (rule '{grouping}'; ideal bound: every car open to "
                 f"allocation) raises handling capacity by {_p(gains[0])} % ± {_p(gains[1])} % "
                 f"and shortens the round trip by {_p(gains[2])} % ± {_p(gains[3])} % against "
                 f"conventional control {where}")
    else:
        first = (f"The gain of destination grouping (rule '{grouping}') over conventional "
                 f"control {where} cannot be estimated from these batches: too few of them "
                 f"carried passengers (run with more trials, or leave --trials out)")
    with_cars = f"with {count_of(cars, 'car')}"
    if base["design_hc"] >= demand:
        verdict = (f"; it is not needed for capacity: conventional control already carries "
                   f"{_p(base['design_hc'])} % at design load {with_cars}")
        if saved:
            verdict += (f", though grouping would meet the criteria with "
                        f"{count_of(saved, 'car')} fewer")
    elif g["design_hc"] >= demand:
        verdict = (f"; conventional control carries only {_p(base['design_hc'])} % at design "
                   f"load {with_cars}, destination grouping at most {_p(g['design_hc'])} % "
                   f"(the bound)")
        if saved:
            verdict += (f", and it saves {count_of(saved, 'car')} against a conventional group "
                        f"that meets the criteria")
    else:
        verdict = (f"; neither carries the demand {with_cars} (conventional "
                   f"{_p(base['design_hc'])} %, grouping {_p(g['design_hc'])} % at design load)")
        if saved is not None:
            verdict += (f"; meeting the criteria takes "
                        f"{count_of(designs[base_name]['cars'], 'car')} under conventional "
                        f"control and {designs[grouping]['cars']} with grouping")
    points = [
        f"Conventional control: round-trip time {_p(base['round_trip_time_s'])} s, interval "
        f"{_p(base['interval_s'])} s, {_p(base['expected_stops'])} stops per trip.",
        f"Destination grouping ('{grouping}'): round-trip time {_p(g['round_trip_time_s'])} s, "
        f"interval {_p(g['interval_s'])} s, {_p(g['expected_stops'])} stops per trip.",
        "These gains assume every car of the group is open to allocation; the chart of gain "
        "against cars open shows how much remains when fewer are.",
    ]
    return first + verdict + ".", points, nums


def run_job(scenario: Scenario, input_path: str | Path, out_dir: Path, *, seed: int = 2026,
            ci_target_pct: float = 0.5, trials: int | None = None,
            max_trials: int = 1_000_000, quiet: bool = True, threads=None, stages=None) -> dict:
    """Run the whole job and write ``report.html`` (and the charts, sweep.csv) into out_dir.

    ``out_dir`` should be a folder of this run alone (the command line gives the private
    folder of :func:`experiments.outputs.output_set`): the report embeds the charts this
    run drew there. Adaptive runs stop at ``max_trials`` (the sweeps at 400,000) or at the
    run limits (:func:`experiments.limits.trial_cap`). ``stages(text)`` is told each stage
    as it begins (see :class:`experiments.progress.Stages`).
    """
    from .progress import no_stages
    stages = no_stages if stages is None else stages
    with _chart_worker() as worker:
        return _run_job(scenario, input_path, out_dir, worker, seed=seed,
                        ci_target_pct=ci_target_pct, trials=trials, max_trials=max_trials,
                        quiet=quiet, threads=threads, stages=stages)


def _run_job(scenario, input_path, out_dir, worker, *, seed, ci_target_pct, trials, max_trials,
             quiet, threads, stages):
    from roundtrip.classical import demand_calculation
    from allocation.registry import default_rules
    from batchrounds.montecarlo import compare_rules
    from roundtrip.montecarlo import simulate_demand

    from .report import write_report
    from .sizing import default_criteria, size_group
    from .sweep import demand_sweep

    from .limits import trial_cap

    b, g = scenario.building, scenario.group
    rules = default_rules()
    traffic = scenario.traffic or Traffic(12.0)
    demand = traffic.arrival_rate_pct_5min
    run = dict(ci_target_pct=ci_target_pct, trials=trials, seed=seed, threads=threads)
    job = replace(scenario, traffic=traffic)
    sweep_cap = min(max_trials, 400_000)

    stages("classical calculation")
    classical = demand_calculation(b, g, traffic, poisson=True)
    stages("Monte Carlo round trips at the demand (a first run compiles the kernels, "
           "about 10 s)")
    mc = simulate_demand(b, g, traffic, **run, max_trials=trial_cap(
        max_trials, passengers_per_car=g.design_load_persons))
    stages(f"allocation rules on common passengers ({', '.join(rules)}; each rule compiles "
           f"on first use)")
    comparison = compare_rules(b, g, rules, mc.passengers_per_trip, traffic=traffic, **run,
                               max_trials=trial_cap(max_trials, cars=g.cars, rules=len(rules),
                                                    passengers_per_car=mc.passengers_per_trip))
    stages(f"demand sweep, {SWEEP_POINTS} points")
    sweep = demand_sweep(job, demand_points(demand), rules, max_trials=sweep_cap,
                         quiet=quiet, **run)
    stages(f"cars open to allocation, 1 to {g.cars}")
    opens = demand_sweep(job, [demand], rules, cars_open_list=list(range(1, g.cars + 1)),
                         max_trials=sweep_cap, quiet=quiet, **run)
    stages("sizing")
    criteria = default_criteria(job)
    sizing = size_group(job, rules, criteria, list(range(1, g.cars + 4)),
                        [g.rated_load_persons], [g.rated_speed_mps], max_trials=max_trials,
                        **run)
    stages("charts and the report")
    design = opens[opens["cars_open"] == g.cars].set_index("rule")
    at_demand = {r["rule"]: {**r, "design_hc": float(
        design.loc[r["rule"], "design_load_handling_capacity_pct_5min"])}
        for r in comparison.to_dict()["rules"]}

    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    write_atomic(out_dir / "sweep.csv", sweep.to_csv(index=False))
    figures = []
    name = b.name
    # half the charts in the helper process (already warm), half here, at the same time
    later = worker.submit(_later_charts, b, g, opens, comparison,
                          min(mc.passengers_per_trip, g.design_load_persons), seed, out_dir, name)
    from . import charts
    paths = charts.sweep_charts(sweep, out_dir, name)
    paths += later.result()
    captions = _captions()
    for p in paths:
        if p.suffix == ".png":
            title, caption = captions.get(p.stem, (p.stem.replace("_", " "), ""))
            figures.append({"title": title, "caption": caption, "png": p})

    headline, points, numbers = _headline(at_demand, demand, sizing, g.cars)
    digest = hashlib.sha256(Path(input_path).read_bytes()).hexdigest()
    stamp = {"liftsort_version": __version__, "seed": seed,
             "trials": f"{comparison.trials} batches at the design demand; adaptive runs to a "
                       f"{ci_target_pct:g} % interval elsewhere" if trials is None else str(trials),
             "input_sha256": digest,
             "generated_at": _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%d %H:%M UTC")}
    context = {
        "title": f"{name}: is destination control worth specifying?",
        "building": name,
        "headline": headline,
        "answer_points": points,
        "headline_numbers": numbers,
        "inputs": input_rows(scenario),
        "method": _method(),
        "assumptions": _assumptions() + ([] if scenario.traffic else [
            "The input gives no [traffic] section: a design demand of 12 % of the population "
            "in 5 minutes, up-peak, is assumed (common office practice)."]),
        "sources": _sources(),
        "tables": _tables(classical, mc, at_demand, sizing, criteria),
        "figures": figures,
        "caution": CAUTION,
        "stamp": stamp,
    }
    report = write_report(context, out_dir)
    stages(f"report written: {report}")
    return {"report": str(report), "headline": headline, "headline_numbers": numbers,
            "figures": [str(p) for p in paths], "csv": str(out_dir / "sweep.csv"),
            "stamp": stamp, "rules": list(at_demand.values()),
            "sizing": {k: v for k, v in sizing.items() if k != "tried"},
            "classical": classical.to_dict(), "monte_carlo": mc.to_dict()}


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


def _later_charts(building, group, opens, comparison, passengers_per_car, seed, out_dir, name):
    from allocation.registry import default_rules

    from . import charts
    paths = charts.cars_open_chart(opens, out_dir, name)
    paths += charts.distribution_charts(comparison, out_dir, name)
    paths += charts.batch_diagram(building, group, rules=tuple(default_rules()[:2]),
                                  passengers_per_car=passengers_per_car, seed=seed,
                                  out_dir=out_dir, building_name=name)
    return paths


def _captions() -> dict:
    return {
        "rtt_interval_vs_demand": ("Round-trip time and interval against demand",
                                   "Each rule at the car load conventional control needs for the "
                                   "demand; bands are 95 % intervals."),
        "capacity_vs_demand": ("Handling capacity at design load against demand",
                               "A rule carries the demand while its level lies above the demand "
                               "line; where they cross, it saturates."),
        "gain_vs_demand": ("Grouping gain against demand",
                           "Gain of each rule over conventional control on the same passengers, "
                           "with paired 95 % intervals."),
        "gain_vs_cars_open": ("Gain against the cars open to allocation",
                              "With one car open every rule is conventional control; the gain "
                              "grows as more cars share the allocation. With k cars open the "
                              "group works in blocks of k cars (and one smaller block when k "
                              "does not divide the cars), so such a k gains less than its "
                              "neighbours suggest."),
        "stops_distribution": ("Stops per round trip", "Share of car trips by number of stops."),
        "reversal_distribution": ("Highest reversal floor", "Share of car trips by the highest "
                                  "floor reached."),
        "batch_diagram": ("Who rode which car to which floor",
                          "One sampled batch: conventional loading mixes destinations in every "
                          "car; destination grouping gives each car a few neighbouring floors."),
    }


def _method() -> list[str]:
    return [
        "Classical calculation: the up-peak round-trip time RTT = 2·H·t_v + (S+1)·t_s + 2·P·t_p "
        "(plus 2·d_x/v for an express zone), with the expected stops S and highest reversal floor "
        "H for the floor populations, the interval RTT / cars and the 5-minute handling capacity "
        "300·P / interval, solved for the car load P that carries the demand.",
        "Monte Carlo round trips: each car's passengers arrive at random over its interval "
        "(Poisson counts, the same passenger model as the classical column); each car's trip is "
        "timed on the real floor levels with ideal jerk-limited flights, door and transfer times, "
        "with at most the rated load aboard; whoever a car cannot take waits for the next one, so "
        "nobody is dropped. The demand sets the load where the passengers carried match the "
        "arrivals. Trials are added until the 95 % interval of the round-trip time is within the "
        "target.",
        "Allocation rules: conventional control ('random') loads cars in arrival order; "
        "destination rules group passengers by floor. All rules run on the very same sampled "
        "passengers, each car carrying as many as under conventional control, so their "
        "differences are measured with paired intervals.",
    ]


def _assumptions() -> list[str]:
    return [
        "Up-peak traffic unless the input gives a traffic mix; passengers arrive independently, "
        "at random (Poisson counts per car interval).",
        "Every rule is compared at the same car load: each car carries the passengers "
        "conventional control would give it; a rule that groups passengers would in practice "
        "run lighter cars at the same demand.",
        "The design load limits how many are in the car at once (the mean load on the busiest "
        "stretch of the trip); no car ever holds more than its rated load.",
        "Ideal kinematics: no levelling, re-levelling, door dwell or passenger hesitation beyond "
        "the stated times; no interference between cars at the lobby.",
        "Destination grouping with every car open to allocation is an upper bound on what a "
        "real destination control can achieve.",
    ]


def _sources() -> list[str]:
    return [
        "ISO 8100-32:2020, Lifts for the transport of persons and goods - Part 32: Planning and "
        "selection of passenger lifts to be installed in office, hotel and residential buildings "
        "(up-peak round-trip time, S and H, ideal kinematics).",
        "CIBSE Guide D: Transportation systems in buildings, 2015 (round-trip time, waiting-time "
        "estimate, office up-peak planning criteria).",
        "\"An efficient method for generating discrete random variables with general "
        "distributions\", ACM Transactions on Mathematical Software, 1977 (alias sampling).",
    ]


def _tables(classical, mc, at_demand, sizing, criteria) -> list[dict]:
    from allocation.registry import get_rule
    c, m = classical.to_dict(), mc.to_dict()
    t1 = {"title": f"Conventional control at the design demand: classical formula and Monte Carlo "
                   f"({c['passenger_model']} passenger counts, {c['traffic_mix']} traffic)",
          "columns": ["quantity", "classical", "Monte Carlo", "± 95 %", "unit"],
          "rows": [["passengers per trip", c["passengers_per_trip"], m["passengers_per_trip"], "", "persons"],
                   ["round-trip time", c["round_trip_time_s"], m["round_trip_time_s"], m["ci95_s"], "s"],
                   ["interval", c["interval_s"], m["interval_s"], m["ci95_s"] / mc.cars, "s"],
                   ["stops", c["expected_stops"], m["expected_stops"], m["expected_stops_ci95"], ""],
                   ["highest reversal floor", c["highest_reversal_floor"],
                    m["highest_reversal_floor"], m["highest_reversal_floor_ci95"], ""],
                   ["passengers carried per trip", c["passengers_per_trip"],
                    m["passengers_carried_per_trip"], m["passengers_carried_ci95"], "persons"],
                   ["car load", c["car_load_pct"], m["car_load_pct"], "", "% of rated load"],
                   ["handling capacity (carried)", c["handling_capacity_pct_5min"],
                    m["handling_capacity_pct_5min"], "", "% / 5 min"],
                   ["trips that leave someone behind", "", 100.0 * m["left_behind_share"], "", "%"],
                   ["saturated", "yes" if c["saturated"] else "no",
                    "yes" if m["saturated"] else "no", "", ""]]}
    t2 = {"title": f"Allocation rules at the design demand (same passengers, "
                   f"{c['passenger_model']} passenger counts, every car open to allocation: the "
                   f"ideal bound)",
          "columns": ["rule", "RTT [s]", "± [s]", "interval [s]", "stops", "highest floor",
                      "HC gain [%]", "±", "HC at design load [%/5 min]"],
          "rows": [[r["rule"], r["round_trip_time_s"], r["ci95_s"], r["interval_s"],
                    r["expected_stops"], r["highest_reversal_floor"], r["hc_gain_pct_vs_random"],
                    r["hc_gain_ci95_pct"], r["design_hc"]] for r in at_demand.values()]}
    t3 = {"title": f"Sizing: smallest group with interval ≤ {criteria.interval_max_s:g} s at the "
                   f"demand and handling capacity ≥ {criteria.hc_min_pct:g} % at design load "
                   f"(destination "
                   f"rules with {sizing['cars_open']} cars open to allocation)",
          "columns": ["rule", "cars", "rated load [persons]", "speed [m/s]", "interval [s]",
                      "HC [%/5 min]"],
          "rows": [[d["rule"], d["cars"] if d["found"] else "none found",
                    d["rated_load_persons"] or "", d["rated_speed_mps"] or "",
                    d["interval_s"] if d["found"] else "", d["handling_capacity_pct_5min"] if d["found"] else ""]
                   for d in sizing["designs"]]}
    t4 = {"title": "The allocation rules",
          "columns": ["rule", "what it does", "source"],
          "rows": [[name, get_rule(name).summary, get_rule(name).source] for name in at_demand]}
    return [t1, t2, t3, t4]
