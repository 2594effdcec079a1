"""One conventional baseline, nobody dropped, saturation on carried passengers: the
round-trip figures of calc, simulate, compare and size agree with one another and
behave as a consultant expects on three invented buildings (tests/buildings/: an
express-zone office in up-peak, a lunch-time 45/45/10 tower, a down-peak office).

Sources named beside the checks: the plain twins of the models (exact), the Monte
Carlo's own intervals (|a - b| < 4 sigma, sigma the combined standard error), and
the definitions of the trade (saturation: the group does not carry the demand;
design load: capacity factor x rated load aboard at once; common practice).
"""
from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest

from allocation.registry import get_rule
from batchrounds import _kernel as G
from experiments.cli import build_parser, main
from roundtrip.building import Traffic
from roundtrip.inputfile import load_scenario
from roundtrip.montecarlo import PassengerSampler, chain_sums
from roundtrip.schedule import TripOut, trip_timing

HERE = Path(__file__).parent / "buildings"
EXPRESS = HERE / "harrow_reach_uppeak.toml"
LUNCH = HERE / "culver_point_lunch.toml"
DOWN = HERE / "pennock_house_downpeak.toml"
DEMO = Path(__file__).parents[1] / "experiments" / "data" / "demo_building.toml"


def cli_json(capsys, *argv):
    assert main([str(a) for a in argv] + ["--json"]) == 0
    return json.loads(capsys.readouterr().out)


def close(a, a_ci, b, b_ci, k=4.0):
    """|a - b| within k combined standard errors (95 % half-widths / 1.96)."""
    return abs(a - b) <= k * math.hypot(a_ci, b_ci) / 1.96


# ---------------------------------------------------------------- exact: one baseline
@pytest.mark.parametrize("mix", [(1.0, 0.0, 0.0), (0.45, 0.45, 0.10), (0.0, 1.0, 0.0)],
                         ids=["up-peak", "lunch", "down-peak"])
