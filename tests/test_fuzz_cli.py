"""Fuzzing the command line: every command, hostile files and options, never a traceback.

The promise of the command line (``experiments.cli`` docstring, issue "hardening"): every
run ends with exit status 0 and a result, or 2 and one paragraph saying what is wrong;
never a traceback, a warning spill or a hang, and nothing is written when it ends with 2.
hypothesis draws, for every command the parser has (a command added later is fuzzed
too), an input file (a small valid building with random damage: wrong types, values out
of range, missing and unknown keys, odd lists and traffic mixes, or not TOML at all) and
an option list drawn from each option's metavar, with tiny trial counts. Each example
runs ``main`` in a fresh folder and checks:

* the exit status is 0 or 2 (1 would be a bug caught by the guard);
* stderr has no "Traceback" and no warning;
* with ``--json`` and status 0, stdout is one JSON object;
* with status 2, the folder is exactly as it was (nothing written, nothing removed);
* with status 0 and ``--out``, the folder holds a whole set (every file its manifest
  lists) and no private folder is left beside it.

This is a check of the project's own contract; it is marked slow (about two minutes).
"""
from __future__ import annotations

import contextlib
import io
import json
import os
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from experiments.cli import build_parser, main
from experiments.outputs import MANIFEST

COMMANDS = build_parser().commands

#: Examples per command (the slow ones draw fewer); a new command gets the default.
EXAMPLES = {"calc": 150, "simulate": 100, "compare": 100, "size": 60, "sweep": 30, "report": 8,
            "demo": 4}
DEFAULT_EXAMPLES = 20

# An invented four-storey building with two small cars: quick to simulate.
VALID = {
    "building": {"name": "Wicket Yard", "floors": 4, "floor_height_m": 3.5, "population": 40},
    "group": {"cars": 2, "rated_load_persons": 8, "rated_speed_mps": 1.0,
              "acceleration_mps2": 0.8, "jerk_mps3": 1.2, "door_open_s": 2.0,
              "door_close_s": 3.0},
    "traffic": {"arrival_rate_pct_5min": 12.0},
}

HOSTILE_VALUES = st.sampled_from([
    0, -1, 1, 2, 3, 7, 0.0, -0.5, 0.5, 1.5, 2.5, 12.0, 64, 101, 1000000, 10 ** 30, 1e300, 1e-300,
    float("nan"), float("inf"), -float("inf"), True, False, "1.6", "", "\u001b[31m", [],
    [1.0], [3.5, 3.5], [0, 0, 0, 40], [40, 40, 40, 40], [3.5, 4.0, 3.5, 3.5], [1, "a"],
    {"a": 1}, "2024-01-01"])


def toml_value(value) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return json.dumps(value)
    if isinstance(value, float):
        if value != value:
            return "nan"
        if value in (float("inf"), -float("inf")):
            return "inf" if value > 0 else "-inf"
        return repr(value)
    if isinstance(value, list):
        return "[" + ", ".join(toml_value(v) for v in value) + "]"
    if isinstance(value, dict):
        return "{" + ", ".join(f"{k} = {toml_value(v)}" for k, v in value.items()) + "}"
    return str(value)


def toml_text(data: dict) -> str:
    lines = [f"{k} = {toml_value(v)}" for k, v in data.items() if not isinstance(v, dict)]
    for sec, table in data.items():
        if isinstance(table, dict):
            lines.append(f"[{sec}]")
            lines += [f"{k} = {toml_value(v)}" for k, v in table.items()]
    return "\n".join(lines) + "\n"


def input_file(draw, kind: str) -> bytes:
    """A building file of one kind: "valid", "mix" (a random traffic mix), "damaged" or
    "garbage" (not TOML at all)."""
    if kind == "garbage":
        return draw(st.one_of(st.binary(max_size=200),
                              st.text(max_size=200).map(lambda t: t.encode("utf-8"))))
    data = json.loads(json.dumps(VALID))
    if kind == "mix":
        shares = draw(st.one_of(
            st.sampled_from([(1.0, 0.0, 0.0), (0.5, 0.5, 0.0), (0.8, 0.1, 0.1),
                             (0.0, 0.0, 1.0), (0.0, 1.0, 0.0), (0.4, 0.4, 0.2)]),
            st.lists(st.sampled_from([0.0, 0.25, 0.5, 1.0, 1.5]), min_size=3, max_size=3)))
        data["traffic"].update(zip(("incoming", "outgoing", "interfloor"), shares))
        data["building"]["population"] = draw(st.sampled_from(
            [40, [0, 0, 0, 40], [40, 0, 0, 0], [10, 20, 30, 40]]))
    if kind == "damaged":
        from roundtrip.inputfile import SCHEMA
        for _ in range(draw(st.integers(1, 3))):
            sec = draw(st.sampled_from(["building", "group", "traffic", "extra", "top"]))
            action = draw(st.sampled_from(["set", "set", "delete", "unknown"]))
            if sec == "top":
                data[draw(st.sampled_from(["name", "cars", "floors", "weird"]))] = \
                    draw(HOSTILE_VALUES)
                continue
            if sec == "extra":
                data[draw(st.sampled_from(["trafic", "groups", "zz"]))] = {"a": 1}
                continue
            table = data.setdefault(sec, {})
            if not isinstance(table, dict):
                continue
            if action == "unknown":
                table[draw(st.sampled_from(["rated_sped_mps", "flors", "x"]))] = 1
            else:
                key = draw(st.sampled_from(sorted(SCHEMA[sec])))
                if action == "delete":
                    table.pop(key, None)
                else:
                    table[key] = draw(HOSTILE_VALUES)
    text = toml_text(data).encode("utf-8")
    if draw(st.integers(0, 5)) == 0:
        text = b"\xef\xbb\xbf" + text                     # a byte-order mark
    return text


