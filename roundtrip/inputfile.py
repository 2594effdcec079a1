"""Read and validate a building input file (TOML, standard-library ``tomllib``).

Every problem in a file is collected and reported at once, each naming its key
path, the value found and what is allowed; an unknown key gets the nearest
valid key as a suggestion. The caller (the command line) prints the message
and exits with status 2.

The file has three sections; ``[traffic]`` is needed only for demand mode::

    [building]
    name = "Example House"
    floors = 12
    floor_height_m = 3.6          # or floor_heights_m = [...], length = floors
    express_m = 0.0               # optional, default 0
    population = 100              # per floor, or a list of length floors

    [group]
    cars = 4
    rated_load_persons = 16
    rated_speed_mps = 1.6
    acceleration_mps2 = 1.0
    jerk_mps3 = 1.5
    door_open_s = 1.8
    door_close_s = 2.9
    start_delay_s = 0.5           # optional, default 0
    transfer_in_s = 1.2           # optional, default 1.2
    transfer_out_s = 1.2          # optional, default 1.2
    capacity_factor = 0.8         # optional, default 0.8
    lobby_dwell_s = 10.0          # optional, default 10 (peak simulation)

    [traffic]
    arrival_rate_pct_5min = 12.0  # optional when profile_pct_5min is given
    profile_pct_5min = [...]      # optional: the rate of each successive 5-minute slot
    incoming = 1.0                # shares; omitted ones are 0 (all omitted: 1, 0, 0)
    outgoing = 0.0
    interfloor = 0.0
"""
from __future__ import annotations

import difflib
import math
import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable

from .building import Building, LiftGroup, Scenario, Traffic

#: Highest number of served floors; the compiled trip model keeps each car's
#: stops in one 64-bit word (lobby + 63 floors).
MAX_FLOORS = 63


class InputError(ValueError):
    """An input file, or a value given on the command line, is not valid.

    ``problems`` lists one sentence per problem; ``str(error)`` joins them
    into the paragraph shown to the user.
    """

    def __init__(self, problems: list[str], source: str = ""):
        self.problems = list(problems)
        self.source = source
        head = f"{source}: " if source else ""
        if len(self.problems) == 1:
            text = head + self.problems[0]
        else:
            text = head + f"{len(self.problems)} problems: " + " ".join(
                f"({i}) {p}" for i, p in enumerate(self.problems, 1))
        super().__init__(text)


@dataclass(frozen=True)
class _Key:
    kind: str                      # "number", "integer", "text", "number-or-list"
    allowed: str                   # what is allowed, in words, with the unit
    check: Callable[[float], bool] | None = None
    required: bool = True
    default: Any = None


def _positive(x: float) -> bool:
    return x > 0


def _non_negative(x: float) -> bool:
    return x >= 0


_BUILDING = {
    "name": _Key("text", "free text"),
    "floors": _Key("integer", f"a whole number of served floors from 1 to {MAX_FLOORS}",
                   lambda x: 1 <= x <= MAX_FLOORS),
    "floor_height_m": _Key("number", "a rise > 0 [m]", _positive, required=False),
    "floor_heights_m": _Key("list", "a list of rises > 0 [m], one per served floor",
                            _positive, required=False),
    "express_m": _Key("number", "an unserved rise >= 0 [m]", _non_negative,
                      required=False, default=0.0),
    "population": _Key("number-or-list",
                       "persons per floor >= 0 [persons], a number or a list of length `floors`",
                       _non_negative),
}
_GROUP = {
    "cars": _Key("integer", "a whole number of cars >= 1", lambda x: x >= 1),
    "rated_load_persons": _Key("integer", "a whole number of persons >= 1", lambda x: x >= 1),
    "rated_speed_mps": _Key("number", "a speed > 0 [m/s]", _positive),
    "acceleration_mps2": _Key("number", "an acceleration > 0 [m/s^2]", _positive),
    "jerk_mps3": _Key("number", "a jerk > 0 [m/s^3]", _positive),
    "door_open_s": _Key("number", "a time >= 0 [s]", _non_negative),
    "door_close_s": _Key("number", "a time >= 0 [s]", _non_negative),
    "start_delay_s": _Key("number", "a time >= 0 [s]", _non_negative, required=False, default=0.0),
    "transfer_in_s": _Key("number", "a time >= 0 [s] per passenger", _non_negative,
                          required=False, default=1.2),
    "transfer_out_s": _Key("number", "a time >= 0 [s] per passenger", _non_negative,
                           required=False, default=1.2),
    "capacity_factor": _Key("number", "a fraction in (0, 1]", lambda x: 0 < x <= 1,
                            required=False, default=0.8),
    "lobby_dwell_s": _Key("number", "a time from 0 to 120 [s] that a car waits at the lobby "
                          "after its first passenger boards", lambda x: 0 <= x <= 120,
                          required=False, default=10.0),
}
_TRAFFIC = {
    "arrival_rate_pct_5min": _Key("number", "a rate > 0 [% of population per 5 min]", _positive,
                                  required=False),
    "profile_pct_5min": _Key("list", "a list of rates >= 0 [% of population per 5 min], one "
                             "per successive 5-minute slot, at most 48", _non_negative,
                             required=False),
    "incoming": _Key("number", "a share in [0, 1]", lambda x: 0 <= x <= 1, required=False),
    "outgoing": _Key("number", "a share in [0, 1]", lambda x: 0 <= x <= 1, required=False),
    "interfloor": _Key("number", "a share in [0, 1]", lambda x: 0 <= x <= 1, required=False),
}
SCHEMA: dict[str, dict[str, _Key]] = {"building": _BUILDING, "group": _GROUP, "traffic": _TRAFFIC}
_REQUIRED_SECTIONS = ("building", "group")


