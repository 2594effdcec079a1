"""The peak simulation's plain Python API: controls, replications and their figures.

:func:`simulate_peak` runs a lift group through a peak period under each
control on the very same arrivals (replication r of every control sees the
same passengers), with independent replications from one
``numpy.random.SeedSequence``, and returns the figures of
:mod:`peak.statistics` with 95 % intervals. The model is that of
:mod:`peak._kernel` (written down in ``docs/peak_model.md``).

Controls are named as on the command line: ``conventional``; a batch rule of
the registry (delayed allocation over ``window_s``); an immediate policy of the
registry. This simulation is for up-peak (incoming) traffic only.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from roundtrip.building import Building, LiftGroup, Traffic
from roundtrip.schedule import trip_timing

from . import _kernel as P
from . import statistics as S
from .arrivals import PeakPeriod, draw_arrivals, peak_period

CONVENTIONAL = "conventional"
DEFAULT_WINDOW_S = 5.0
FIRST_REPLICATIONS = 10
MAX_REPLICATIONS = 200
CI_TARGET_PCT = 5.0
CI_FLOOR_S = 0.25
MAX_PASSENGERS = 20_000_000
THREAD_PASSENGERS = 100_000


@dataclass(frozen=True)
class Control:
    """A way of giving passengers to cars."""

    name: str
    kind: str            # "conventional", "delayed" or "immediate"
    basis: str = "peak"  # every figure of this simulation is simulated in time
    summary: str = ""

    @property
    def mode(self) -> int:
        return {"conventional": P.CONVENTIONAL, "delayed": P.DELAYED,
                "immediate": P.IMMEDIATE}[self.kind]


def control_names() -> list[str]:
    """Every control the simulation knows: conventional, the batch rules, the policies."""
    from allocation.registry import POLICIES, RULES
    return [CONVENTIONAL] + [r.name for r in RULES.values() if r.max_batch is None] + list(POLICIES)


def resolve_controls(names) -> list[Control]:
    """The controls called ``names`` (conventional first); a ValueError lists the choices."""
    import difflib

    from allocation.registry import POLICIES, RULES
    known = control_names()
    out = [Control(CONVENTIONAL, "conventional",
                   summary="Conventional control: passengers queue at the lobby and step into "
                           "the open car that opened first.")]
    for name in dict.fromkeys(names):
        if name == CONVENTIONAL:
            continue
        if name in POLICIES:
            out.append(Control(name, "immediate", summary=POLICIES[name].summary))
        elif name in RULES and RULES[name].max_batch is None:
            out.append(Control(name, "delayed", summary=RULES[name].summary))
        else:
            near = difflib.get_close_matches(name, known, n=1, cutoff=0.5)
            hint = f"; did you mean '{near[0]}'?" if near else ""
            why = (" (an exhaustive bound for tiny batches, not a control)"
                   if name in RULES else "")
            raise ValueError(f"{name!r} is not a control of the peak simulation{why}{hint} "
                             f"(choices: {', '.join(known)})")
    return out


def _check_traffic(traffic: Traffic) -> None:
    if traffic.outgoing > 0 or traffic.interfloor > 0:
        raise ValueError(
            f"traffic = incoming {traffic.incoming:g}, outgoing {traffic.outgoing:g}, "
            f"interfloor {traffic.interfloor:g}: the peak simulation models up-peak (incoming) "
            f"traffic only; give incoming = 1 (mixed traffic is not modelled in time yet - the "
            f"round-trip commands `simulate` and `compare` take any mix)")


@dataclass(frozen=True)
class ControlRun:
    """One control over every replication: the figures and the rows behind them."""

    control: Control
    per_replication: tuple            # dict of figures per replication
    slots: tuple                      # dict of slot figures per replication
    summary: dict = field(repr=False)  # {figure: statistics.Interval}

    @property
    def saturated(self) -> bool:
        return S.is_saturated(self.summary)

    def to_dict(self) -> dict:
        """The figures (means over replications) with, under ``ci95``, the 95 % half-width
        of each; ``average_waiting_time_ci95_s`` is also given at the top level."""
        s = self.summary
        shown = [k for k in S.FIGURES if k not in ("arrival_rate_persons_per_s", "backlog_persons")]
        d = {"control": self.control.name, "kind": self.control.kind,
             "basis": self.control.basis}
        for key in shown:
            d[key] = s[key].mean
            if key == "average_waiting_time_s":
                d["average_waiting_time_ci95_s"] = s[key].ci95
        d["saturated"] = self.saturated
        d["replications"] = len(self.per_replication)
        d["ci95"] = {key: s[key].ci95 for key in shown}
        d["backlog_persons"] = s["backlog_persons"].mean
        return d


@dataclass(frozen=True)
class PeakStudy:
    """Every control on common arrivals."""

    building: str
    cars: int
    departure_load_persons: int
    lobby_dwell_s: float
    window_s: float
    period: PeakPeriod
    demand_pct_5min: float
    profile_pct_5min: tuple | None
    seed: int
    runs: tuple                        # ControlRun, conventional first
    cars_open: int = 0                 # cars offered to one allocation (0: not recorded)

    def run(self, name: str) -> ControlRun:
        return next(r for r in self.runs if r.control.name == name)

    def slots(self) -> list[dict]:
        """Per 5-minute slot and control, the mean over replications."""
        rows = []
        for run in self.runs:
            n_slots = len(run.slots[0]["start_s"]) if run.slots else 0
            for k in range(n_slots):
                row = {"control": run.control.name,
                       "slot_start_min": (run.slots[0]["start_s"][k] - self.period.measure_start_s) / 60.0}
                for key in ("arrivals", "deliveries", "average_waiting_time_s",
                            "mean_lobby_queue_persons"):
                    vals = np.array([s[key][k] for s in run.slots], dtype=float)
                    vals = vals[np.isfinite(vals)]
                    row[key] = float(vals.mean()) if vals.size else math.nan
                rows.append(row)
        return rows

    def to_dict(self) -> dict:
        return {"building": self.building, "cars": self.cars,
                "departure_load_persons": self.departure_load_persons,
                "lobby_dwell_s": self.lobby_dwell_s, "allocation_window_s": self.window_s,
                "cars_open": self.cars_open,
                "demand_pct_5min": self.demand_pct_5min,
                "profile_pct_5min": list(self.profile_pct_5min) if self.profile_pct_5min else None,
                "minutes": self.period.measured_s / 60.0,
                "warmup_minutes": self.period.measure_start_s / 60.0,
                "controls": [r.to_dict() for r in self.runs], "slots": self.slots(),
                "seed": self.seed}


def _tables(control: Control, building, group, cars: int):
    """The compiled rule and policy the loop calls, with their tables (row k: k cars)."""
    from allocation.registry import get_policy, get_rule
    rule = get_rule(control.name) if control.kind == "delayed" else get_rule("random")
    policy = (get_policy(control.name) if control.kind == "immediate"
              else get_policy("earliest-leaving"))
    p = group.departure_load_persons
    sizes = list(range(1, cars + 1))
    return (rule.compiled, rule.table(building, group, sizes, p),
            policy.compiled, policy.table(building, group, sizes, p))


def peak_setup(group: LiftGroup, control: Control, window_s: float,
               cars_open: int | None = None) -> P.PeakSetup:
    """The loop's setup; ``cars_open`` (default: every car) caps the cars offered to one
    allocation (see :mod:`peak._kernel`)."""
    k = group.cars if cars_open is None else int(min(cars_open, group.cars))
    if k < 1:
        raise ValueError(f"cars_open = {cars_open!r}: must be a whole number >= 1")
    return P.PeakSetup(int(group.cars), int(group.departure_load_persons),
                       float(group.lobby_dwell_s), float(group.door_close_s),
                       float(group.start_delay_s), int(control.mode), float(window_s), k)


def _threads(threads: int | None) -> int:
    if threads is not None:
        return int(threads)
    import numba
    return numba.get_num_threads()


def run_rows(building: Building, group: LiftGroup, control: Control, streams, *,
             window_s: float = DEFAULT_WINDOW_S, threads: int | None = None,
             cars_open: int | None = None):
    """The rows of ``control`` on each replication's arrivals ``streams`` (a list of
    (times, destinations)): a list of (rows, trips) record arrays (:data:`peak._kernel.
    PASSENGER`, :data:`peak._kernel.TRIP`), one pair per replication. The one helper
    through which every caller runs the event loop: replications are shared out in
    contiguous ranges to a pool of threads (the compiled loop releases the GIL); each
    depends on its own arrivals only, so the rows are the same on any thread count."""
    timing = trip_timing(building, group)
    setup = peak_setup(group, control, window_s, cars_open)
    rule, rule_table, policy, policy_table = _tables(control, building, group, group.cars)
    R = len(streams)
    sizes = [t.size for t, _ in streams]
    offsets = np.zeros(R + 1, np.int64)
    np.cumsum(sizes, out=offsets[1:])
    trip_offsets = np.zeros(R + 1, np.int64)
    np.cumsum([n + group.cars + 1 for n in sizes], out=trip_offsets[1:])
    times = np.ascontiguousarray(np.concatenate([t for t, _ in streams])) if R else np.empty(0)
    dests = (np.ascontiguousarray(np.concatenate([d for _, d in streams]), dtype=np.int64)
             if R else np.empty(0, np.int64))
    passengers = P.empty_passengers(int(offsets[-1]))
    trip_rows = P.empty_trips(int(trip_offsets[-1]))
    counters = np.zeros((max(R, 1), P.N_COUNTERS), np.int64)
    args = (times, dests, offsets, timing, setup, rule, rule_table, policy, policy_table,
            trip_offsets, passengers, trip_rows, counters)
    # a thread takes at least THREAD_PASSENGERS passengers (about 10 ms of work), so that
    # starting the pool never costs more than it gains
    n_threads = max(1, min(_threads(threads), R, int(offsets[-1]) // THREAD_PASSENGERS))
    if n_threads == 1:
        P.run_range(*args, 0, R)
    else:
        from concurrent.futures import ThreadPoolExecutor
        cuts = [R * k // n_threads for k in range(n_threads + 1)]
        with ThreadPoolExecutor(n_threads) as pool:
            for f in [pool.submit(P.run_range, *args, cuts[k], cuts[k + 1])
                      for k in range(n_threads)]:
                f.result()
    errors = counters[:R, P.ERROR]
    if np.any(errors != P.NO_ERROR):
        why = {P.ERROR_RULE_PLACED_NOBODY: "the rule placed nobody although cars had room",
               P.ERROR_POLICY_NO_CAR: "the policy returned no car with room"}
        raise RuntimeError(f"control {control.name!r}: {why[int(errors[errors != 0][0])]} "
                           f"(a rule must place every passenger of a batch that fits)")
    result = []
    for r in range(R):
        s, e = offsets[r], offsets[r + 1]
        ts = trip_offsets[r]
        result.append((passengers[s:e], trip_rows[ts:ts + counters[r, P.N_TRIPS]]))
    return result


def arrival_streams(building: Building, traffic: Traffic, period: PeakPeriod, seed: int,
                    first: int, count: int):
    """Replications first ... first + count - 1 of the arrivals: replication r draws from
    the r-th child of ``numpy.random.SeedSequence(seed)``."""
    from roundtrip.montecarlo import PassengerSampler
    sampler = PassengerSampler(building, traffic)
    children = np.random.SeedSequence(seed).spawn(first + count)[first:]
    return [draw_arrivals(np.random.Generator(np.random.PCG64(c)), period, sampler)
            for c in children]


def _check(building, group, traffic, controls, window_s, period, replications):
    _check_traffic(traffic)
    if not (window_s > 0 and math.isfinite(window_s)):
        raise ValueError(f"window = {window_s!r}: the allocation window must be > 0 [s]")
    if replications is not None and not (isinstance(replications, (int, np.integer))
                                         and 2 <= replications <= 10_000):
        raise ValueError(f"replications = {replications!r}: must be a whole number from 2 to "
                         f"10000")
    expected = period.expected_passengers()
    reps = replications or MAX_REPLICATIONS
    if expected * min(reps, 50) > MAX_PASSENGERS:
        raise ValueError(f"the period would simulate about {expected:,.0f} passengers per "
                         f"replication; at most {MAX_PASSENGERS // 50:,} are allowed: shorten "
                         f"--minutes or lower the demand")


def simulate_peak(building: Building, group: LiftGroup, traffic: Traffic, controls=None, *,
                  window_s: float = DEFAULT_WINDOW_S, minutes: float | None = None,
                  warmup_minutes: float = 5.0, replications: int | None = None, seed: int = 0,
                  ci_target_pct: float = CI_TARGET_PCT, max_replications: int = MAX_REPLICATIONS,
                  threads: int | None = None, slots: bool = True,
                  cars_open: int | None = None) -> PeakStudy:
    """The peak simulation of ``group`` in ``building`` under each control.

    Parameters
    ----------
    controls : sequence of str, optional
        Control names (default: the registry's peak controls); conventional control
        always runs, first.
    window_s : float
        The delayed-allocation window [s].
    minutes, warmup_minutes : float
        The measured period and the warm-up before it [min] (see
        :func:`peak.arrivals.peak_period`).
    replications : int, optional
        Exactly this many replications; otherwise replications are added (10, then
        in steps) until every control's average waiting time is known to
        ``ci_target_pct`` % (or 0.25 s, whichever is larger) or ``max_replications``.
    seed : int
        Seed of the ``SeedSequence`` whose children give the replications.
    slots : bool
        Also make the table per 5-minute slot (the charts need it; a search does not).
    cars_open : int, optional
        At most this many cars offered to one allocation (default: every car): an
        immediate policy sees only the K cars that leave the lobby soonest, a delayed
        round the K that open first. Conventional control does not depend on it.
    """
    from allocation.registry import peak_controls
    chosen = resolve_controls(peak_controls() if controls is None else controls)
    period = peak_period(building, traffic, minutes=minutes, warmup_minutes=warmup_minutes)
    _check(building, group, traffic, chosen, window_s, period, replications)
    figs = {c.name: [] for c in chosen}
    slots_of = {c.name: [] for c in chosen}
    done = 0
    want = replications or FIRST_REPLICATIONS
    while True:
        streams = arrival_streams(building, traffic, period, seed, done, want - done)
        for control in chosen:
            for (t, _), (rows, trips) in zip(streams, run_rows(building, group, control, streams,
                                                                 window_s=window_s, threads=threads,
                                                                 cars_open=cars_open)):
                figs[control.name].append(S.replication_figures(
                    t, rows, trips, period.measure_start_s, period.measure_end_s,
                    building.total_population, group.door_open_s))
                if slots:
                    slots_of[control.name].append(S.slot_figures(t, rows, period.measure_start_s,
                                                                 period.measure_end_s))
        done = want
        if replications is not None or done >= max_replications:
            break
        worst = 0.0
        for control in chosen:
            w = S.Interval.ratio([f["_sums"]["wait"] for f in figs[control.name]],
                                 [f["_sums"]["n"] for f in figs[control.name]])
            target = max(ci_target_pct / 100.0 * abs(w.mean), CI_FLOOR_S)
            worst = max(worst, (w.ci95 / target) ** 2 if math.isfinite(w.ci95) else 4.0)
        if worst <= 1.0:
            break
        want = int(min(max_replications, max(done + 5, math.ceil(done * worst * 1.1))))
    runs = tuple(ControlRun(c, tuple(figs[c.name]), tuple(slots_of[c.name]),
                            S.summarise(figs[c.name])) for c in chosen)
    return PeakStudy(building.name, group.cars, group.departure_load_persons, group.lobby_dwell_s,
                     float(window_s), period, traffic.arrival_rate_pct_5min,
                     traffic.profile_pct_5min, int(seed), runs,
                     group.cars if cars_open is None else int(min(cars_open, group.cars)))


def warm_up(controls=None) -> None:
    """Compile (or load from numba's disk cache) every kernel the peak simulation of
    ``controls`` (default: the registry's peak controls) needs, on a small invented
    building: a process that runs this first leaves nothing to compile for the next."""
    b = Building("warm-up", (4.0, 3.5, 3.5), (30.0, 30.0, 30.0))
    g = LiftGroup(cars=2, rated_load_persons=8, rated_speed_mps=1.6, acceleration_mps2=1.0,
                  jerk_mps3=1.5, door_open_s=1.8, door_close_s=2.9, start_delay_s=0.5)
    simulate_peak(b, g, Traffic(12.0), controls, minutes=1.0, warmup_minutes=0.0,
                  replications=2, seed=0, threads=1, slots=True)
