"""Reading and validating building input files.

Every bad file is refused by ``liftsort calc`` with exit status 2, one
paragraph on stderr that names the offending key path (and its value), no
traceback and nothing on stdout (README, "Using it on your building"). The
loader reports every problem at once and suggests the nearest key for a typo.

These are checks of the project's own input contract (README and the
``roundtrip.inputfile`` docstring); the numbers in the files are invented.
"""
from __future__ import annotations

import copy
import json
import math

import pytest

from experiments.cli import main
from roundtrip.inputfile import MAX_FLOORS, InputError, load_scenario, parse_scenario

# An invented six-storey building with a small group; valid as it stands.
VALID = {
    "building": {"name": "Tarn House", "floors": 6, "floor_height_m": 3.6, "population": 80},
    "group": {"cars": 3, "rated_load_persons": 13, "rated_speed_mps": 1.6,
              "acceleration_mps2": 1.0, "jerk_mps3": 1.5, "door_open_s": 1.8,
              "door_close_s": 2.9},
    "traffic": {"arrival_rate_pct_5min": 11.0},
}


def toml_value(value) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return json.dumps(value)               # a TOML basic string
    if isinstance(value, float) and math.isnan(value):
        return "nan"
    if isinstance(value, float) and math.isinf(value):
        return "inf" if value > 0 else "-inf"
    if isinstance(value, list):
        return "[" + ", ".join(toml_value(v) for v in value) + "]"
    return repr(value)


def toml_text(data: dict) -> str:
    """A TOML file from {section: {key: value}} (a top-level non-table is written as a key)."""
    lines = [f"{sec} = {toml_value(table)}" for sec, table in data.items()
             if not isinstance(table, dict)]
    for sec, table in data.items():
        if isinstance(table, dict):
            lines.append(f"[{sec}]")
            lines += [f"{k} = {toml_value(v)}" for k, v in table.items()]
            lines.append("")
    return "\n".join(lines)


def variant(**changes) -> dict:
    """VALID with changes: {"group.cars": 2.5} sets a key, value None deletes it,
    {"traffic": None} deletes a section, {"extra": {...}} adds one."""
    data = copy.deepcopy(VALID)
    for path, value in changes.items():
        path = path.replace("__", ".")
        if "." in path:
            sec, key = path.split(".", 1)
            if value is None:
                del data[sec][key]
            else:
                data[sec][key] = value
        elif value is None:
            del data[path]
        else:
            data[path] = value
    return data


def write(tmp_path, data, name="building.toml"):
    path = tmp_path / name
    path.write_text(data if isinstance(data, str) else toml_text(data), encoding="utf-8")
    return path


def run_calc(capsys, *argv):
    rc = main(["calc", *map(str, argv)])
    out, err = capsys.readouterr()
    return rc, out, err


# ------------------------------------------------------------- the valid file
def test_valid_file_reads_with_defaults(tmp_path):
    # Input contract (README): optional keys take their stated defaults.
    s = load_scenario(write(tmp_path, VALID))
    assert s.building.name == "Tarn House"
    assert s.building.floor_rises_m == (3.6,) * 6
    assert s.building.populations == (80.0,) * 6
    assert s.building.express_m == 0.0
    g = s.group
    assert (g.cars, g.rated_load_persons, g.rated_speed_mps) == (3, 13, 1.6)
    assert (g.start_delay_s, g.transfer_in_s, g.transfer_out_s, g.capacity_factor) == (
        0.0, 1.2, 1.2, 0.8)
    # All mix shares omitted: the traffic is all incoming.
    t = s.traffic
    assert (t.arrival_rate_pct_5min, t.incoming, t.outgoing, t.interfloor) == (11.0, 1.0, 0.0, 0.0)


def test_lists_and_levels(tmp_path):
    # Input contract (README): level of floor k = express_m + sum of rises 1..k.
    data = variant(**{"building.floor_height_m": None,
                      "building.floor_heights_m": [5.0, 3.5, 3.5, 3.5, 3.5, 4.0],
                      "building.population": [0, 90, 90, 90, 60, 30],
                      "building.express_m": 20.0, "traffic.incoming": 0.8,
                      "traffic.outgoing": 0.1, "traffic.interfloor": 0.1})
    s = load_scenario(write(tmp_path, data))
    assert list(s.building.levels_m) == pytest.approx([0, 25, 28.5, 32, 35.5, 39, 43])
    assert s.building.populations == (0.0, 90.0, 90.0, 90.0, 60.0, 30.0)
    assert s.building.average_interfloor_height_m == pytest.approx(23.0 / 6)
    assert (s.traffic.incoming, s.traffic.outgoing, s.traffic.interfloor) == (0.8, 0.1, 0.1)


