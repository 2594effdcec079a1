"""The hostile cases of the hardening issue, one by one: each ends in exit 0, 2 or 130.

These are checks of the project's own contract (``experiments.cli`` docstring): a bad
input file or option gets one paragraph naming the key or option, its value and what is
allowed (exit status 2, nothing written); Ctrl-C gets one line (status 130); an
unexpected error gets a short message asking for a report, with the traceback only
under ``--debug``. The plausible ranges are those stated in ``roundtrip.inputfile`` (from
the standards and common practice named there); the buildings are invented.
"""
from __future__ import annotations

import json
import math
import os
import subprocess
import sys
from pathlib import Path

import pytest

from experiments import limits
from experiments.cli import main
from experiments.cli.options import parse_range
from experiments.outputs import MANIFEST
from roundtrip.inputfile import ARRIVAL_RATE, MAX_FILE_BYTES, SCHEMA, InputError, load_scenario

REPO = Path(__file__).resolve().parents[1]

# An invented five-storey building with two cars; valid as it stands.
BUILDING = """\
[building]
name = "Hollin Court"
floors = 5
floor_height_m = 3.5
population = 50

[group]
cars = 2
rated_load_persons = 10
rated_speed_mps = 1.0
acceleration_mps2 = 0.8
jerk_mps3 = 1.2
door_open_s = 2.0
door_close_s = 3.0

[traffic]
arrival_rate_pct_5min = 12.0
"""


def with_line(text: str, key: str, value: str) -> str:
    """``text`` with ``key = ...`` set to ``value`` (added to its section when absent)."""
    lines = text.splitlines()
    for i, line in enumerate(lines):
        if line.split("=")[0].strip() == key:
            lines[i] = f"{key} = {value}"
            return "\n".join(lines) + "\n"
    section = next(s for s, keys in SCHEMA.items() if key in keys)
    at = lines.index(f"[{section}]") + 1
    return "\n".join(lines[:at] + [f"{key} = {value}"] + lines[at:]) + "\n"


@pytest.fixture
def building(tmp_path):
    def make(text=BUILDING, name="hollin.toml"):
        path = tmp_path / name
        path.write_text(text, encoding="utf-8")
        return path
    return make


def run(capsys, *argv):
    try:
        rc = main([str(a) for a in argv])
    except SystemExit as exc:                    # argparse usage errors
        rc = exc.code
    out, err = capsys.readouterr()
    return rc, out, err


def refused(capsys, *argv, fragments=()):
    rc, out, err = run(capsys, *argv)
    assert rc == 2, err
    assert "Traceback" not in err and out == ""
    for f in fragments:
        assert f in err, err
    return err


# ------------------------------------------------------------------ plausible ranges
RANGED = [(sec, name, key.plausible) for sec, keys in SCHEMA.items()
          for name, key in keys.items() if key.plausible is not None and key.kind != "list"]


@pytest.mark.parametrize("sec, name, plausible", RANGED, ids=[f"{s}.{n}" for s, n, _ in RANGED])
def test_every_plausible_range_is_stated_and_enforced(building, capsys, sec, name, plausible):
    # Contract: a value outside the plausible range is refused with the range and its
    # basis; the bounds themselves are accepted.
    integer = SCHEMA[sec][name].kind == "integer"
    above = plausible.high + 1 if integer else plausible.high * 1.5 + 1
    err = refused(capsys, "calc", building(with_line(BUILDING, name, repr(above))),
                  "--passengers", "3", fragments=[f"{sec}.{name} = ",
                                                  f"liftsort accepts {plausible.low:g} to "
                                                  f"{plausible.high:g}", plausible.basis])
    assert err.count("\n") == 1
    for bound in (plausible.low, plausible.high):
        if bound == 0 and name in ("population",):
            continue                                       # a zero total is refused apart
        value = str(int(bound)) if integer else repr(float(bound))
        passengers = "1" if name == "rated_load_persons" else "3"   # no more than rated load
        rc, _, err = run(capsys, "calc", building(with_line(BUILDING, name, value)),
                         "--passengers", passengers)
        assert rc == 0, err