#: Option values that should run (with tiny trial counts) and values that must be refused,
#: by option, then by metavar (an option added later gets its metavar's values, or the
#: generic ones).
GOOD_BAD = {
    "--trials": (["2", "3", "17", "40"], ["0", "1", "-5", "x", "2.5", "1e3", "99999999999", ""]),
    "--rules": (["random", "sorted,sectors", "round-robin", "fewest-stops", "random,random"],
                ["best", "nope", "", ",", "\u001b[2J"]),
    "--cars": (["1,2", "2", "1:3", "2:2"], ["0", "1:1e9", "1.5", "x", "17", "3:1"]),
    "--cars-open LIST": (["1", "2", "1,2"], ["0", "3", "17", "x"]),
    "--loads": (["8", "8,13"], ["0", "1e300", "101", "x"]),
    "--speeds": (["1.0", "1.0,1.6"], ["0", "1e300", "26", "x"]),
    "--seed": (["0", "1", "2026"], ["-1", "x", "18446744073709551616", "1e3"]),
    "--controls": (["conventional", "sorted", "same-floor-first,least-added-time",
                    "earliest-leaving"], ["best", "nope", "", ",", "\u001b[2J"]),
    "--minutes": (["5", "10", "20"], ["0", "-1", "x", "nan", "1e300", "241"]),
    "--replications": (["2", "3"], ["0", "1", "x", "2.5", "1001"]),
    "--destination-control": (["least-added-time", "same-floor-first", "sorted"],
                              ["conventional", "random", "best", "nope", "", "\u001b[2J"]),
    "--wait-max": (["20", "30"], ["0", "-1", "x", "nan", "601"]),
    "--wait-p95-max": (["60", "90"], ["0", "-1", "x", "nan", "1201"]),
    "--cost-weight": (["0", "1", "10"], ["-1", "x", "nan", "1e300", "1001"]),
    "--passengers": (["0.5", "3", "6.5", "40"], ["1001", "-1", "nan", "1e300", "x"]),
    "N": (["2", "3", "17", "40"], ["0", "1", "-5", "x", "2.5", "1e3", ""]),
    "PCT": (["0.5", "2", "12", "50"], ["0", "-1", "nan", "inf", "1e300", "101", "x"]),
    "S": (["1", "7", "30"], ["0", "-1", "x", "1e3", "601"]),
    "T": (["1", "2"], ["0", "x", "1025"]),
    "K": (["1", "2"], ["0", "3", "17", "x"]),
    "P": (["0.5", "3", "6.5"], ["1001", "-1", "nan", "1e300", "x"]),
    "A:B:STEP": (["8", "6:10:2", "10,14"], ["1:1e9:1", "10:8", "a:b", "0", "0.1", "nan", "",
                                             "1:2:0", "1e308:1e309", "150"]),
    "A:B": (["1:3", "2:2", "2", "1,2"], ["1:1e9", "3:1", "x", "0:2", "17"]),
    "DIR": (["out", "nested/out", "prev"], ["mine", "afile", "", ".", "..", "\u001b[0m"]),
    "FILE": (["building.toml"], ["missing.toml", "", ".", "afile", "big.toml", "fifo",
                                 "/dev/zero"]),
}
GENERIC = (["1", "2"], ["0", "-1", "x", "", "nan", "1e300"])
# --workers and --scheduler start or reach a Dask cluster (seconds per example): their
# refusals are checked in tests/test_tasks.py, their runs in tests/test_cluster.py.
SKIP = {"-h", "--help", "--version", "--debug", "--workers", "--scheduler"}


def _actions(parser):
    # argparse lists a parser's arguments in ``_actions`` (no public accessor exists).
    return [a for a in parser._actions if not set(a.option_strings) & SKIP
            and a.dest not in ("help", "version")]


def _values(action):
    flag = action.option_strings[-1] if action.option_strings else None
    return (GOOD_BAD.get(f"{flag} {action.metavar}") or GOOD_BAD.get(flag)
            or GOOD_BAD.get(action.metavar) or GENERIC)


def _exclusive(parser) -> list[set]:
    # argparse keeps mutually exclusive groups in ``_mutually_exclusive_groups``.
    return [{a.dest for a in g._group_actions} for g in parser._mutually_exclusive_groups]


