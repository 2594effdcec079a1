"""Charts of liftsort's results, for engineers and their clients.

Every chart is drawn off-screen (matplotlib's Agg renderer on a standalone
``Figure``, never pyplot's global state) in seaborn's "whitegrid" style and
saved as PNG (150 dpi) and SVG into an output folder, each through a
temporary file renamed into place (:func:`experiments.outputs.write_atomic`),
so no half-written chart is ever left behind. Each function returns the
paths it wrote.

Conventions shared by all charts:

* every number drawn comes from the table or the run given, never invented;
* colours come from seaborn's colour-blind-safe "colorblind" palette with a
  fixed mapping from rule name to colour (:func:`rule_colour`), so a rule
  looks the same in every chart; conventional control (``random``) is dark
  grey and dashed, the baseline the others are measured against;
* the building's name is in every title and every axis names its unit.

This module imports matplotlib and seaborn; only commands that draw import it.
"""
from __future__ import annotations

import io
import math
import zlib
from contextlib import contextmanager
from pathlib import Path

import numpy as np

from .outputs import output_dir, write_atomic
from .wording import count_of

DPI = 150
#: The widest chart [in]: 1650 px at DPI, so that in the report's 66 rem (1056 px) column
#: a 10 pt label is still about 13 px high. A chart with more to show gets narrower bars,
#: never a wider canvas.
MAX_WIDTH_IN = 11.0

def _is_baseline(rule: str) -> bool:
    """True for the registry's conventional baseline rule."""
    from allocation.registry import baseline_rule
    return rule == baseline_rule()

DEMAND_LABEL = "demand [% of population per 5 min]"

# Fixed rule -> index into seaborn's "colorblind" palette (None: the baseline's grey).
_RULE_COLOUR_INDEX = {"random": None, "conventional": None, "sorted": 0, "sectors": 1,
                      "fewest-stops": 2, "best": 4, "round-robin": 3, "same-floor-first": 5,
                      "least-added-time": 9, "earliest-leaving": 6}
_SPARE_COLOUR_INDEX = (7, 8)
_BASELINE_COLOUR = "#4d4d4d"
_MARKERS = {"random": "o", "sorted": "s", "sectors": "^", "fewest-stops": "D", "best": "v",
            "round-robin": "P"}
_SPARE_MARKERS = ("X", "h", "<", ">")


# --------------------------------------------------------------------------- style
def rule_colour(rule: str) -> str:
    """The fixed colour of an allocation rule, as a hex string.

    Parameters
    ----------
    rule : str
        Rule name (see :mod:`allocation.registry`).

    Returns
    -------
    str
        ``#rrggbb`` from seaborn's "colorblind" palette; the conventional
        baseline ``random`` is dark grey. A rule not in the fixed table gets a
        spare palette colour chosen by a stable hash of its name.
    """
    import seaborn as sns
    palette = sns.color_palette("colorblind").as_hex()
    if rule in _RULE_COLOUR_INDEX:
        index = _RULE_COLOUR_INDEX[rule]
        return _BASELINE_COLOUR if index is None else palette[index]
    return palette[_SPARE_COLOUR_INDEX[zlib.crc32(rule.encode()) % len(_SPARE_COLOUR_INDEX)]]


def _marker(rule: str) -> str:
    if rule in _MARKERS:
        return _MARKERS[rule]
    return _SPARE_MARKERS[zlib.crc32(rule.encode()) % len(_SPARE_MARKERS)]


def _line_style(rule: str) -> dict:
    return {"color": rule_colour(rule), "marker": _marker(rule), "markersize": 4.5,
            "linewidth": 1.8, "linestyle": "--" if _is_baseline(rule) else "-", "label": rule}


@contextmanager
def _style():
    """seaborn's whitegrid look, as a local rc context (no global state changed)."""
    import matplotlib
    import seaborn as sns
    rc = {**sns.axes_style("whitegrid"), **sns.plotting_context("notebook", font_scale=0.85),
          "svg.hashsalt": "liftsort",
          # SVG text stays text (smaller files, drawn much faster than glyph outlines)
          "svg.fonttype": "none", "axes.titleweight": "bold", "figure.titlesize": 12.5,
          "figure.titleweight": "bold", "legend.frameon": False,
          # a building called "Unit $5" must print as typed, not as mathematics
          "text.parse_math": False}
    with matplotlib.rc_context(rc):
        yield