@pytest.mark.parametrize("key, value", [("jerk_mps3", "1e300"), ("jerk_mps3", "1e-300"),
                                        ("acceleration_mps2", "1e300"),
                                        ("acceleration_mps2", "1e-300"),
                                        ("floor_height_m", "1e308"),
                                        ("rated_load_persons", "1000000"),
                                        ("cars", "100000")])
@pytest.mark.parametrize("command", ["calc", "simulate", "compare"])
def test_values_that_overflowed_are_refused_up_front(building, capsys, key, value, command):
    # The cases: OverflowError, ZeroDivisionError, 23.8 GiB, no answer in 120 s.
    options = ["--passengers", "3"] if command == "calc" else ["--trials", "2"]
    refused(capsys, command, building(with_line(BUILDING, key, value)), *options,
            fragments=[key, "accepts"])


def test_zero_door_and_transfer_times_simply_work(building, capsys):
    # A zero door or transfer time is physical: every estimate runs, an empty car too.
    text = BUILDING
    for key in ("door_open_s", "door_close_s", "start_delay_s", "transfer_in_s",
                "transfer_out_s"):
        text = with_line(text, key, "0")
    path = building(text)
    for argv in (["calc", path], ["calc", path, "--passengers", "0"],
                 ["simulate", path, "--passengers", "0", "--trials", "50", "--json"],
                 ["simulate", path, "--trials", "50", "--json"],
                 ["compare", path, "--trials", "50", "--json"]):
        rc, out, err = run(capsys, *argv)
        assert rc == 0 and "Traceback" not in err, err
    empty = json.loads(run(capsys, "simulate", path, "--passengers", "0", "--trials", "50",
                           "--json")[1])
    assert empty["round_trip_time_s"] == 0.0 and empty["handling_capacity_persons_5min"] == 0.0


@pytest.mark.parametrize("command", ["calc", "simulate", "compare", "sweep", "size", "report"])
def test_interfloor_with_one_populated_floor_is_a_file_error(building, capsys, tmp_path, command):
    # Interfloor trips run between two populated floors: refused in the file check, by
    # every command alike (before: a traceback from sweep, size and report).
    text = with_line(with_line(with_line(BUILDING, "population", "[0, 0, 0, 0, 50]"),
                               "incoming", "0.5"), "interfloor", "0.5")
    extra = {"sweep": ["--arrival", "12", "--out", tmp_path / "o"],
             "report": ["--out", tmp_path / "o"], "calc": ["--passengers", "3"]}
    refused(capsys, command, building(text), *extra.get(command, ["--trials", "2"]),
            fragments=["traffic.interfloor = 0.5 with 1 populated floor"])
    assert not (tmp_path / "o").exists()


# ------------------------------------------------------------------ the input file itself
def test_only_a_regular_file_of_at_most_a_megabyte_is_read(tmp_path, capsys):
    fifo = tmp_path / "pipe.toml"
    os.mkfifo(fifo)                                       # would block an open() for ever
    refused(capsys, "calc", fifo, fragments=["is not a regular file"])
    refused(capsys, "calc", "/dev/zero", fragments=["/dev/zero is not a regular file"])
    big = tmp_path / "big.toml"
    big.write_bytes(b"#" * (MAX_FILE_BYTES + 1))
    refused(capsys, "calc", big, fragments=[f"at most {MAX_FILE_BYTES:,} bytes"])
    refused(capsys, "calc", "", fragments=["no input file given"])


def test_a_byte_order_mark_is_accepted(tmp_path):
    path = tmp_path / "bom.toml"
    path.write_bytes(b"\xef\xbb\xbf" + BUILDING.encode("utf-8"))
    assert load_scenario(path).building.name == "Hollin Court"


