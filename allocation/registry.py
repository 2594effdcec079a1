"""The registry of allocation rules: one entry per rule, registered once.

A rule is a plain function with the fixed signature::

    rule(origins, destinations, cars_open, car_limit, params, scratch, car_out) -> None

origins, destinations : int64 arrays, one entry per passenger of the batch, in
    arrival order (floor 0 is the lobby)
cars_open : int, the cars open to this batch, numbered 0 ... cars_open - 1
car_limit : int, the most passengers one car may take from this batch [persons]:
    the rated load, or the car's equal share ceil(n / cars_open) of the batch
    when that is smaller, so that every rule compares at the same car load
params : float64 array, the rule's own table made once per run by its
    ``prepare`` hook (zeros when the rule has none)
scratch : int64 array, working space the rule may overwrite, at least
    :func:`scratch_size` (n, cars_open) entries (so that a rule inside the kernel
    need not allocate memory for every batch)
car_out : int64 array, written by the rule: each passenger's car, or -1 when
    no car can take them

The engine only gives a rule a batch that fits (at most cars_open x rated
load passengers; later arrivals beyond that are left behind in arrival order),
so every passenger can be placed and -1 is for rules that choose to refuse. The function body is numba-compatible
Python: :func:`register` compiles it once (numba ``cfunc`` with this fixed
signature, cached on disk) so that the Monte Carlo kernel calls it, and keeps
the plain function for tests and diagrams.
"""
from __future__ import annotations

import difflib
import functools
from dataclasses import dataclass
from typing import Callable

import numpy as np

RULE_SIGNATURE_TEXT = ("void(int64[::1], int64[::1], int64, int64, float64[::1], int64[::1], "
                       "int64[::1])")


@dataclass(frozen=True)
class Rule:
    """A registered allocation rule.

    Attributes
    ----------
    name : str
        The rule's name on the command line.
    summary : str
        Two plain sentences for a client: what it does and why.
    source : str
        Its source or rationale.
    function : callable
        The plain Python function (runs anywhere numpy runs).
    compiled : object
        The same function compiled for the Monte Carlo kernel (on first use,
        from numba's on-disk cache when it is warm).
    prepare : callable or None
        ``prepare(building, group, cars_open, passengers_per_car) -> float64 array``.
    max_batch : int or None
        Largest batch the rule accepts (exhaustive rules), None for any.
    """

    name: str
    summary: str
    source: str
    function: Callable
    prepare: Callable | None = None
    max_batch: int | None = None

    @functools.cached_property
    def compiled(self):
        return _compile(self.function)

    def params(self, building, group, cars_open: int, passengers_per_car: float) -> np.ndarray:
        if self.prepare is None:
            return np.zeros(1)
        return np.ascontiguousarray(self.prepare(building, group, cars_open, passengers_per_car),
                                    dtype=np.float64)

    def allocate(self, origins, destinations, cars_open: int, car_limit: int,
                 params: np.ndarray | None = None) -> np.ndarray:
        """Run the plain function on one batch; returns each passenger's car (or -1)."""
        o = np.ascontiguousarray(origins, dtype=np.int64)
        d = np.ascontiguousarray(destinations, dtype=np.int64)
        out = np.full(o.size, -1, dtype=np.int64)
        p = np.zeros(1) if params is None else np.ascontiguousarray(params, dtype=np.float64)
        scratch = np.zeros(scratch_size(o.size, int(cars_open)), dtype=np.int64)
        self.function(o, d, int(cars_open), int(car_limit), p, scratch, out)
        return out


RULES: dict[str, Rule] = {}


def _compile(function: Callable):
    import numba
    if numba.config.DISABLE_JIT:
        return function
    from numba import cfunc, types
    sig = types.void(types.int64[::1], types.int64[::1], types.int64, types.int64,
                     types.float64[::1], types.int64[::1], types.int64[::1])
    return cfunc(sig, cache=True)(function)


def register(name: str, *, summary: str, source: str, prepare: Callable | None = None,
             max_batch: int | None = None):
    """Decorator: register ``function`` as the allocation rule ``name``."""
    def wrap(function: Callable) -> Callable:
        if name in RULES:
            raise ValueError(f"allocation rule {name!r} is registered twice")
        RULES[name] = Rule(name, summary, source, function, prepare, max_batch)
        return function
    return wrap


def scratch_size(batch: int, cars_open: int) -> int:
    """Entries of the working space a rule is given: 4 n + 4 cars + 2 x 64 + 2."""
    from roundtrip._group_kernel import RULE_SCRATCH_FIXED
    return 4 * batch + 4 * cars_open + RULE_SCRATCH_FIXED


def car_limit(batch: int, cars_open: int, rated_load_persons: int) -> int:
    """The per-car limit the engine gives a rule: min(rated load, ceil(batch / cars open))."""
    return min(rated_load_persons, -(-batch // cars_open))


def get_rule(name: str) -> Rule:
    """The rule called ``name``; a ValueError names the choices and the nearest one."""
    if name not in RULES:
        near = difflib.get_close_matches(name, list(RULES), n=1, cutoff=0.5)
        hint = f"; did you mean '{near[0]}'?" if near else ""
        raise ValueError(f"rule = {name!r}: not a known allocation rule{hint} "
                         f"(choices: {', '.join(RULES)})")
    return RULES[name]


def rule_names() -> list[str]:
    return list(RULES)


# Importing the rule modules registers them, in the order shown to users.
from . import conventional, grouped, sectors, fewest_stops, exhaustive, round_robin  # noqa: E402,F401
