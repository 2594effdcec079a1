"""The registry of allocation rules and policies: one entry each, registered once.

A batch rule registers with :func:`register`, an immediate policy with
:func:`register_policy`; the function signatures are those of
:mod:`allocation.contract`. The registry drives the command line's choices,
the documentation table (``docs/rules.md``) and the tests, and it declares,
once, which rule is the conventional baseline and which rules run by default
(flags on the entry, never lists spelled out elsewhere).

Each function is compiled once, on first use, into a ``numba.cfunc`` (cached
on disk) so that one compiled engine kernel serves every rule; the plain
function stays available for tests and diagrams (:meth:`Rule.allocate`,
:meth:`Policy.choose`).
"""
from __future__ import annotations

import difflib
import functools
import hashlib
import importlib
import marshal
import re
from dataclasses import dataclass
from typing import Callable, NamedTuple

import numpy as np

from roundtrip.schedule import TripTiming, trip_timing

from .contract import CAR_VIEW, car_limit, empty_cars, scratch_size

__all__ = ["Rule", "Policy", "RuleParams", "RULES", "POLICIES", "register", "register_policy",
           "get_rule", "get_policy", "rule_names", "policy_names", "baseline_rule",
           "default_rules", "peak_controls", "headline_control", "car_limit", "scratch_size"]


class RuleParams(NamedTuple):
    """What a rule is given besides the batch and the cars: its table and the timing."""

    table: np.ndarray          # int64, rows 0 ... cars (row k for k cars open)
    timing: TripTiming


def _digest(function: Callable) -> str:
    """A short digest of a rule's code and of the sources it may call (every module of
    ``allocation`` and ``roundtrip``), so that an edited rule, or an edited function it
    calls, gets a fresh cache entry: numba's disk cache checks only the file of the
    function it compiles, and would otherwise run a rule with a stale callee."""
    h = hashlib.sha1(marshal.dumps(function.__code__))
    h.update(_package_sources())
    return h.hexdigest()[:12]


@functools.lru_cache(maxsize=1)
def _package_sources() -> bytes:
    """The digest of the source files of ``allocation`` and ``roundtrip`` (once a process)."""
    from pathlib import Path
    h = hashlib.sha1()
    root = Path(__file__).resolve().parent.parent
    for package in ("allocation", "roundtrip"):
        for path in sorted((root / package).glob("*.py")):
            h.update(path.name.encode())
            h.update(path.read_bytes())
    return h.digest()


def _table(prepare, building, group, sizes, passengers_per_car) -> np.ndarray:
    """Row k: the rule's prepared table for k cars open (the sizes a run uses)."""
    rows = {k: np.asarray(prepare(building, group, k, passengers_per_car), dtype=np.int64)
            for k in sorted(set(int(k) for k in sizes))} if prepare is not None else {}
    width = max([r.size for r in rows.values()] + [1])
    table = np.zeros((max(int(k) for k in sizes) + 1 if len(sizes) else 1, width), dtype=np.int64)
    for k, r in rows.items():
        table[k, :r.size] = r
    return table