@pytest.mark.parametrize("key, value, shown", [
    ("cars", "true", "group.cars = true:"),
    ("rated_speed_mps", "2024-01-01", "group.rated_speed_mps = 2024-01-01:"),
    ("floors", "1e300", "building.floors = 1e+300:"),
    ("floors", "1" * 40, "building.floors = 1.111e+39:"),
    ("floors", "1" * 21, "building.floors = 1.111e+20:"),      # past 20 digits: shortened
    ("floors", "1" * 20, "building.floors = 11111111111111111111:"),
    ("population", '"many"', 'building.population = "many":'),
])
def test_values_are_quoted_as_toml_spells_them(building, capsys, key, value, shown):
    # Messages quote the file's own spelling, never Python's (True, datetime.date(...)) or
    # a 301-digit integer.
    err = refused(capsys, "calc", building(with_line(BUILDING, key, value)), fragments=[shown])
    assert "True" not in err and "datetime" not in err


def test_a_name_with_terminal_escape_codes_is_refused_and_never_printed_raw(building, capsys):
    err = refused(capsys, "calc", building(with_line(BUILDING, "name", r'"\u001b[31mRed"')),
                  fragments=["building.name", "control characters", r"\u001b"])
    assert "\x1b" not in err


def test_a_key_outside_any_section_says_where_it_belongs(building, capsys):
    refused(capsys, "calc", building("name = 'x'\n" + BUILDING),
            fragments=["is a key outside any section", "it belongs in [building]"])


def test_a_misspelt_key_outside_any_section_gets_the_nearest_key_and_its_section(building,
                                                                               capsys):
    refused(capsys, "calc", building("carz = 2\n" + BUILDING),
            fragments=["carz = 2 is a key outside any section",
                       "did you mean a key of [group]? did you mean 'cars'?"])
    refused(capsys, "calc", building("qqqqq = 2\n" + BUILDING),
            fragments=["qqqqq = 2 is a key outside any section"])


# ------------------------------------------------------------------ options and run limits
def test_ranges_are_counted_before_any_list_is_built():
    # Before: 53 s to a MemoryError (1:1e9:1), or no end at all (1:1e308:1e300).
    for text in ("1:1e9:1", "1:1e308:1e300", "0:1e308", ",".join(["3"] * 300)):
        with pytest.raises(InputError, match="at most 200"):
            parse_range(text, "--arrival", whole=False, low=0.0)
    with pytest.raises(InputError, match="from 0.5 to 100"):
        parse_range("150", "--arrival", whole=False, low=0.0, plausible=ARRIVAL_RATE)
    assert parse_range("1:3", "--cars", whole=True, low=1) == [1, 2, 3]


@pytest.mark.parametrize("argv, fragment", [
    (["simulate", "{f}", "--passengers", "1e9", "--trials", "2"], "--passengers"),
    (["compare", "{f}", "--passengers", "1e9", "--trials", "2"], "--passengers"),
    (["calc", "{f}", "--passengers", "1e300"], "--passengers"),
    (["simulate", "{f}", "--trials", "1000000000000"], "--trials"),
    (["compare", "{f}", "--passengers", "40", "--trials", "4000000"], "at most"),
    (["compare", "{f}", "--passengers", "0", "--trials", "50"], "--passengers 0"),
    (["size", "{f}", "--rules", "best", "--trials", "50"], "--rules best"),
    (["size", "{f}", "--rules", "best", "--fixed", "--trials", "50"], "--rules best"),
    (["sweep", "{f}", "--rules", "best", "--arrival", "12", "--out", "{o}"], "--rules best"),
    (["size", "{f}", "--cars", "1:1e9"], "--cars"),
    (["size", "{f}", "--loads", "1:1e9"], "--loads"),
    (["size", "{f}", "--speeds", "1:1e9:1"], "--speeds"),
    (["size", "{f}", "--cars", "1:16", "--loads", "1:20"], "at most 200"),
    (["sweep", "{f}", "--arrival", "1:1e9:1", "--out", "{o}"], "--arrival"),
    (["sweep", "{f}", "--arrival", "12", "--cars", "1:1e9", "--out", "{o}"], "--cars"),
    (["sweep", "{f}", "--arrival", "12", "--cars-open", "7", "--out", "{o}"], "--cars-open"),
    (["sweep", "{f}", "--arrival", "12", "--out", ""], "--out ''"),
    (["size", "{f}", "--hc-min", "-1"], "--hc-min"),
    (["compare", "{f}", "--cars-open", "3"], "from 1 to the group's 2"),
])
def test_options_are_checked_before_any_work(building, capsys, tmp_path, argv, fragment):
    path = building()
    argv = [a.replace("{f}", str(path)).replace("{o}", str(tmp_path / "o")) for a in argv]
    err = refused(capsys, *argv, fragments=[fragment])
    assert "%%" not in err
    assert not (tmp_path / "o").exists()


