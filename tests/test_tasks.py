"""Studies as keyed tasks (experiments/tasks.py), in this process: seeds from the run's seed
and the unit's key, the ordered search with look-ahead, several buildings in one run, and
the refusals of --workers / --scheduler. Nothing here needs Dask; tests/test_cluster.py
runs the same studies on a local Dask cluster."""
from __future__ import annotations

import functools
import hashlib
import json
import sys

import pandas as pd
import pytest

from experiments import sweep as sweep_module
from experiments.cli import main
from experiments.tasks import InProcess, Task, TaskFailed, ordered_search, task_seed

from .test_experiments import BUILDING


@pytest.fixture
def two_buildings(tmp_path):
    a = tmp_path / "quarry.toml"
    a.write_text(BUILDING.format(name="Quarry Mews"), encoding="utf-8")
    b = tmp_path / "tannery.toml"
    b.write_text(BUILDING.format(name="Tannery Yard").replace("11.0", "9.0"), encoding="utf-8")
    return a, b


def test_a_task_seed_depends_on_the_run_seed_and_the_key_only():
    key = ("sweep", "Quarry Mews", "522f7f3763fe", 3, 2)
    assert task_seed(2026, key) == task_seed(2026, tuple(key))       # no hidden state
    assert task_seed(2026, key) != task_seed(2027, key)
    assert task_seed(2026, key) != task_seed(2026, key[:-1] + (3,))
    seeds = {task_seed(2026, key[:-1] + (k,)) for k in range(1, 200)}
    assert len(seeds) == 199                                         # no collisions here


def _square(x):
    return x * x


class _Waves(InProcess):
    """An in-process executor that runs candidates in waves of ``lookahead`` and runs each
    wave's tasks in reverse order (a cluster finishes them in any order)."""

    def __init__(self, lookahead):
        super().__init__()
        self.lookahead = lookahead
        self.ran = []

    def run(self, tasks, on_done=None):
        out = {}
        for i in reversed(range(len(tasks))):
            self.ran.append(tasks[i].key)
            out[i] = super().run([tasks[i]], on_done)[0]
        return [out[i] for i in range(len(tasks))]


@pytest.mark.parametrize("lookahead", [1, 2, 3, 7, 50])
def test_the_ordered_search_takes_the_same_candidates_whatever_the_look_ahead(lookahead):
    # candidates 0..19, the search ends at the first square above 50 (candidate 8)
    taken = []

    def take(i, result):
        taken.append((i, result))
        return result > 50
    ex = _Waves(lookahead)
    ordered_search(ex, 20, lambda i: Task(("c", i), _square, {"x": i}), take)
    assert taken == [(i, i * i) for i in range(9)]
    assert len(ex.ran) >= 9 and len(ex.ran) <= 9 + lookahead - 1  # at most one wave ahead


def test_sweep_of_two_buildings_names_each_and_equals_their_own_sweeps(two_buildings, tmp_path,
                                                                        capsys):
    a, b = two_buildings
    common = ["--arrival", "8,12", "--trials", "200", "--no-charts", "--quiet"]
    assert main(["sweep", str(a), str(b), *common, "--out", str(tmp_path / "ab")]) == 0
    assert main(["sweep", str(b), *common, "--out", str(tmp_path / "b")]) == 0
    assert main(["sweep", str(a), *common, "--out", str(tmp_path / "a")]) == 0
    capsys.readouterr()
    both = pd.read_csv(tmp_path / "ab" / "sweep.csv", dtype={"building_file_sha256": str})
    digest = {f.name: hashlib.sha256(f.read_bytes()).hexdigest()[:12] for f in (a, b)}
    assert list(both.columns[:2]) == ["building", "building_file_sha256"]
    assert set(zip(both["building"], both["building_file_sha256"])) == {
        ("Quarry Mews", digest["quarry.toml"]), ("Tannery Yard", digest["tannery.toml"])}
    # each building's rows are its own sweep's, to the byte: a unit's result does not depend
    # on the other units of the run, nor on the order the files are given in
    alone = (tmp_path / "a" / "sweep.csv").read_text().splitlines()
    other = (tmp_path / "b" / "sweep.csv").read_text().splitlines()
    lines = (tmp_path / "ab" / "sweep.csv").read_text().splitlines()
    assert lines == alone + other[1:]