@dataclass(frozen=True)
class Rule:
    """A registered batch rule.

    Attributes
    ----------
    name : str
        The rule's name on the command line.
    summary : str
        Two plain sentences for a client: what it does and why.
    source : str
        Its source or rationale.
    function : callable
        The plain Python function for one batch (runs anywhere numpy runs).
    prepare : callable or None
        ``prepare(building, group, cars_open, passengers_per_car) -> int64 array``:
        the rule's table for ``cars_open`` cars, made once per run.
    max_batch : int or None
        Largest batch the rule accepts (exhaustive rules), None for any.
    baseline : bool
        The conventional baseline every gain is measured against (one rule).
    default : bool
        Run by default by the round-trip commands.
    peak : bool
        Offered by default as a delayed-allocation control of the peak simulation.
    allocates : bool
        The rule allocates arrays (an exhaustive search); every other rule works in
        the scratch it is given and is compiled without the reference-counting
        runtime (see :func:`_compiled`).
    """

    name: str
    summary: str
    source: str
    function: Callable
    prepare: Callable | None = None
    max_batch: int | None = None
    baseline: bool = False
    default: bool = False
    peak: bool = False
    allocates: bool = False
    kind = "batch rule"

    @functools.cached_property
    def compiled(self):
        """The compiled batch driver: many batches per call (see the contract)."""
        return _compile_batch_rule(self.name, self.function, self.allocates)

    def table(self, building, group, sizes, passengers_per_car: float) -> np.ndarray:
        """The rule's table with a row for each number of cars open in ``sizes``."""
        return _table(self.prepare, building, group, list(sizes), passengers_per_car)

    def params(self, building, group, cars_open: int, passengers_per_car: float) -> RuleParams:
        """Table (row ``cars_open``) and timing for plain calls of :meth:`allocate`."""
        return RuleParams(self.table(building, group, [cars_open], passengers_per_car),
                          trip_timing(building, group))

    def allocate(self, origins, destinations, cars_open: int, car_limit: int | None = None,
                 params: RuleParams | None = None, cars: np.ndarray | None = None) -> np.ndarray:
        """Run the plain function on one batch; returns each passenger's car (or -1).

        The cars are ``cars`` (a :data:`~allocation.contract.CAR_VIEW` array), or
        ``cars_open`` empty cars each with room ``car_limit``.
        """
        o = np.ascontiguousarray(origins, dtype=np.int64).reshape(-1)
        d = np.ascontiguousarray(destinations, dtype=np.int64).reshape(-1)
        if cars is None:
            cars = empty_cars(cars_open, o.size if car_limit is None else car_limit)
        k = cars.shape[0]
        if params is None:
            params = RuleParams(np.zeros((k + 1, 1), dtype=np.int64), _NO_TIMING)
        out = np.full(o.size, -1, dtype=np.int64)
        scratch = np.zeros(scratch_size(o.size, k), dtype=np.int64)
        self.function(o, d, cars, params.timing, params.table, scratch, out)
        return out


@dataclass(frozen=True)
class Policy:
    """A registered immediate policy (see :mod:`allocation.contract`)."""

    name: str
    summary: str
    source: str
    function: Callable
    prepare: Callable | None = None
    peak: bool = True
    headline: bool = False
    kind = "immediate policy"
    max_batch = None

    @functools.cached_property
    def compiled(self):
        return _compile_policy(self.function)

    def table(self, building, group, sizes, passengers_per_car: float) -> np.ndarray:
        return _table(self.prepare, building, group, list(sizes), passengers_per_car)

    def choose(self, origin: int, destination: int, cars: np.ndarray,
               timing: TripTiming, table: np.ndarray | None = None) -> int:
        """Run the plain function for one passenger; returns their car (or -1)."""
        t = np.zeros((cars.shape[0] + 1, 1), dtype=np.int64) if table is None else table
        return int(self.function(int(origin), int(destination), cars, timing, t))


_NO_TIMING = TripTiming(np.zeros((1, 1)), 0.0, 0.0, 0.0, 0.0, 1 << 30)

RULES: dict[str, Rule] = {}
POLICIES: dict[str, Policy] = {}


def _compiled(signature, function: Callable, allocates: bool):
    """``function`` as a ``numba.cfunc`` of ``signature``, cached on disk.

    A rule that allocates nothing is compiled without numba's reference-counting
    runtime: the compiler then refuses any allocation in it (so a rule can keep
    nothing beyond the call), and the slices it takes of the engine's arrays cost
    no atomic reference counts, which would otherwise be a sixth of a batch's time
    (``python -m experiments.bench``); see :mod:`roundtrip.compile_options`.
    """
    from numba import cfunc

    from roundtrip.compile_options import WITHOUT_RUNTIME
    if allocates:
        return cfunc(signature, cache=True)(function)
    return cfunc(signature, cache=True, **WITHOUT_RUNTIME)(function)


def _batch_driver(batches, timing, table, scratch, car_out):  # pragma: no mutate block
    """Many batches in one call: the rule (the global ``_rule_body`` of each driver's own
    namespace, see :func:`_compile_batch_rule`) on each batch in turn. Kept out of
    mutation testing (the pragma): its code object is reused with new globals, which a
    mutant's wrapper (a closure) would not allow."""
    offsets = batches.offsets
    for b in range(offsets.shape[0] - 1):
        s = offsets[b]
        e = offsets[b + 1]
        _rule_body(batches.origins[s:e], batches.destinations[s:e],  # noqa: F821
                   batches.cars[batches.car_start[b]:batches.car_stop[b]], timing, table, scratch,
                   car_out[s:e])


