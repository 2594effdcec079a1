"""Option types and option checks shared by the commands (parsing only, no model work)."""
from __future__ import annotations

import argparse
import math

import numpy as np

from roundtrip.inputfile import InputError


def number(low: float, low_open: bool, what: str):
    """An argparse type: a finite number >= low (> low when ``low_open``)."""
    def parse(text: str) -> float:
        try:
            value = float(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{text!r} is not a number; {what}") from None
        if not math.isfinite(value) or value < low or (low_open and value == low):
            raise argparse.ArgumentTypeError(f"{text} is out of range; {what}")
        return value
    return parse


def whole(low: int, what: str):
    """An argparse type: a whole number >= low."""
    def parse(text: str) -> int:
        try:
            value = int(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{text!r} is not a whole number; {what}") from None
        if value < low:
            raise argparse.ArgumentTypeError(f"{text} is out of range; {what}")
        return value
    return parse


passengers_type = number(0.0, False, "P must be a number of passengers per trip >= 0 [persons]")
trials_type = whole(2, "N must be a whole number of trials >= 2")
ci_type = number(0.0, True, "PCT must be a percentage > 0")
seed_type = whole(0, "S must be a whole number >= 0")


def parse_rules(text: str | None) -> list[str]:
    """Rule names from a comma list, each checked against the registry (None: the
    registry's default rules)."""
    from allocation.registry import default_rules, get_rule
    if text is None:
        return default_rules()
    names = [r.strip() for r in text.split(",") if r.strip()]
    if not names:
        raise InputError([f"--rules {text!r}: give at least one rule name."])
    problems = []
    for name in names:
        try:
            get_rule(name)
        except ValueError as exc:
            problems.append(f"--rules: {exc}.")
    if problems:
        raise InputError(problems)
    return names


def rules_help() -> str:
    """The --rules help text, from the registry (imported only when help is shown)."""
    return "comma-separated allocation rules (default: the registry's default rules)"


def check_cars_open(cars_open: int | None, cars: int) -> None:
    """--cars-open must lie between 1 and the group's cars."""
    if cars_open is not None and not 1 <= cars_open <= cars:
        raise InputError([f"--cars-open {cars_open}: must be a whole number from 1 to "
                          f"cars = {cars}."])


def parse_range(text: str, option: str, *, whole: bool, low: float, most: int = 200) -> list:
    """``start:stop:step`` (stop included) or a comma list, validated."""
    def value(tok):
        try:
            v = float(tok)
        except ValueError:
            raise InputError([f"{option} {text!r}: {tok!r} is not a number."]) from None
        if whole and not v.is_integer():
            raise InputError([f"{option} {text!r}: {tok!r} is not a whole number."])
        if not np.isfinite(v):
            raise InputError([f"{option} {text!r}: {tok!r} is not finite."])
        return int(v) if whole else v

    if ":" in text:
        parts = text.split(":")
        if len(parts) not in (2, 3):
            raise InputError([f"{option} {text!r}: give START:STOP or START:STOP:STEP."])
        start, stop = value(parts[0]), value(parts[1])
        step = value(parts[2]) if len(parts) == 3 else 1
        if step <= 0:
            raise InputError([f"{option} {text!r}: the step must be > 0."])
        if stop < start:
            raise InputError([f"{option} {text!r}: STOP must not be below START."])
        count = int(np.floor((stop - start) / step + 1e-9)) + 1
        values = [start + i * step for i in range(count)]
        values = [int(round(v)) if whole else round(v, 10) for v in values]
    else:
        values = [value(t) for t in text.split(",") if t.strip()]
    if not values:
        raise InputError([f"{option} {text!r}: give at least one value."])
    bad = [v for v in values if v < low]
    if bad:
        raise InputError([f"{option} {text!r}: every value must be >= {low:g} (got {bad[0]:g})."])
    if len(values) > most:
        raise InputError([f"{option} {text!r}: {len(values)} values; at most {most} are allowed."])
    return list(dict.fromkeys(values))