def test_an_adaptive_run_stops_at_the_memory_limit(building, capsys, monkeypatch):
    # Before: `compare --ci-target 0.01` on 10 cars reached 5.4 GB. The adaptive run now
    # stops at the trials the run limits allow (here lowered to make it quick).
    monkeypatch.setattr(limits, "MAX_KEPT_CAR_TRIPS", 20_000)
    rc, out, err = run(capsys, "compare", building(), "--passengers", "4", "--ci-target",
                       "0.001", "--json")
    assert rc == 0, err
    d = json.loads(out)
    assert d["trials"] <= 20_000 // (2 * 5)                # cars x (default rules + baseline)
    assert limits.trial_cap(10**9, cars=10, rules=5) == 400


def test_the_trial_options_reach_every_step(building, capsys, monkeypatch):
    # Before: `size` and `report` ignored --max-trials, and compare's demand step ignored
    # --trials, --ci-target and --max-trials.
    import batchrounds.montecarlo as group_mc
    import roundtrip.montecarlo as mc

    def spy(module, name):
        """The keyword arguments of every call of ``module.name`` from now on."""
        calls, real = [], getattr(module, name)

        def record(*args, **kwargs):
            calls.append(kwargs)
            return real(*args, **kwargs)
        monkeypatch.setattr(module, name, record)
        return calls

    seen = spy(mc, "simulate_demand")
    assert run(capsys, "compare", building(), "--trials", "30", "--json")[0] == 0
    assert seen and seen[-1]["trials"] == 30
    rc, out, _ = run(capsys, "size", building(), "--cars", "1:2", "--max-trials", "50",
                     "--json")
    assert rc == 0
    # the round-trip screen of size: every comparison and demand step gets --ci-target
    compared = spy(group_mc, "compare_rules")
    seen.clear()
    rc, out, _ = run(capsys, "size", building(), "--cars", "1:2", "--round-trip-only",
                     "--ci-target", "3", "--json")
    assert rc == 0 and compared and seen
    assert all(k["ci_target_pct"] == 3.0 for k in compared + seen)


def test_messages_count_cars_in_words(tmp_path, capsys):
    path = tmp_path / "one.toml"
    path.write_text(with_line(BUILDING, "cars", "1"), encoding="utf-8")
    err = refused(capsys, "compare", path, "--cars-open", "2")
    assert "1 cars" not in err and "one car" in err
    rc, out, _ = run(capsys, "compare", path, "--passengers", "3", "--trials", "30")
    assert rc == 0 and "(1 car," in out


