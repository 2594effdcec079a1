"""`liftsort size`: the cheapest group meeting the service criterion under each control
(peak simulation), and the round-trip screen per rule beside it, as a bound; for one
building file or several, in this process or on a Dask cluster (--workers, --scheduler),
with the candidates tried as tidy tables (--out)."""
from __future__ import annotations

import contextlib

from roundtrip.building import Scenario

from experiments.progress import progress_bar
from experiments.sizing import default_criteria, size_group
from experiments.wording import CAUTION, client_name

from .options import (CARS, LOADS, SPEEDS, building_digests, check_rules_fit, check_runs,
                      check_trials, parse_range, parse_rules)
from .tables import dumps, grid_table


def sizing_plan(scenario: Scenario, args) -> dict:
    """The candidates and rules from the options, every one checked before any work."""
    cars = parse_range(args.cars, "--cars", whole=True, low=1, plausible=CARS)
    loads = parse_range(args.loads, "--loads", whole=True, low=1, plausible=LOADS) \
        if args.loads else [scenario.group.rated_load_persons]
    speeds = parse_range(args.speeds, "--speeds", whole=False, low=0.0, plausible=SPEEDS) \
        if args.speeds else [scenario.group.rated_speed_mps]
    rules = parse_rules(args.rules)
    check_runs(len(cars) * len(loads) * len(speeds), "--cars x --loads x --speeds")
    factor = scenario.group.capacity_factor
    for c in cars:
        check_rules_fit(rules, poisson=not args.fixed, cars=c, cars_open=c,
                        passengers_per_car=factor * max(loads))
    check_trials(args.trials, cars=max(cars), rules=len(rules) + 1,
                 passengers_per_car=factor * max(loads))
    return dict(cars=cars, loads=loads, speeds=speeds, rules=rules)


def service_sizing(scenario: Scenario, args, plan: dict, ex=None,
                   digest: str = "") -> dict | None:
    """The peak sizing (None with --round-trip-only; a note when the traffic is not
    up-peak, which the peak simulation does not model)."""
    from allocation.registry import headline_control
    from roundtrip.building import Traffic
    from roundtrip.classical import is_uppeak

    from experiments.decision import ServiceCriterion
    from experiments.sizing import size_by_service
    if args.round_trip_only:
        return None
    traffic = scenario.traffic or Traffic(args.hc_min or 12.0)
    if args.hc_min is not None:
        from dataclasses import replace as _replace
        traffic = _replace(traffic, arrival_rate_pct_5min=args.hc_min, profile_pct_5min=None)
    if not is_uppeak(traffic):
        return {"skipped": "the peak simulation models up-peak traffic only; this file's "
                           "traffic is a mix, so only the round-trip screen (a bound) is given"}
    dc = args.destination_control or headline_control()
    criterion = ServiceCriterion(args.wait_max, args.wait_p95_max)
    total = len(plan["cars"]) * len(plan["loads"]) * len(plan["speeds"])
    with progress_bar(total, args.quiet or args.json, "sizing, peak simulation",
                      unit="group") as bar:
        from dataclasses import replace
        return size_by_service(replace(scenario, traffic=traffic), dc, criterion, plan["cars"],
                               plan["loads"], plan["speeds"], seed=args.seed,
                               replications=args.replications, cost_weight=args.cost_weight,
                               on_candidate=bar.update, ex=ex, building_file_sha256=digest)


def sizing(scenario: Scenario, args, plan: dict | None = None, ex=None,
           digest: str = "") -> dict:
    """Both searches for one building, their tasks run on the executor ``ex`` (default: in
    process)."""
    plan = sizing_plan(scenario, args) if plan is None else plan
    criteria = default_criteria(scenario, args.interval_max, args.hc_min)
    service = service_sizing(scenario, args, plan, ex, digest)
    total = len(plan["cars"]) * len(plan["loads"]) * len(plan["speeds"])
    with progress_bar(total, args.quiet or args.json, "sizing, round-trip screen") as bar:
        result = size_group(scenario, plan["rules"], criteria, plan["cars"], plan["loads"],
                            plan["speeds"], cars_open=args.cars_open, poisson=not args.fixed,
                            trials=args.trials, ci_target_pct=args.ci_target,
                            max_trials=args.max_trials, seed=args.seed, threads=args.threads,
                            on_candidate=bar.update, ex=ex, building_file_sha256=digest)
    out = {"building": scenario.building.name, "building_file_sha256": digest, **result}
    if service is not None:
        out["service"] = {k: v for k, v in service.items() if k != "tried"}
        out["service_tried"] = service.get("tried", [])
    return out