def test_the_same_building_file_twice_is_refused(two_buildings, tmp_path, capsys):
    a, _ = two_buildings
    copy = tmp_path / "copy.toml"
    copy.write_bytes(a.read_bytes())
    assert main(["size", str(a), str(copy), "--cars", "1:2", "--trials", "200"]) == 2
    err = capsys.readouterr().err
    assert "same contents" in err and "copy.toml" in err and "Traceback" not in err


@pytest.mark.parametrize("value", ["0", "257", "x", "1.5", "-2"])
def test_workers_out_of_range_is_refused_before_any_work(two_buildings, tmp_path, capsys, value):
    a, _ = two_buildings
    out = tmp_path / "out"
    with pytest.raises(SystemExit) as exc:
        main(["sweep", str(a), "--arrival", "8", "--out", str(out), "--workers", value])
    assert exc.value.code == 2
    err = capsys.readouterr().err
    assert "--workers" in err and "1 to 256" in err
    assert not out.exists()


def test_workers_without_dask_installed_says_what_to_install(two_buildings, tmp_path, capsys,
                                                             monkeypatch):
    a, _ = two_buildings
    monkeypatch.setitem(sys.modules, "distributed", None)      # import distributed fails
    out = tmp_path / "out"
    assert main(["sweep", str(a), "--arrival", "8", "--trials", "200", "--out", str(out),
                 "--workers", "2"]) == 2
    err = capsys.readouterr().err
    assert "pip install 'liftsort[cluster]'" in err and "Traceback" not in err
    assert not out.exists()
    assert main(["size", str(a), "--cars", "1:2", "--trials", "200", "--scheduler",
                 "tcp://127.0.0.1:8786"]) == 2
    assert "pip install 'liftsort[cluster]'" in capsys.readouterr().err


def fails_at(arrival, function, **kwargs):
    """A sweep point task that raises at one demand (a stand-in for a failing unit)."""
    if kwargs["traffic"].arrival_rate_pct_5min == arrival:
        raise FloatingPointError("made to fail by the test")
    return function(**kwargs)


def test_a_task_that_raises_is_reported_by_its_key_and_nothing_is_written(
        two_buildings, tmp_path, capsys, monkeypatch):
    a, _ = two_buildings
    monkeypatch.setattr(sweep_module, "_demand_point_task",
                        functools.partial(fails_at, 12.0, sweep_module._demand_point_task))
    out = tmp_path / "out"
    assert main(["sweep", str(a), "--arrival", "8,12,14", "--trials", "200", "--no-charts",
                 "--out", str(out)]) == 1
    err = capsys.readouterr().err
    assert "Quarry Mews" in err and "12 %" in err and "FloatingPointError" in err
    assert "made to fail by the test" in err and "No output was written" in err
    assert "Traceback" not in err
    assert not out.exists()
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".")]   # no unfinished set


def test_a_failed_task_names_its_key():
    def boom():
        raise ZeroDivisionError("x")
    with pytest.raises(TaskFailed, match="sweep / B / 3 cars failed: ZeroDivisionError"):
        InProcess().run([Task(("sweep", "B", "3 cars"), boom)])


def test_size_out_writes_the_candidates_tried_with_name_and_digest(two_buildings, tmp_path,
                                                                   capsys):
    a, b = two_buildings
    out = tmp_path / "sz"
    assert main(["size", str(a), str(b), "--cars", "1:4", "--trials", "300", "--replications",
                 "2", "--out", str(out), "--json", "--quiet"]) == 0
    shown = json.loads(capsys.readouterr().out)
    whole = json.loads((out / "sizing.json").read_text())
    assert [d["building"] for d in shown["buildings"]] == ["Quarry Mews", "Tannery Yard"]
    screen = pd.read_csv(out / "sizing_round_trip.csv", dtype={"building_file_sha256": str})
    for d in whole["buildings"]:
        rows = screen[screen["building"] == d["building"]]
        assert len(rows) == len(d["tried"])
        assert set(rows["building_file_sha256"]) == {d["building_file_sha256"]}
        chosen = rows[rows["chosen"]]
        found = [x for x in d["designs"] if x["found"]]
        assert sorted(zip(chosen["rule"], chosen["cars"])) == sorted(
            (x["rule"], x["cars"]) for x in found)
        # a rule is tried up to its design and not beyond
        for x in found:
            tried = rows[rows["rule"] == x["rule"]]
            assert tried["cars"].max() == x["cars"]