def _suggest(word: str, choices) -> str:
    match = difflib.get_close_matches(word, list(choices), n=1, cutoff=0.5)
    return f"; did you mean '{match[0]}'?" if match else ""


def _is_number(value: Any) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool)


def _fmt(value: Any) -> str:
    if isinstance(value, str):
        return repr(value)
    if isinstance(value, dict):
        return "a table"
    return repr(value)


class _Collector:
    def __init__(self):
        self.problems: list[str] = []

    def bad(self, path: str, value: Any, allowed: str) -> None:
        self.problems.append(f"{path} = {_fmt(value)}: must be {allowed}.")

    def note(self, text: str) -> None:
        self.problems.append(text)


def _read_value(sec: str, name: str, spec: _Key, table: dict, out: _Collector):
    """The key's value, checked against its spec; None when missing or bad."""
    path = f"{sec}.{name}"
    if name not in table:
        if spec.required:
            out.note(f"{path} is missing: it is required, {spec.allowed}.")
        return spec.default
    value = table[name]
    if spec.kind == "text":
        if not isinstance(value, str):
            out.bad(path, value, spec.allowed + " in quotes")
            return None
        return value
    if spec.kind == "integer":
        if isinstance(value, float) and value.is_integer():
            value = int(value)
        if not (isinstance(value, int) and not isinstance(value, bool)) or not spec.check(value):
            out.bad(path, value, spec.allowed)
            return None
        return value
    if spec.kind == "number" or (spec.kind == "number-or-list" and not isinstance(value, list)):
        if not _is_number(value) or not math.isfinite(value) or not spec.check(value):
            out.bad(path, value, spec.allowed)
            return None
        return float(value)
    # a list (list, or number-or-list given as a list)
    if not isinstance(value, list) or not value:
        out.bad(path, value, spec.allowed)
        return None
    ok = True
    for i, item in enumerate(value):
        if not _is_number(item) or not math.isfinite(item) or not spec.check(item):
            out.bad(f"{path}[{i}]", item, spec.allowed.split(",")[0].replace("a list of ", "each "))
            ok = False
    return [float(v) for v in value] if ok else None


def _read_section(sec: str, table: Any, out: _Collector) -> dict[str, Any] | None:
    schema = SCHEMA[sec]
    if not isinstance(table, dict):
        out.bad(sec, table, f"a table [{sec}]")
        return None
    for name in table:
        if name not in schema:
            out.note(f"{sec}.{name} is not a known key{_suggest(name, schema)} "
                     f"(allowed in [{sec}]: {', '.join(schema)}).")
    return {name: _read_value(sec, name, spec, table, out) for name, spec in schema.items()}


def parse_scenario(data: dict, source: str = "") -> Scenario:
    """Validate the parsed TOML mapping ``data`` and build a :class:`Scenario`.

    Raises
    ------
    InputError
        Listing every problem found, each with its key path.
    """
    out = _Collector()
    for sec in data:
        if sec not in SCHEMA:
            out.note(f"[{sec}] is not a known section{_suggest(sec, SCHEMA)} "
                     f"(allowed: {', '.join(SCHEMA)}).")
    for sec in _REQUIRED_SECTIONS:
        if sec not in data:
            out.note(f"[{sec}] is missing: the file needs the sections "
                     f"{', '.join('[' + s + ']' for s in _REQUIRED_SECTIONS)}.")
    b = _read_section("building", data["building"], out) if "building" in data else None
    g = _read_section("group", data["group"], out) if "group" in data else None
    t = _read_section("traffic", data["traffic"], out) if "traffic" in data else None

    building = group = traffic = None
    if b is not None:
        building = _building(b, data["building"], out)
    if g is not None and all(g[k] is not None for k in _GROUP):
        group = LiftGroup(**g)
    if t is not None:
        traffic = _traffic(t, data["traffic"], out)
    if out.problems:
        raise InputError(out.problems, source)
    return Scenario(building=building, group=group, traffic=traffic, source=source)