def _figure(nrows: int, ncols: int, width_in: float, height_in: float, **subplots):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure
    fig = Figure(figsize=(min(width_in, MAX_WIDTH_IN), height_in), layout="constrained")
    FigureCanvasAgg(fig)
    axes = fig.subplots(nrows, ncols, squeeze=False, **subplots)
    return fig, axes


def _save(fig, out_dir, stem: str) -> list[Path]:
    """Write ``stem``.png and ``stem``.svg atomically; return their paths."""
    out = output_dir(out_dir)
    paths = []
    for fmt, extra in (("png", {"dpi": DPI, "metadata": {"Software": None}}),
                       ("svg", {"metadata": {"Date": None}})):
        buf = io.BytesIO()
        fig.savefig(buf, format=fmt, facecolor="white", **extra)
        paths.append(write_atomic(out / f"{stem}.{fmt}", buf.getvalue()))
        fig.set_layout_engine("none")     # the layout is settled: do not solve it again
    return paths


def _suptitle(fig, text: str, **kwargs) -> None:
    """The figure title, each line wrapped to the figure's width (long building names)."""
    import textwrap
    width_in = fig.get_figwidth()
    chars = max(30, int(width_in * 9.5 * (1.25 if kwargs.get("fontsize") == "medium" else 1.0)))
    lines = [textwrap.fill(line, chars, break_long_words=True) for line in text.split("\n")]
    fig.suptitle("\n".join(lines), **kwargs)


def _legend_below(fig, axes, ncols: int | None = None) -> None:
    """One legend for the figure, below the panels, without duplicate labels."""
    handles, labels = {}, []
    for ax in np.ravel(axes):
        for h, lab in zip(*ax.get_legend_handles_labels()):
            if lab not in handles and not lab.startswith("_"):
                handles[lab] = h
                labels.append(lab)
    if labels:
        fig.legend([handles[lab] for lab in labels], labels, loc="outside lower center",
                   ncols=ncols or min(len(labels), 5))


# --------------------------------------------------------------------------- tables
def _require(table, columns) -> None:
    if len(table) == 0:
        raise ValueError("table: has no rows; nothing to draw")
    missing = [c for c in columns if c not in table.columns]
    if missing:
        raise ValueError(f"table: missing column(s) {', '.join(missing)} "
                         f"(expected a sweep table from experiments.sweep.demand_sweep)")


def _rules(table) -> list[str]:
    """Rules in order of first appearance (the baseline first, as the sweep lists them)."""
    return list(dict.fromkeys(table["rule"]))


def _groups(table) -> list[tuple[str, object]]:
    """(label, rows) per number of cars: the rows with every car open to allocation.

    When a group has no row with cars_open == cars (a cars-open sweep below
    the group size), its largest cars_open is used and the label says so.
    """
    several = table["cars"].nunique() > 1
    out = []
    for cars, rows in table.groupby("cars", sort=True):
        full = rows[rows["cars_open"] == cars]
        if len(full):
            label = count_of(int(cars), "car") if several else ""
        else:
            k = rows["cars_open"].max()
            full = rows[rows["cars_open"] == k]
            label = f"{count_of(int(cars), 'car')}, {k} open to allocation"
        out.append((label, full.sort_values("arrival_rate_pct_5min")))
    return out


def _shade_saturated(ax, rows) -> None:
    """Shade the demands where conventional control is saturated (load held at design load).

    The shading starts at conventional control's handling capacity at design
    load (the demand it saturates at), kept between the last unsaturated and
    the first saturated demand of the sweep.
    """
    if "saturated_under_random" not in rows.columns:
        return
    flags = rows["saturated_under_random"].astype(bool)
    sat = rows.loc[flags, "arrival_rate_pct_5min"]
    if len(sat) == 0:
        return
    first = float(sat.min())
    unsat = rows.loc[~flags, "arrival_rate_pct_5min"]
    start = first
    base = rows.loc[rows["rule"].map(_is_baseline), "design_load_handling_capacity_pct_5min"]
    if len(base):
        last_ok = float(unsat[unsat < first].max()) if (unsat < first).any() else -math.inf
        start = min(max(float(base.iloc[0]), last_ok), first)
    stop = float(rows["arrival_rate_pct_5min"].max())
    if stop <= start:
        return
    ax.axvspan(start, stop, color="#e6e6e6", zorder=0, linewidth=0,
               label="conventional control saturated:\nall rules at design load")


