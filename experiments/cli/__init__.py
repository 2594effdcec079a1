"""The `liftsort` command line: parsing and printing, nothing else.

Each command lives in its own module (``experiments/cli/<command>.py``),
imported only when that command runs, so that `liftsort calc` never loads
numba, pandas or seaborn. The commands call the orchestration of
:mod:`experiments` (which never imports this package) and print what it
returns.

Every run ends in one of three ways (the guard in :func:`main`):

* exit status 0 with a result;
* exit status 2 with one paragraph naming what is wrong: an input file or an
  option (the key or option, its value, what is allowed), or the environment
  (an output folder that cannot be written, too little memory);
* exit status 130 with one line after Ctrl-C.

Anything else is a bug: one short message asks for a report (status 1); the
traceback is shown only with ``--debug``. Output sets are written whole or not
at all (:func:`experiments.outputs.output_set`).
"""
from __future__ import annotations

import argparse
import importlib
import os
import sys
import traceback
import warnings

from roundtrip import __version__

from .caches import choose_cache_folders

# Only the standard library is imported above: the rest (numpy with it) loads inside
# main's guard, so that Ctrl-C at any moment after start-up ends in the one line.

EXIT_BAD_INPUT = 2
EXIT_BUG = 1
EXIT_INTERRUPTED = 130


def _rules_help(names: str | None) -> str:
    default = f"default: {names}" if names else "default: the registry's default rules"
    return f"comma-separated allocation rules ({default}; `docs/rules.md` lists them all)"


def _add_file(p: argparse.ArgumentParser) -> None:
    p.add_argument("file", metavar="FILE", help="building input file (TOML); see README.md")


def _add_files(p: argparse.ArgumentParser) -> None:
    p.add_argument("file", metavar="FILE", nargs="+",
                   help="building input file(s) (TOML); see README.md. With several, one run "
                        "covers them all and every table names the building and its file's "
                        "digest")


def _add_cluster(p: argparse.ArgumentParser) -> None:
    """Where the study's tasks run (see experiments/tasks.py); in this process by default."""
    from .options import workers_type
    where = p.add_mutually_exclusive_group()
    where.add_argument("--workers", metavar="N", type=workers_type,
                       help="run the study's tasks on a local Dask cluster of N worker "
                            "processes (1 ... 256; needs pip install 'liftsort[cluster]'); "
                            "the result is the same as in this process")
    where.add_argument("--scheduler", metavar="ADDRESS",
                       help="run the study's tasks on a running Dask scheduler, e.g. "
                            "tcp://HOST:8786 (workers started with `dask worker ADDRESS`, the "
                            "same liftsort version on each); the result is the same as in this "
                            "process")


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
    from .options import ci_type, max_trials_type, seed_type, threads_type, trials_type
    p.add_argument("--trials", metavar="N", type=trials_type,
                   help="run exactly N trials instead of stopping on --ci-target")
    p.add_argument("--ci-target", metavar="PCT", type=ci_type, default=0.5,
                   help="stop when the 95 %% half-width of the round-trip time is at most "
                        "PCT %% of its mean (default 0.5)")
    p.add_argument("--max-trials", metavar="N", type=max_trials_type, default=2_000_000,
                   help="trial cap of the adaptive run (default 2,000,000; never more than the "
                        "memory limit allows: 8 million car trips kept per run)")
    p.add_argument("--seed", metavar="S", type=seed_type, default=2026,
                   help="seed of the random stream; the same seed gives the same numbers "
                        "(default 2026)")
    p.add_argument("--threads", metavar="T", type=threads_type,
                   help="compute threads (default: all cores); results do not depend on it")


def _add_decision_options(p: argparse.ArgumentParser) -> None:
    """The destination control the answer is stated for and the service criterion."""
    from .options import destination_control_type, number
    p.add_argument("--destination-control", metavar="NAME", type=destination_control_type,
                   help="the destination control the decision is stated for: an immediate "
                        "policy or a batch rule (default: least-added-time, declared in "
                        "docs/rules.md)")
    p.add_argument("--wait-max", metavar="S", default=30.0,
                   type=number(0.0, True, "S must be a time > 0 and at most 600 [s]", high=600.0),
                   help="service criterion: the largest average waiting time [s] (default 30, "
                        "common office practice)")
    p.add_argument("--wait-p95-max", metavar="S", default=90.0,
                   type=number(0.0, True, "S must be a time > 0 and at most 1200 [s]",
                               high=1200.0),
                   help="service criterion: the largest 95th-percentile waiting time [s] "
                        "(default 90, common office practice)")


