"""`liftsort calc`, `liftsort demo` and the help texts, as a user meets them.

Checks of the command-line contract in README.md ("Two commands", "Using it on
your building"); the figures themselves are checked in test_classical.py, so
here the JSON is compared with the library call on the same file (plumbing).
Most runs call ``experiments.cli.main`` in-process; a few run a real
``python -m experiments.cli`` process to prove the exit status and the absence
of a traceback there too.
"""
from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

from experiments.cli import main
from roundtrip.classical import demand_calculation, uppeak_calculation
from roundtrip.inputfile import load_scenario

REPO = Path(__file__).resolve().parents[1]

# An invented nine-storey building; demand mode is not saturated at 8 %.
BUILDING_TOML = """\
[building]
name = "Osier Point"
floors = 9
floor_heights_m = [4.4, 3.7, 3.7, 3.7, 3.7, 3.7, 3.7, 3.7, 3.7]
population = [40, 85, 85, 85, 85, 85, 85, 70, 50]

[group]
cars = 3
rated_load_persons = 13
rated_speed_mps = 1.75
acceleration_mps2 = 0.9
jerk_mps3 = 1.4
door_open_s = 1.8
door_close_s = 2.9
start_delay_s = 0.4

[traffic]
arrival_rate_pct_5min = 8.0
"""

JSON_KEYS = {"round_trip_time_s", "interval_s", "passengers_per_trip", "expected_stops",
             "highest_reversal_floor", "handling_capacity_persons_5min",
             "handling_capacity_pct_5min", "car_load_pct", "average_waiting_time_s",
             "saturated"}


@pytest.fixture
def building_file(tmp_path):
    path = tmp_path / "osier_point.toml"
    path.write_text(BUILDING_TOML, encoding="utf-8")
    return path


@pytest.fixture
def no_traffic_file(tmp_path):
    path = tmp_path / "osier_point_no_traffic.toml"
    path.write_text(BUILDING_TOML.split("[traffic]")[0], encoding="utf-8")
    return path


def run(capsys, *argv):
    rc = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return rc, out, err


def run_exit(capsys, *argv):
    """A run that argparse ends with SystemExit: (status, stdout, stderr)."""
    with pytest.raises(SystemExit) as info:
        main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return info.value.code, out, err


def run_process(*argv):
    return subprocess.run([sys.executable, "-m", "experiments.cli", *map(str, argv)],
                          capture_output=True, text=True, cwd=REPO, timeout=60)


# ------------------------------------------------------------- --json
def test_json_is_one_object_with_the_documented_keys(building_file, capsys):
    # README: `calc --json` prints one JSON object with (among others) these keys.
    rc, out, err = run(capsys, "calc", building_file, "--json")
    assert rc == 0 and err == ""
    obj = json.loads(out)                          # the whole of stdout is one JSON value
    assert isinstance(obj, dict)
    assert JSON_KEYS <= obj.keys()
    assert isinstance(obj["saturated"], bool)
    for key in JSON_KEYS - {"saturated"}:
        assert isinstance(obj[key], float)


def test_json_demand_mode_equals_library(building_file, capsys):
    # Plumbing: the JSON carries the library's demand-mode figures unchanged (Poisson
    # passenger counts by default, as every command).
    rc, out, _ = run(capsys, "calc", building_file, "--json")
    obj = json.loads(out)
    s = load_scenario(building_file)
    r = demand_calculation(s.building, s.group, s.traffic, poisson=True)
    assert obj["passenger_model"] == "poisson"
    assert obj["mode"] == "demand" and obj["saturated"] is False
    for key in JSON_KEYS - {"saturated"}:
        assert obj[key] == pytest.approx(getattr(r, key), rel=1e-12)
    # At the fixed point the handling capacity equals the demand (8 %).
    assert obj["handling_capacity_pct_5min"] == pytest.approx(8.0, rel=1e-9)


@pytest.mark.parametrize("poisson", [False, True], ids=["fixed", "poisson"])
def test_json_given_load_equals_library(building_file, capsys, poisson):
    # Plumbing: --passengers sets the car load, --fixed / --poisson the passenger model.
    argv = ["calc", building_file, "--passengers", "7.5", "--json", "--poisson" if poisson else "--fixed"]
    rc, out, _ = run(capsys, *argv)
    obj = json.loads(out)
    s = load_scenario(building_file)
    r = uppeak_calculation(s.building, s.group, 7.5, poisson)
    assert rc == 0
    assert obj["passengers_per_trip"] == 7.5
    assert obj["passenger_model"] == ("poisson" if poisson else "fixed")
    assert obj["saturated"] is False
    for key in JSON_KEYS - {"saturated"}:
        assert obj[key] == pytest.approx(getattr(r, key), rel=1e-12)


def test_table_output(building_file, capsys):
    # README: without --json, a table with the trade's terms and units, and the caution.
    rc, out, err = run(capsys, "calc", building_file, "--passengers", "6")
    assert rc == 0 and err == ""
    for label in ("round-trip time RTT", "interval INT", "handling capacity",
                  "persons / 5 min", "% of rated load", "Caution"):
        assert label in out