def _print_service(s: dict) -> None:
    if "skipped" in s:
        print(f"Peak sizing: skipped - {s['skipped']}.")
        return
    c = s["criterion"]
    print(f"Cheapest group meeting the service criterion at {s['demand_pct_5min']:g} % / 5 min "
          f"(simulated in time; average wait <= {c['average_wait_max_s']:g} s, 95th-percentile "
          f"wait <= {c['wait_p95_max_s']:g} s, destination control's time to destination no "
          f"worse than conventional's; upper ends of the 95 % intervals; order: "
          f"{s['cost_order']}):")
    rows = []
    for x in s["designs"]:
        if x["found"]:
            rows.append([client_name(x["control"], with_key=False), x["cars"],
                         x["rated_load_persons"], x["rated_speed_mps"],
                         x["average_waiting_time_s"], x["waiting_time_p95_s"],
                         x["average_time_to_destination_s"], x["handling_capacity_pct_5min"]])
        else:
            rows.append([client_name(x["control"], with_key=False), "none", "", "", "", "", "",
                         ""])
    print(grid_table(["control", "cars", "load [persons]", "speed [m/s]", "wait [s]",
                      "wait p95 [s]", "to destination [s]", "HC [%/5min]"], rows, digits=1))
    saving = s.get("savings")
    if saving and saving["cars_saved"] > 0:
        print(f"- destination control saves {saving['cars_saved']} car(s) (simulated in time)")
    elif saving:
        print(f"- destination control saves no car here (simulated in time; "
              f"{saving['cars_saved']:+d} cars)")
        if (saving["cars_saved"] == 0 and saving.get("installation_destination") is not None
                and saving["installation_destination"] < saving["installation_conventional"]):
            print(f"- with the same cars, destination control's installation is smaller "
                  f"({saving['installation_measure']} {saving['installation_destination']:g} against "
                  f"{saving['installation_conventional']:g})")
    for x in s["designs"]:
        if not x["found"]:
            print(f"- {client_name(x['control'], with_key=False)}: {x['message']}")


def _same(entry: dict, design: dict, name: str) -> bool:
    return design.get("found") and all(entry.get(k) == design.get(k) for k in
                                       (name, "cars", "rated_load_persons", "rated_speed_mps",
                                        "basis"))


def tried_tables(results: list[dict]):
    """The candidates tried, as two tidy tables (pandas DataFrames): the peak sizing's
    (one row per candidate and control) and the round-trip screen's (one row per candidate
    and rule), each row with its building, its file's digest and whether it is the
    design chosen."""
    import pandas as pd
    peak, screen = [], []
    for d in results:
        where = {"building": d["building"], "building_file_sha256": d["building_file_sha256"]}
        designs = d.get("service", {}).get("designs", [])
        for x in d.get("service_tried", []):
            peak.append({**where, **x, "why": "; ".join(x.get("why", [])),
                         "chosen": any(_same(x, y, "control") for y in designs)})
        for x in d["tried"]:
            screen.append({**where, **x,
                           "chosen": any(_same(x, y, "rule") for y in d["designs"])})
    return pd.DataFrame(peak), pd.DataFrame(screen)


def run(args, scenario) -> int:
    from experiments.outputs import output_set, write_atomic
    from experiments.tasks import executor
    scenarios = list(scenario) if isinstance(scenario, (list, tuple)) else [scenario]
    files = args.file if isinstance(args.file, list) else [args.file]
    digests = building_digests(files)
    plans = [sizing_plan(s, args) for s in scenarios]
    written = []
    outs_cm = output_set(args.out, command="size") if args.out else contextlib.nullcontext()
    with outs_cm as outs:
        with executor(args.workers, args.scheduler, args.threads) as ex:
            results = [sizing(s, args, p, ex, d)
                       for s, p, d in zip(scenarios, plans, digests)]
        if outs is not None:
            peak, screen = tried_tables(results)
            whole = results[0] if len(results) == 1 else {"buildings": results}
            files = [("sizing_peak.csv", peak), ("sizing_round_trip.csv", screen)]
            for name, text in [(n, t.to_csv(index=False)) for n, t in files if len(t)] + [
                    ("sizing.json", dumps(whole))]:
                written.append(outs.final_path(write_atomic(outs.folder / name, text)))
    if args.json:
        shown = []
        for d in results:
            out = dict(d)
            out.pop("tried")
            out.pop("service_tried", None)
            shown.append(out)
        print(dumps(shown[0] if len(shown) == 1 else {"buildings": shown}))
        return 0
    for i, d in enumerate(results):
        if i:
            print()
        if len(results) > 1:
            print(f"=== {d['building']} (file SHA-256 {d['building_file_sha256']}...)")
        _print_building(d, args)
    for p in written:
        print(f"wrote {p}")
    print("\n" + CAUTION)
    return 0


def _print_building(d: dict, args) -> None:
    if "service" in d:
        _print_service(d["service"])
        print()
    c = d["criteria"]
    print(f"{d['building']}: round-trip screen (a bound for destination rules, not an answer): "
          f"smallest group with interval <= {c['interval_max_s']:g} s at the "
          f"demand and handling capacity >= {c['hc_min_pct']:g} % / 5 min at design load "
          f"({d['passenger_model']} passenger counts; destination rules with "
          f"{d['cars_open']} car(s) open to allocation"
          f"{' (the default, realisable)' if args.cars_open is None else ''})")
    rows = [[x["rule"], x.get("basis", "conventional"), x["cars"] if x["found"] else "none",
             x["cars_open"], x["rated_load_persons"], x["rated_speed_mps"], x["interval_s"],
             x["handling_capacity_pct_5min"], x["round_trip_time_s"]] for x in d["designs"]]
    print(grid_table(["rule", "basis", "cars", "cars open", "load [persons]", "speed [m/s]",
                      "INT at demand [s]", "HC at design load [%/5min]", "RTT at design [s]"],
                     rows))
    for s in d["savings"]:
        print("- " + s["saving"])
    for x in d["designs"]:
        if not x["found"]:
            print(f"- {x['rule']}: {x['message']}")
