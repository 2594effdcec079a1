"""`liftsort calc`: the classical calculation of a building file (any traffic mix)."""
from __future__ import annotations

from roundtrip.building import Scenario
from roundtrip.classical import RATED_SPEED_NOTE_PCT, ClassicalResult

from experiments.estimates import classical_result
from experiments.wording import CAUTION, WAITING_TIME_LEFT_OUT

from .tables import dumps, key_value_table


def result_rows(r: ClassicalResult) -> list[tuple[str, object, str]]:
    mixed = r.traffic_mix != "up-peak"
    rows = [
        ("traffic", r.traffic_mix, ""),
        ("passenger model", r.passenger_model, ""),
        ("passengers per trip P", r.passengers_per_trip, "persons"),
        ("expected stops S", r.expected_stops, "stops"),
    ]
    if mixed:
        rows += [("  up stops", r.expected_up_stops, "stops"),
                 ("  down stops", r.expected_down_stops, "stops")]
    rows.append(("highest reversal floor H", r.highest_reversal_floor, "floor"))
    if mixed:
        rows.append(("lowest reversal floor L", r.lowest_reversal_floor, "floor"))
    rows += [
        ("average interfloor height d_f", r.average_interfloor_height_m, "m"),
        ("time to pass one floor t_v", r.t_v_s, "s"),
        ("time lost per stop t_s", r.t_s_s, "s"),
        ("transfer time per passenger t_p", r.t_p_s, "s"),
        ("round-trip time RTT", r.round_trip_time_s, "s"),
        ("interval INT", r.interval_s, "s"),
        ("handling capacity", r.handling_capacity_persons_5min, "persons / 5 min"),
        ("handling capacity", r.handling_capacity_pct_5min, "% population / 5 min"),
        ("car load (busiest stretch)" if mixed else "car load", r.car_load_persons, "persons"),
        ("car load", r.car_load_pct, "% of rated load"),
        ("design load", r.design_load_persons, "persons"),
    ]
    if r.average_waiting_time_s is not None:
        rows += [
            ("average waiting time" + ("" if r.average_waiting_time_in_range
                                       else " (load > 80 %: outside range)"),
             r.average_waiting_time_s, "s"),
            ("average transit time", r.average_transit_time_s, "s"),
            ("average time to destination", r.average_time_to_destination_s, "s"),
        ]
    if r.demand_pct_5min is not None:
        rows.insert(0, ("demand", r.demand_pct_5min, "% population / 5 min"))
    rows.append(("saturated", r.saturated, ""))
    return rows


def notes(r: ClassicalResult) -> list[str]:
    out = []
    if r.saturated and r.mode == "demand":
        out.append(f"The group cannot carry this demand: even at the design load it handles "
                   f"{r.handling_capacity_pct_5min:.1f} % of the population in 5 minutes, "
                   f"against a demand of {r.demand_pct_5min:.1f} %. The figures above are at "
                   f"the design load ({r.passengers_per_trip:.1f} passengers per trip, "
                   f"{r.car_load_persons:.1f} persons aboard on the busiest stretch).")
    elif r.saturated:
        out.append(f"The car load of {r.car_load_persons:.1f} persons is above the design load "
                   f"of {r.design_load_persons:.1f} persons: the group is saturated at this load.")
    if r.average_waiting_time_s is None:
        out.append(WAITING_TIME_LEFT_OUT)
    if r.traffic_mix != "up-peak":
        out.append("Traffic mix: the general analysis of the round trip (expected up and down "
                   "stops and the highest and lowest reversal floors from the "
                   "origin-destination rates); the car load is the mean load on the busiest "
                   "stretch of the trip.")
    if r.rated_speed_note:
        diff = 100.0 * (r.round_trip_time_s / r.exact_round_trip_time_s - 1.0)
        out.append(f"The classical formula assumes that rated speed is reached in every jump; "
                   f"here it is not, and the formula's round-trip time is {diff:+.1f} % off the "
                   f"exact expectation of the trip model on the real kinematics "
                   f"({r.exact_round_trip_time_s:.1f} s; the note appears beyond "
                   f"{RATED_SPEED_NOTE_PCT:g} %). `liftsort simulate` gives the Monte Carlo "
                   f"estimate.")
    return out


def print_classical(r: ClassicalResult, title: str) -> None:
    print(key_value_table(result_rows(r), title))
    for line in notes(r):
        print("\n" + line)


def run(args, scenario: Scenario) -> int:
    r = classical_result(scenario, args.passengers, not args.fixed)
    if args.json:
        print(dumps({"building": scenario.building.name, **r.to_dict(), "notes": notes(r)}))
        return 0
    what = "up-peak" if r.traffic_mix == "up-peak" else "general (traffic mix)"
    print_classical(r, f"{scenario.building.name}: classical {what} calculation ({r.mode}, "
                       f"{r.passenger_model} passenger counts)")
    print("\n" + CAUTION)
    return 0