@pytest.mark.parametrize("cars_open", [1, 2, 4])
def test_conventional_rule_is_the_one_car_chain_trip_by_trip(mix, cars_open):
    """The group kernel's conventional rule (`random`) times every car trip exactly as
    the one-car Monte Carlo times the same trips of the same stream (a chain of R rounds
    of L cars is a chain of R x L trips): the two commands share one baseline, whatever
    the cars open to allocation."""
    s = load_scenario(DEMO)
    g = s.group
    L = 4
    from dataclasses import replace
    g = replace(g, cars=L)
    traffic = Traffic(12.0, *mix)
    sampler = PassengerSampler(s.building, traffic)
    timing = trip_timing(s.building, g)
    rounds, R = 300, 64
    P = 11.0 if mix[0] == 1.0 else 14.0
    stream = sampler.uniforms(np.random.default_rng(7), P, rounds * L, True)
    rule = get_rule("random")
    out = G.GroupOut.empty(rounds, L, -(-rounds // R), sampler.n_levels)
    G.group_trips(rule.compiled, stream, sampler.alias, G.GroupLayout(L, cars_open, R), timing,
                  rule.table(s.building, g, [cars_open], P), sampler.lobby_origins_only, out,
                  0, out.waiting_end.size)
    one = TripOut.empty(rounds * L)
    chain_sums(sampler, timing, stream, R * L, one)
    assert np.array_equal(out.rtt_s.ravel(), one.rtt_s)
    assert np.array_equal(out.counts.reshape(-1, one.counts.shape[1]), one.counts)


# ---------------------------------------------------------------- the three buildings
@pytest.mark.slow
@pytest.mark.parametrize("path", [EXPRESS, LUNCH, DOWN], ids=lambda p: p.stem)
def test_one_conventional_round_trip_per_building_and_load(path, capsys):
    """At the load the demand sets: `simulate` and `compare`'s `random` agree within their
    intervals (same passenger model, Poisson), and so do their shares of car trips that
    leave someone behind; `calc` (the formula: everyone boards, rated speed in every
    jump) is within 2 % of them; every JSON object names its passenger model."""
    sim = cli_json(capsys, "simulate", path, "--seed", "11")
    P = sim["passengers_per_trip"]
    cmp_ = cli_json(capsys, "compare", path, "--passengers", f"{P!r}", "--rules", "random",
                    "--seed", "12")
    calc = cli_json(capsys, "calc", path, "--passengers", f"{P!r}")
    base = cmp_["rules"][0]
    assert sim["passenger_model"] == cmp_["passenger_model"] == calc["passenger_model"] == "poisson"
    assert base["passenger_model"] == "poisson"
    assert close(sim["round_trip_time_s"], sim["ci95_s"], base["round_trip_time_s"], base["ci95_s"])
    n_sim, n_cmp = sim["trials"], cmp_["trials"] * cmp_["cars"]
    p, q = sim["left_behind_share"], base["left_behind_share"]
    se = math.sqrt(max(p * (1 - p), 1e-4) / n_sim + max(q * (1 - q), 1e-4) / n_cmp)
    assert abs(p - q) <= 4 * se * 3          # car trips within a round are not independent
    assert calc["round_trip_time_s"] == pytest.approx(sim["round_trip_time_s"], rel=0.02)


def test_lunch_time_is_not_saturated_at_45_percent_occupancy(capsys):
    """Culver Point at lunch (45 % in, 45 % out, 10 % interfloor, 11 %/5 min): the design
    load limits how many are in the car at once, so the group carries the demand with the
    busiest stretch well below the design load, in `calc` and in `simulate`; the up-peak
    waiting-time formula is not applied (null, with a note)."""
    calc = cli_json(capsys, "calc", LUNCH)
    sim = cli_json(capsys, "simulate", LUNCH, "--seed", "3")
    for d in (calc, sim):
        assert d["saturated"] is False
        assert d["car_load_pct"] < 80.0
        assert d["average_waiting_time_s"] is None
        assert any("waiting time is left out" in n for n in d["notes"])
    assert calc["passengers_per_trip"] > 16 * 0.8          # more per trip than the design load
    assert sim["handling_capacity_pct_5min"] == pytest.approx(11.0, rel=0.01)


def test_calc_changes_with_the_traffic_mix(tmp_path, capsys):
    """The same building and load under up-peak, lunch-time and down-peak traffic: three
    different classical round trips (the general analysis), the lowest reversal floor
    the lobby whenever a trip has lobby traffic."""
    text = LUNCH.read_text(encoding="utf-8")
    rtts = {}
    for name, mix in (("up", (1.0, 0.0, 0.0)), ("lunch", (0.45, 0.45, 0.1)),
                      ("down", (0.0, 1.0, 0.0))):
        f = tmp_path / f"{name}.toml"
        f.write_text(text.replace("incoming = 0.45\noutgoing = 0.45\ninterfloor = 0.10",
                                  f"incoming = {mix[0]}\noutgoing = {mix[1]}\ninterfloor = {mix[2]}"),
                     encoding="utf-8")
        d = cli_json(capsys, "calc", f, "--passengers", "10")
        rtts[name] = d["round_trip_time_s"]
        assert d["lowest_reversal_floor"] < 0.01           # lobby traffic in almost every trip
    assert len({round(v, 6) for v in rtts.values()}) == 3


def test_down_peak_starts_and_ends_at_the_lobby(capsys):
    """Down-peak: every passenger alights at the lobby, so every trip is a lobby trip;
    `simulate` and `calc` name the mix, and the waiting-time formula is left out."""
    sim = cli_json(capsys, "simulate", DOWN, "--seed", "5", "--trials", "20000")
    assert sim["traffic_mix"] == "down-peak" and sim["lowest_reversal_floor"] == 0.0
    assert sim["average_waiting_time_s"] is None


# ---------------------------------------------------------------- nobody dropped
def test_saturated_whenever_the_carried_capacity_falls_short(capsys):
    """The demo building at 12 %/5 min: saturated, and the capacity carried at the design
    load falls short of the demand. With six cars the fixed point on carried passengers
    carries the demand (the case that was once reported unsaturated while it carried
    11.7 % and dropped the rest)."""
    d = cli_json(capsys, "simulate", DEMO, "--seed", "2026")
    assert d["saturated"] is True and d["handling_capacity_pct_5min"] < 12.0
    assert d["passengers_arrived"] == d["passengers_carried"] + d["passengers_still_waiting"]


def test_six_cars_carry_the_demand(tmp_path, capsys):
    f = tmp_path / "six.toml"
    f.write_text(DEMO.read_text(encoding="utf-8").replace("cars = 5", "cars = 6"), encoding="utf-8")
    d = cli_json(capsys, "simulate", f, "--seed", "2026")
    assert d["saturated"] is False
    assert d["handling_capacity_pct_5min"] == pytest.approx(12.0, rel=0.01)
    assert d["passengers_carried_per_trip"] == pytest.approx(d["passengers_offered_per_trip"],
                                                             rel=0.005)
    assert d["left_behind_share"] > 0.0 and d["passengers_still_waiting"] >= 0


# ---------------------------------------------------------------- refusals and wording
@pytest.mark.parametrize("command", ["calc", "simulate", "compare"])
def test_passengers_above_the_rated_load_are_refused(command, capsys):
    """A mean load above the rated load can never be carried: exit 2, one paragraph
    naming the option, the value and the limit, no traceback."""
    rc = main([command, str(DEMO), "--passengers", "17"])
    err = capsys.readouterr().err
    assert rc == 2
    assert "--passengers 17" in err and "at most 16" in err and "rated load" in err
    assert "Traceback" not in err


def test_help_texts_print_percent_signs():
    """Every command's help prints "%", never a literal "%%"."""
    parser = build_parser("random,sorted")
    sub = next(a for a in parser._actions if a.__class__.__name__ == "_SubParsersAction")
    texts = [parser.format_help()] + [p.format_help() for p in sub.choices.values()]
    for text in texts:
        assert "%%" not in text
    assert any("95 %" in t for t in texts)


def test_rated_speed_note_only_where_formula_and_exact_differ(capsys):
    """The demo building's formula is within 1 % of the trip model's exact expectation
    (rated speed is not reached in a one-floor jump, but it hardly matters): no note.
    A fast car on short floors differs by more: the note, with the difference."""
    d = cli_json(capsys, "calc", DEMO)
    assert d["rated_speed_reached_in_one_floor"] is False and d["rated_speed_note"] is False
    assert abs(d["round_trip_time_s"] / d["exact_round_trip_time_s"] - 1) < 0.01
    assert not any("rated speed" in n for n in d["notes"])


def test_rated_speed_note_where_it_matters(tmp_path, capsys):
    f = tmp_path / "fast.toml"
    text = DEMO.read_text(encoding="utf-8").replace("rated_speed_mps = 2.0", "rated_speed_mps = 6.0")
    f.write_text(text, encoding="utf-8")
    d = cli_json(capsys, "calc", f, "--passengers", "3")
    assert d["rated_speed_note"] is True
    assert any("exact expectation" in n for n in d["notes"])


def test_size_says_which_cars_open_it_used(capsys):
    """`size --cars-open K`: the default is the realisable 2 (docs/rules.md), every
    destination design says its cars open, and the table says it too."""
    d = cli_json(capsys, "size", EXPRESS, "--cars", "3:6", "--rules", "random,sorted",
                 "--trials", "600", "--quiet")
    assert d["cars_open"] == 2
    assert all(x["cars_open"] == min(2, x["cars"]) for x in d["designs"] if x["found"])
    e = cli_json(capsys, "size", EXPRESS, "--cars", "3:6", "--rules", "random,sorted",
                 "--cars-open", "6", "--trials", "600", "--quiet")
    assert e["cars_open"] == 6
    assert main(["size", str(EXPRESS), "--cars", "3:4", "--rules", "random", "--trials", "400",
                 "--quiet"]) == 0
    assert "2 car(s) open to allocation (the default, realisable)" in capsys.readouterr().out
