"""The `liftsort` command line: parsing and printing, nothing else.

Each command lives in its own module (``experiments/cli/<command>.py``),
imported only when that command runs, so that `liftsort calc` never loads
numba, pandas or seaborn. The commands call the orchestration of
:mod:`experiments` (which never imports this package) and print what it
returns. Errors in input files or options print one paragraph and exit with
status 2, without a traceback.
"""
from __future__ import annotations

import argparse
import importlib
import sys

from roundtrip import __version__
from roundtrip.inputfile import InputError, load_scenario

from .options import ci_type, number, passengers_type, seed_type, trials_type, whole

EXIT_BAD_INPUT = 2


def _rules_help(names: str | None) -> str:
    default = f"default: {names}" if names else "default: the registry's default rules"
    return f"comma-separated allocation rules ({default}; `docs/rules.md` lists them all)"


def _add_file(p: argparse.ArgumentParser) -> None:
    p.add_argument("file", metavar="FILE", help="building input file (TOML); see README.md")


def _add_json(p: argparse.ArgumentParser) -> None:
    p.add_argument("--json", action="store_true",
                   help="print exactly one JSON object on stdout instead of a table")


def _add_counts(p: argparse.ArgumentParser) -> None:
    counts = p.add_mutually_exclusive_group()
    counts.add_argument("--fixed", action="store_true",
                        help="fixed passenger counts (a real P mixes the two nearest integers)")
    counts.add_argument("--poisson", action="store_true",
                        help="Poisson passenger counts with mean P (the default)")


def _add_run_options(p: argparse.ArgumentParser) -> None:
    p.add_argument("--trials", metavar="N", type=trials_type,
                   help="run exactly N trials instead of stopping on --ci-target")
    p.add_argument("--ci-target", metavar="PCT", type=ci_type, default=0.5,
                   help="stop when the 95 %% half-width of the round-trip time is at most "
                        "PCT %% of its mean (default 0.5)")
    p.add_argument("--max-trials", metavar="N", type=trials_type, default=2_000_000,
                   help="trial cap of the adaptive run (default 2,000,000)")
    p.add_argument("--seed", metavar="S", type=seed_type, default=2026,
                   help="seed of the random stream; the same seed gives the same numbers "
                        "(default 2026)")
    p.add_argument("--threads", metavar="T", type=whole(1, "T must be a whole number of threads >= 1"),
                   help="compute threads (default: all cores); results do not depend on it")


