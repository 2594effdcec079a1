"""`liftsort calc`: the classical up-peak calculation of a building file."""
from __future__ import annotations

from roundtrip.building import Scenario
from roundtrip.classical import UppeakResult

from experiments.estimates import classical_result
from experiments.wording import CAUTION

from .tables import dumps, key_value_table


def result_rows(r: UppeakResult) -> list[tuple[str, object, str]]:
    rows = [
        ("passenger model", r.passenger_model, ""),
        ("passengers per trip P", r.passengers_per_trip, "persons"),
        ("expected stops S", r.expected_stops, "stops"),
        ("highest reversal floor H", r.highest_reversal_floor, "floor"),
        ("average interfloor height d_f", r.average_interfloor_height_m, "m"),
        ("time to pass one floor t_v", r.t_v_s, "s"),
        ("time lost per stop t_s", r.t_s_s, "s"),
        ("transfer time per passenger t_p", r.t_p_s, "s"),
        ("round-trip time RTT", r.round_trip_time_s, "s"),
        ("interval INT", r.interval_s, "s"),
        ("handling capacity", r.handling_capacity_persons_5min, "persons / 5 min"),
        ("handling capacity", r.handling_capacity_pct_5min, "% population / 5 min"),
        ("car load", r.car_load_pct, "% of rated load"),
        ("average waiting time" + ("" if r.average_waiting_time_in_range else " (load > 80 %: outside range)"),
         r.average_waiting_time_s, "s"),
        ("average transit time", r.average_transit_time_s, "s"),
        ("average time to destination", r.average_time_to_destination_s, "s"),
    ]
    if r.demand_pct_5min is not None:
        rows.insert(0, ("demand", r.demand_pct_5min, "% population / 5 min"))
    if r.mode == "demand":
        rows.append(("saturated", r.saturated, ""))
    return rows


def notes(r: UppeakResult) -> list[str]:
    out = []
    if r.saturated:
        out.append(f"The group cannot carry this demand: even at the design load of "
                   f"{r.passengers_per_trip:.1f} persons per trip it handles "
                   f"{r.handling_capacity_pct_5min:.1f} % of the population in 5 minutes, "
                   f"against a demand of {r.demand_pct_5min:.1f} %. The figures above are at the design load.")
    if not r.rated_speed_reached_in_one_floor:
        out.append("Rated speed is not reached in a one-floor jump: the classical formula's "
                   "assumption fails and its round-trip time may be off in either direction; "
                   "use `liftsort simulate` for a Monte Carlo estimate on the real kinematics.")
    return out


def print_classical(r: UppeakResult, title: str) -> None:
    print(key_value_table(result_rows(r), title))
    for line in notes(r):
        print("\n" + line)


def run(args, scenario: Scenario) -> int:
    r = classical_result(scenario, args.passengers, args.poisson)
    if args.json:
        print(dumps({"building": scenario.building.name, **r.to_dict()}))
        return 0
    print_classical(r, f"{scenario.building.name}: classical up-peak calculation ({r.mode})")
    print("\n" + CAUTION)
    return 0
