"""Option types and option checks shared by the commands (parsing only, no model work).

Every option is checked where it is parsed, against a stated range, before any
work starts: numbers against the plausible ranges of the input file
(:data:`roundtrip.inputfile.SCHEMA`) or the run limits
(:mod:`experiments.limits`); range options (``START:STOP:STEP`` or a comma list)
are counted before any list is built. A refusal names the option, the value
and what is allowed.
"""
from __future__ import annotations

import argparse
import math

from roundtrip.inputfile import ARRIVAL_RATE, SCHEMA, InputError, Plausible

from experiments.limits import (MAX_KEPT_CAR_TRIPS, MAX_PASSENGERS_PER_TRIP, MAX_RANGE_VALUES,
                                MAX_RUNS, trials_problem)

CARS = SCHEMA["group"]["cars"].plausible
LOADS = SCHEMA["group"]["rated_load_persons"].plausible
SPEEDS = SCHEMA["group"]["rated_speed_mps"].plausible


def _shown(text: str) -> str:
    """An option's text as typed, quoted and with control characters escaped."""
    from roundtrip.inputfile import toml_spelling
    return toml_spelling(str(text))


def number(low: float, low_open: bool, what: str, high: float = math.inf):
    """An argparse type: a finite number >= low (> low when ``low_open``) and <= high."""
    def parse(text: str) -> float:
        try:
            value = float(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{_shown(text)} is not a number; {what}") from None
        if not math.isfinite(value) or value < low or (low_open and value == low) or value > high:
            raise argparse.ArgumentTypeError(f"{_shown(text)} is out of range; {what}")
        return value
    return parse


def whole(low: int, what: str, high: int | None = None):
    """An argparse type: a whole number >= low (and <= high)."""
    def parse(text: str) -> int:
        try:
            value = int(text)
        except ValueError:
            raise argparse.ArgumentTypeError(
                f"{_shown(text)} is not a whole number; {what}") from None
        if value < low or (high is not None and value > high):
            raise argparse.ArgumentTypeError(f"{_shown(text)} is out of range; {what}")
        return value
    return parse


passengers_type = number(0.0, False, f"P must be a number of passengers per trip from 0 to "
                                     f"{MAX_PASSENGERS_PER_TRIP:g} [persons] (ten times the "
                                     f"largest rated load accepted)",
                         high=MAX_PASSENGERS_PER_TRIP)
trials_type = whole(2, f"N must be a whole number of trials from 2 to {MAX_KEPT_CAR_TRIPS:,}",
                    high=MAX_KEPT_CAR_TRIPS)
max_trials_type = whole(2, "N must be a whole number of trials >= 2")
ci_type = number(0.0, True, "PCT must be a percentage > 0 and at most 100", high=100.0)
seed_type = whole(0, "S must be a whole number from 0 to 2^64 - 1", high=2 ** 64 - 1)
workers_type = whole(1, "N must be a whole number of worker processes from 1 to 256", high=256)
threads_type = whole(1, "T must be a whole number of threads from 1 to 1024", high=1024)
cars_open_type = whole(1, f"K must be a whole number of cars from 1 to {CARS.high:g}",
                       high=int(CARS.high))
interval_type = number(0.0, True, "S must be an interval > 0 and at most 600 [s]", high=600.0)
hc_type = number(0.0, True, "PCT must be a handling capacity > 0 and at most 100 "
                            "[% of the population per 5 min]", high=100.0)


def destination_control_type(text: str) -> str:
    """An argparse type: a destination control of the peak simulation (a batch rule for
    delayed allocation or an immediate policy; not conventional control)."""
    from allocation.registry import POLICIES, RULES
    import difflib
    name = text.strip()
    choices = [n for n in (*RULES, *POLICIES) if n not in ("random", "best", "round-robin")]
    if name not in choices:
        near = difflib.get_close_matches(name, choices, n=1, cutoff=0.5)
        hint = f"; did you mean '{near[0]}'?" if near else ""
        raise argparse.ArgumentTypeError(
            f"{_shown(text)} is not a destination control{hint} (choices: {', '.join(choices)})")
    return name


def parse_rules(text: str | None) -> list[str]:
    """Rule names from a comma list, each checked against the registry (None: the
    registry's default rules)."""
    from allocation.registry import default_rules, get_rule
    if text is None:
        return default_rules()
    names = [r.strip() for r in text.split(",") if r.strip()]
    if not names:
        raise InputError([f"--rules {_shown(text)}: give at least one rule name."])
    problems = []
    for name in dict.fromkeys(names):
        try:
            get_rule(name)
        except ValueError as exc:
            problems.append(f"--rules: {exc}.")
    if problems:
        raise InputError(problems)
    return list(dict.fromkeys(names))


def check_rules_fit(rules: list[str], *, poisson: bool, cars: int, cars_open: int,
                    passengers_per_car: float) -> None:
    """A rule that takes only small batches (the exhaustive ``best``) needs fixed passenger
    counts and sub-batches it can take: refused here, before any work, with the limit.

    The largest sub-batch is that of :func:`batchrounds.montecarlo.compare_rules`:
    ceil(ceil(cars x P) x cars open / cars) + 1 passengers.
    """
    from allocation.registry import get_rule
    for name in rules:
        most = get_rule(name).max_batch
        if most is None:
            continue
        if poisson:
            raise InputError([f"--rules {name}: an exhaustive rule for tiny batches only; it "
                              f"needs fixed passenger counts (--fixed), since Poisson counts "
                              f"have no upper bound."])
        biggest = math.ceil(math.ceil(cars * passengers_per_car) * cars_open / cars) + 1
        if biggest > most:
            raise InputError([f"--rules {name}: an exhaustive rule for tiny batches only; it "
                              f"takes at most {most} passengers per sub-batch, and here (cars "
                              f"open {cars_open} x {passengers_per_car:g} passengers per car) "
                              f"a sub-batch may hold up to {biggest}."])


def rules_help() -> str:
    """The --rules help text, from the registry (imported only when help is shown)."""
    return "comma-separated allocation rules (default: the registry's default rules)"


def check_cars_open(cars_open: int | None, cars: int) -> None:
    """--cars-open must lie between 1 and the group's cars."""
    if cars_open is not None and not 1 <= cars_open <= cars:
        raise InputError([f"--cars-open {cars_open}: must be a whole number of cars from 1 to "
                          f"the group's {cars} (group.cars)." if cars > 1 else
                          f"--cars-open {cars_open}: the group has one car, so the only "
                          f"choice is 1 (group.cars = 1)."])


def check_trials(trials: int | None, *, cars: int = 1, rules: int = 1,
                 passengers_per_car: float = 0.0) -> None:
    """An exact ``--trials N`` must fit the run limits (:mod:`experiments.limits`)."""
    if trials is None:
        return
    problem = trials_problem(trials, cars=cars, rules=rules,
                             passengers_per_car=passengers_per_car)
    if problem:
        raise InputError([problem])


def check_runs(count: int, what: str) -> None:
    """A sweep's points or a sizing search's candidates: at most :data:`MAX_RUNS`."""
    if count > MAX_RUNS:
        raise InputError([f"{what}: {count:,} runs; at most {MAX_RUNS} are allowed (each is "
                          f"a full comparison of the rules); give shorter lists."])


def parse_range(text: str, option: str, *, whole: bool, low: float,
                most: int = MAX_RANGE_VALUES, high: float = math.inf,
                plausible: Plausible | None = None) -> list:
    """``start:stop:step`` (stop included) or a comma list, validated.

    The number of values is found before any list is built, so that a range of
    a billion values is refused at once. Every value must be >= ``low`` and
    <= ``high``, or inside ``plausible`` (whose basis the message states).
    """
    if plausible is not None:
        low, high = max(low, plausible.low), min(high, plausible.high)
    shown = _shown(text)

    def value(tok):
        try:
            v = float(tok)
        except ValueError:
            raise InputError([f"{option} {shown}: {_shown(tok.strip())} is not a number."]) \
                from None
        if not math.isfinite(v):
            raise InputError([f"{option} {shown}: {_shown(tok.strip())} is not finite."])
        if whole and not v.is_integer():
            raise InputError([f"{option} {shown}: {_shown(tok.strip())} is not a whole number."])
        return v

    def allowed() -> str:
        span = (f"from {low:g} to {high:g}" if math.isfinite(high) else f">= {low:g}")
        basis = f"; {plausible.text()}" if plausible is not None else ""
        return f"every value must be {span}{basis}"

    if ":" in text:
        parts = text.split(":")
        if len(parts) not in (2, 3):
            raise InputError([f"{option} {shown}: give START:STOP or START:STOP:STEP."])
        start, stop = value(parts[0]), value(parts[1])
        step = value(parts[2]) if len(parts) == 3 else 1.0
        if step <= 0:
            raise InputError([f"{option} {shown}: the step must be > 0."])
        if stop < start:
            raise InputError([f"{option} {shown}: STOP must not be below START."])
        span = (stop - start) / step
        if not math.isfinite(span) or span + 1 > most:
            raise InputError([f"{option} {shown}: more than {most} values; at most {most} are "
                              f"allowed."])
        count = int(math.floor(span + 1e-9)) + 1
        values = [start + i * step for i in range(count)]
        values = [int(round(v)) if whole else round(v, 10) for v in values]
    else:
        tokens = [t for t in text.split(",") if t.strip()]
        if len(tokens) > most:
            raise InputError([f"{option} {shown}: {len(tokens):,} values; at most {most} are "
                              f"allowed."])
        values = [value(t) for t in tokens]
        values = [int(v) if whole and abs(v) < 2 ** 53 else v for v in values]
    if not values:
        raise InputError([f"{option} {shown}: give at least one value."])
    bad = [v for v in values if not low <= v <= high]
    if bad:
        raise InputError([f"{option} {shown}: {allowed()} (got {bad[0]:g})."])
    return list(dict.fromkeys(values))


def target_note(args, widest_pct: float, trials: int) -> str | None:
    """A line for an adaptive run that stopped at its trial cap (``--max-trials`` or the
    run limits) before the interval met ``--ci-target``; None otherwise."""
    if args.trials is not None or not widest_pct > args.ci_target:
        return None
    return (f"The run stopped at {trials:,} trials (--max-trials or the memory limit) with a "
            f"95 % half-width of up to {widest_pct:.2g} % of the round-trip time, short of "
            f"--ci-target {args.ci_target:g}.")


def building_digests(files) -> list[str]:
    """The digest of each building file (:func:`experiments.tasks.file_digest`), checked to
    name each building once: the same file given twice would be the same units twice."""
    from pathlib import Path

    from experiments.tasks import file_digest
    digests = [file_digest(Path(f).read_bytes()) for f in files]
    seen: dict[str, str] = {}
    for f, d in zip(files, digests):
        if d in seen:
            raise InputError([f"FILE {_shown(f)}: has the same contents as {_shown(seen[d])} "
                              f"(SHA-256 {d}...); give each building once."])
        seen[d] = f
    return digests
