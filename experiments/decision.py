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
              minutes, cache):
    """{control: (meets, reasons)} at demand ``pct`` (memoised in ``cache``)."""
    key = round(pct, 6)
    if key not in cache:
        from peak.simulation import simulate_peak
        study = simulate_peak(scenario.building, scenario.group, _with_demand(scenario, pct),
                              controls, window_s=window_s, minutes=minutes,
                              replications=replications, seed=seed, slots=False)
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
                          on_step=None) -> list[CapacityAtCriterion]:
    """Each control's handling capacity at the criterion [% of population / 5 min].

    Demands ``low_pct``, ``low_pct + grid_step_pct``, ... are tried up to ``high_pct``
    (default: 2.5 x the file's demand) or until every control has failed at the last two
    demands and at least one has passed somewhere; the
    highest passing demand of each control is then refined by bisection against the next
    demand of the grid to ``tolerance_pct``. Every evaluation runs all controls on the same
    arrivals (the same seed at every demand).
    """
    from peak.simulation import resolve_controls
    names = [c.name for c in resolve_controls(controls)]
    demand = scenario.traffic.arrival_rate_pct_5min if scenario.traffic else 12.0
    high = 2.5 * demand if high_pct is None else high_pct
    cache: dict = {}
    run = dict(seed=seed, replications=replications, window_s=window_s, minutes=minutes,
               cache=cache)
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
    hc_gain_pct_5min: float | None           # destination control's HC at criterion - conventional's
    ttd_difference_s: float                  # destination - conventional, at the file's demand
    ttd_difference_ci95_s: float


def _moved(scenario: Scenario, name: str, sign: int):
    g, t = scenario.group, scenario.traffic
    if name == "transfer times":
        f = 1 + 0.2 * sign
        return replace(scenario, group=replace(g, transfer_in_s=g.transfer_in_s * f,
                                               transfer_out_s=g.transfer_out_s * f)), \
            f"{'+' if sign > 0 else '-'}20 %", None
    if name == "door times":
        f = 1 + 0.2 * sign
        return replace(scenario, group=replace(g, door_open_s=g.door_open_s * f,
                                               door_close_s=g.door_close_s * f)), \
            f"{'+' if sign > 0 else '-'}20 %", None
    if name == "departure load":
        load = g.departure_load_persons + sign
        if not 1 <= load <= g.rated_load_persons:
            return None, "", None
        return replace(scenario, group=replace(g, capacity_factor=load / g.rated_load_persons)), \
            f"{sign:+d} person", None
    if name == "demand":
        pct = t.arrival_rate_pct_5min + 2.0 * sign
        if pct <= 0:
            return None, "", None
        return replace(scenario, traffic=replace(t, arrival_rate_pct_5min=pct,
                                                 profile_pct_5min=None)), \
            f"{2 * sign:+d} % / 5 min", None
    if name == "lobby dwell":
        f = 1 + 0.5 * sign
        return replace(scenario, group=replace(g, lobby_dwell_s=g.lobby_dwell_s * f)), \
            f"{'+' if sign > 0 else '-'}50 %", None
    raise ValueError(name)


SENSITIVITY_INPUTS = ("transfer times", "door times", "departure load", "demand",
                      "allocation window", "lobby dwell")


def sensitivity(scenario: Scenario, control: str, criterion: ServiceCriterion, *,
                seed: int = 0, replications: int = DECISION_REPLICATIONS,
                window_s: float = 5.0, minutes: float = 60.0, base=None,
                inputs=SENSITIVITY_INPUTS, on_step=None) -> list[SensitivityStep]:
    """The decision figures with each input moved down and up by its step (see the module
    notes); ``base`` (optional) is the unmoved decision, to search capacities near it."""
    from peak.simulation import simulate_peak
    from peak.simulation import resolve_controls
    delayed = resolve_controls([control])[-1].kind == "delayed"
    steps = []
    for name in inputs:
        if name == "allocation window" and not delayed:
            continue                         # an immediate policy has no window
        for sign in (-1, 1):
            window = window_s
            if name == "allocation window":
                window = window_s * (1 + 0.5 * sign)
                moved, label = scenario, f"{'+' if sign > 0 else '-'}50 %"
            else:
                moved, label, _ = _moved(scenario, name, sign)
            if moved is None:
                continue
            low, tol = 1.0, CAPACITY_TOLERANCE_PCT
            if base is not None:            # search near the unmoved capacities
                known = [c.handling_capacity_pct_5min for c in base if c.handling_capacity_pct_5min]
                low = max(1.0, min(known) - 2.0) if known else 1.0
                tol = 2.5 * CAPACITY_TOLERANCE_PCT
            caps = capacity_at_criterion(moved, [control], criterion, seed=seed,
                                         replications=replications, window_s=window,
                                         minutes=minutes, low_pct=low, tolerance_pct=tol,
                                         on_step=on_step)
            hc = {c.control: c.handling_capacity_pct_5min for c in caps}
            gain = (hc[control] - hc["conventional"]
                    if hc.get(control) is not None and hc.get("conventional") is not None
                    else None)
            study = simulate_peak(moved.building, moved.group, moved.traffic, [control],
                                  window_s=window, minutes=minutes, replications=replications,
                                  seed=seed, slots=False)
            diff, ci = paired_ttd_difference(study.run(control), study.runs[0])
            steps.append(SensitivityStep(name, label, gain, diff, ci))
    return steps


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

    def to_dict(self) -> dict:
        return {"name": self.name, "value": self.value, "ci95": self.ci95, "unit": self.unit,
                "basis": self.basis}