def _band(ax, x, y, half, rule) -> None:
    x, y, half = (np.asarray(v, dtype=float) for v in (x, y, half))
    ax.fill_between(x, y - half, y + half, color=rule_colour(rule), alpha=0.22, linewidth=0)


def _panel_title(base: str, label: str) -> str:
    return f"{base} ({label})" if label else base


# --------------------------------------------------------------------------- sweeps
def sweep_charts(table, out_dir, building_name: str) -> list[Path]:
    """The charts of a demand sweep: RTT and interval, capacity, and grouping gain.

    Parameters
    ----------
    table : pandas.DataFrame
        The tidy sweep table of :func:`experiments.sweep.demand_sweep` (one row
        per rule per point; demand ``arrival_rate_pct_5min`` [% of population
        per 5 min], ``round_trip_time_s`` and its 95 % half-width ``ci95_s``
        [s], ``interval_s`` [s], ``design_load_handling_capacity_pct_5min``
        [% / 5 min], gains ``hc_gain_pct_vs_random``, ``rtt_gain_pct_vs_random``
        and their paired half-widths [%]).
    out_dir : path
        Output folder (created if needed).
    building_name : str
        Shown in every title.

    Returns
    -------
    list of pathlib.Path
        ``rtt_interval_vs_demand``, ``capacity_vs_demand`` and
        ``gain_vs_demand`` as .png and .svg; and ``gain_vs_cars_open`` (see
        :func:`cars_open_chart`) when the table holds several cars-open values.

    Notes
    -----
    The demand charts use the rows with every car open to allocation
    (cars_open == cars); a table with several numbers of cars gets one row of
    panels per number of cars. Interval bands are ci95_s / cars, the interval
    being RTT / cars. Demands at which conventional control is saturated are
    shaded: there the car load is held at the design load for every rule, so
    the curves are flat.
    """
    _require(table, ["rule", "arrival_rate_pct_5min", "cars", "cars_open", "round_trip_time_s",
                     "ci95_s", "interval_s", "design_load_handling_capacity_pct_5min",
                     "hc_gain_pct_vs_random", "hc_gain_ci95_pct", "rtt_gain_pct_vs_random",
                     "rtt_gain_ci95_pct"])
    groups = _groups(table)
    basis = (f"{_passenger_model(table)} passenger counts; destination rules with every car "
             f"open to allocation (the ideal bound)")
    paths = _rtt_interval_chart(groups, out_dir, building_name, basis)
    paths += _capacity_chart(groups, out_dir, building_name, basis)
    paths += _gain_chart(groups, out_dir, building_name, basis)
    if table["cars_open"].nunique() > 1:
        paths += cars_open_chart(table, out_dir, building_name)
    return paths


def _passenger_model(table) -> str:
    """The passenger model(s) of a sweep table, in words ("Poisson", "fixed")."""
    if "passenger_model" not in table.columns:
        return "Poisson"
    names = {"poisson": "Poisson", "fixed": "fixed"}
    return " and ".join(names.get(m, str(m)) for m in sorted(table["passenger_model"].unique()))


