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
    times_scale_with_car_size = false   # optional: sizing scales door and transfer times

    [traffic]
    arrival_rate_pct_5min = 12.0  # optional when profile_pct_5min is given
    profile_pct_5min = [...]      # optional: the rate of each successive 5-minute slot
    incoming = 1.0                # shares; omitted ones are 0 (all omitted: 1, 0, 0)
    outgoing = 0.0
    interfloor = 0.0

Plausible ranges
----------------
Besides its type and sign, every number must lie in the range a lift engineer
would accept for a passenger lift (the ``plausible`` entry of its key in
:data:`SCHEMA`; the message states the range and its basis). The ranges are
wide on purpose: they refuse typing slips and values that would overflow the
arithmetic (a jerk of 1e300, a storey of 1e308 m), never an unusual but real
building.

=====================  ==================  ==============================================
key                    accepted            basis
=====================  ==================  ==============================================
floor rise             2 to 50 m           storeys run 2.5 m (housing) to 6 m (lobbies,
                                           plant); up to 50 m lets a rise span unserved
                                           storeys (common practice)
express_m              0 to 800 m          the longest passenger-lift travel is about
                                           600 m (common practice); the whole rise,
                                           express zone included, is held to 1000 m
population             0 to 10 000 per     an office floor holds one person per 8 to
                       floor               14 m^2 of net area (CIBSE Guide D, from memory)
cars                   1 to 16             a group rarely has more than 8 cars (common
                                           practice); 16 covers the largest
                                           destination-control groups
rated_load_persons     1 to 100            EN 81-20:2020 Table 6 gives the persons for
                                           loads up to 2500 kg, 33 persons (from memory);
                                           the largest shuttle cars carry under 100
rated_speed_mps        0.1 to 25 m/s       passenger lifts run at 0.5 to 10 m/s, the
                                           fastest at about 21 m/s (common practice)
acceleration_mps2      0.1 to 2.5 m/s^2    ride comfort keeps it to 0.4 to 1.5 m/s^2
                                           (common practice)
jerk_mps3              0.1 to 10 m/s^3     ride comfort keeps it to 0.8 to 2.5 m/s^3
                                           (common practice)
door, start times      0 to 30 s, 0 to     doors open or close in 1 to 4 s (common
                       10 s                practice); zero is allowed
transfer times         0 to 10 s per       1.2 s is the usual design value (ISO 8100-32,
                       passenger           from memory); zero is allowed
capacity_factor        0.1 to 1            0.8 is the usual design load (common practice)
arrival_rate_pct_5min  0.5 to 100 %        design up-peak demands are 10 to 17 % (CIBSE
                                           Guide D, from memory); 100 % is the whole
                                           population in five minutes
=====================  ==================  ==============================================

