"""`liftsort peak` on the command line: the JSON contract, the table, clear refusals, and a
building it has never seen (with a demand profile)."""
from __future__ import annotations

import json

import pytest

from experiments.cli import main

CONTRACT = {"control", "average_waiting_time_s", "average_waiting_time_ci95_s",
            "waiting_time_p50_s", "waiting_time_p90_s", "waiting_time_p95_s",
            "waiting_over_60s_pct", "average_transit_time_s", "average_time_to_destination_s",
            "time_to_destination_p95_s", "mean_lobby_queue_persons", "passengers_arrived",
            "passengers_delivered", "handling_capacity_persons_5min",
            "handling_capacity_pct_5min", "mean_departure_load_persons", "round_trip_time_s",
            "saturated", "replications"}

# An invented 20-storey office with an express zone and a morning profile.
QUILLON = """
[building]
name = "Quillon Works"
floors = 20
floor_height_m = 3.7
express_m = 18.0
population = 70

[group]
cars = 6
rated_load_persons = 16
rated_speed_mps = 3.0
acceleration_mps2 = 1.0
jerk_mps3 = 1.6
door_open_s = 1.8
door_close_s = 2.9
start_delay_s = 0.5
lobby_dwell_s = 8.0

[traffic]
profile_pct_5min = [6.0, 9.0, 12.0, 13.0, 10.0, 7.0]
"""


@pytest.fixture()
def quillon(tmp_path):
    f = tmp_path / "quillon.toml"
    f.write_text(QUILLON)
    return f


def test_json_has_the_contract_keys_conventional_first(quillon, capsys):
    assert main(["peak", str(quillon), "--replications", "3", "--json",
                 "--controls", "sorted,same-floor-first", "--seed", "7"]) == 0
    d = json.loads(capsys.readouterr().out)
    assert set(d) >= {"controls", "slots", "seed"}
    assert d["seed"] == 7
    assert [c["control"] for c in d["controls"]] == ["conventional", "sorted", "same-floor-first"]
    for c in d["controls"]:
        assert CONTRACT <= set(c)
        assert c["basis"] == "peak"
        assert c["replications"] == 3
        assert c["average_waiting_time_s"] >= 0
        assert c["waiting_time_p50_s"] <= c["waiting_time_p90_s"] <= c["waiting_time_p95_s"]
    assert d["minutes"] == 30                              # the profile's six slots
    slots = [s for s in d["slots"] if s["control"] == "conventional"]
    assert [s["slot_start_min"] for s in slots] == [0, 5, 10, 15, 20, 25]
    # the busiest slot of the profile has the most arrivals
    assert max(slots, key=lambda s: s["arrivals"])["slot_start_min"] == 15


def test_table_names_every_control_with_units_and_the_caution(quillon, capsys):
    assert main(["peak", str(quillon), "--replications", "2", "--minutes", "10",
                 "--controls", "least-added-time"]) == 0
    out = capsys.readouterr().out
    assert "average time to destination" in out and "% population / 5 min" in out
    assert out.index("conventional") < out.index("least-added-time")
    assert "simulated in time" in out
    assert "qualified lift engineer" in out


@pytest.mark.parametrize("extra, message", [
    (["--controls", "sortd"], "did you mean 'sorted'"),
    (["--controls", "best"], "not a control"),
    (["--window", "0"], "--window"),
    (["--replications", "1"], "--replications"),
    (["--minutes", "-5"], "--minutes"),
])
def test_bad_options_are_refused_clearly(quillon, capsys, extra, message):
    """Exit status 2 and the option or name in the message, whether argparse or the
    simulation refuses it."""
    assert exit_status(["peak", str(quillon), *extra]) == 2
    err = capsys.readouterr().err
    assert message in err and "Traceback" not in err


def test_mixed_traffic_is_refused_with_exit_2(tmp_path, capsys):
    f = tmp_path / "mixed.toml"
    f.write_text(QUILLON.replace("profile_pct_5min = [6.0, 9.0, 12.0, 13.0, 10.0, 7.0]",
                                 "arrival_rate_pct_5min = 11.0\nincoming = 0.45\noutgoing = 0.45\n"
                                 "interfloor = 0.1"))
    assert main(["peak", str(f), "--replications", "2"]) == 2
    err = capsys.readouterr().err
    assert "up-peak" in err and "Traceback" not in err


def test_a_file_without_traffic_needs_it(tmp_path, capsys):
    f = tmp_path / "none.toml"
    f.write_text(QUILLON.split("[traffic]")[0])
    assert main(["peak", str(f)]) == 2
    assert "[traffic] is missing" in capsys.readouterr().err


def exit_status(argv) -> int:
    try:
        return main(argv)
    except SystemExit as exc:           # argparse refuses an option this way
        return int(exc.code)