def test_traffic_is_optional(tmp_path):
    # Input contract (README): [traffic] is needed only for demand mode.
    assert load_scenario(write(tmp_path, variant(traffic=None))).traffic is None


def test_whole_float_is_accepted_for_integer_keys(tmp_path):
    # Input contract: "a whole number" -- 4.0 is one (a lenient reading of TOML floats).
    assert load_scenario(write(tmp_path, variant(**{"group.cars": 4.0}))).group.cars == 4


# ------------------------------------------------------------- bad files through the command line
# (case id, file content (dict or raw text), fragments that stderr must contain)
BAD_FILES = [
    ("TOML syntax error", '[building]\nname = "Tarn House"\nfloors 6\n',
     ["not valid TOML", "line 3"]),
    ("unknown section", variant(trafic={"arrival_rate_pct_5min": 11.0}),
     ["[trafic] is not a known section", "did you mean 'traffic'"]),
    ("unknown key", variant(**{"group.rated_sped_mps": 1.6}),
     ["group.rated_sped_mps is not a known key", "did you mean 'rated_speed_mps'"]),
    ("missing section", variant(group=None), ["[group] is missing"]),
    ("section not a table", variant(building=5), ["building = 5", "a table [building]"]),
    ("missing key", variant(**{"group.rated_load_persons": None}),
     ["group.rated_load_persons is missing"]),
    ("string for a number", variant(**{"group.rated_speed_mps": "1.6"}),
     ['group.rated_speed_mps = "1.6"', "a speed > 0 [m/s]"]),
    ("bool for a number", variant(**{"group.door_open_s": True}), ["group.door_open_s"]),
    ("bool for an integer", variant(**{"group.cars": True}), ["group.cars", "whole number"]),
    ("float for cars", variant(**{"group.cars": 2.5}), ["group.cars = 2.5", "whole number"]),
    ("text name not quoted text", variant(**{"building.name": 7}), ["building.name = 7"]),
    ("zero floors", variant(**{"building.floors": 0}), ["building.floors = 0"]),
    ("too many floors", variant(**{"building.floors": MAX_FLOORS + 1}),
     [f"building.floors = {MAX_FLOORS + 1}", f"from 1 to {MAX_FLOORS}"]),
    ("negative speed", variant(**{"group.rated_speed_mps": -1.6}),
     ["group.rated_speed_mps = -1.6", "> 0"]),
    ("zero speed", variant(**{"group.rated_speed_mps": 0}), ["group.rated_speed_mps = 0"]),
    ("infinite speed", variant(**{"group.rated_speed_mps": math.inf}),
     ["group.rated_speed_mps = inf"]),
    ("not-a-number jerk", variant(**{"group.jerk_mps3": math.nan}), ["group.jerk_mps3 = nan"]),
    ("zero acceleration", variant(**{"group.acceleration_mps2": 0.0}),
     ["group.acceleration_mps2 = 0.0", "[m/s^2]"]),
    ("negative jerk", variant(**{"group.jerk_mps3": -1.5}), ["group.jerk_mps3 = -1.5"]),
    ("negative door time", variant(**{"group.door_close_s": -2.9}),
     ["group.door_close_s = -2.9", ">= 0 [s]"]),
    ("capacity factor zero", variant(**{"group.capacity_factor": 0.0}),
     ["group.capacity_factor = 0.0", "(0, 1]"]),
    ("capacity factor above one", variant(**{"group.capacity_factor": 1.2}),
     ["group.capacity_factor = 1.2", "(0, 1]"]),
    ("negative population", variant(**{"building.population": -80}),
     ["building.population = -80"]),
    ("negative population in a list", variant(**{"building.population": [80, 80, -4, 80, 80, 80]}),
     ["building.population[2] = -4"]),
    ("all populations zero", variant(**{"building.population": [0, 0, 0, 0, 0, 0]}),
     ["building.population", "positive total"]),
    ("population zero", variant(**{"building.population": 0}),
     ["building.population = 0", "positive total"]),
    ("population list too short", variant(**{"building.population": [80, 80, 80, 80]}),
     ["building.population", "length floors = 6", "(it has 4)"]),
    ("rises list too long", variant(**{"building.floor_height_m": None,
                                       "building.floor_heights_m": [3.6] * 7}),
     ["building.floor_heights_m", "length floors = 6", "(it has 7)"]),
    ("zero rise in a list", variant(**{"building.floor_height_m": None,
                                       "building.floor_heights_m": [3.6, 0.0, 3.6, 3.6, 3.6, 3.6]}),
     ["building.floor_heights_m[1] = 0.0"]),
    ("rises not a list", variant(**{"building.floor_height_m": None,
                                    "building.floor_heights_m": 3.6}),
     ["building.floor_heights_m = 3.6"]),
    ("both rise keys", variant(**{"building.floor_heights_m": [3.6] * 6}),
     ["building.floor_height_m and building.floor_heights_m are both given"]),
    ("neither rise key", variant(**{"building.floor_height_m": None}),
     ["building.floor_height_m is missing", "building.floor_heights_m"]),
    ("negative express rise", variant(**{"building.express_m": -10.0}),
     ["building.express_m = -10.0"]),
    ("mix shares not summing to 1", variant(**{"traffic.incoming": 0.8, "traffic.outgoing": 0.3}),
     ["traffic.incoming + traffic.outgoing + traffic.interfloor", "= 1.1", "must sum to 1"]),
    ("share out of range", variant(**{"traffic.interfloor": 1.5}),
     ["traffic.interfloor = 1.5", "[0, 1]"]),
    ("negative arrival rate", variant(**{"traffic.arrival_rate_pct_5min": -3.0}),
     ["traffic.arrival_rate_pct_5min = -3.0"]),
    ("missing arrival rate", variant(**{"traffic.arrival_rate_pct_5min": None,
                                        "traffic.incoming": 1.0}),
     ["traffic.arrival_rate_pct_5min is missing"]),
]