@dataclass(frozen=True)
class Decision:
    """Everything the verdict rests on, each destination-control figure labelled."""

    building: str
    demand_pct_5min: float
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

    def ttd_difference(self):
        return paired_ttd_difference(self.study.run(self.destination_control), self.study.runs[0])

    def verdict(self) -> dict:
        """The answer in words, with its margin, from the peak-simulated figures."""
        conv, dc = self.capacity("conventional"), self.capacity(self.destination_control)
        demand = self.demand_pct_5min
        name = self.destination_control
        crit = self.criterion.describe()
        fmt = (lambda x: "no demand tried" if x is None else f"{x:.1f} %")
        if conv is not None and conv >= demand:
            worth = False
            text = (f"Destination control is not needed to meet the demand: conventional "
                    f"control meets the service criterion ({crit}) up to {conv:.1f} % of the "
                    f"population per 5 minutes, above the design demand of {demand:g} % "
                    f"(margin {conv - demand:+.1f} points); destination control ('{name}') "
                    f"meets it up to {fmt(dc)}.")
        elif dc is not None and dc >= demand:
            worth = True
            text = (f"Destination control is worth specifying here: at the design demand of "
                    f"{demand:g} % of the population per 5 minutes, conventional control fails "
                    f"the service criterion ({crit}; it meets it only up to {fmt(conv)}), "
                    f"while destination control ('{name}') meets it up to {dc:.1f} % "
                    f"(margin {dc - demand:+.1f} points over the demand).")
        else:
            worth = False
            text = (f"Neither control meets the service criterion ({crit}) at the design demand "
                    f"of {demand:g} % of the population per 5 minutes with this group: "
                    f"conventional control meets it up to {fmt(conv)}, destination control "
                    f"('{name}') up to {fmt(dc)}; the group itself needs changing (see the "
                    f"sizing).")
        return {"worth_specifying": worth, "text": text, "basis": "peak",
                "margin_pct_5min": (None if dc is None else dc - demand),
                "gain_pct_5min": self.gain_pct_5min}

    def to_dict(self) -> dict:
        diff, ci = self.ttd_difference()
        return {"building": self.building, "demand_pct_5min": self.demand_pct_5min,
                "destination_control": self.destination_control,
                "criterion": self.criterion.to_dict(), "verdict": self.verdict(),
                "capacity_at_criterion": [c.to_dict() for c in self.capacities],
                "time_to_destination_difference_s": {"value": diff, "ci95": ci,
                                                     "basis": "peak"},
                "bounds": [b.to_dict() for b in self.bounds],
                "sensitivity": [{"input": s.input, "step": s.step,
                                 "hc_gain_pct_5min": s.hc_gain_pct_5min,
                                 "time_to_destination_difference_s": s.ttd_difference_s,
                                 "time_to_destination_difference_ci95_s": s.ttd_difference_ci95_s,
                                 "basis": "peak"} for s in self.sensitivity],
                "seed": self.seed}


def round_trip_bounds(scenario: Scenario, rule: str, cars_open: int, *, seed: int = 0,
                      trials: int | None = None) -> tuple:
    """Destination grouping's handling capacity at the design load by the round-trip Monte
    Carlo of batches: with ``cars_open`` cars sharing each allocation (the realisable bound:
    cars of one allocation leave together) and with every car open and the whole round
    known (the ideal bound) [% of population per 5 min]."""
    from batchrounds.montecarlo import compare_rules
    g = scenario.group
    out = []
    for k, basis in ((min(cars_open, g.cars), "realisable-bound"), (g.cars, "ideal-bound")):
        c = compare_rules(scenario.building, g, [rule], g.design_load_persons, cars_open=k,
                          traffic=scenario.traffic, trials=trials, seed=seed)
        r = c.to_dict()["rules"][-1]
        out.append(Figure(f"handling capacity at design load, {rule}, {k} of {g.cars} cars open",
                          r["handling_capacity_pct_5min"],
                          r.get("handling_capacity_ci95_pct", None), "% of population per 5 min",
                          basis))
    return tuple(out)


def decide(scenario: Scenario, destination_control: str, criterion: ServiceCriterion, *,
           cars_open: int, bound_rule: str = "sorted", seed: int = 0,
           replications: int = DECISION_REPLICATIONS, window_s: float = 5.0,
           minutes: float = 60.0, with_sensitivity: bool = True, on_step=None) -> Decision:
    """The decision for the file's building: the peak simulation at the design demand, each
    control's handling capacity at the criterion, the two round-trip bounds, and the
    sensitivity of the decision figures."""
    from peak.simulation import simulate_peak
    t = scenario.traffic
    study = simulate_peak(scenario.building, scenario.group, t, [destination_control],
                          window_s=window_s, minutes=minutes, replications=replications,
                          seed=seed)
    if on_step is not None:
        on_step()
    caps = tuple(capacity_at_criterion(scenario, [destination_control], criterion, seed=seed,
                                       replications=replications, window_s=window_s,
                                       minutes=minutes, on_step=on_step))
    bounds = round_trip_bounds(scenario, bound_rule, cars_open, seed=seed)
    steps = ()
    if with_sensitivity:
        steps = tuple(sensitivity(scenario, destination_control, criterion, seed=seed,
                                  replications=replications, window_s=window_s,
                                  minutes=minutes, base=caps, on_step=on_step))
    return Decision(scenario.building.name, t.arrival_rate_pct_5min, destination_control,
                    criterion, study, caps, bounds, steps, int(seed))
