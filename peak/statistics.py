"""Figures of a peak simulation, from one row per passenger and one per trip.

Every figure comes from the rows (:class:`peak._kernel.PeakOut`), so none can
disagree with another. Per replication, over the passengers arriving in the
measured period:

* waiting time = ready - arrival: until their car is at the lobby with its doors
  open for them (for destination control, and not before they are allocated);
  zero at a parked open car. Its mean, 50th/90th/95th percentiles and the share
  of waits over 60 s;
* transit time = alighting - start of boarding; time to destination = alighting
  - arrival (it includes the moments spent stepping in behind others);
* mean lobby queue = the time average over the measured period of the number of
  passengers waiting (arrived, their car not yet open for them), from the rows
  as the sum of each passenger's waiting inside the period over its length;
* passengers arrived in the period and delivered in it (alighted), and the
  handling capacity delivered: delivered per 5 minutes, also as % of the
  population; mean departure load of the trips leaving in the period; mean
  round-trip time of the trips starting in the period, a trip starting when its
  lobby stop starts (the car's arrival, or, at a car parked with its doors
  open, its first passenger's boarding less the door opening) and ending when
  the car is back at the lobby.

Across replications (independent and identically distributed), a figure that
is a total over the period (arrivals, deliveries, handling capacity, the time
average of the queue) is the mean of the replications' values with a 95 %
interval from Student's t. A figure that is an average over passengers (or over
trips) is the **ratio estimator**: the replications' sums over their counts,
sum_r X_r / sum_r N_r, with the delta-method interval from
z_r = X_r - R N_r ("Simulation Modeling and Analysis", McGraw-Hill, 4th ed.,
2007, ratio estimators; from memory). The mean of the replications' own
averages would be biased low, because a replication with more arrivals also
has longer waits, and weighs each of them less (about -1 % for a single car at
85 % utilisation, seen in the tests against the Pollaczek-Khinchine mean). A
percentile is taken over all the replications' passengers together, its
interval from the spread of the replications' own percentiles.

``saturated`` is true when the lobby queue grows through the period: the
period's arrivals exceed its deliveries by more than 2 % of the arrivals beyond
the interval's margin (a stable group delivers what arrives, give or take the
passengers in the system at its two ends).
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .arrivals import SLOT_S

# Two-sided 95 % quantiles of Student's t for 1 ... 30 degrees of freedom (standard
# tables, e.g. "Biometrika Tables for Statisticians", Cambridge University Press, 1966,
# from memory; checked against scipy.stats.t in the tests).
_T975 = (12.706, 4.303, 3.182, 2.776, 2.571, 2.447, 2.365, 2.306, 2.262, 2.228, 2.201, 2.179,
         2.160, 2.145, 2.131, 2.120, 2.110, 2.101, 2.093, 2.086, 2.080, 2.074, 2.069, 2.064,
         2.060, 2.056, 2.052, 2.048, 2.045, 2.042)
Z975 = 1.959963984540054
SATURATION_MARGIN = 0.02
WAIT_LIMIT_S = 60.0


def t975(df: int) -> float:
    """The 0.975 quantile of Student's t with ``df`` degrees of freedom.

    Tabulated for df <= 30; beyond, the Cornish-Fisher expansion
    z + (z^3 + z) / (4 df) + (5 z^5 + 16 z^3 + 3 z) / (96 df^2) ("Handbook of
    Mathematical Functions", NBS Applied Mathematics Series 55, 1964, eq. 26.7.5,
    from memory), within 1e-4 of the exact value there.
    """
    if df < 1:
        return math.inf
    if df <= len(_T975):
        return _T975[df - 1]
    z = Z975
    return z + (z ** 3 + z) / (4 * df) + (5 * z ** 5 + 16 * z ** 3 + 3 * z) / (96 * df ** 2)


@dataclass(frozen=True)
class Interval:
    """A mean over replications with its 95 % half-width."""

    mean: float
    ci95: float
    n: int

    @classmethod
    def ratio(cls, sums, counts) -> "Interval":
        """sum(sums) / sum(counts) with its delta-method 95 % half-width (see the notes)."""
        x = np.asarray(sums, dtype=float)
        n = np.asarray(counts, dtype=float)
        ok = np.isfinite(x) & (n > 0)
        x, n = x[ok], n[ok]
        k = x.size
        if k == 0:
            return cls(math.nan, math.nan, 0)
        r = float(x.sum() / n.sum())
        if k == 1:
            return cls(r, math.inf, 1)
        z = x - r * n
        return cls(r, t975(k - 1) * float(z.std(ddof=1)) / (float(n.mean()) * math.sqrt(k)), k)

    @classmethod
    def of(cls, values) -> "Interval":
        x = np.asarray(values, dtype=float)
        x = x[np.isfinite(x)]
        n = x.size
        if n == 0:
            return cls(math.nan, math.nan, 0)
        if n == 1:
            return cls(float(x[0]), math.inf, 1)
        return cls(float(x.mean()), t975(n - 1) * float(x.std(ddof=1)) / math.sqrt(n), n)


#: The per-replication figures (keys of :func:`replication_figures`).
FIGURES = ("average_waiting_time_s", "waiting_time_p50_s", "waiting_time_p90_s",
           "waiting_time_p95_s", "waiting_over_60s_pct", "average_transit_time_s",
           "average_time_to_destination_s", "time_to_destination_p95_s",
           "mean_lobby_queue_persons", "passengers_arrived", "passengers_delivered",
           "handling_capacity_persons_5min", "handling_capacity_pct_5min",
           "mean_departure_load_persons", "round_trip_time_s", "arrival_rate_persons_per_s",
           "backlog_persons")


def _overlap_s(start, end, lo: float, hi: float) -> np.ndarray:
    return np.clip(np.minimum(end, hi) - np.maximum(start, lo), 0.0, None)


def replication_figures(arrival_s, rows, trips, measure_start_s: float, measure_end_s: float,
                        population: float, door_open_s: float) -> dict:
    """The figures of one replication (see the module notes), with, under ``"_sums"``,
    the sums, counts and samples its figures come from (for :func:`summarise`).

    ``rows`` has the per-passenger arrays ``ready_s``, ``board_s``, ``alight_s``;
    ``trips`` the per-trip arrays ``load``, ``open_s``, ``first_board_s``,
    ``depart_s``, ``return_s``.
    """
    lo, hi = measure_start_s, measure_end_s
    span = hi - lo
    arr = np.asarray(arrival_s)
    ready, board, alight = rows["ready_s"], rows["board_s"], rows["alight_s"]
    m = (arr >= lo) & (arr < hi)
    wait = ready[m] - arr[m]
    ttd = alight[m] - arr[m]
    transit = alight[m] - board[m]
    n = int(m.sum())
    has = n > 0
    p50, p90, p95 = np.percentile(wait, [50, 90, 95]) if has else (math.nan,) * 3
    ttd95 = float(np.percentile(ttd, 95)) if has else math.nan
    delivered = int(np.count_nonzero((alight >= lo) & (alight < hi)))
    dep, ret = trips["depart_s"], trips["return_s"]
    leaving = np.isfinite(dep) & (dep >= lo) & (dep < hi)
    first = trips["first_board_s"]
    start = np.maximum(trips["open_s"], first) - door_open_s
    starting = np.isfinite(ret) & np.isfinite(first) & (start >= lo) & (start < hi)
    rtt = (ret[starting] - np.maximum(trips["open_s"][starting], first[starting])) + door_open_s
    hc = delivered / (span / SLOT_S)
    over = int(np.count_nonzero(wait > WAIT_LIMIT_S))
    loads = trips["load"][leaving]
    mean = (lambda total, count: total / count if count else math.nan)
    return {
        "average_waiting_time_s": mean(float(wait.sum()), n),
        "waiting_time_p50_s": float(p50),
        "waiting_time_p90_s": float(p90),
        "waiting_time_p95_s": float(p95),
        "waiting_over_60s_pct": 100.0 * mean(over, n),
        "average_transit_time_s": mean(float(transit.sum()), n),
        "average_time_to_destination_s": mean(float(ttd.sum()), n),
        "time_to_destination_p95_s": ttd95,
        "mean_lobby_queue_persons": float(_overlap_s(arr, ready, lo, hi).sum() / span),
        "passengers_arrived": n,
        "passengers_delivered": delivered,
        "handling_capacity_persons_5min": hc,
        "handling_capacity_pct_5min": 100.0 * hc / population,
        "mean_departure_load_persons": mean(float(loads.sum()), loads.size),
        "round_trip_time_s": mean(float(rtt.sum()), rtt.size),
        "arrival_rate_persons_per_s": n / span,
        "backlog_persons": n - delivered,
        "_sums": {"wait": float(wait.sum()), "over": over, "transit": float(transit.sum()),
                  "ttd": float(ttd.sum()), "n": n, "load": float(loads.sum()),
                  "trips": int(loads.size), "rtt": float(rtt.sum()), "rtt_n": int(rtt.size),
                  "waits": wait, "ttds": ttd},
    }


def slot_figures(arrival_s, rows, measure_start_s: float, measure_end_s: float) -> dict:
    """Per 5-minute slot of the measured period: arrivals, deliveries, average wait of
    the slot's arrivals [s] and the time-average lobby queue [persons]."""
    arr = np.asarray(arrival_s)
    ready, alight = rows["ready_s"], rows["alight_s"]
    edges = np.arange(measure_start_s, measure_end_s + 1e-9, SLOT_S)
    if edges[-1] < measure_end_s - 1e-9:
        edges = np.append(edges, measure_end_s)
    k = edges.size - 1
    slot = np.searchsorted(edges, arr, side="right") - 1
    inside = (slot >= 0) & (slot < k)
    arrivals = np.bincount(slot[inside], minlength=k)
    waits = np.bincount(slot[inside], weights=(ready - arr)[inside], minlength=k)
    out_slot = np.searchsorted(edges, alight, side="right") - 1
    delivered = np.bincount(out_slot[(out_slot >= 0) & (out_slot < k)], minlength=k)
    # each passenger's waiting, cut at the slot edges: the time spent waiting before each
    # edge, differenced
    before = np.clip(edges[None, :] - arr[:, None], 0.0, None) - np.clip(
        edges[None, :] - ready[:, None], 0.0, None)
    queue = np.diff(before.sum(axis=0)) / np.diff(edges)
    with np.errstate(invalid="ignore", divide="ignore"):
        mean_wait = np.where(arrivals > 0, waits / np.maximum(arrivals, 1), np.nan)
    return {"start_s": edges[:-1].tolist(), "arrivals": arrivals.tolist(),
            "deliveries": delivered.tolist(), "average_waiting_time_s": mean_wait.tolist(),
            "mean_lobby_queue_persons": queue.tolist()}