Checks that need the whole scenario are made here too: interfloor traffic
needs two populated floors (otherwise part of the mix has no possible trip).
The file itself must be a regular file of at most :data:`MAX_FILE_BYTES`
bytes, in UTF-8 (a leading byte-order mark is accepted and ignored).
"""
from __future__ import annotations

import datetime
import difflib
import json
import math
import os
import stat
import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable, NamedTuple

from .building import Building, LiftGroup, Scenario, Traffic

#: Highest number of served floors; the compiled trip model keeps each car's
#: stops in one 64-bit word (lobby + 63 floors).
MAX_FLOORS = 63

#: Largest input file read [bytes]: a building file is a few hundred bytes.
MAX_FILE_BYTES = 1_000_000

#: Highest total rise, express zone included [m] (see "Plausible ranges").
MAX_TOTAL_RISE_M = 1000.0

#: Longest building name [characters].
MAX_NAME_CHARS = 200


#: Problems spelled out in one message; the rest are counted.
_PROBLEMS_SHOWN = 12


class InputError(ValueError):
    """An input file, or a value given on the command line, is not valid.

    ``problems`` lists one sentence per problem; ``str(error)`` joins them
    into the paragraph shown to the user.
    """

    def __init__(self, problems: list[str], source: str = ""):
        self.problems = list(problems)
        self.source = source
        head = f"{source}: " if source else ""
        shown = self.problems[:_PROBLEMS_SHOWN]
        if len(self.problems) == 1:
            text = head + self.problems[0]
        else:
            text = head + f"{len(self.problems)} problems: " + " ".join(
                f"({i}) {p}" for i, p in enumerate(shown, 1))
            if len(self.problems) > len(shown):
                text += f" ... and {len(self.problems) - len(shown)} more."
        super().__init__(text)


class Plausible(NamedTuple):
    """The range of a key that a lift engineer would accept, and where it comes from."""

    low: float
    high: float
    unit: str                      # as it reads after a number: "m/s", "cars", "% / 5 min"
    basis: str                     # the standard or the common practice behind the range

    def holds(self, x: float) -> bool:
        return self.low <= x <= self.high

    def text(self) -> str:
        unit = f" {self.unit}" if self.unit else ""
        return f"liftsort accepts {self.low:g} to {self.high:g}{unit} ({self.basis})"


@dataclass(frozen=True)
class _Key:
    kind: str                      # "number", "integer", "text", "boolean", "list", "number-or-list"
    allowed: str                   # what is allowed, in words, with the unit
    check: Callable[[float], bool] | None = None
    required: bool = True
    default: Any = None
    plausible: Plausible | None = None     # checked after ``check``, stated in the message
    item: str = ""                 # a list's entry, in words ("a rise > 0 [m]")

    def accepts(self, x: float) -> bool:
        return (self.check is None or self.check(x)) and (
            self.plausible is None or self.plausible.holds(x))

    def wanted(self, item: bool = False) -> str:
        """What is allowed, with the plausible range and its basis."""
        text = (self.item or self.allowed) if item else self.allowed
        return text + (f"; {self.plausible.text()}" if self.plausible else "")


def _positive(x: float) -> bool:
    return x > 0


def _non_negative(x: float) -> bool:
    return x >= 0


_RISE = Plausible(2.0, 50.0, "m per served floor",
                  "storeys run from 2.5 m in housing to 6 m for lobbies and plant; up to 50 m "
                  "lets one rise span unserved storeys; common practice")
_TIME = "doors open or close in 1 to 4 s; zero is allowed; common practice"
_TRANSFER = ("1.2 s per passenger is the usual design value (ISO 8100-32, from memory); "
             "zero is allowed")
_SHARE = "a share in [0, 1]"

_BUILDING = {
    "name": _Key("text", f"printable text of at most {MAX_NAME_CHARS} characters"),
    "floors": _Key("integer", f"a whole number of served floors from 1 to {MAX_FLOORS}",
                   lambda x: 1 <= x <= MAX_FLOORS),
    "floor_height_m": _Key("number", "a rise > 0 [m]", _positive, required=False,
                           plausible=_RISE),
    "floor_heights_m": _Key("list", "a list of rises > 0 [m], one per served floor",
                            _positive, required=False, plausible=_RISE, item="a rise > 0 [m]"),
    "express_m": _Key("number", "an unserved rise >= 0 [m]", _non_negative,
                      required=False, default=0.0,
                      plausible=Plausible(0.0, 800.0, "m",
                                          "the longest passenger-lift travel is about 600 m; "
                                          "common practice")),
    "population": _Key("number-or-list",
                       "persons per floor >= 0 [persons], a number or a list of length `floors`",
                       _non_negative, item="persons on the floor >= 0 [persons]",
                       plausible=Plausible(0.0, 10_000.0, "persons per floor",
                                           "an office floor holds one person per 8 to 14 m^2 "
                                           "of net area, CIBSE Guide D, from memory")),
}
_GROUP = {
    "cars": _Key("integer", "a whole number of cars >= 1", lambda x: x >= 1,
                 plausible=Plausible(1, 16, "cars",
                                     "a group rarely has more than 8 cars; 16 covers the "
                                     "largest destination-control groups; common practice")),
    "rated_load_persons": _Key("integer", "a whole number of persons >= 1", lambda x: x >= 1,
                               plausible=Plausible(1, 100, "persons",
                                                   "EN 81-20:2020 Table 6 gives the persons "
                                                   "for rated loads up to 2500 kg, 33 persons, "
                                                   "from memory; the largest shuttle cars "
                                                   "carry under 100")),
    "rated_speed_mps": _Key("number", "a speed > 0 [m/s]", _positive,
                            plausible=Plausible(0.1, 25.0, "m/s",
                                                "passenger lifts run at 0.5 to 10 m/s, the "
                                                "fastest at about 21 m/s; common practice")),
    "acceleration_mps2": _Key("number", "an acceleration > 0 [m/s^2]", _positive,
                              plausible=Plausible(0.1, 2.5, "m/s^2",
                                                  "ride comfort keeps it to 0.4 to 1.5 m/s^2; "
                                                  "common practice")),
    "jerk_mps3": _Key("number", "a jerk > 0 [m/s^3]", _positive,
                      plausible=Plausible(0.1, 10.0, "m/s^3",
                                          "ride comfort keeps it to 0.8 to 2.5 m/s^3; "
                                          "common practice")),
    "door_open_s": _Key("number", "a time >= 0 [s]", _non_negative,
                        plausible=Plausible(0.0, 30.0, "s", _TIME)),
    "door_close_s": _Key("number", "a time >= 0 [s]", _non_negative,
                         plausible=Plausible(0.0, 30.0, "s", _TIME)),
    "start_delay_s": _Key("number", "a time >= 0 [s]", _non_negative, required=False, default=0.0,
                          plausible=Plausible(0.0, 10.0, "s",
                                              "a start delay is 0 to 1 s; common practice")),
    "transfer_in_s": _Key("number", "a time >= 0 [s] per passenger", _non_negative,
                          required=False, default=1.2,
                          plausible=Plausible(0.0, 10.0, "s per passenger", _TRANSFER)),
    "transfer_out_s": _Key("number", "a time >= 0 [s] per passenger", _non_negative,
                           required=False, default=1.2,
                           plausible=Plausible(0.0, 10.0, "s per passenger", _TRANSFER)),
    "capacity_factor": _Key("number", "a fraction in (0, 1]", lambda x: 0 < x <= 1,
                            required=False, default=0.8,
                            plausible=Plausible(0.1, 1.0, "",
                                                "0.8 is the usual design load; common practice")),
    "lobby_dwell_s": _Key("number", "a time >= 0 [s] that a car waits at the lobby after its "
                          "first passenger boards (peak simulation)", _non_negative,
                          required=False, default=10.0,
                          plausible=Plausible(0.0, 120.0, "s",
                                              "a lobby dwell of 5 to 15 s is usual in up-peak; "
                                              "common practice")),
    "times_scale_with_car_size": _Key("boolean", "true or false: when sizing tries other car "
                                      "sizes, scale their door and transfer times with the "
                                      "car's standard door width (default false: every "
                                      "candidate keeps the file's times)", required=False,
                                      default=False),
}
#: Accepted design demands [% of the population per 5 min] (also for `sweep --arrival`).
ARRIVAL_RATE = Plausible(0.5, 100.0, "% of the population per 5 min",
                         "design up-peak demands are 10 to 17 %, CIBSE Guide D, from memory; "
                         "100 % is the whole population in five minutes")
_TRAFFIC = {
    "arrival_rate_pct_5min": _Key("number", "a rate > 0 [% of population per 5 min]", _positive,
                                  required=False, plausible=ARRIVAL_RATE),
    "profile_pct_5min": _Key("list", "a list of rates >= 0 [% of population per 5 min], one "
                             "per successive 5-minute slot, at most 48", _non_negative,
                             required=False, item="a rate >= 0 [% of population per 5 min]",
                             plausible=Plausible(0.0, 100.0, "% of the population per 5 min",
                                                 "100 % is the whole population in five "
                                                 "minutes")),
    "incoming": _Key("number", _SHARE, lambda x: 0 <= x <= 1, required=False),
    "outgoing": _Key("number", _SHARE, lambda x: 0 <= x <= 1, required=False),
    "interfloor": _Key("number", _SHARE, lambda x: 0 <= x <= 1, required=False),
}
SCHEMA: dict[str, dict[str, _Key]] = {"building": _BUILDING, "group": _GROUP, "traffic": _TRAFFIC}
_REQUIRED_SECTIONS = ("building", "group")


def _suggest(word: str, choices) -> str:
    match = difflib.get_close_matches(word, list(choices), n=1, cutoff=0.5)
    return f"; did you mean '{match[0]}'?" if match else ""


def _is_number(value: Any) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool)


def _as_float(value: Any) -> float | None:
    """A number's value as a float; None for a non-number, NaN, an infinity, or an integer
    too large for a float."""
    if not _is_number(value):
        return None
    try:
        x = float(value)
    except OverflowError:
        return None
    return x if math.isfinite(x) else None


def toml_spelling(value: Any, items: int = 8) -> str:
    """A value as it is written in TOML (``true``, ``2024-01-01``, ``"text"``, ``1e+300``);
    strings are quoted with control characters escaped, so that a message never carries a
    terminal escape code; long lists and huge integers are shortened."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        text = json.dumps(value, ensure_ascii=False)
        return text if len(text) <= 80 else text[:76] + '..."'
    if isinstance(value, int):
        digits = str(value)
        return digits if len(digits) <= 20 else f"{value:.3e}"
    if isinstance(value, float):
        return repr(value)
    if isinstance(value, (datetime.datetime, datetime.date, datetime.time)):
        return value.isoformat()
    if isinstance(value, dict):
        return "a table"
    if isinstance(value, list):
        shown = ", ".join(toml_spelling(v) for v in value[:items])
        more = f", ... ({len(value)} entries)" if len(value) > items else ""
        return f"[{shown}{more}]"
    return json.dumps(str(value))