# ------------------------------------------------------------------ the guard
def test_an_unexpected_error_is_a_short_bug_report_and_a_traceback_only_with_debug(
        building, capsys, monkeypatch):
    import experiments.cli.calc as calc

    def broken(*_):
        raise RuntimeError("something unforeseen")

    monkeypatch.setattr(calc, "run", broken)
    rc, out, err = run(capsys, "calc", building())
    assert rc == 1 and "Traceback" not in err and err.count("\n") == 1
    assert "internal error: RuntimeError: something unforeseen" in err and "--debug" in err
    rc, out, err = run(capsys, "calc", building(), "--debug")
    assert rc == 1 and "Traceback" in err


def test_report_headline_never_shows_nan():
    # Before: "raises handling capacity by nan % ± nan %" (arrival 0.1 %, --trials 60). A
    # figure that could not be estimated shows as "n/a", never "nan".
    from experiments.decision import Figure
    from experiments.report_job import _answer
    from roundtrip.building import Traffic
    nan = math.nan
    bounds = (Figure("b", nan, nan, "%", "realisable-bound", 2),
              Figure("b", nan, nan, "%", "ideal-bound", 5))
    rows = {"random": {"design_hc": nan}, "sorted": {"design_hc": nan}}
    a = _answer(None, None, bounds, rows, None, 12.0, 5, "least-added-time",
                Traffic(12.0, 0.5, 0.3, 0.2))
    assert "nan" not in (a["headline"] + " ".join(a["points"])).lower()
    assert "n/a" in a["headline"] and "not an answer" in a["headline"]


# ------------------------------------------------------------------ output sets
def _set(folder: Path) -> dict:
    return {p.name: p.read_bytes() for p in sorted(folder.iterdir())}


def test_out_must_be_a_folder_liftsort_may_replace(building, capsys, tmp_path):
    mine = tmp_path / "mine"
    mine.mkdir()
    (mine / "notes.txt").write_text("keep me", encoding="utf-8")
    refused(capsys, "sweep", building(), "--arrival", "12", "--out", mine,
            fragments=["notes.txt", "did not write"])
    assert _set(mine) == {"notes.txt": b"keep me"}
    a_file = tmp_path / "a_file"
    a_file.write_text("x", encoding="utf-8")
    refused(capsys, "sweep", building(), "--arrival", "12", "--out", a_file,
            fragments=["not a folder"])
    refused(capsys, "sweep", building(), "--arrival", "12", "--out", os.getcwd(),
            fragments=["current folder"])


def test_a_new_set_replaces_the_previous_one_whole(building, capsys, tmp_path):
    out = tmp_path / "deep" / "out"
    argv = ["sweep", building(), "--arrival", "10:12:2", "--trials", "40", "--out", out]
    assert run(capsys, *argv, "--quiet")[0] == 0
    first = _set(out)
    assert set(json.loads(first[MANIFEST])["files"]) | {MANIFEST} == set(first)
    assert run(capsys, *argv, "--no-charts", "--json")[0] == 0
    second = _set(out)
    assert set(second) == {"sweep.csv", MANIFEST}            # the charts of the first are gone
    assert not [p for p in out.parent.iterdir() if ".liftsort-" in p.name]


def test_an_error_during_the_run_leaves_the_previous_set(building, capsys, tmp_path,
                                                          monkeypatch):
    out = tmp_path / "out"
    argv = ["sweep", building(), "--arrival", "12", "--trials", "40", "--out", out,
            "--no-charts"]
    assert run(capsys, *argv)[0] == 0
    before = _set(out)
    import experiments.charts as charts

    def broken(*_):
        raise OSError(28, "No space left on device", str(out / "capacity_vs_demand.png"))

    monkeypatch.setattr(charts, "sweep_charts", broken)
    rc, _, err = run(capsys, *argv[:-1])
    assert rc == 2 and "No space left on device" in err and "Traceback" not in err
    assert _set(out) == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["hollin.toml", "out"]


def _process(*argv, **kwargs):
    import signal
    return subprocess.Popen([sys.executable, "-m", "experiments.cli", *map(str, argv)],
                            cwd=REPO, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            preexec_fn=lambda: signal.signal(signal.SIGINT, signal.SIG_DFL),
                            **kwargs)