@pytest.mark.parametrize("content, fragments", [c[1:] for c in BAD_FILES],
                         ids=[c[0] for c in BAD_FILES])
def test_bad_file_refused_with_key_path(tmp_path, capsys, content, fragments):
    # Input contract (README): exit status 2, the key path and value in one
    # paragraph on stderr, no traceback, nothing on stdout.
    path = write(tmp_path, content)
    rc, out, err = run_calc(capsys, path, "--passengers", "6")
    assert rc == 2
    assert out == ""
    assert "Traceback" not in err
    assert err.startswith("liftsort calc: error: ")
    assert str(path) in err
    for fragment in fragments:
        assert fragment in err
    assert err.count("\n") == 1                   # one paragraph


@pytest.mark.parametrize("content, fragments", [c[1:] for c in BAD_FILES[:6]],
                         ids=[c[0] for c in BAD_FILES[:6]])
def test_bad_file_refused_in_json_and_demand_mode(tmp_path, capsys, content, fragments):
    # Input contract: the same refusal whatever the options; no partial JSON.
    rc, out, err = run_calc(capsys, write(tmp_path, content), "--json")
    assert rc == 2 and out == "" and "Traceback" not in err
    assert all(f in err for f in fragments)


def test_missing_file(tmp_path, capsys):
    # Input contract (README): exit status 2, the file named, no traceback.
    path = tmp_path / "no-such-building.toml"
    rc, out, err = run_calc(capsys, path)
    assert rc == 2 and out == "" and "Traceback" not in err
    assert f"no such file: {path}" in err


def test_folder_instead_of_file(tmp_path, capsys):
    # Input contract (README): as above, for a folder given as FILE.
    rc, out, err = run_calc(capsys, tmp_path)
    assert rc == 2 and out == "" and "Traceback" not in err
    assert f"{tmp_path} is a folder" in err


def test_file_not_utf8(tmp_path, capsys):
    # Input contract: TOML is UTF-8 (TOML v1.0.0 specification); other bytes are refused.
    path = tmp_path / "latin1.toml"
    path.write_bytes('[building]\nname = "Caf\xe9"\n'.encode("latin-1"))
    rc, out, err = run_calc(capsys, path)
    assert rc == 2 and out == "" and "Traceback" not in err
    assert f"cannot read {path}" in err


def test_several_problems_reported_at_once(tmp_path, capsys):
    # Input contract (inputfile docstring): every problem in a file at once,
    # numbered, each with its key path.
    data = variant(**{"building.floors": 4, "building.floor_height_m": None,
                      "building.floor_heights_m": [3.6] * 5,
                      "building.population": [80, 80, 80],
                      "group.rated_sped_mps": 1.6, "group.rated_speed_mps": None,
                      "group.capacity_factor": 0.0, "traffic.outgoing": 0.5})
    path = write(tmp_path, data)
    with pytest.raises(InputError, match="6 problems") as info:
        load_scenario(path)
    text = str(info.value)
    for fragment in [
            "building.floor_heights_m = [3.6, 3.6, 3.6, 3.6, 3.6]", "(it has 5)",
            "building.population = [80, 80, 80]", "(it has 3)",
            "group.rated_sped_mps is not a known key", "did you mean 'rated_speed_mps'",
            "group.rated_speed_mps is missing", "group.capacity_factor = 0.0",
            "traffic.incoming + traffic.outgoing + traffic.interfloor"]:
        assert fragment in text
    assert len(info.value.problems) == 6
    assert "(1) " in text and "(6) " in text
    rc, out, err = run_calc(capsys, path)
    assert rc == 2 and out == "" and "Traceback" not in err
    assert "6 problems" in err