def build_parser(default_rule_names: str | None = None) -> argparse.ArgumentParser:
    """The parser; ``default_rule_names`` (from the registry) only for the help text."""
    rules_help = _rules_help(default_rule_names)
    parser = argparse.ArgumentParser(
        prog="liftsort",
        description="Lift-traffic planning estimates: the classical up-peak calculation, "
                    "Monte Carlo round trips, and conventional against destination-grouped "
                    "allocation. Results are planning estimates; final design must be "
                    "checked by a qualified lift engineer.",
        epilog="Units: SI throughout - lengths in m, times in s, speeds in m/s, "
               "accelerations in m/s^2, jerks in m/s^3, loads in persons; demand and "
               "handling capacity in % of the building population per 5 minutes. "
               "`liftsort COMMAND --help` gives every option with its unit.")
    parser.add_argument("--version", action="version", version=f"liftsort {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", required=True)

    calc = sub.add_parser(
        "calc", help="classical round-trip time, interval and handling capacity (any traffic mix)",
        description="Classical calculation: the up-peak formulae of ISO 8100-32 / CIBSE Guide D "
                    "for up-peak traffic, the general analysis (expected up and down stops, "
                    "highest and lowest reversal floors) for any other traffic mix. With "
                    "--passengers, at that load; otherwise in demand mode, at the load that "
                    "carries traffic.arrival_rate_pct_5min. Passenger counts are Poisson (arrivals "
                    "at random over each car's interval) unless --fixed.")
    _add_file(calc)
    calc.add_argument("--passengers", metavar="P", type=passengers_type,
                      help="passengers per trip [persons], a real number >= 0, at most what a "
                           "car can carry (given-load mode)")
    counts = calc.add_mutually_exclusive_group()
    counts.add_argument("--fixed", action="store_true",
                        help="fixed passenger counts: the ISO 8100-32 forms of S and H")
    counts.add_argument("--poisson", action="store_true",
                        help="Poisson passenger counts with mean P (the default)")
    _add_json(calc)
    calc.set_defaults(handler="experiments.cli.calc")

    sim = sub.add_parser(
        "simulate", help="Monte Carlo round trips of one car, with 95 %% confidence intervals",
        description="Monte Carlo simulation of single round trips on the real floor levels with "
                    "ideal jerk-limited flights, any traffic mix, and rated-load limits. With "
                    "--passengers, at that mean load; otherwise at the load the demand sets "
                    "(fixed point P = lambda RTT / cars).")
    _add_file(sim)
    sim.add_argument("--passengers", metavar="P", type=passengers_type,
                     help="mean passengers offered per trip [persons], >= 0")
    _add_counts(sim)
    _add_run_options(sim)
    _add_json(sim)
    sim.set_defaults(handler="experiments.cli.simulate")

    cmp_ = sub.add_parser(
        "compare", help="compare allocation rules (conventional against destination grouping)",
        description="Compare allocation rules on the very same passenger batches (common random "
                    "numbers). A trial is one round of the group, each car's passengers arriving "
                    "over its interval (cars x P on average); gains are against `random` "
                    "(conventional control) with paired 95 % intervals.")
    _add_file(cmp_)
    cmp_.add_argument("--rules", metavar="LIST", help=rules_help)
    cmp_.add_argument("--cars-open", metavar="K", type=whole(1, "K must be a whole number of cars >= 1"),
                      help="cars open to allocation at once, 1 ... cars (default: all cars)")
    cmp_.add_argument("--passengers", metavar="P", type=passengers_type,
                      help="mean passengers per car per round [persons] (default: the demand's "
                           "Monte Carlo fixed point under conventional control)")
    _add_counts(cmp_)
    _add_run_options(cmp_)
    _add_json(cmp_)
    cmp_.set_defaults(handler="experiments.cli.compare")

    sw = sub.add_parser(
        "sweep", help="every rule across a range of demand: one tidy CSV and charts",
        description="Sweep the demand (and optionally cars and cars open to allocation) and "
                    "compare the rules at every point on common passengers. Writes sweep.csv "
                    "and the charts into --out.")
    _add_file(sw)
    sw.add_argument("--arrival", metavar="A:B:STEP", required=True,
                    help="demand points [%% of population per 5 min], START:STOP:STEP (STOP "
                         "included) or a comma list, e.g. 6:20:1")
    sw.add_argument("--cars", metavar="LIST",
                    help="numbers of cars, a comma list or START:STOP (default: the file's)")
    sw.add_argument("--cars-open", metavar="LIST",
                    help="cars open to allocation, a comma list (default: all cars); values "
                         "above a group's cars are skipped for that group")
    sw.add_argument("--rules", metavar="LIST", help=rules_help)
    sw.add_argument("--out", metavar="DIR", default="liftsort-out",
                    help="output folder for sweep.csv and the charts (default: liftsort-out)")
    sw.add_argument("--fixed", action="store_true", help="fixed passenger counts (default Poisson)")
    sw.add_argument("--no-charts", action="store_true", help="write the CSV only")
    sw.add_argument("--quiet", action="store_true", help="no progress bar")
    _add_run_options(sw)
    _add_json(sw)
    sw.set_defaults(handler="experiments.cli.sweep")

    sz = sub.add_parser(
        "size", help="smallest group meeting interval and handling-capacity criteria, per rule",
        description="Search lift groups, fewest cars first, then smallest car, then slowest "
                    "speed, for the smallest one whose interval at the demand and 5-minute "
                    "handling capacity at design load meet the criteria under each rule, and "
                    "say what destination control saves. Default criteria: interval <= 30 s "
                    "and handling capacity >= the file's demand (or 12 %), common office "
                    "practice (CIBSE Guide D).")
    _add_file(sz)
    sz.add_argument("--interval-max", metavar="S", type=number(0.0, True, "S must be > 0 [s]"),
                    help="largest acceptable interval at the load the demand (--hc-min) sets "
                         "[s] (default 30)")
    sz.add_argument("--hc-min", metavar="PCT", type=number(0.0, True, "PCT must be > 0 [%]"),
                    help="least 5-minute handling capacity [%% of population] (default: the "
                         "file's demand, else 12)")
    sz.add_argument("--cars", metavar="A:B", default="1:10",
                    help="numbers of cars to try, START:STOP or a comma list (default 1:10)")
    sz.add_argument("--loads", metavar="LIST",
                    help="rated loads to try [persons], e.g. 13,16,21 (default: the file's)")
    sz.add_argument("--speeds", metavar="LIST",
                    help="rated speeds to try [m/s], e.g. 1.6,2.5,3.5 (default: the file's)")
    sz.add_argument("--cars-open", metavar="K", type=whole(1, "K must be a whole number of cars >= 1"),
                    help="cars open to each allocation of a destination rule (min(K, cars) per "
                         "candidate; default 2, the realisable value: the car loading at the "
                         "lobby and the next one; every car open is the ideal bound)")
    sz.add_argument("--rules", metavar="LIST", help=rules_help)
    sz.add_argument("--fixed", action="store_true", help="fixed passenger counts (default Poisson)")
    sz.add_argument("--quiet", action="store_true", help="no progress bar")
    _add_run_options(sz)
    _add_json(sz)
    sz.set_defaults(handler="experiments.cli.size")

    rep = sub.add_parser(
        "report", help="the whole job as one self-contained HTML report with charts",
        description="Classical calculation, Monte Carlo, every rule, demand and cars-open "
                    "sweeps and sizing, written as DIR/report.html (figures embedded; opens "
                    "offline) beside the charts and sweep.csv.")
    _add_file(rep)
    rep.add_argument("--out", metavar="DIR", required=True, help="output folder")
    rep.add_argument("--quiet", action="store_true", help="no progress bar")
    _add_run_options(rep)
    _add_json(rep)
    rep.set_defaults(handler="experiments.cli.report")

    demo = sub.add_parser(
        "demo", help="run the main job on the built-in invented demo building",
        description="Run liftsort's main job on the built-in invented demo building "
                    "(Larkspur Exchange) and print the results.")
    demo.add_argument("--out", metavar="DIR", default="liftsort-demo",
                      help="where the report and charts go (default: liftsort-demo)")
    demo.add_argument("--seed", metavar="S", type=seed_type, default=2026,
                      help="seed of the random stream (default 2026)")
    demo.set_defaults(handler="experiments.cli.demo", file=None)
    return parser


def main(argv: list[str] | None = None) -> int:
    argv = sys.argv[1:] if argv is None else list(argv)
    names = None
    if "-h" in argv or "--help" in argv:        # only help pays for the registry's import
        from allocation.registry import default_rules
        names = ",".join(default_rules())
    parser = build_parser(names)
    args = parser.parse_args(argv)
    try:
        scenario = load_scenario(args.file) if args.file is not None else None
        module = importlib.import_module(args.handler)
        return module.run(args, scenario)
    except InputError as exc:
        print(f"liftsort {args.command}: error: {exc}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except BrokenPipeError:
        return 0