def build_parser(default_rule_names: str | None = None) -> argparse.ArgumentParser:
    """The parser; ``default_rule_names`` (from the registry) only for the help text."""
    from .options import (cars_open_type, hc_type, interval_type, number, passengers_type,
                          whole)
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
    calc.set_defaults(handler="experiments.cli.calc", compiled=False)

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
    cmp_.add_argument("--cars-open", metavar="K", type=cars_open_type,
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
    _add_files(sw)
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
    _add_cluster(sw)
    _add_json(sw)
    sw.set_defaults(handler="experiments.cli.sweep")

    sz = sub.add_parser(
        "size", help="cheapest group meeting the service criterion under each control",
        description="Search lift groups in the order a client pays for them (fewest cars, "
                    "then the smaller installation: rated load x rated speed, or with "
                    "--cost-weight W, rated load + W x speed) for the first one that meets the "
                    "service criterion in the peak simulation (simulated in time; average and "
                    "95th-percentile waiting time, and for destination control a time to "
                    "destination no worse than conventional control's), under conventional "
                    "control and the destination control; a design passes only if the upper "
                    "end of each 95 % interval meets its limit. Then, as a bound, the "
                    "round-trip screen: interval <= 30 s at the demand and handling capacity "
                    ">= the demand (or 12 %) at design load, per rule (common office practice, "
                    "CIBSE Guide D). Up-peak traffic for the peak sizing.")
    _add_files(sz)
    sz.add_argument("--interval-max", metavar="S", type=interval_type,
                    help="largest acceptable interval at the load the demand (--hc-min) sets "
                         "[s] (default 30)")
    sz.add_argument("--hc-min", metavar="PCT", type=hc_type,
                    help="least 5-minute handling capacity [%% of population] (default: the "
                         "file's demand, else 12)")
    sz.add_argument("--cars", metavar="A:B", default="1:10",
                    help="numbers of cars to try, START:STOP or a comma list (default 1:10)")
    sz.add_argument("--loads", metavar="LIST",
                    help="rated loads to try [persons], e.g. 13,16,21 (default: the file's)")
    sz.add_argument("--speeds", metavar="LIST",
                    help="rated speeds to try [m/s], e.g. 1.6,2.5,3.5 (default: the file's)")
    sz.add_argument("--cars-open", metavar="K", type=cars_open_type,
                    help="cars open to each allocation of a destination rule (min(K, cars) per "
                         "candidate; default 2, the realisable value: the car loading at the "
                         "lobby and the next one; every car open is the ideal bound)")
    sz.add_argument("--rules", metavar="LIST", help=rules_help)
    sz.add_argument("--fixed", action="store_true", help="fixed passenger counts (default Poisson)")
    sz.add_argument("--quiet", action="store_true", help="no progress bar")
    sz.add_argument("--cost-weight", metavar="W",
                    type=number(0.0, False, "W must be a weight >= 0 and at most 1000 "
                                "[persons per m/s]", high=1000.0),
                    help="order installations by rated load + W x rated speed instead of "
                         "rated load x rated speed")
    sz.add_argument("--replications", metavar="R", default=10,
                    type=whole(2, "R must be a whole number of replications from 2 to 200",
                               high=200),
                    help="peak-simulation replications per candidate and control (default 10)")
    sz.add_argument("--round-trip-only", action="store_true",
                    help="skip the peak sizing: the round-trip screen only (a bound)")
    sz.add_argument("--out", metavar="DIR",
                    help="also write the candidates tried as tidy tables (sizing_peak.csv, "
                         "sizing_round_trip.csv) and the whole result (sizing.json) into DIR")
    _add_run_options(sz)
    _add_cluster(sz)
    _add_decision_options(sz)
    _add_json(sz)
    sz.set_defaults(handler="experiments.cli.size")

    from .options import number, seed_type, threads_type, whole
    pk = sub.add_parser(
        "peak", help="time-based peak simulation: waiting time and time to destination, per control",
        description="Simulate the group through a peak period passenger by passenger (Poisson "
                    "arrivals, cars leaving when loaded or when their lobby dwell has run), under "
                    "conventional control and destination control (delayed allocation by a "
                    "batch rule, or immediate allocation by a policy), on the same arrivals. "
                    "Up-peak traffic. Figures carry 95 % intervals from independent "
                    "replications.")
    _add_file(pk)
    pk.add_argument("--controls", metavar="LIST",
                    help="comma-separated controls: conventional, a batch rule (delayed "
                         "allocation) or an immediate policy (default: every shipped control; "
                         "`docs/rules.md` lists them)")
    pk.add_argument("--window", metavar="S",
                    type=number(0.0, True, "S must be a window > 0 and at most 120 [s]",
                                high=120.0),
                    help="allocation window of delayed allocation [s] (default 5)")
    pk.add_argument("--minutes", metavar="M",
                    type=number(0.0, True, "M must be a period > 0 and at most 240 [min]",
                                high=240.0),
                    help="the measured period [min] (default 60, or the demand profile's length)")
    pk.add_argument("--warmup-minutes", metavar="W",
                    type=number(0.0, False, "W must be a warm-up from 0 to 120 [min]", high=120.0),
                    default=5.0, help="simulated before the measured period, not measured "
                                      "[min] (default 5)")
    pk.add_argument("--replications", metavar="R",
                    type=whole(2, "R must be a whole number of replications from 2 to 1000",
                               high=1000),
                    help="exactly R replications (default: enough for a 5 %% interval on every "
                         "control's average wait, at most 200)")
    pk.add_argument("--cars-open", metavar="K", type=cars_open_type,
                    help="at most K cars offered to one allocation: an immediate policy sees "
                         "the K cars that leave the lobby soonest, a delayed round the K that "
                         "open first (default: every car; 1 makes every immediate policy "
                         "conventional control)")
    pk.add_argument("--seed", metavar="S", type=seed_type, default=2026,
                    help="seed of the replications' random streams (default 2026)")
    pk.add_argument("--threads", metavar="T", type=threads_type,
                    help="compute threads (default: all cores); results do not depend on it")
    _add_json(pk)
    pk.set_defaults(handler="experiments.cli.peak")

    rep = sub.add_parser(
        "report", help="the whole job as one self-contained HTML report with charts",
        description="Classical calculation, Monte Carlo, every rule, demand and cars-open "
                    "sweeps and sizing, written as DIR/report.html (figures embedded; opens "
                    "offline) beside the charts and sweep.csv.")
    _add_file(rep)
    rep.add_argument("--out", metavar="DIR", required=True, help="output folder")
    rep.add_argument("--quiet", action="store_true", help="no progress bar")
    _add_run_options(rep)
    _add_cluster(rep)
    _add_decision_options(rep)
    _add_json(rep)
    rep.set_defaults(handler="experiments.cli.report")

    demo = sub.add_parser(
        "demo", help="run the main job on the built-in invented demo building",
        description="Run liftsort's main job on the built-in invented demo building "
                    "(Larkspur Exchange) and print the results.")
    demo.add_argument("--out", metavar="DIR", default="liftsort-demo",
                      help="where the report and charts go (default: liftsort-demo)")
    demo.add_argument("--quiet", action="store_true", help="no progress bar")
    _add_run_options(demo)
    _add_decision_options(demo)
    demo.set_defaults(handler="experiments.cli.demo", file=None)
    for command in sub.choices.values():
        _add_debug(command)
    _add_debug(parser)
    parser.commands = dict(sub.choices)          # name -> parser, for help and the tests
    return parser


def _add_debug(p: argparse.ArgumentParser) -> None:
    p.add_argument("--debug", action="store_true", default=argparse.SUPPRESS,
                   help="on an unexpected error, show the traceback (for a bug report)")


def _say(command: str, text: str) -> None:
    name = f"liftsort {command}" if command else "liftsort"
    print(f"{name}: {text}", file=sys.stderr)


def main(argv: list[str] | None = None) -> int:
    """Run one command; returns the exit status (0, 2, 130; 1 for a bug).

    Library warnings (numpy's on a figure that cannot be estimated from too few trials,
    which shows as "-" or null) are not shown, except with ``--debug``.
    """
    argv = sys.argv[1:] if argv is None else list(argv)
    with warnings.catch_warnings():
        if "--debug" not in argv:
            warnings.simplefilter("ignore")
        return _main(argv)


class _NotLoaded(Exception):
    """Stands for InputError until its module is loaded."""


def _shown(value) -> str:
    """Text for a message, control characters escaped (standard library only)."""
    return "".join(c if c.isprintable() or c == " " else repr(c)[1:-1] for c in str(value))


def _main(argv: list[str]) -> int:
    debug = "--debug" in argv
    command = ""
    caches = None
    bad_input = _NotLoaded
    try:
        from roundtrip.inputfile import InputError as bad_input
        from roundtrip.inputfile import load_scenario
        names = None
        if "-h" in argv or "--help" in argv:    # only help pays for the registry's import
            caches = choose_cache_folders()
            _ON_EXIT.append(caches.remove)
            from allocation.registry import default_rules
            names = ",".join(default_rules())
        parser = build_parser(names)
        args = parser.parse_args(argv)
        command = args.command
        if caches is None and getattr(args, "compiled", True):
            caches = choose_cache_folders()
            _ON_EXIT.append(caches.remove)
            if caches.note:
                print(caches.note, file=sys.stderr)
        if isinstance(args.file, list):             # commands that take several files
            scenario = [load_scenario(f) for f in args.file]
        else:
            scenario = load_scenario(args.file) if args.file is not None else None
        module = importlib.import_module(args.handler)
        return module.run(args, scenario)
    except bad_input as exc:
        _say(command, f"error: {exc}")
        return EXIT_BAD_INPUT
    except KeyboardInterrupt:
        _say(command, "interrupted; no partial output is left.")
        return EXIT_INTERRUPTED
    except BrokenPipeError:
        _quiet_stdout()
        return 0
    except MemoryError:
        _say(command, "error: not enough memory for this run; give fewer --trials, a larger "
                      "--ci-target or a smaller building, or free some memory.")
        return EXIT_BAD_INPUT
    except OSError as exc:
        where = f"{_shown(exc.filename)}: " if getattr(exc, "filename", None) else ""
        _say(command, f"error: {where}{_shown(exc.strerror or exc)}.")
        return EXIT_BAD_INPUT
    except Exception as exc:                      # a bug: say so briefly, ask for a report
        tasks = sys.modules.get("experiments.tasks")
        if tasks is not None and isinstance(exc, tasks.TaskFailed):
            if debug:
                traceback.print_exception(exc.error)
            _say(command, f"error: {_shown(exc)}. No output was written.")
            return EXIT_BUG
        if debug:
            traceback.print_exc()
        hint = "" if debug else " (run it again with --debug to see the traceback)"
        _say(command, f"internal error: {type(exc).__name__}: {_shown(exc)}. This is a bug "
                      f"in liftsort; please report it with the input file and the command "
                      f"line{hint}.")
        return EXIT_BUG
    finally:
        if caches is not None:
            caches.remove()
            if caches.remove in _ON_EXIT:
                _ON_EXIT.remove(caches.remove)


def entry() -> None:
    """The `liftsort` program: :func:`main`, then exit with its status.

    As a program (not when :func:`main` is called from Python), Ctrl-C is answered at
    once by :func:`_interrupted`: one line, the unfinished output set and the temporary
    cache removed, exit status 130. Python would otherwise turn it into an exception
    wherever the program happens to be, and where it cannot be raised (a callback of
    numba's compiler, a finaliser) it prints a stray "Exception ignored" report instead.
    """
    import signal
    signal.signal(signal.SIGINT, _interrupted)
    if "--debug" not in sys.argv:
        # helper processes (multiprocessing's resource tracker among them) inherit it
        os.environ.setdefault("PYTHONWARNINGS", "ignore")
    status = main()
    try:
        sys.stdout.flush()
    except (BrokenPipeError, ValueError, OSError):
        _quiet_stdout()
    signal.signal(signal.SIGINT, signal.SIG_IGN)     # the command has ended
    sys.exit(status)


def _interrupted(signum, frame) -> None:
    """Ctrl-C in the program: say so in one line, leave nothing unfinished, exit 130."""
    command = next((a for a in sys.argv[1:] if not a.startswith("-")), "")
    try:
        sys.stdout.flush()
    except (OSError, ValueError):
        pass
    _say(command if command.isidentifier() else "", "interrupted; no partial output is left.")
    for remove in list(_ON_EXIT):
        try:
            remove()
        except Exception:                             # nothing more can be done here
            pass
    if "experiments.outputs" in sys.modules:
        sys.modules["experiments.outputs"].remove_unfinished_sets()
    if "multiprocessing" in sys.modules:                # the chart process of a report
        for child in sys.modules["multiprocessing"].active_children():
            child.terminate()
            child.join(2)
    os._exit(EXIT_INTERRUPTED)


#: What the program removes when interrupted (the temporary cache folder).
_ON_EXIT: list = []


def _quiet_stdout() -> None:
    """After a closed pipe, send what is left of stdout nowhere (no second error at exit)."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
    except (OSError, ValueError, AttributeError):
        pass