_fmt = toml_spelling


def printable(text: str) -> str:
    """``text`` with control characters escaped, for a message or a terminal."""
    return "".join(c if c.isprintable() or c == " " else
                   json.dumps(c)[1:-1] for c in str(text))


class _Collector:
    def __init__(self):
        self.problems: list[str] = []

    def bad(self, path: str, value: Any, allowed: str) -> None:
        self.problems.append(f"{path} = {_fmt(value)}: must be {allowed}.")

    def note(self, text: str) -> None:
        self.problems.append(text)


#: Bad entries of one list reported one by one; the rest are counted.
_LIST_PROBLEMS = 3


def _read_value(sec: str, name: str, spec: _Key, table: dict, out: _Collector):
    """The key's value, checked against its spec; None when missing or bad."""
    path = f"{sec}.{name}"
    if name not in table:
        if spec.required:
            out.note(f"{path} is missing: it is required, {spec.wanted()}.")
        return spec.default
    value = table[name]
    if spec.kind == "text":
        if not isinstance(value, str):
            out.bad(path, value, spec.allowed + " in quotes")
            return None
        return value
    if spec.kind == "boolean":
        if not isinstance(value, bool):
            out.bad(path, value, spec.allowed + " (unquoted)")
            return None
        return value
    if spec.kind == "integer":
        x = _as_float(value)
        if x is None or not x.is_integer() or not spec.accepts(x):
            out.bad(path, value, spec.wanted())
            return None
        return int(x)
    if spec.kind == "number" or (spec.kind == "number-or-list" and not isinstance(value, list)):
        x = _as_float(value)
        if x is None or not spec.accepts(x):
            out.bad(path, value, spec.wanted())
            return None
        return x
    # a list (list, or number-or-list given as a list)
    if not isinstance(value, list) or not value:
        out.bad(path, value, spec.wanted())
        return None
    items = [_as_float(v) for v in value]
    bad = [i for i, x in enumerate(items) if x is None or not spec.accepts(x)]
    for i in bad[:_LIST_PROBLEMS]:
        out.bad(f"{path}[{i}]", value[i], spec.wanted(item=True))
    if len(bad) > _LIST_PROBLEMS:
        out.note(f"{path}: {len(bad) - _LIST_PROBLEMS} more entries are not allowed either.")
    return None if bad else items


