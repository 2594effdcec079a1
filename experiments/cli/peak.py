"""`liftsort peak`: the time-based peak simulation, one row per control."""
from __future__ import annotations

from roundtrip.building import Scenario
from roundtrip.inputfile import InputError

from experiments.estimates import peak_study
from experiments.wording import CAUTION

from .tables import dumps, grid_table

ROWS = [  # (quantity, unit, key, decimals)
    ("kind of control", "", "kind", None),
    ("average waiting time", "s", "average_waiting_time_s", 1),
    ("  its 95 % interval (+/-)", "s", "average_waiting_time_ci95_s", 1),
    ("waiting time, 50th percentile", "s", "waiting_time_p50_s", 1),
    ("waiting time, 90th percentile", "s", "waiting_time_p90_s", 1),
    ("waiting time, 95th percentile", "s", "waiting_time_p95_s", 1),
    ("waits over 60 s", "%", "waiting_over_60s_pct", 1),
    ("average transit time", "s", "average_transit_time_s", 1),
    ("average time to destination", "s", "average_time_to_destination_s", 1),
    ("time to destination, 95th percentile", "s", "time_to_destination_p95_s", 1),
    ("mean lobby queue", "persons", "mean_lobby_queue_persons", 1),
    ("passengers arrived", "persons", "passengers_arrived", 0),
    ("passengers delivered", "persons", "passengers_delivered", 0),
    ("handling capacity delivered", "persons / 5 min", "handling_capacity_persons_5min", 1),
    ("handling capacity delivered", "% population / 5 min", "handling_capacity_pct_5min", 2),
    ("mean departure load", "persons", "mean_departure_load_persons", 1),
    ("mean round-trip time", "s", "round_trip_time_s", 1),
    ("saturated", "", "saturated", None),
]


def _cell(value, decimals):
    if decimals is None or not isinstance(value, (int, float)) or isinstance(value, bool):
        return value
    return round(float(value), decimals) if decimals else int(round(value))


def parse_controls(text: str | None):
    if text is None:
        return None
    names = [c.strip() for c in text.split(",") if c.strip()]
    if not names:
        raise InputError([f"--controls {text!r}: give at least one control name."])
    return names


def run(args, scenario: Scenario) -> int:
    if args.cars_open is not None and args.cars_open > scenario.group.cars:
        raise InputError([f"--cars-open {args.cars_open}: at most the group's "
                          f"{scenario.group.cars} cars can be open to an allocation."])
    study = peak_study(scenario, parse_controls(args.controls), window_s=args.window,
                       minutes=args.minutes, warmup_minutes=args.warmup_minutes,
                       replications=args.replications, seed=args.seed, threads=args.threads,
                       cars_open=args.cars_open)
    d = study.to_dict()
    if args.json:
        print(dumps(d))
        return 0
    profile = (f", profile {', '.join(f'{x:g}' for x in d['profile_pct_5min'])} % / 5 min"
               if d["profile_pct_5min"] else "")
    reps = d["controls"][0]["replications"]
    print(f"{d['building']}: peak simulation in time, up-peak, demand "
          f"{d['demand_pct_5min']:g} % of the population per 5 min{profile}")
    print(f"{d['cars']} cars leaving the lobby with {d['departure_load_persons']} persons or "
          f"{d['lobby_dwell_s']:g} s after their first boarding; allocation window "
          f"{d['allocation_window_s']:g} s; {d['cars_open']} of {d['cars']} cars open to an "
          f"allocation; {d['minutes']:g} min measured after a "
          f"{d['warmup_minutes']:g} min warm-up; {reps} replications, seed {d['seed']}")
    print("Every figure is simulated in time (basis: peak), the mean over replications.\n")
    rows = [[label, unit] + [_cell(r[key], dec) for r in d["controls"]]
            for label, unit, key, dec in ROWS]
    print(grid_table(["quantity", "unit"] + [r["control"] for r in d["controls"]], rows,
                     digits=1))
    sat = [r["control"] for r in d["controls"] if r["saturated"]]
    print("\nwait: from arrival until the passenger's car is at the lobby with its doors open "
          "for them; to destination: from arrival until they are out at their floor; HC: "
          "passengers delivered in the measured period.")
    if sat:
        print(f"Saturated (the lobby queue grows through the period): {', '.join(sat)}; "
              f"their waits depend on the period's length.")
    print("\n" + CAUTION)
    return 0