@pytest.mark.slow
@pytest.mark.parametrize("command", ["sweep", "report"])
def test_ctrl_c_ends_with_one_line_and_the_previous_set(building, tmp_path, command):
    # Before: a KeyboardInterrupt traceback and a partial set (a sweep.csv, some charts,
    # no report.html). Ctrl-C is sent once the run has started writing its new set.
    import signal
    import time
    out = tmp_path / "out"
    extra = ["--arrival", "8:16:1"] if command == "sweep" else []
    done = _process(command, building(), *extra, "--trials", "60", "--out", out, "--quiet")
    assert done.wait(timeout=300) == 0
    before = _set(out)
    proc = _process(command, building(), *extra, "--out", out, "--quiet", "--seed", "9")
    deadline = time.time() + 120
    while not [p for p in tmp_path.iterdir() if ".liftsort-" in p.name]:
        assert proc.poll() is None and time.time() < deadline
        time.sleep(0.05)
    time.sleep(0.5)
    proc.send_signal(signal.SIGINT)
    out_text, err = proc.communicate(timeout=120)
    assert proc.returncode == 130, err
    assert err.count("\n") == 1 and "interrupted" in err and "Traceback" not in err
    assert _set(out) == before
    assert not [p for p in tmp_path.iterdir() if ".liftsort-" in p.name]


@pytest.mark.slow
def test_two_reports_into_one_folder_leave_one_whole_set(building, tmp_path):
    # Before: a report stamped seed 1 embedding a seed-2 chart. Now the last run to finish
    # owns the folder, and its report embeds exactly the charts beside it.
    import base64
    import re
    out = tmp_path / "out"
    runs = [_process("report", building(), "--out", out, "--trials", "200", "--seed", s,
                     "--json", "--quiet") for s in (1, 2)]
    results = [json.loads(p.communicate(timeout=600)[0]) for p in runs]
    assert all(p.returncode == 0 for p in runs)
    files = _set(out)
    html = files["report.html"].decode("utf-8")
    embedded = [base64.b64decode(x) for x in
                re.findall(r"data:image/png;base64,([A-Za-z0-9+/=]+)", html)]
    pngs = [v for k, v in files.items() if k.endswith(".png")]
    assert embedded and all(e in pngs for e in embedded)
    import csv
    import io
    csv_seeds = {row["run_seed"]
                 for row in csv.DictReader(io.StringIO(files["sweep.csv"].decode()))}
    assert len(csv_seeds) == 1
    winner = int(csv_seeds.pop())
    assert any(r["stamp"]["seed"] == winner for r in results)
    assert f">{winner}<" in html


# ------------------------------------------------------------------ the numba cache
def _unwritable(tmp_path) -> Path:
    """A path that nobody, root included, can make: it lies under a regular file."""
    blocker = tmp_path / "blocker"
    blocker.write_text("", encoding="utf-8")
    return blocker / "cannot"


def test_a_temporary_compile_cache_is_chosen_when_none_can_be_written(tmp_path):
    from experiments.cli.caches import choose_cache_folders
    nowhere = _unwritable(tmp_path)
    env = {"HOME": str(nowhere), "NUMBA_CACHE_DIR": str(nowhere / "numba")}
    chosen = choose_cache_folders(env, package_folders=[nowhere / "roundtrip"])
    try:
        assert chosen.note and "start-up will be slower" in chosen.note
        assert chosen.note.count("\n") == 0
        cache = Path(env["NUMBA_CACHE_DIR"])
        assert cache.parent == chosen.temporary and chosen.temporary.is_dir()
        assert Path(env["MPLCONFIGDIR"]).parent == chosen.temporary
    finally:
        chosen.remove()
    assert not cache.parent.exists()