def _building(b: dict, raw: dict, out: _Collector) -> Building | None:
    # Each check runs on its own so that one problem does not hide another.
    floors = b["floors"]
    rises = None
    if "floor_height_m" in raw and "floor_heights_m" in raw:
        out.note("building.floor_height_m and building.floor_heights_m are both given: "
                 "give one of them (a uniform rise, or a list of rises).")
    elif "floor_height_m" not in raw and "floor_heights_m" not in raw:
        out.note("building.floor_height_m is missing: give a uniform rise > 0 [m], "
                 "or building.floor_heights_m, a list of rises, one per served floor.")
    else:
        rises = b["floor_height_m"] if "floor_height_m" in raw else b["floor_heights_m"]
    pops = b["population"]
    if floors is not None and isinstance(rises, list) and len(rises) != floors:
        out.bad("building.floor_heights_m", raw["floor_heights_m"],
                f"a list of length floors = {floors} (it has {len(rises)})")
        rises = None
    if floors is not None and isinstance(pops, list) and len(pops) != floors:
        out.bad("building.population", raw["population"],
                f"a number, or a list of length floors = {floors} (it has {len(pops)})")
        pops = None
    elif pops is not None and (sum(pops) if isinstance(pops, list) else pops) <= 0:
        out.bad("building.population", raw["population"],
                "populations >= 0 with a positive total [persons]")
        pops = None
    if floors is None or rises is None or pops is None or b["express_m"] is None or b["name"] is None:
        return None
    if isinstance(rises, float):
        rises = [rises] * floors
    if isinstance(pops, float):
        pops = [pops] * floors
    return Building(name=b["name"], floor_rises_m=tuple(rises), populations=tuple(pops),
                    express_m=b["express_m"])


def _traffic(t: dict, raw: dict, out: _Collector) -> Traffic | None:
    shares = ("incoming", "outgoing", "interfloor")
    profile = t["profile_pct_5min"]
    if "profile_pct_5min" in raw and profile is not None:
        if len(profile) > 48:
            out.note(f"traffic.profile_pct_5min has {len(profile)} rates: give at most 48 "
                     f"(four hours of 5-minute slots).")
            return None
        if max(profile) <= 0:
            out.bad("traffic.profile_pct_5min", raw["profile_pct_5min"],
                    "rates >= 0 [% of population per 5 min] with at least one above 0")
            return None
    if "arrival_rate_pct_5min" not in raw and "profile_pct_5min" not in raw:
        out.note("traffic.arrival_rate_pct_5min is missing: give the design demand, a rate > 0 "
                 "[% of population per 5 min], or traffic.profile_pct_5min, the rate of each "
                 "5-minute slot.")
        return None
    if (("arrival_rate_pct_5min" in raw and t["arrival_rate_pct_5min"] is None)
            or ("profile_pct_5min" in raw and profile is None)
            or any(k in raw and t[k] is None for k in shares)):
        return None
    if not any(k in raw for k in shares):
        mix = (1.0, 0.0, 0.0)
    else:
        mix = tuple(t[k] if k in raw else 0.0 for k in shares)
    if abs(sum(mix) - 1.0) > 1e-6:
        out.note(f"traffic.incoming + traffic.outgoing + traffic.interfloor = "
                 f"{mix[0]:g} + {mix[1]:g} + {mix[2]:g} = {sum(mix):g}: the shares must sum to 1.")
        return None
    rate = t["arrival_rate_pct_5min"] if "arrival_rate_pct_5min" in raw else max(profile)
    return Traffic(rate, *mix, profile_pct_5min=tuple(profile) if profile is not None else None)


def load_scenario(path: str | Path) -> Scenario:
    """Read, parse and validate an input file.

    Raises
    ------
    InputError
        When the file is missing or unreadable, is not valid TOML (the message
        gives the line), or fails validation.
    """
    path = Path(path)
    source = str(path)
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise InputError([f"no such file: {source}."]) from None
    except IsADirectoryError:
        raise InputError([f"{source} is a folder, not an input file."]) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError([f"cannot read {source}: {exc}."]) from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError([f"not valid TOML: {exc}."], source) from None
    return parse_scenario(data, source)