def _read_section(sec: str, table: Any, out: _Collector) -> dict[str, Any] | None:
    schema = SCHEMA[sec]
    if not isinstance(table, dict):
        out.bad(sec, table, f"a table [{sec}]")
        return None
    for name in table:
        if name not in schema:
            out.note(f"{sec}.{printable(name)} is not a known key{_suggest(name, schema)} "
                     f"(allowed in [{sec}]: {', '.join(schema)}).")
    return {name: _read_value(sec, name, spec, table, out) for name, spec in schema.items()}


def _outside_sections(name: str, value: Any, out: _Collector) -> None:
    """A top-level key that is not a section: say where such a key belongs."""
    homes = [sec for sec, schema in SCHEMA.items() if name in schema]
    near = [sec for sec, schema in SCHEMA.items()
            if difflib.get_close_matches(name, list(schema), n=1, cutoff=0.5)]
    if homes:
        hint = f"; it belongs in [{homes[0]}]"
    elif near:
        hint = f"; did you mean a key of [{near[0]}]?{_suggest(name, SCHEMA[near[0]])[1:]}"
    else:
        hint = ""
    out.note(f"{printable(name)} = {_fmt(value)} is a key outside any section: every key "
             f"goes under one of the sections {', '.join('[' + s + ']' for s in SCHEMA)}"
             f"{hint}.")


def parse_scenario(data: dict, source: str = "") -> Scenario:
    """Validate the parsed TOML mapping ``data`` and build a :class:`Scenario`.

    Raises
    ------
    InputError
        Listing every problem found, each with its key path.
    """
    out = _Collector()
    for sec in data:
        if sec in SCHEMA:
            continue
        if isinstance(data[sec], dict):
            out.note(f"[{printable(sec)}] is not a known section{_suggest(sec, SCHEMA)} "
                     f"(allowed: {', '.join(SCHEMA)}).")
        else:
            _outside_sections(sec, data[sec], out)
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
    if building is not None and traffic is not None:
        _check_mix(building, traffic, out)
    if out.problems:
        raise InputError(out.problems, source)
    return Scenario(building=building, group=group, traffic=traffic, source=source)


