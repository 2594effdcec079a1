"""Is destination control worth specifying? The decision, from the peak simulation.

The measure is **handling capacity at a service criterion**: for each control,
the highest demand at which the peak simulation (:mod:`peak.simulation`) still
meets the criterion, found on a grid of demands and refined by bisection, with
the intervals taken into account (a demand passes only if the upper end of
each 95 % interval meets its limit). Destination control is compared with
conventional control on the same arrivals (common random numbers), so the
difference in time to destination carries a paired interval.

Default criteria (common practice for office up-peak; all are options):

* average waiting time at most 30 s;
* 95th-percentile waiting time at most 90 s;
* for destination control also: average time to destination no worse than
  conventional control's at the same demand (the upper end of the paired 95 %
  interval of the difference at most 0 s);
* and the group is not saturated.

The **sensitivity** study moves each main input by a stated step and
recomputes the decision figures (destination control's gain in handling
capacity at the criterion, and the difference in average time to destination
at the file's demand), so that the answer can be seen to turn, or not, on each
of them; the Monte Carlo error is reported apart.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np

from roundtrip.building import Scenario, Traffic

CAPACITY_TOLERANCE_PCT = 0.1      # bisection stops within this [% of population / 5 min]
GRID_STEP_PCT = 1.0               # the coarse grid of demands [% / 5 min]
DECISION_REPLICATIONS = 10        # replications per evaluated demand


@dataclass(frozen=True)
class ServiceCriterion:
    """What a control must deliver at a demand (see the module notes)."""

    average_wait_max_s: float = 30.0
    wait_p95_max_s: float = 90.0
    destination_ttd_no_worse: bool = True

    def describe(self) -> str:
        text = (f"average waiting time ≤ {self.average_wait_max_s:g} s and 95th-percentile "
                f"waiting time ≤ {self.wait_p95_max_s:g} s")
        if self.destination_ttd_no_worse:
            text += (", and for destination control an average time to destination no worse "
                     "than conventional control's")
        return text

    def to_dict(self) -> dict:
        return {"average_wait_max_s": self.average_wait_max_s,
                "wait_p95_max_s": self.wait_p95_max_s,
                "destination_ttd_no_worse_than_conventional": self.destination_ttd_no_worse,
                "intervals": "upper end of each 95 % interval"}


def _upper(interval) -> float:
    ci = interval.ci95 if math.isfinite(interval.ci95) else 0.0
    return interval.mean + ci


def paired_ttd_difference(run, base):
    """Average time to destination of ``run`` less ``base``'s, replication by replication on
    the same arrivals: (mean, 95 % half-width) [s]."""
    from peak.statistics import Interval
    d = [a["average_time_to_destination_s"] - b["average_time_to_destination_s"]
         for a, b in zip(run.per_replication, base.per_replication)]
    iv = Interval.of(d)
    return iv.mean, iv.ci95


def meets(run, base, criterion: ServiceCriterion) -> tuple[bool, list[str]]:
    """Whether ``run`` meets the criterion (``base`` is conventional control on the same
    arrivals); the reasons it does not."""
    s = run.summary
    why = []
    if run.saturated:
        why.append("saturated")
    if _upper(s["average_waiting_time_s"]) > criterion.average_wait_max_s:
        why.append(f"average wait up to {_upper(s['average_waiting_time_s']):.1f} s")
    if _upper(s["waiting_time_p95_s"]) > criterion.wait_p95_max_s:
        why.append(f"95th-percentile wait up to {_upper(s['waiting_time_p95_s']):.1f} s")
    if run is not base and criterion.destination_ttd_no_worse:
        mean, ci = paired_ttd_difference(run, base)
        if mean + (ci if math.isfinite(ci) else 0.0) > 0.0:
            why.append(f"time to destination up to {mean + ci:+.1f} s against conventional")
    return not why, why


@dataclass(frozen=True)
class Tried:
    """One demand tried in the search, for one control."""

    demand_pct_5min: float
    meets: bool
    reasons: tuple
    figures: dict


@dataclass(frozen=True)
class CapacityAtCriterion:
    """The highest demand at which a control meets the criterion."""

    control: str
    handling_capacity_pct_5min: float | None      # None: not even at the lowest demand tried
    criterion: ServiceCriterion
    fails_below: bool                              # it fails at some lower demand tried too
    tried: tuple = field(default=(), repr=False)   # Tried, in the order tried

    def to_dict(self) -> dict:
        return {"control": self.control, "basis": "peak",
                "handling_capacity_pct_5min": self.handling_capacity_pct_5min,
                "criterion": self.criterion.to_dict(),
                "fails_at_some_lower_demand": self.fails_below}


def _with_demand(scenario: Scenario, pct: float) -> Traffic:
    t = scenario.traffic or Traffic(pct)
    return replace(t, arrival_rate_pct_5min=pct, profile_pct_5min=None)


def _evaluate(scenario: Scenario, controls, pct, criterion, *, seed, replications, window_s,
              minutes, cache, cars_open=None):
    """{control: (meets, reasons)} at demand ``pct`` (memoised in ``cache``)."""
    key = round(pct, 6)
    if key not in cache:
        from peak.simulation import simulate_peak
        study = simulate_peak(scenario.building, scenario.group, _with_demand(scenario, pct),
                              controls, window_s=window_s, minutes=minutes,
                              replications=replications, seed=seed, slots=False,
                              cars_open=cars_open)
        base = study.runs[0]
        cache[key] = {r.control.name: (*meets(r, base, criterion), _figures(r)) for r in study.runs}
    return cache[key]


def _figures(run) -> dict:
    """The figures a chart of the search draws: means and 95 % half-widths."""
    s = run.summary
    return {"average_waiting_time_s": s["average_waiting_time_s"].mean,
            "average_waiting_time_ci95_s": s["average_waiting_time_s"].ci95,
            "waiting_time_p95_s": s["waiting_time_p95_s"].mean,
            "average_time_to_destination_s": s["average_time_to_destination_s"].mean,
            "average_time_to_destination_ci95_s": s["average_time_to_destination_s"].ci95,
            "handling_capacity_pct_5min": s["handling_capacity_pct_5min"].mean,
            "saturated": run.saturated}


def capacity_at_criterion(scenario: Scenario, controls, criterion: ServiceCriterion, *,
                          seed: int = 0, replications: int = DECISION_REPLICATIONS,
                          window_s: float = 5.0, minutes: float = 60.0, low_pct: float = 1.0,
                          high_pct: float | None = None, grid_step_pct: float = GRID_STEP_PCT,
                          tolerance_pct: float = CAPACITY_TOLERANCE_PCT,
                          cars_open: int | None = None,
                          on_step=None) -> list[CapacityAtCriterion]:
    """Each control's handling capacity at the criterion [% of population / 5 min].

    Demands ``low_pct``, ``low_pct + grid_step_pct``, ... are tried up to ``high_pct``
    (default: 2.5 x the file's demand) or until every control has failed at the last two
    demands and at least one has passed somewhere; the
    highest passing demand of each control is then refined by bisection against the next
    demand of the grid to ``tolerance_pct``. Every evaluation runs all controls on the same
    arrivals (the same seed at every demand). ``cars_open`` caps the cars offered to one
    allocation (default: every car; see :func:`peak.simulation.simulate_peak`).
    """
    from peak.simulation import resolve_controls
    names = [c.name for c in resolve_controls(controls)]
    demand = scenario.traffic.arrival_rate_pct_5min if scenario.traffic else 12.0
    high = 2.5 * demand if high_pct is None else high_pct
    cache: dict = {}
    run = dict(seed=seed, replications=replications, window_s=window_s, minutes=minutes,
               cache=cache, cars_open=cars_open)
    grid = list(np.arange(low_pct, high + 1e-9, grid_step_pct))
    passing = {n: [] for n in names}
    failing_run = {n: 0 for n in names}         # failed at this many demands in a row
    tried = {n: [] for n in names}
    for pct in grid:
        result = _evaluate(scenario, names, pct, criterion, **run)
        if on_step is not None:
            on_step()
        for n in names:
            ok, why, figs = result[n]
            tried[n].append(Tried(float(pct), ok, tuple(why), figs))
            if ok:
                passing[n].append(float(pct))
                failing_run[n] = 0
            else:
                failing_run[n] += 1
        if any(passing.values()) and all(failing_run[n] >= 2 for n in names):
            break
    out = []
    for n in names:
        if not passing[n]:
            out.append(CapacityAtCriterion(n, None, criterion, True, tuple(tried[n])))
            continue
        lo = max(passing[n])
        hi = lo + grid_step_pct
        while hi - lo > tolerance_pct:
            mid = 0.5 * (lo + hi)
            ok, why, figs = _evaluate(scenario, names, mid, criterion, **run)[n]
            tried[n].append(Tried(float(mid), ok, tuple(why), figs))
            if on_step is not None:
                on_step()
            if ok:
                lo = mid
            else:
                hi = mid
        fails_below = any(not t.meets for t in tried[n] if t.demand_pct_5min < lo)
        out.append(CapacityAtCriterion(n, float(lo), criterion, fails_below, tuple(tried[n])))
    return out


# ------------------------------------------------------------------ sensitivity
@dataclass(frozen=True)
class SensitivityStep:
    """One input moved by one step, and the decision figures it gives."""

    input: str                  # what was moved, in words
    step: str                   # by how much, in words
    conventional_pct_5min: float | None      # handling capacity at the criterion
    destination_pct_5min: float | None
    demand_pct_5min: float                   # the design demand (moved by the demand step)
    ttd_difference_s: float                  # destination - conventional, at that demand
    ttd_difference_ci95_s: float
    monte_carlo: bool = False                # the same inputs on another seed (MC error)

    @property
    def hc_gain_pct_5min(self) -> float | None:
        """Destination control's handling capacity at the criterion less conventional's."""
        a, b = self.destination_pct_5min, self.conventional_pct_5min
        return None if a is None or b is None else a - b

    @property
    def outcome(self) -> str:
        return outcome(self.conventional_pct_5min, self.destination_pct_5min,
                       self.demand_pct_5min)

    def to_dict(self) -> dict:
        return {"input": self.input, "step": self.step, "basis": "peak",
                "conventional_hc_at_criterion_pct_5min": self.conventional_pct_5min,
                "destination_hc_at_criterion_pct_5min": self.destination_pct_5min,
                "hc_gain_pct_5min": self.hc_gain_pct_5min,
                "demand_pct_5min": self.demand_pct_5min,
                "time_to_destination_difference_s": self.ttd_difference_s,
                "time_to_destination_difference_ci95_s": self.ttd_difference_ci95_s,
                "outcome": self.outcome, "monte_carlo_error": self.monte_carlo}


#: The three answers the capacities can give at a demand.
CONVENTIONAL_SUFFICES = "conventional control meets the criterion"
DESTINATION_NEEDED = "only destination control meets the criterion"
NEITHER = "neither control meets the criterion"


def outcome(conventional_pct, destination_pct, demand_pct) -> str:
    """Which of the three answers the capacities at the criterion give at ``demand_pct``."""
    if conventional_pct is not None and conventional_pct >= demand_pct:
        return CONVENTIONAL_SUFFICES
    if destination_pct is not None and destination_pct >= demand_pct:
        return DESTINATION_NEEDED
    return NEITHER


def _moved(scenario: Scenario, name: str, sign: int):
    """The scenario with input ``name`` moved one step down (-1) or up (+1), and the step
    in words; (None, "") where the step leaves the input's range."""
    g, t = scenario.group, scenario.traffic
    pm = "+" if sign > 0 else "-"
    if name == "transfer times":
        f = 1 + 0.2 * sign
        return replace(scenario, group=replace(g, transfer_in_s=g.transfer_in_s * f,
                                               transfer_out_s=g.transfer_out_s * f)), f"{pm}20 %"
    if name == "door times":
        f = 1 + 0.2 * sign
        return replace(scenario, group=replace(g, door_open_s=g.door_open_s * f,
                                               door_close_s=g.door_close_s * f)), f"{pm}20 %"
    if name == "departure load":
        load = g.departure_load_persons + sign
        if not 1 <= load <= g.rated_load_persons:
            return None, ""
        return replace(scenario, group=replace(g, capacity_factor=load / g.rated_load_persons)), \
            f"{sign:+d} person"
    if name == "demand":
        pct = t.arrival_rate_pct_5min + 2.0 * sign
        if pct <= 0:
            return None, ""
        return replace(scenario, traffic=replace(t, arrival_rate_pct_5min=pct,
                                                 profile_pct_5min=None)), \
            f"{2 * sign:+d} % / 5 min"
    if name == "lobby dwell":
        f = 1 + 0.5 * sign
        return replace(scenario, group=replace(g, lobby_dwell_s=g.lobby_dwell_s * f)), f"{pm}50 %"
    raise ValueError(f"sensitivity input {name!r}: not one of {', '.join(SENSITIVITY_INPUTS)}")


#: The inputs moved, each down and up: transfer and door times by 20 %, the departure load
#: by one person, the demand by 2 % of the population per 5 min, the allocation window
#: (delayed allocation only) and the lobby dwell by 50 %; and the cars open to one
#: allocation, from every car down to one car fewer and to the realisable two (the car
#: loading and the next; docs/rules.md) - there is no step up from every car.
SENSITIVITY_INPUTS = ("transfer times", "door times", "departure load", "demand",
                      "allocation window", "lobby dwell", "cars open")


def _step(scenario, control, criterion, *, name, label, seed, replications, window_s, minutes,
          low, tol, on_step, monte_carlo=False, cars_open=None) -> SensitivityStep:
    from peak.simulation import simulate_peak
    caps = capacity_at_criterion(scenario, [control], criterion, seed=seed,
                                 replications=replications, window_s=window_s, minutes=minutes,
                                 low_pct=low, tolerance_pct=tol, on_step=on_step,
                                 cars_open=cars_open)
    hc = {c.control: c.handling_capacity_pct_5min for c in caps}
    study = simulate_peak(scenario.building, scenario.group, scenario.traffic, [control],
                          window_s=window_s, minutes=minutes, replications=replications,
                          seed=seed, slots=False, cars_open=cars_open)
    diff, ci = paired_ttd_difference(study.run(control), study.runs[0])
    return SensitivityStep(name, label, hc.get("conventional"), hc.get(control),
                           scenario.traffic.arrival_rate_pct_5min, diff, ci, monte_carlo)


def sensitivity(scenario: Scenario, control: str, criterion: ServiceCriterion, *,
                seed: int = 0, replications: int = DECISION_REPLICATIONS,
                window_s: float = 5.0, minutes: float = 60.0, base=None,
                inputs=SENSITIVITY_INPUTS, on_step=None, ex=None,
                building_file_sha256: str = "") -> list[SensitivityStep]:
    """The decision figures with each input moved down and up by its step (see the module
    notes), then, apart, the inputs as given on another stream (the Monte Carlo error of
    the capacities). ``base`` (optional): the unmoved capacities, to start the searches
    near them.

    Each step is one task (:mod:`experiments.tasks`), run on the executor ``ex`` (default:
    in process); ``on_step`` is called as each completes. The moved steps run on the
    decision's own seed, the stream of the unmoved figures, so that a step's difference is
    the input's and not the draw's (common random numbers); the Monte Carlo step runs on
    ``task_seed(seed, ("sensitivity", building, digest, "Monte Carlo"))``, another
    stream derived from the run's seed and its key alone.
    """
    from peak.simulation import resolve_controls

    from .tasks import InProcess, Task, task_seed
    ex = InProcess() if ex is None else ex
    delayed = resolve_controls([control])[-1].kind == "delayed"
    low, tol = 1.0, CAPACITY_TOLERANCE_PCT
    if base is not None:                    # search near the unmoved capacities
        known = [c.handling_capacity_pct_5min for c in base if c.handling_capacity_pct_5min]
        low = max(1.0, math.floor(min(known) - 3.0)) if known else 1.0
    run = dict(replications=replications, minutes=minutes, low=low, tol=tol, on_step=None)
    name_ = scenario.building.name
    tasks = []

    def add(moved, name, label, **kwargs):
        tasks.append(Task(("sensitivity", name_, building_file_sha256, name, label), _step,
                          dict(scenario=moved, control=control, criterion=criterion,
                               name=name, label=label, **run, **kwargs)))
    for name in inputs:
        if name == "allocation window" and not delayed:
            continue                         # an immediate policy has no window
        if name == "cars open":
            cars = scenario.group.cars
            for k in sorted({cars - 1, 2}, reverse=True):
                if 2 <= k < cars:
                    add(scenario, name, f"{k - cars:+d} car{'s' if cars - k > 1 else ''} "
                                        f"({k} of {cars} open)",
                        seed=seed, window_s=window_s, cars_open=k)
            continue
        for sign in (-1, 1):
            window = window_s
            if name == "allocation window":
                window = window_s * (1 + 0.5 * sign)
                moved, label = scenario, f"{'+' if sign > 0 else '-'}50 %"
            else:
                moved, label = _moved(scenario, name, sign)
            if moved is None:
                continue
            add(moved, name, label, seed=seed, window_s=window)
    add(scenario, "Monte Carlo", "another seed",
        seed=task_seed(seed, ("sensitivity", name_, building_file_sha256, "Monte Carlo")),
        window_s=window_s, monte_carlo=True)
    return ex.run(tasks, on_step)


def turns_on(steps, base_outcome: str) -> list[str]:
    """The inputs the answer turns on: those with a step that changes the outcome (which
    control meets the criterion at the demand) or the sign of destination control's gain."""
    out = []
    for s in steps:
        if s.monte_carlo or s.input in out:
            continue
        gain = s.hc_gain_pct_5min
        if s.outcome != base_outcome:
            out.append(s.input)
        elif gain is not None and any(
                t.input == s.input and t.hc_gain_pct_5min is not None
                and (t.hc_gain_pct_5min > 0) != (gain > 0) for t in steps):
            out.append(s.input)
    return out


# ------------------------------------------------------------------ the decision
@dataclass(frozen=True)
class Figure:
    """A destination-control figure with its basis: ``peak`` (simulated in time),
    ``realisable-bound`` or ``ideal-bound`` (the round-trip Monte Carlo of batches)."""

    name: str
    value: float | None
    ci95: float | None
    unit: str
    basis: str
    cars_open: int | None = None

    def to_dict(self) -> dict:
        return {"name": self.name, "value": self.value, "ci95": self.ci95, "unit": self.unit,
                "basis": self.basis, "cars_open": self.cars_open}


@dataclass(frozen=True)
class Decision:
    """Everything the verdict rests on, each destination-control figure labelled."""

    building: str
    demand_pct_5min: float
    cars: int
    destination_control: str
    criterion: ServiceCriterion
    study: object                  # peak.simulation.PeakStudy at the file's demand
    capacities: tuple              # CapacityAtCriterion: conventional, destination control
    bounds: tuple                  # Figure: realisable-bound, ideal-bound
    sensitivity: tuple             # SensitivityStep
    seed: int

    def capacity(self, control: str) -> float | None:
        return next(c.handling_capacity_pct_5min for c in self.capacities if c.control == control)

    @property
    def gain_pct_5min(self) -> float | None:
        """Destination control's handling capacity at the criterion less conventional's."""
        a, b = self.capacity(self.destination_control), self.capacity("conventional")
        return None if a is None or b is None else a - b

    @property
    def outcome(self) -> str:
        return outcome(self.capacity("conventional"), self.capacity(self.destination_control),
                       self.demand_pct_5min)

    def ttd_difference(self):
        return paired_ttd_difference(self.study.run(self.destination_control), self.study.runs[0])

    def turns_on(self) -> list[str]:
        return turns_on(self.sensitivity, self.outcome)

    def verdict(self, sizing: dict | None = None) -> dict:
        """The answer in words, with its margin, from the peak-simulated figures (and, when
        neither control meets the criterion with this group, from the peak sizing)."""
        from .wording import client_name, count_of
        conv, dc = self.capacity("conventional"), self.capacity(self.destination_control)
        demand = self.demand_pct_5min
        name = client_name(self.destination_control)
        crit = self.criterion.describe()
        fmt = (lambda x: "at none of the demands tried" if x is None else f"up to {x:.1f} %")
        cars = count_of(self.cars, "car")
        cars_saved = None
        if self.outcome == CONVENTIONAL_SUFFICES:
            worth = False
            margin = conv - demand
            text = (f"Destination control is not needed to meet the demand with {cars}: "
                    f"conventional control meets the service criterion ({crit}) up to "
                    f"{conv:.1f} % of the population per 5 minutes, {margin:+.1f} points "
                    f"against the design demand of {demand:g} %; {name} meets it "
                    f"{fmt(dc)}.")
        elif self.outcome == DESTINATION_NEEDED:
            worth = True
            margin = dc - demand
            text = (f"Destination control is worth specifying: at the design demand of "
                    f"{demand:g} % of the population per 5 minutes, conventional control with "
                    f"{cars} fails the service criterion ({crit}; it meets it {fmt(conv)}), "
                    f"while {name} meets it up to {dc:.1f} %, a margin of {margin:+.1f} points "
                    f"over the demand.")
        else:
            worth = False
            margin = None if dc is None else dc - demand
            text = (f"Neither control meets the service criterion ({crit}) at the design demand "
                    f"of {demand:g} % of the population per 5 minutes with {cars}: "
                    f"conventional control meets it {fmt(conv)}, {name} {fmt(dc)}.")
            designs = {d["control"]: d for d in (sizing or {}).get("designs", [])}
            c, d = designs.get("conventional"), designs.get(self.destination_control)
            if c and d and c.get("found") and d.get("found"):
                cars_saved = c["cars"] - d["cars"]
                group = (lambda x: f"{count_of(x['cars'], 'car')} of "
                                   f"{x['rated_load_persons']} persons at "
                                   f"{x['rated_speed_mps']:g} m/s")
                text += (f" Sized on the same criterion in the peak simulation, conventional "
                         f"control needs {group(c)} and destination control {group(d)}")
                if cars_saved > 0:
                    worth = True
                    text += (f": destination control is worth specifying, it saves "
                             f"{count_of(cars_saved, 'car')}.")
                elif cars_saved == 0:
                    saving = (sizing or {}).get("savings") or {}
                    smaller = (saving.get("installation_destination") is not None
                               and saving["installation_destination"]
                               < saving["installation_conventional"])
                    if smaller:
                        text += (": the same number of cars, and destination control's are a "
                                 f"smaller installation ({saving['installation_measure']}"
                                 f" {saving['installation_destination']:g} against "
                                 f"{saving['installation_conventional']:g}), a saving to weigh "
                                 "against the cost of destination control.")
                    else:
                        text += ": the same number of cars either way."
                else:
                    text += ": destination control needs more cars here."
            elif sizing is not None:
                text += " The sizing found no group meeting it for both controls."
            else:
                text += " The group itself needs changing (see the sizing)."
        return {"worth_specifying": worth, "text": text, "basis": "peak",
                "outcome": self.outcome, "margin_pct_5min": margin,
                "gain_pct_5min": self.gain_pct_5min, "cars_saved": cars_saved}

    def to_dict(self, sizing: dict | None = None) -> dict:
        diff, ci = self.ttd_difference()
        return {"building": self.building, "demand_pct_5min": self.demand_pct_5min,
                "destination_control": self.destination_control,
                "criterion": self.criterion.to_dict(), "verdict": self.verdict(sizing),
                "capacity_at_criterion": [c.to_dict() for c in self.capacities],
                "time_to_destination_difference_s": {"value": diff, "ci95": ci,
                                                     "basis": "peak"},
                "bounds": [b.to_dict() for b in self.bounds],
                "sensitivity": [s.to_dict() for s in self.sensitivity],
                "turns_on": self.turns_on(),
                "seed": self.seed}


#: The batch rule whose round-trip bounds stand beside the peak-simulated answer: sorting
#: the batch by destination, the plainest grouping to explain.
BOUND_RULE = "sorted"


def round_trip_bounds(scenario: Scenario, rule: str = BOUND_RULE, *, cars_open: int | None = None,
                      seed: int = 0, trials: int | None = None, threads=None) -> tuple:
    """Destination grouping's handling capacity at the design load by the round-trip Monte
    Carlo of batches: with the realisable cars open (cars of one allocation leave
    together) and with every car open and the whole round known (the ideal bound)
    [% of population per 5 min]."""
    from batchrounds.montecarlo import compare_rules
    from roundtrip.classical import design_passengers

    from .basis import IDEAL, REALISABLE_CARS_OPEN, round_trip_basis
    g = scenario.group
    k_real = min(REALISABLE_CARS_OPEN if cars_open is None else cars_open, g.cars)
    out = []
    p = design_passengers(scenario.building, g, scenario.traffic)
    for k in (k_real, g.cars):
        basis = IDEAL if k == g.cars and g.cars > REALISABLE_CARS_OPEN else round_trip_basis(k, g.cars)
        c = compare_rules(scenario.building, g, [rule], p, cars_open=k, traffic=scenario.traffic,
                          trials=trials, seed=seed, threads=threads)
        r = c.to_dict()["rules"][-1]
        ci = r["handling_capacity_pct_5min"] * r["ci95_s"] / r["round_trip_time_s"]
        out.append(Figure(f"handling capacity at design load, {rule}, {k} of {g.cars} cars open",
                          r["handling_capacity_pct_5min"], ci, "% of population per 5 min",
                          basis, k))
    return tuple(out)


def decide(scenario: Scenario, destination_control: str, criterion: ServiceCriterion, *,
           study=None, bounds=None, bound_rule: str = BOUND_RULE, seed: int = 0,
           replications: int = DECISION_REPLICATIONS, window_s: float = 5.0,
           minutes: float = 60.0, with_sensitivity: bool = True, threads=None,
           on_step=None, ex=None, building_file_sha256: str = "") -> Decision:
    """The decision for the file's building: the peak simulation at the design demand
    (``study``, or run here), each control's handling capacity at the criterion, the two
    round-trip bounds (``bounds``, or run here) and the sensitivity of the decision figures."""
    from peak.simulation import simulate_peak
    t = scenario.traffic
    if study is None:
        study = simulate_peak(scenario.building, scenario.group, t, [destination_control],
                              window_s=window_s, minutes=minutes, replications=replications,
                              seed=seed)
    if on_step is not None:
        on_step()
    caps = tuple(capacity_at_criterion(scenario, [destination_control], criterion, seed=seed,
                                       replications=replications, window_s=window_s,
                                       minutes=minutes, on_step=on_step))
    if bounds is None:
        bounds = round_trip_bounds(scenario, bound_rule, seed=seed, threads=threads)
    steps = ()
    if with_sensitivity:
        steps = tuple(sensitivity(scenario, destination_control, criterion, seed=seed,
                                  replications=replications, window_s=window_s,
                                  minutes=minutes, base=caps, on_step=on_step, ex=ex,
                                  building_file_sha256=building_file_sha256))
    return Decision(scenario.building.name, t.arrival_rate_pct_5min, scenario.group.cars,
                    destination_control, criterion, study, caps, tuple(bounds), steps, int(seed))