def test_a_working_cache_is_left_alone(tmp_path):
    from experiments.cli.caches import choose_cache_folders
    env = {"HOME": str(tmp_path), "NUMBA_CACHE_DIR": str(tmp_path / "numba")}
    chosen = choose_cache_folders(env, package_folders=[tmp_path / "pkg"])
    assert chosen.note is None and chosen.temporary is None
    assert env["NUMBA_CACHE_DIR"] == str(tmp_path / "numba") and "MPLCONFIGDIR" not in env
    env = {"HOME": str(tmp_path)}                           # the packages' own __pycache__
    assert choose_cache_folders(env, package_folders=[tmp_path / "pkg"]).note is None
    assert "NUMBA_CACHE_DIR" not in env
    env = {"HOME": str(tmp_path)}                           # read-only install, usable home
    assert choose_cache_folders(env, package_folders=[_unwritable(tmp_path)]).note is None
    assert env["NUMBA_CACHE_DIR"].startswith(str(tmp_path / ".cache"))


@pytest.mark.slow
@pytest.mark.skipif(os.name != "posix" or os.geteuid() != 0,
                    reason="runs the commands as the unprivileged user 'nobody'")
def test_a_service_account_with_no_writable_home_runs_with_a_temporary_cache():
    # Before: "cannot cache function '_sample_cells': no locator available" at import, and
    # a PermissionError traceback for a read-only --out found after the whole sweep.
    import pwd
    import shutil
    import tempfile
    nobody = pwd.getpwnam("nobody")
    if shutil.which("setpriv") is None:
        pytest.skip("setpriv is not installed")
    tmp_path = Path(tempfile.mkdtemp())                 # pytest's own is private to root
    try:
        _as_service_account(tmp_path, nobody)
    finally:
        shutil.rmtree(tmp_path, ignore_errors=True)


def _as_service_account(tmp_path: Path, nobody) -> None:
    os.chmod(tmp_path, 0o755)
    path = tmp_path / "hollin.toml"
    path.write_text(BUILDING, encoding="utf-8")
    os.chmod(path, 0o644)
    read_only = tmp_path / "read_only"
    read_only.mkdir()
    os.chmod(read_only, 0o555)
    out = tmp_path / "shared"
    out.mkdir()
    os.chmod(out, 0o777)
    env = {"PATH": os.environ.get("PATH", "/usr/bin:/bin"), "HOME": "/nonexistent",
           "NUMBA_CACHE_DIR": str(read_only), "LANG": "C.UTF-8"}

    def as_nobody(*argv):
        return subprocess.run(["setpriv", f"--reuid={nobody.pw_uid}", f"--regid={nobody.pw_gid}",
                               "--clear-groups", sys.executable, "-m", "experiments.cli",
                               *map(str, argv)], cwd=REPO, env=env, capture_output=True,
                              text=True, timeout=600)

    ran = as_nobody("sweep", path, "--arrival", "12", "--trials", "40", "--out", out / "set",
                    "--quiet")
    assert ran.returncode == 0, ran.stderr
    notes = ran.stderr.splitlines()
    assert len(notes) == 1 and "start-up will be slower" in notes[0]
    assert "Matplotlib" not in ran.stderr and "Traceback" not in ran.stderr
    assert (out / "set" / "capacity_vs_demand.png").is_file()
    refused_run = as_nobody("sweep", path, "--arrival", "12", "--out", read_only / "set")
    assert refused_run.returncode == 2 and "cannot write into" in refused_run.stderr
    assert not [p for p in Path("/tmp").glob("liftsort-cache-*") if p.owner() == "nobody"]


def test_the_command_line_module_loads_only_the_standard_library():
    # So that Ctrl-C right after start-up is answered by the guard in one line too: numpy
    # and the rest load inside main.
    code = ("import sys; import experiments.cli; "
            "print(sorted(m for m in ('numpy', 'numba', 'pandas', 'matplotlib') "
            "if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True, cwd=REPO)
    assert out.stdout.strip() == "[]"