def test_rise_and_population_problems_reported_together(tmp_path):
    # Input contract: a problem with the rises does not hide one with the
    # populations (both keys given alongside each other, all populations zero).
    data = variant(**{"building.floor_heights_m": [3.6] * 6,
                      "building.population": [0, 0, 0, 0, 0, 0]})
    with pytest.raises(InputError, match="2 problems") as info:
        load_scenario(write(tmp_path, data))
    assert "are both given" in str(info.value)
    assert "positive total" in str(info.value)


def test_input_error_is_a_value_error():
    # API contract: callers may catch ValueError.
    with pytest.raises(ValueError, match=r"\[building\] is missing"):
        parse_scenario({"group": VALID["group"]}, "in memory")


def test_empty_file_names_both_required_sections(tmp_path):
    # Input contract (README): [building] and [group] are required.
    with pytest.raises(InputError, match=r"\[building\] is missing.*\[group\] is missing"):
        load_scenario(write(tmp_path, ""))


def test_more_problems_than_a_paragraph_holds_are_counted(tmp_path):
    # Input contract (inputfile docstring): every problem at once; past the twelfth the
    # paragraph says how many more there are.
    data = variant(**{f"group.unknown_key_{i}": 1 for i in range(15)})
    with pytest.raises(InputError, match="15 problems") as info:
        load_scenario(write(tmp_path, data))
    assert str(info.value).endswith(" ... and 3 more.")
    assert "(12) " in str(info.value) and "(13) " not in str(info.value)


@pytest.mark.parametrize("slots, accepted", [(48, True), (49, False)])
def test_a_demand_profile_covers_at_most_four_hours(tmp_path, slots, accepted):
    # Input contract (README): at most 48 five-minute slots in traffic.profile_pct_5min.
    data = variant(**{"traffic.profile_pct_5min": [10.0] * slots})
    if accepted:
        assert load_scenario(write(tmp_path, data)).traffic.profile_pct_5min is not None
    else:
        with pytest.raises(InputError, match="has 49 rates: give at most 48 "
                                             r"\(four hours of 5-minute slots\)"):
            load_scenario(write(tmp_path, data))


def test_a_traffic_section_without_a_demand_asks_for_one(tmp_path):
    data = variant(**{"traffic.arrival_rate_pct_5min": None, "traffic.incoming": 1.0})
    with pytest.raises(InputError) as info:
        load_scenario(write(tmp_path, data))
    assert ("traffic.arrival_rate_pct_5min is missing: give the design demand, a rate > 0 "
            "[% of population per 5 min], or traffic.profile_pct_5min, the rate of each "
            "5-minute slot.") in info.value.problems


def test_a_file_that_grows_while_it_is_read_is_refused(tmp_path, monkeypatch):
    # The size is checked before reading and again on what was read (a file being
    # written by another program may grow in between).
    import os
    from pathlib import Path

    from roundtrip.inputfile import MAX_FILE_BYTES
    path = tmp_path / "growing.toml"
    path.write_bytes(b"#" * (MAX_FILE_BYTES + 10))
    small = os.stat_result((0o100644, 0, 0, 1, 0, 0, 100, 0, 0, 0))
    monkeypatch.setattr(Path, "stat", lambda self, **kw: small)
    with pytest.raises(InputError, match=f"has more than {MAX_FILE_BYTES:,} bytes: an input "
                                         f"file may have at most {MAX_FILE_BYTES:,} bytes"):
        load_scenario(path)


def test_a_read_error_is_named_by_the_system_message(tmp_path, monkeypatch):
    import builtins
    import errno
    path = write(tmp_path, VALID)

    def failing_open(*args, **kwargs):
        raise OSError(errno.EIO, "Input/output error")
    monkeypatch.setattr(builtins, "open", failing_open)
    with pytest.raises(InputError) as info:
        load_scenario(path)
    assert str(info.value) == f"cannot read {path}: Input/output error."