def _panels_vs_demand(groups, panels, title: str, stem: str, out_dir, *,
                      skip_baseline: bool = False) -> list[Path]:
    """Two panels per group: each ``(column, half_width(rows), panel title, y label)``
    drawn against demand, one line per rule with its 95 % band."""
    with _style():
        fig, axes = _figure(len(groups), 2, 10.0, 1.0 + 3.6 * len(groups), sharex=True)
        for (label, rows), row_axes in zip(groups, axes):
            for ax in row_axes:
                _shade_saturated(ax, rows)
                if skip_baseline:
                    ax.axhline(0.0, color=_BASELINE_COLOUR, linewidth=1.0, linestyle="--",
                               label="conventional control (random)")
            for rule in _rules(rows):
                if skip_baseline and _is_baseline(rule):
                    continue
                r = rows[rows["rule"] == rule]
                x = r["arrival_rate_pct_5min"]
                for ax, (column, half, _, _) in zip(row_axes, panels):
                    ax.plot(x, r[column], **_line_style(rule))
                    _band(ax, x, r[column], half(r), rule)
            for ax, (_, _, panel, ylabel) in zip(row_axes, panels):
                ax.set_title(_panel_title(panel, label), loc="left")
                ax.set_ylabel(ylabel)
        for ax in axes[-1]:
            ax.set_xlabel(DEMAND_LABEL)
        _suptitle(fig, title)
        _legend_below(fig, axes)
        return _save(fig, out_dir, stem)


def _rtt_interval_chart(groups, out_dir, name, basis: str = "") -> list[Path]:
    panels = [("round_trip_time_s", lambda r: r["ci95_s"], "Round-trip time", "round-trip time [s]"),
              ("interval_s", lambda r: r["ci95_s"] / r["cars"], "Interval", "interval [s]")]
    return _panels_vs_demand(groups, panels, f"{name}: round-trip time and interval against "
                             f"demand (bands: 95 % intervals)\n{basis}", "rtt_interval_vs_demand",
                             out_dir)