#: Figures that average over passengers or trips: (sum key, count key, scale).
_RATIOS = {"average_waiting_time_s": ("wait", "n", 1.0),
           "waiting_over_60s_pct": ("over", "n", 100.0),
           "average_transit_time_s": ("transit", "n", 1.0),
           "average_time_to_destination_s": ("ttd", "n", 1.0),
           "mean_departure_load_persons": ("load", "trips", 1.0),
           "round_trip_time_s": ("rtt", "rtt_n", 1.0)}
_PERCENTILES = {"waiting_time_p50_s": ("waits", 50), "waiting_time_p90_s": ("waits", 90),
                "waiting_time_p95_s": ("waits", 95), "time_to_destination_p95_s": ("ttds", 95)}


def summarise(per_replication: list[dict]) -> dict:
    """Every figure across replications: {name: Interval} (see the module notes)."""
    out = {}
    sums = [r["_sums"] for r in per_replication]
    for key in FIGURES:
        if key in _RATIOS:
            x, n, scale = _RATIOS[key]
            iv = Interval.ratio([s[x] for s in sums], [s[n] for s in sums])
            out[key] = Interval(scale * iv.mean, scale * iv.ci95, iv.n)
        elif key in _PERCENTILES:
            sample, q = _PERCENTILES[key]
            pooled = np.concatenate([s[sample] for s in sums]) if sums else np.empty(0)
            spread = Interval.of([r[key] for r in per_replication])
            value = float(np.percentile(pooled, q)) if pooled.size else math.nan
            out[key] = Interval(value, spread.ci95, spread.n)
        else:
            out[key] = Interval.of([r[key] for r in per_replication])
    return out


def is_saturated(summary: dict) -> bool:
    """The queue grows through the period (see the module notes)."""
    backlog = summary["backlog_persons"]
    arrived = summary["passengers_arrived"].mean
    if not math.isfinite(backlog.mean) or not arrived > 0:
        return False
    margin = backlog.ci95 if math.isfinite(backlog.ci95) else 0.0
    return backlog.mean - margin > SATURATION_MARGIN * arrived