def _compile_batch_rule(name: str, function: Callable, allocates: bool):
    """The rule's batch driver, compiled (or plain under NUMBA_DISABLE_JIT).

    Each driver is the function :func:`_batch_driver` with its own globals, in which
    ``_rule_body`` is the rule: not a closure, so that numba's disk cache finds it again
    in the next process (a closure over a compiled function gets a new cache key in
    every process). Its name carries a digest of the rule's code: one cache entry per
    rule and per version of its code.
    """
    import types

    import numba
    from numba import njit

    from .contract import BATCH_DRIVER_SIGNATURE
    inner = function if numba.config.DISABLE_JIT else njit(inline="always", cache=True)(function)
    label = f"batch_rule_{re.sub(r'[^0-9a-zA-Z]', '_', name)}_{_digest(function)}"
    driver = types.FunctionType(_batch_driver.__code__,
                                {**_batch_driver.__globals__, "_rule_body": inner}, label)
    driver.__qualname__ = label
    if numba.config.DISABLE_JIT:
        return driver
    return _compiled(BATCH_DRIVER_SIGNATURE, driver, allocates)


def _compile_policy(function: Callable):
    import numba
    if numba.config.DISABLE_JIT:
        return function

    from .contract import POLICY_SIGNATURE
    return _compiled(POLICY_SIGNATURE, function, False)


def _check_new(name: str) -> None:
    if name in RULES or name in POLICIES or name == "conventional":
        raise ValueError(f"allocation rule {name!r} is registered twice")


def register(name: str, *, summary: str, source: str, prepare: Callable | None = None,
             max_batch: int | None = None, baseline: bool = False, default: bool = False,
             peak: bool = False, allocates: bool = False):
    """Decorator: register ``function`` as the batch rule ``name``."""
    def wrap(function: Callable) -> Callable:
        _check_new(name)
        if baseline and any(r.baseline for r in RULES.values()):
            raise ValueError(f"allocation rule {name!r}: a baseline rule is registered already")
        RULES[name] = Rule(name, summary, source, function, prepare, max_batch, baseline,
                           default, peak, allocates)
        return function
    return wrap


def register_policy(name: str, *, summary: str, source: str, prepare: Callable | None = None,
                    peak: bool = True, headline: bool = False):
    """Decorator: register ``function`` as the immediate policy ``name``; ``headline``: the
    destination control the decision is stated for unless the user names another (one
    policy)."""
    def wrap(function: Callable) -> Callable:
        _check_new(name)
        if headline and any(p.headline for p in POLICIES.values()):
            raise ValueError(f"allocation policy {name!r}: a headline policy is registered "
                             f"already")
        POLICIES[name] = Policy(name, summary, source, function, prepare, peak, headline)
        return function
    return wrap


def _unknown(name: str, kind: str, choices) -> ValueError:
    near = difflib.get_close_matches(name, list(choices), n=1, cutoff=0.5)
    hint = f"; did you mean '{near[0]}'?" if near else ""
    return ValueError(f"{name!r} is not a known {kind}{hint} (choices: {', '.join(choices)})")


def get_rule(name: str) -> Rule:
    """The batch rule called ``name``; a ValueError names the choices and the nearest one."""
    if name not in RULES:
        raise _unknown(name, "allocation rule", RULES)
    return RULES[name]


def get_policy(name: str) -> Policy:
    """The immediate policy called ``name``."""
    if name not in POLICIES:
        raise _unknown(name, "immediate allocation policy", POLICIES)
    return POLICIES[name]


def rule_names() -> list[str]:
    return list(RULES)


def policy_names() -> list[str]:
    return list(POLICIES)


def baseline_rule() -> str:
    """The name of the conventional baseline rule."""
    return next(r.name for r in RULES.values() if r.baseline)


def default_rules() -> list[str]:
    """The rules the round-trip commands run by default, the baseline first."""
    base = baseline_rule()
    return [base] + [r.name for r in RULES.values() if r.default and r.name != base]


def headline_control() -> str:
    """The destination control the decision is stated for by default (declared before any
    result is seen, never the best of several after the fact)."""
    return next(p.name for p in POLICIES.values() if p.headline)


def peak_controls() -> list[str]:
    """The controls the peak simulation runs by default: conventional control, then the
    batch rules for delayed allocation, then the immediate policies."""
    return (["conventional"] + [r.name for r in RULES.values() if r.peak]
            + [p.name for p in POLICIES.values() if p.peak])


# Importing the rule modules registers them, in the order shown to users (each module is
# named after its rule; imported by name so that `random` and `sorted` shadow nothing here).
for _module in ("random", "sorted", "sectors", "fewest_stops", "best", "round_robin",
                "earliest_leaving", "same_floor_first", "least_added_time"):
    importlib.import_module(f"allocation.{_module}")
