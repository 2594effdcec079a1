"""Charts of the decision: the shape of the waiting-time trade, service against demand, and
what the answer turns on.

Same conventions as :mod:`experiments.charts` (seaborn whitegrid, the colour-blind
palette with one fixed colour per control, conventional control dark grey and dashed,
PNG and SVG written atomically, the building's name in every title, units on every
axis). Every number drawn comes from the peak simulation's rows.
"""
from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from .charts import _figure, _legend_below, _save, _style, _suptitle, rule_colour
from .wording import client_name

CONVENTIONAL = "conventional"
_BASE = "#4d4d4d"
_DOWN = "#b8b8b8"


def control_colour(name: str) -> str:
    """The fixed colour of a control (conventional control dark grey)."""
    return _BASE if name == CONVENTIONAL else rule_colour(name)


def _line(name: str) -> dict:
    return {"color": control_colour(name), "linewidth": 1.9,
            "linestyle": "--" if name == CONVENTIONAL else "-", "label": client_name(name)}


def waiting_distribution_chart(study, out_dir, building_name: str, limits_s=(30.0, 60.0, 90.0),
                               controls=None) -> list[Path]:
    """Share of passengers who wait longer than t, for each control, at the study's demand.

    Parameters
    ----------
    study : peak.simulation.PeakStudy
        The peak simulation at one demand; every replication's passengers count.
    out_dir : path
    building_name : str
    limits_s : sequence of float
        Waiting times marked on the chart [s] (the service criterion's, 60 s).
    controls : sequence of str, optional
        The controls drawn (default: all of the study).

    Returns
    -------
    list of pathlib.Path
        ``waiting_distribution.png`` and ``.svg``.

    Notes
    -----
    The curve is 1 - F(t), F the empirical distribution of waiting time over all the
    measured passengers of all replications (waiting time: arrival until the passenger's
    car is at the lobby with its doors open for them).
    """
    runs = [r for r in study.runs if controls is None or r.control.name in controls]
    with _style():
        fig, axes = _figure(1, 1, 8.0, 4.8)
        ax = axes[0][0]
        top = 0.0
        for run in runs:
            waits = np.sort(np.concatenate([f["_sums"]["waits"] for f in run.per_replication]))
            if waits.size == 0:
                continue
            share = 1.0 - np.arange(1, waits.size + 1) / waits.size
            ax.step(waits, 100.0 * share, where="post", **_line(run.control.name))
            top = max(top, float(np.percentile(waits, 99)))
        for limit in limits_s:
            ax.axvline(limit, color="#999999", linewidth=0.9, linestyle=":")
            ax.text(limit, 98, f" {limit:g} s", ha="left", va="top", rotation=90,
                    fontsize="small", color="#555555")
        ax.set_xlim(0, max(top, max(limits_s) * 1.2))
        ax.set_ylim(0, 100)
        ax.set_xlabel("waiting time t [s]")
        ax.set_ylabel("passengers waiting longer than t [%]")
        _suptitle(fig, f"{building_name}: waiting time by control at "
                       f"{study.demand_pct_5min:g} % of the population per 5 min\n"
                       f"(peak simulation, {runs[0].summary['passengers_arrived'].n if runs else 0} "
                       f"replications)")
        _legend_below(fig, axes)
        return _save(fig, out_dir, "waiting_distribution")


def service_vs_demand_chart(capacities, out_dir, building_name: str, criterion,
                            demand_pct: float | None = None) -> list[Path]:
    """Average waiting time and average time to destination against demand, each control,
    with the criterion's lines and each control's handling capacity at the criterion.

    Parameters
    ----------
    capacities : list of experiments.decision.CapacityAtCriterion
        The search of each control; its tried demands give the points drawn.
    criterion : experiments.decision.ServiceCriterion
    demand_pct : float, optional
        The design demand, marked [% of population per 5 min].

    Returns
    -------
    list of pathlib.Path
        ``service_vs_demand.png`` and ``.svg``.

    Notes
    -----
    Bands are the 95 % intervals over replications. Points where a control is saturated
    are left out (their waits grow with the length of the period), and the waiting axis
    is cut at four times the criterion.
    """
    with _style():
        fig, axes = _figure(1, 2, 11.0, 4.8, sharex=True)
        ax_w, ax_t = axes[0]
        for cap in capacities:
            pts = sorted((t for t in cap.tried if not t.figures["saturated"]),
                         key=lambda t: t.demand_pct_5min)
            if not pts:
                continue
            x = np.array([t.demand_pct_5min for t in pts])
            for ax, key in ((ax_w, "average_waiting_time_s"), (ax_t, "average_time_to_destination_s")):
                y = np.array([t.figures[key] for t in pts])
                ci = np.array([t.figures[key[:-2] + "_ci95_s"] for t in pts])
                ci = np.where(np.isfinite(ci), ci, 0.0)
                ax.plot(x, y, marker="o", markersize=3.5, **_line(cap.control))
                ax.fill_between(x, y - ci, y + ci, color=control_colour(cap.control), alpha=0.18,
                                linewidth=0)
            if cap.handling_capacity_pct_5min is not None:
                for ax in (ax_w, ax_t):
                    ax.axvline(cap.handling_capacity_pct_5min, color=control_colour(cap.control),
                               linewidth=0.9, linestyle=":")
        ax_w.axhline(criterion.average_wait_max_s, color="black", linewidth=1.1,
                     label=f"criterion: average wait {criterion.average_wait_max_s:g} s")
        ax_w.set_ylim(0, 4 * criterion.average_wait_max_s)
        for ax in (ax_w, ax_t):
            if demand_pct is not None:
                ax.axvline(demand_pct, color="#b30000", linewidth=1.0, linestyle="-.",
                           label=f"design demand {demand_pct:g} %")
            ax.set_xlabel("demand [% of population per 5 min]")
        ax_w.set_ylabel("average waiting time [s]")
        ax_t.set_ylabel("average time to destination [s]")
        ax_w.set_title("Average waiting time", loc="left")
        ax_t.set_title("Average time to destination", loc="left")
        _suptitle(fig, f"{building_name}: service against demand (peak simulation; dotted: "
                       f"each control's handling capacity at the criterion)")
        _legend_below(fig, axes, ncols=3)
        return _save(fig, out_dir, "service_vs_demand")