# ------------------------------------------------------------- bad options
@pytest.mark.parametrize("value", ["-1", "abc", "nan", "inf"])
def test_bad_passengers_option_exits_2(building_file, capsys, value):
    # README/--help: P is a real number >= 0 [persons].
    status, out, err = run_exit(capsys, "calc", building_file, "--passengers", value)
    assert status == 2 and out == ""
    assert "--passengers" in err and "[persons]" in err
    assert "Traceback" not in err


def test_demand_mode_without_traffic_exits_2(no_traffic_file, capsys):
    # README: demand mode needs [traffic]; the message names it.
    rc, out, err = run(capsys, "calc", no_traffic_file)
    assert rc == 2 and out == "" and "Traceback" not in err
    assert "[traffic] is missing" in err
    assert "traffic.arrival_rate_pct_5min" in err and "--passengers" in err


def test_given_load_mode_needs_no_traffic(no_traffic_file, capsys):
    # README: [traffic] is needed only for demand mode.
    rc, out, _ = run(capsys, "calc", no_traffic_file, "--passengers", "5", "--json")
    assert rc == 0 and json.loads(out)["passengers_per_trip"] == 5.0


def test_no_file_argument_exits_2(capsys):
    # Command-line contract: a missing FILE is a usage error, exit status 2.
    status, out, err = run_exit(capsys, "calc")
    assert status == 2 and out == "" and "FILE" in err


# ------------------------------------------------------------- demo and help
def test_demo_prints_a_table(capsys, tmp_path):
    # README: `liftsort demo` runs the main job on the invented demo building (here
    # into a temporary folder: no test writes into the working directory).
    rc, out, err = run(capsys, "demo", "--out", tmp_path / "demo")
    assert rc == 0 and err == ""
    assert "Larkspur Exchange" in out
    lines = out.splitlines()
    # it leads with the peak-simulated comparison, conventional control first
    head = next(i for i, line in enumerate(lines) if line.startswith("quantity"))
    assert "simulated in time" in lines[head - 1]
    assert lines[head].split()[2] == "conventional" and "destination control" in lines[head]
    assert set(lines[head + 1].replace(" ", "")) == {"-"}
    assert lines[head + 2].startswith("average waiting time")
    verdict = next(i for i, line in enumerate(lines) if "service criterion" in line)
    bounds = next(i for i, line in enumerate(lines) if line.startswith("Round-trip bounds"))
    method = next(i for i, line in enumerate(lines) if line.startswith("Method check"))
    assert head < verdict < bounds < method
    assert "(realisable-bound)" in lines[bounds] and "(ideal-bound)" in lines[bounds]
    for label in ("round-trip time RTT", "interval INT", "handling capacity", "car load"):
        assert any(line.startswith(label) for line in lines[method:])
    assert (tmp_path / "demo" / "report.html").is_file()


def test_main_help_mentions_units(capsys):
    # README: the help explains options with their units.
    status, out, _ = run_exit(capsys, "--help")
    assert status == 0
    text = " ".join(out.split())                   # undo the help's line wrapping
    assert "calc" in text and "demo" in text
    assert "Units: SI" in text and "m/s" in text and "% of the building population" in text


def test_process_help_exits_0_without_traceback():
    # A real process: the top-level help formats every command's one-line help
    # (an unescaped '%' in any of them makes argparse raise).
    proc = run_process("--help")
    assert proc.returncode == 0 and "Traceback" not in proc.stderr
    assert "usage: liftsort" in proc.stdout


def test_calc_help_mentions_units(capsys):
    # README: `liftsort COMMAND --help` explains every option with its unit.
    status, out, _ = run_exit(capsys, "calc", "--help")
    assert status == 0
    assert "--passengers" in out and "[persons]" in out and "--json" in out


# ------------------------------------------------------------- real processes
def test_process_bad_file_exit_2_without_traceback(tmp_path):
    # README: a file with mistakes is refused with exit status 2; in a real
    # process, nothing on stdout and no traceback.
    path = tmp_path / "typo.toml"
    path.write_text(BUILDING_TOML.replace("rated_speed_mps", "rated_sped_mps"), encoding="utf-8")
    proc = run_process("calc", path, "--json")
    assert proc.returncode == 2
    assert proc.stdout == ""
    assert "Traceback" not in proc.stderr
    assert "group.rated_sped_mps" in proc.stderr and "did you mean 'rated_speed_mps'" in proc.stderr


def test_process_bad_option_exit_2_without_traceback(building_file):
    # README/--help: P >= 0 [persons]; a real process exits 2 without a traceback.
    proc = run_process("calc", building_file, "--passengers", "-1")
    assert proc.returncode == 2 and proc.stdout == ""
    assert "Traceback" not in proc.stderr and "--passengers" in proc.stderr


def test_process_json(building_file):
    # README: `calc --json` prints one JSON object, in a real process too.
    proc = run_process("calc", building_file, "--json")
    assert proc.returncode == 0 and proc.stderr == ""
    assert JSON_KEYS <= json.loads(proc.stdout).keys()