def _capacity_chart(groups, out_dir, name, basis: str = "") -> list[Path]:
    n = len(groups)
    cols = min(n, 3)
    rows_n = math.ceil(n / cols)
    with _style():
        fig, axes = _figure(rows_n, cols, 1.5 + 6.5 * cols, 1.4 + 5.0 * rows_n)
        for i, (label, rows) in enumerate(groups):
            ax = axes[i // cols][i % cols]
            demands = rows["arrival_rate_pct_5min"].to_numpy(dtype=float)
            levels = {rule: float(rows.loc[rows["rule"] == rule,
                                           "design_load_handling_capacity_pct_5min"].iloc[0])
                      for rule in _rules(rows)}
            low = 0.85 * min(demands.min(), min(levels.values()))
            high = 1.08 * max(demands.max(), max(levels.values()))
            ax.plot([low, high], [low, high], color="black", linewidth=1.2,
                    label="demand line (handling capacity = demand)")
            for rule, hc in levels.items():
                colour = rule_colour(rule)
                ax.plot([hc, hc], [low, hc], color=colour, linewidth=1.0, linestyle=":")
                ax.plot([low, hc, high], [hc, hc, hc], color=colour, linewidth=1.8,
                        linestyle="--" if _is_baseline(rule) else "-", marker=_marker(rule),
                        markevery=[1], markersize=8, markeredgecolor="white",
                        label=f"{rule}: carries up to {hc:.1f} %")
            ax.set_xlim(low, high)
            ax.set_ylim(low, high)
            ax.set_xlabel(DEMAND_LABEL)
            ax.set_ylabel("handling capacity at design load\n[% of population per 5 min]")
            ax.set_title(_panel_title("Each rule carries the demands left of its marker "
                                      "and saturates beyond", label),
                         loc="left", fontsize="medium", fontweight="normal")
            ax.legend(loc="upper left", fontsize="small")
        for j in range(n, rows_n * cols):
            axes[j // cols][j % cols].set_visible(False)
        _suptitle(fig, f"{name}:\nhandling capacity at design load against demand\n{basis}")
        return _save(fig, out_dir, "capacity_vs_demand")


def _gain_chart(groups, out_dir, name, basis: str = "") -> list[Path]:
    panels = [("hc_gain_pct_vs_random", lambda r: r["hc_gain_ci95_pct"],
               "Handling-capacity gain", "handling-capacity gain vs random [%]"),
              ("rtt_gain_pct_vs_random", lambda r: r["rtt_gain_ci95_pct"],
               "Round-trip-time reduction", "round-trip-time reduction vs random [%]")]
    return _panels_vs_demand(groups, panels, f"{name}: grouping gain against demand, same "
                             f"passengers (bands: paired 95 % intervals)\n{basis}",
                             "gain_vs_demand",
                             out_dir, skip_baseline=True)


def cars_open_chart(table, out_dir, building_name: str) -> list[Path]:
    """Handling-capacity gain against the number of cars open to allocation.

    Parameters
    ----------
    table : pandas.DataFrame
        A sweep table (:func:`experiments.sweep.demand_sweep`) over cars open;
        uses ``cars_open``, ``hc_gain_pct_vs_random`` and its paired 95 %
        half-width ``hc_gain_ci95_pct`` [%].
    out_dir : path
        Output folder (created if needed).
    building_name : str
        Shown in the title.

    Returns
    -------
    list of pathlib.Path
        ``gain_vs_cars_open.png`` and ``.svg``.

    Notes
    -----
    Drawn at one demand, the highest present in the table (named in the
    title), one line per rule except the ``random`` baseline (the zero line),
    one panel per number of cars when the table holds several.
    """
    _require(table, ["rule", "arrival_rate_pct_5min", "cars", "cars_open",
                     "hc_gain_pct_vs_random", "hc_gain_ci95_pct"])
    demand = float(table["arrival_rate_pct_5min"].max())
    highest = ", the highest in the sweep" if table["arrival_rate_pct_5min"].nunique() > 1 else ""
    at = table[table["arrival_rate_pct_5min"] == demand]
    groups = list(at.groupby("cars", sort=True))
    n = len(groups)
    cols = min(n, 3)
    rows_n = math.ceil(n / cols)
    with _style():
        fig, axes = _figure(rows_n, cols, 2.5 + 5.2 * cols, 1.4 + 3.9 * rows_n)
        for i, (cars, rows) in enumerate(groups):
            ax = axes[i // cols][i % cols]
            ax.axhline(0.0, color=_BASELINE_COLOUR, linewidth=1.0, linestyle="--",
                       label="conventional control (random)")
            for rule in _rules(rows):
                if _is_baseline(rule):
                    continue
                r = rows[rows["rule"] == rule].sort_values("cars_open")
                x = r["cars_open"]
                ax.plot(x, r["hc_gain_pct_vs_random"], **_line_style(rule))
                _band(ax, x, r["hc_gain_pct_vs_random"], r["hc_gain_ci95_pct"], rule)
            opens = sorted(rows["cars_open"].unique())
            ax.set_xticks(opens)
            ax.set_xlabel("cars open to allocation [cars]")
            ax.set_ylabel("handling-capacity gain vs random [%]")
            if n > 1:
                ax.set_title(count_of(int(cars), "car"), loc="left")
        for j in range(n, rows_n * cols):
            axes[j // cols][j % cols].set_visible(False)
        _suptitle(fig, f"{building_name}: handling-capacity gain against cars open to "
                     f"allocation\nat demand {demand:g} % of population per 5 min{highest} "
                     f"(bands: paired 95 % intervals; {_passenger_model(table)} passenger "
                     f"counts)", fontsize="medium")
        _legend_below(fig, axes)
        return _save(fig, out_dir, "gain_vs_cars_open")


# --------------------------------------------------------------------------- distributions
def distribution_charts(comparison, out_dir, building_name: str) -> list[Path]:
    """Distributions of stops and of the highest reversal floor per car trip, per rule.

    Parameters
    ----------
    comparison : batchrounds.montecarlo.Comparison
        A run of :func:`batchrounds.montecarlo.compare_rules`; every car
        trip of every trial counts once.
    out_dir : path
        Output folder (created if needed).
    building_name : str
        Shown in the titles.

    Returns
    -------
    list of pathlib.Path
        ``stops_distribution`` and ``reversal_distribution`` as .png and .svg.

    Notes
    -----
    Bars give the probability of each value (stops above the lobby [-];
    highest reversal floor [floor]) among all car trips, side by side per
    rule; the legend gives each rule's mean.
    """
    from roundtrip import schedule as K

    results = list(comparison.results)
    if not results:
        raise ValueError("comparison: has no rule results; nothing to draw")
    sub = (f"{comparison.passengers_per_car:.1f} passengers per car ({comparison.passenger_model}), "
           f"{count_of(comparison.cars, 'car')}, {comparison.trials} rounds")
    paths = _distribution(results, K.STOPS, "stops above the lobby per round trip [-]",
                          f"{building_name}: stops per round trip\n({sub})", out_dir,
                          "stops_distribution")
    paths += _distribution(results, K.HIGHEST, "highest reversal floor [floor]",
                           f"{building_name}: highest reversal floor per round trip\n({sub})",
                           out_dir, "reversal_distribution")
    return paths


def _distribution(results, column: int, xlabel: str, title: str, out_dir, stem) -> list[Path]:
    from roundtrip import schedule as K
    hists = {r.rule: np.asarray(r.totals.stops_hist if column == K.STOPS
                                else r.totals.highest_hist) for r in results}
    used = [int(np.flatnonzero(h).max()) for h in hists.values() if h.any()]
    top = max(used) if used else 0
    ks = np.arange(top + 1)
    width = 0.8 / len(hists)
    with _style():
        fig, axes = _figure(1, 1, max(7.0, 1.5 + 0.55 * (top + 1)), 4.6)
        ax = axes[0][0]
        for i, (rule, h) in enumerate(hists.items()):
            total = max(int(h.sum()), 1)
            prob = h[: top + 1] / total
            mean = float(np.sum(np.arange(h.size) * h) / total) if h.any() else float("nan")
            ax.bar(ks - 0.4 + width * (i + 0.5), prob, width=width, color=rule_colour(rule),
                   edgecolor="white", linewidth=0.4, label=f"{rule} (mean {mean:.2f})",
                   hatch="//" if _is_baseline(rule) else None)
        step = max(1, int(np.ceil((top + 1) / 24)))      # at most 24 labels on the axis
        ax.set_xticks(ks[::step])
        ax.set_xlim(-0.6, top + 0.6)
        ax.set_xlabel(xlabel)
        ax.set_ylabel("probability per car trip [-]")
        ax.grid(axis="x", visible=False)
        ax.legend(loc="upper left")
        _suptitle(fig, title)
        return _save(fig, out_dir, stem)


# --------------------------------------------------------------------------- batch diagram
def batch_diagram(building, group, rules=("random", "sorted"), passengers_per_car=None,
                  seed: int = 0, out_dir=".", building_name: str | None = None,
                  design_traffic_is_uppeak: bool = True) -> list[Path]:
    """One sampled up-peak batch, allocated by each rule: who rode which car to which floor.

    Parameters
    ----------
    building : roundtrip.building.Building
    group : roundtrip.building.LiftGroup
        All its cars are open to allocation.
    rules : sequence of str
        Rules drawn side by side (default conventional ``random`` and ``sorted``).
    passengers_per_car : float, optional
        Mean passengers per car, P [persons], 0 < P <= rated load; the batch
        holds cars x P passengers (fixed count, a real value mixing the two
        nearest integers). Default: the design load.
    seed : int
        Seed of the batch (``numpy.random.default_rng(seed)``).
    out_dir : path
        Output folder (created if needed).
    building_name : str, optional
        Shown in the title (default: the building's name).
    design_traffic_is_uppeak : bool
        False when the building's design traffic is a mix: the title then says that the
        round drawn is an up-peak illustration.

    Returns
    -------
    list of pathlib.Path
        ``batch_diagram.png`` and ``.svg``.

    Notes
    -----
    The round is drawn once by :class:`roundtrip.montecarlo.PassengerSampler`
    (each car's passengers over its interval) and given to every rule's plain
    function with each car's room, the passengers conventional control gives it
    (as in the round-trip Monte Carlo). Each car's passengers are timed
    by :func:`roundtrip.montecarlo.time_trips` (the trip model of
    ``docs/trip_model.md``); its round-trip time [s] and stops are in the
    car's axis label. A dot is a passenger at their destination floor (dots
    at one floor are spread side by side); a grey bar marks a stop.
    """
    from allocation.contract import empty_cars
    from allocation.registry import get_rule
    from roundtrip.montecarlo import PassengerSampler, time_trips
    from roundtrip.schedule import STOPS, trip_timing

    name = building.name if building_name is None else building_name
    cars = group.cars
    p = group.design_load_persons if passengers_per_car is None else float(passengers_per_car)
    if not (0 < p <= group.rated_load_persons):
        raise ValueError(f"passengers_per_car = {passengers_per_car!r}: must be > 0 and at most "
                         f"the rated load {group.rated_load_persons} [persons]")
    chosen = [get_rule(r) for r in rules]
    if not chosen:
        raise ValueError("rules = (): give at least one rule")
    # one round: each car's passengers arrive over its interval (a fixed count, a real P
    # mixing the two nearest integers), and each car takes as many as conventional
    # control would give it, as in the round-trip Monte Carlo
    orig, dest, offsets = PassengerSampler(building).draw(np.random.default_rng(seed), p, cars,
                                                          poisson=False)
    n = int(offsets[-1])
    for rule in chosen:
        if rule.max_batch is not None and n > rule.max_batch:
            raise ValueError(f"rule = {rule.name!r}: takes batches of at most {rule.max_batch} "
                             f"passengers; this batch has {n}")
    view = empty_cars(cars, 0)
    view["room"] = np.minimum(np.diff(offsets), group.rated_load_persons)
    timing = trip_timing(building, group)
    drawn = []
    for rule in chosen:
        params = rule.params(building, group, cars, p)
        car_of = rule.allocate(orig, dest, cars, params=params, cars=view)
        per_car = []
        for c in range(cars):
            idx = np.flatnonzero(car_of == c)
            trip = time_trips(building, group, orig[idx], dest[idx],
                              np.array([0, idx.size], dtype=np.int64), timing)
            per_car.append((idx, float(trip.rtt_s[0]), int(trip.counts[0, STOPS])))
        drawn.append((rule.name, car_of, per_car))

    floors = building.floors
    with _style():
        fig, axes = _figure(1, len(drawn), 0.8 + len(drawn) * (1.2 + 0.95 * cars),
                            1.6 + 0.32 * (floors + 1), sharey=True)
        for ax, (rule, car_of, per_car) in zip(axes[0], drawn):
            colour = rule_colour(rule)
            for c, (idx, _, _) in enumerate(per_car):
                x0 = c + 1
                stops = np.unique(dest[idx])
                top = int(stops.max()) if stops.size else 0
                ax.plot([x0, x0], [0, top], color="#b0b0b0", linewidth=1.0, zorder=1)
                ax.plot(np.full(stops.size, x0), stops, linestyle="none", marker="_",
                        markersize=34, markeredgewidth=7, color="#c8c8c8", zorder=2)
                for floor in stops:
                    here = idx[dest[idx] == floor]
                    step = min(0.09, 0.6 / here.size)
                    spread = (np.arange(here.size) - (here.size - 1) / 2.0) * step
                    ax.plot(x0 + spread, np.full(here.size, floor), linestyle="none", marker="o",
                            markersize=5.5, color=colour, markeredgecolor="white",
                            markeredgewidth=0.6, zorder=3)
            mean_rtt = float(np.mean([t for _, t, _ in per_car]))
            unplaced = int(np.sum(car_of < 0))
            ax.set_xticks(range(1, cars + 1))
            ax.set_xticklabels([f"car {c + 1}\n{t:.1f} s\n{s} stops"
                                for c, (_, t, s) in enumerate(per_car)], fontsize="small")
            ax.set_xlim(0.4, cars + 0.6)
            ax.grid(axis="x", visible=False)
            extra = f", {unplaced} not allocated" if unplaced else ""
            ax.set_title(f"{rule}: mean round-trip time {mean_rtt:.1f} s{extra}", loc="left",
                         color="black")
            ax.set_xlabel("car (round-trip time [s], stops above the lobby)")
        ax0 = axes[0][0]
        ax0.set_yticks(range(floors + 1))
        ax0.set_yticklabels(["lobby"] + [str(f) for f in range(1, floors + 1)])
        ax0.set_ylim(-0.6, floors + 0.6)
        ax0.set_ylabel("destination floor [floor]")
        mixed = ("" if design_traffic_is_uppeak else
                 "\nAn illustration with up-peak arrivals only: the building's design traffic "
                 "is a mix of incoming, outgoing and interfloor trips")
        _suptitle(fig, f"{name}: one up-peak round of {count_of(n, 'passenger')} for "
                     f"{count_of(cars, 'car')} (fixed counts per car, every car open), "
                     f"allocated by {' and by '.join(repr(r) for r, _, _ in drawn)} "
                     f"(seed {seed}){mixed}")
        from matplotlib.lines import Line2D
        handles = [Line2D([], [], linestyle="none", marker="_", markersize=16, markeredgewidth=7,
                          color="#c8c8c8")]
        labels = ["car stop"]
        for rule, _, _ in drawn:
            handles.append(Line2D([], [], linestyle="none", marker="o", markersize=6,
                                  color=rule_colour(rule), markeredgecolor="white"))
            labels.append(f"passenger at their destination floor ({rule})")
        fig.legend(handles, labels, loc="outside lower center", ncols=len(labels))
        return _save(fig, out_dir, "batch_diagram")


# --------------------------------------------------------------------------- classical check
def classical_vs_simulation_chart(table, out_dir, building_name: str) -> list[Path]:
    """Classical against Monte Carlo round-trip time over rated speed.

    Parameters
    ----------
    table : pandas.DataFrame
        Columns ``rated_speed_mps`` [m/s], ``classical_round_trip_time_s`` [s],
        ``monte_carlo_round_trip_time_s`` [s] with its 95 % half-width
        ``monte_carlo_ci95_s`` [s], and optionally
        ``rated_speed_reached_in_one_floor`` (bool).
    out_dir : path
        Output folder (created if needed).
    building_name : str
        Shown in the title.

    Returns
    -------
    list of pathlib.Path
        ``classical_vs_simulation.png`` and ``.svg``.

    Notes
    -----
    The lower panel is the Monte Carlo RTT relative to the classical one,
    100 (RTT_mc / RTT_classical - 1) [%], with the band
    100 ci95 / RTT_classical. Speeds at which rated speed is not reached in a
    one-floor jump (the classical formula's assumption fails) are shaded.
    """
    _require(table, ["rated_speed_mps", "classical_round_trip_time_s",
                     "monte_carlo_round_trip_time_s", "monte_carlo_ci95_s"])
    import seaborn as sns
    t = table.sort_values("rated_speed_mps")
    v = t["rated_speed_mps"].to_numpy(dtype=float)
    classical = t["classical_round_trip_time_s"].to_numpy(dtype=float)
    mc = t["monte_carlo_round_trip_time_s"].to_numpy(dtype=float)
    ci = t["monte_carlo_ci95_s"].to_numpy(dtype=float)
    blue = sns.color_palette("colorblind").as_hex()[0]
    with _style():
        fig, axes = _figure(2, 1, 7.5, 7.0, sharex=True, height_ratios=[3, 2])
        top, bottom = axes[0][0], axes[1][0]
        if "rated_speed_reached_in_one_floor" in t.columns:
            not_reached = ~t["rated_speed_reached_in_one_floor"].astype(bool).to_numpy()
            if not_reached.any():
                for ax in (top, bottom):
                    ax.axvspan(v[not_reached].min(), v.max(), color="#e6e6e6", zorder=0,
                               linewidth=0, label="rated speed not reached in one floor jump")
        top.plot(v, classical, color="black", marker="o", markersize=4.5, linewidth=1.8,
                 linestyle="--", label="classical formula")
        top.plot(v, mc, color=blue, marker="s", markersize=4.5, linewidth=1.8,
                 label="Monte Carlo (real levels, jerk-limited flights)")
        top.fill_between(v, mc - ci, mc + ci, color=blue, alpha=0.22, linewidth=0)
        top.set_ylabel("round-trip time [s]")
        rel = 100.0 * (mc / classical - 1.0)
        bottom.axhline(0.0, color="black", linewidth=1.0, linestyle="--")
        bottom.plot(v, rel, color=blue, marker="s", markersize=4.5, linewidth=1.8)
        bottom.fill_between(v, rel - 100.0 * ci / classical, rel + 100.0 * ci / classical,
                            color=blue, alpha=0.22, linewidth=0)
        bottom.set_ylabel("Monte Carlo against\nclassical [%]")
        bottom.set_xlabel("rated speed [m/s]")
        _suptitle(fig, f"{building_name}:\nclassical against Monte Carlo round-trip time "
                     f"(band: 95 % interval)")
        _legend_below(fig, axes, ncols=2)
        return _save(fig, out_dir, "classical_vs_simulation")