def tornado_chart(steps, base_gain_pct: float | None, out_dir, building_name: str,
                  control: str, base_outcome: str | None = None) -> list[Path]:
    """Destination control's gain in handling capacity at the criterion, with each input
    moved down and up by its step: one bar per input, widest first.

    Parameters
    ----------
    steps : list of experiments.decision.SensitivityStep
        The step with ``monte_carlo`` set (the same inputs on another seed) is drawn as a
        grey band around the inputs-as-given line, apart from the bars.
    base_gain_pct : float or None
        The gain with every input as in the file [% of population per 5 min, points].
    base_outcome : str, optional
        The answer with every input as in the file (:func:`experiments.decision.outcome`):
        an input with a step that gives another answer is marked "changes the answer",
        whether or not it moves the gain (the demand moves the answer, not the
        capacities).

    Returns
    -------
    list of pathlib.Path
        ``sensitivity_tornado.png`` and ``.svg``.
    """
    base = 0.0 if base_gain_pct is None else base_gain_pct
    noise = [abs(s.hc_gain_pct_5min - base) for s in steps
             if getattr(s, "monte_carlo", False) and s.hc_gain_pct_5min is not None]
    by_input: dict = {}
    for s in steps:
        if getattr(s, "monte_carlo", False):
            continue
        by_input.setdefault(s.input, []).append(s)
    rows = []
    for name, pair in by_input.items():
        vals = [s.hc_gain_pct_5min for s in pair if s.hc_gain_pct_5min is not None]
        if not vals:
            vals = [base]
        lo, hi = min(vals), max(vals)
        label = f"{name} ({', '.join(s.step for s in pair)})"
        rows.append((label, lo, hi, pair))
    rows.sort(key=lambda r: r[2] - r[1])
    with _style():
        fig, axes = _figure(1, 1, 8.5, 1.4 + 0.55 * max(len(rows), 1))
        ax = axes[0][0]
        for y, (label, lo, hi, pair) in enumerate(rows):
            for s in pair:
                if s.hc_gain_pct_5min is None:
                    continue
                down = s.step.startswith("-")
                ax.barh(y, s.hc_gain_pct_5min - base, left=base, height=0.55,
                        color=_DOWN if down else control_colour(control), edgecolor="white")
        if noise and max(noise) > 0:
            ax.axvspan(base - max(noise), base + max(noise), color="#d9d9d9", alpha=0.6,
                       zorder=0, linewidth=0)
        ax.axvline(base, color="black", linewidth=1.2)
        if base_outcome is not None:
            for y, (_, _, _, pair) in enumerate(rows):
                moved = [s.step for s in pair if s.outcome != base_outcome]
                if moved:
                    ax.annotate(f"changes the answer ({', '.join(moved)})", (1.0, y),
                                xycoords=("axes fraction", "data"), xytext=(-4, 0),
                                textcoords="offset points", ha="right", va="center",
                                fontsize="small", color="#b30000")
        ax.axvline(0.0, color=_BASE, linewidth=0.9, linestyle="--")
        ax.set_yticks(range(len(rows)))
        ax.set_yticklabels([r[0] for r in rows])
        ax.set_xlabel("gain in handling capacity at the criterion\n"
                      "[points of % of population per 5 min]")
        from matplotlib.patches import Patch
        handles = [Patch(color=_DOWN), Patch(color=control_colour(control))]
        labels = ["input moved down", "input moved up"]
        if noise and max(noise) > 0:
            handles.append(Patch(color="#d9d9d9"))
            labels.append(f"Monte Carlo error: another seed moves it {max(noise):.2f} points")
        fig.legend(handles, labels, loc="outside lower center", ncols=len(handles))
        _suptitle(fig, f"{building_name}: what the answer turns on ({client_name(control)} "
                       f"against conventional control, simulated in time; black line: the "
                       f"inputs as given, {base:+.2f} points)", fontsize="medium")
        return _save(fig, out_dir, "sensitivity_tornado")