@st.composite
def runs(draw, parser) -> tuple[bytes, list[str]]:
    """An input file and an option list: half of them clean (they should run), a third
    with exactly one thing wrong (in the file or one option), the rest anything."""
    mode = draw(st.sampled_from(["clean"] * 3 + ["one"] * 2 + ["chaos"]))
    chosen = []
    taken: set = set()
    for action in _actions(parser):
        if action.nargs == 0:                               # a switch
            clash = any(action.dest in g and g & taken for g in _exclusive(parser))
            if draw(st.integers(0, 3)) == 0 and (mode == "chaos" or not clash):
                chosen.append((action, None))
                taken.add(action.dest)
        elif action.required or not action.option_strings or \
                action.option_strings[-1] == "--trials" or draw(st.booleans()):
            chosen.append((action, "value"))
    valued = [i for i, (_, v) in enumerate(chosen) if v]
    wrong = None
    if mode == "one":
        wrong = draw(st.sampled_from(["file", *valued]))
    kind = {"clean": st.sampled_from(["valid", "mix"]),
            "one": st.just("damaged" if wrong == "file" else "valid"),
            "chaos": st.sampled_from(["valid", "mix", "damaged", "garbage"])}[mode]
    file_bytes = input_file(draw, draw(kind))
    argv = []
    for i, (action, v) in enumerate(chosen):
        if v is None:
            argv.append(action.option_strings[-1])
            continue
        good, bad = _values(action)
        if mode == "chaos":
            value = draw(st.sampled_from(good + bad))
        else:
            value = draw(st.sampled_from(bad if i == wrong else good))
        argv += [action.option_strings[-1], value] if action.option_strings else [value]
    return file_bytes, argv


def _tree(root: Path) -> dict:
    return {str(p.relative_to(root)): (p.is_dir(), p.stat().st_size if p.is_file() else 0)
            for p in sorted(root.rglob("*")) if not p.is_fifo()}


def _prepare(folder: Path, file_bytes: bytes) -> None:
    (folder / "building.toml").write_bytes(file_bytes)
    (folder / "afile").write_text("not a building\n", encoding="utf-8")
    (folder / "big.toml").write_bytes(b"# " + b"x" * 1_100_000 + b"\n")
    os.mkfifo(folder / "fifo")
    (folder / "prev").mkdir()                              # a previous liftsort set
    (folder / "prev" / "sweep.csv").write_text("a\n1\n", encoding="utf-8")
    (folder / "prev" / MANIFEST).write_text(json.dumps(
        {"liftsort_version": "0", "files": ["sweep.csv"]}), encoding="utf-8")
    (folder / "mine").mkdir()                              # someone's own folder
    (folder / "mine" / "notes.txt").write_text("keep me\n", encoding="utf-8")


def run_in(folder: Path, argv: list[str]) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    here = os.getcwd()
    os.chdir(folder)
    try:
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
            try:
                rc = main(argv)
            except SystemExit as exc:                      # argparse: usage errors
                rc = exc.code if isinstance(exc.code, int) else 2
    finally:
        os.chdir(here)
    return rc, out.getvalue(), err.getvalue()


def check_run(folder: Path, command: str, argv: list[str]) -> None:
    before = _tree(folder)
    rc, out, err = run_in(folder, [command, *argv])
    shown = f"liftsort {command} {' '.join(argv)!r}\n--- stderr:\n{err}"
    assert rc in (0, 2), shown
    assert "Traceback" not in err and "Warning" not in err, shown
    if rc == 2:
        assert err.strip(), shown
        assert _tree(folder) == before, shown + "\n(exit 2 changed the folder)"
        return
    assert out.strip(), shown
    if "--json" in argv:
        assert isinstance(json.loads(out), dict), shown
    left = [p.name for p in folder.rglob(".*liftsort-*")]
    assert not left, shown + f"\n(private folders left: {left})"
    if "--out" in argv or command == "demo":
        target = argv[argv.index("--out") + 1] if "--out" in argv else "liftsort-demo"
        manifest = json.loads((folder / target / MANIFEST).read_text(encoding="utf-8"))
        assert all((folder / target / f).is_file() for f in manifest["files"]), shown


@pytest.fixture(scope="module", autouse=True)
def warm_kernels():
    """Compile the kernels once, outside the examples (the first call includes it)."""
    import tempfile
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        (folder / "building.toml").write_text(toml_text(VALID), encoding="utf-8")
        run_in(folder, ["compare", "building.toml", "--trials", "2"])
        run_in(folder, ["simulate", "building.toml", "--trials", "2"])


@pytest.mark.slow
@pytest.mark.parametrize("command", sorted(COMMANDS))
def test_every_command_ends_in_0_or_2_without_a_traceback(command, tmp_path_factory):
    parser = COMMANDS[command]

    @settings(max_examples=EXAMPLES.get(command, DEFAULT_EXAMPLES), deadline=None,
              suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large,
                                     HealthCheck.filter_too_much])
    @given(run=runs(parser))
    def example(run):
        file_bytes, argv = run
        folder = tmp_path_factory.mktemp(command)
        _prepare(folder, file_bytes)
        check_run(folder, command, argv)

    example()