def _check_name(name: str | None, out: _Collector) -> str | None:
    if name is None:
        return None
    if len(name) > MAX_NAME_CHARS or not name.strip() or not all(
            c.isprintable() or c == " " for c in name):
        what = ("is empty" if not name.strip() else f"has {len(name)} characters"
                if len(name) > MAX_NAME_CHARS else "holds control characters")
        out.note(f"building.name = {_fmt(name)} {what}: it must be printable text of at most "
                 f"{MAX_NAME_CHARS} characters (it is shown in tables, charts and the report).")
        return None
    return name


def _building(b: dict, raw: dict, out: _Collector) -> Building | None:
    # Each check runs on its own so that one problem does not hide another.
    floors = b["floors"]
    name = _check_name(b["name"], out)
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
    if floors is None or rises is None or pops is None or b["express_m"] is None or name is None:
        return None
    if isinstance(rises, float):
        rises = [rises] * floors
    if isinstance(pops, float):
        pops = [pops] * floors
    total = b["express_m"] + sum(rises)
    if total > MAX_TOTAL_RISE_M:
        out.note(f"building.express_m + the floor rises = {total:g} m: the whole rise from the "
                 f"lobby to the top floor must be at most {MAX_TOTAL_RISE_M:g} m (the longest "
                 f"passenger-lift travel is about 600 m; common practice).")
        return None
    return Building(name=name, floor_rises_m=tuple(rises), populations=tuple(pops),
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
    if not ARRIVAL_RATE.holds(rate):
        out.note(f"traffic.profile_pct_5min = {_fmt(raw['profile_pct_5min'])}: its highest rate "
                 f"{rate:g} is taken as the design demand, which must be a rate > 0 [% of "
                 f"population per 5 min]; {ARRIVAL_RATE.text()}.")
        return None
    return Traffic(rate, *mix, profile_pct_5min=tuple(profile) if profile is not None else None)


def _check_mix(building: Building, traffic: Traffic, out: _Collector) -> None:
    """Every part of the traffic mix needs a possible trip: interfloor traffic runs between
    two different populated floors."""
    populated = sum(1 for u in building.populations if u > 0)
    if traffic.interfloor > 0 and populated < 2:
        out.note(f"traffic.interfloor = {traffic.interfloor:g} with {populated} populated "
                 f"floor{'' if populated == 1 else 's'}: interfloor trips run between two "
                 f"different populated floors, so give population to a second floor or set "
                 f"traffic.interfloor = 0.")


def load_scenario(path: str | Path) -> Scenario:
    """Read, parse and validate an input file.

    The file must be a regular file (not a folder, a device or a pipe) of at
    most :data:`MAX_FILE_BYTES` bytes, in UTF-8; a leading byte-order mark is
    ignored.

    Raises
    ------
    InputError
        When the file is missing, unreadable, not a regular file or too large, is
        not valid TOML (the message gives the line), or fails validation.
    """
    if os.fspath(path) == "":
        raise InputError(["no input file given (the name is empty)."])
    path = Path(path)
    source = printable(path)
    try:
        info = path.stat()
    except FileNotFoundError:
        raise InputError([f"no such file: {source}."]) from None
    except OSError as exc:
        raise InputError([f"cannot read {source}: {exc.strerror or exc}."]) from None
    if stat.S_ISDIR(info.st_mode):
        raise InputError([f"{source} is a folder, not an input file."])
    if not stat.S_ISREG(info.st_mode):
        raise InputError([f"{source} is not a regular file (a device, a pipe or a socket): "
                          f"give the path of a TOML file."])
    if info.st_size > MAX_FILE_BYTES:
        raise InputError([f"{source} has {info.st_size:,} bytes: an input file may have at most "
                          f"{MAX_FILE_BYTES:,} bytes (a building file is a few hundred)."])
    try:
        with open(path, "rb") as f:
            raw = f.read(MAX_FILE_BYTES + 1)
    except OSError as exc:
        raise InputError([f"cannot read {source}: {exc.strerror or exc}."]) from None
    if len(raw) > MAX_FILE_BYTES:
        raise InputError([f"{source} has more than {MAX_FILE_BYTES:,} bytes: an input file may "
                          f"have at most {MAX_FILE_BYTES:,} bytes."])
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise InputError([f"cannot read {source}: byte {exc.start + 1} is not UTF-8 "
                          f"({exc.reason}); save the file as UTF-8 (TOML files are UTF-8)."]) \
            from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError([f"not valid TOML: {exc}."], source) from None
    except RecursionError:
        raise InputError(["not valid TOML: the tables or lists are nested too deeply."],
                         source) from None
    return parse_scenario(data, source)
