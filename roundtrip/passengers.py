"""Passenger demand: the origin-destination matrix, and batches sampled from it.

The traffic mix shares (incoming c_in, outgoing c_out, interfloor c_if) weight
three origin-destination (OD) patterns on floors 0 (lobby) ... N:

    incoming    p(0 -> k) = U_k / U
    outgoing    p(k -> 0) = U_k / U
    interfloor  p(i -> k) = U_i U_k / sum_{a != b} U_a U_b      (i != k, both >= 1)

    p = c_in incoming + c_out outgoing + c_if interfloor

Passengers are drawn independently from p with one uniform each by the alias
method ("A linear algorithm for generating random numbers with a given
distribution", IEEE Transactions on Software Engineering, 1991).

Passengers per trip are Poisson with a mean P, or fixed: an integer P, and for
a real P the two nearest integers mixed so that the mean is P.
"""
from __future__ import annotations

import math
from typing import NamedTuple

import numpy as np

from .building import Building, Traffic

UPPEAK = Traffic(arrival_rate_pct_5min=1.0, incoming=1.0, outgoing=0.0, interfloor=0.0)


def od_matrix(building: Building, traffic: Traffic | None = None) -> np.ndarray:
    """Origin-destination probabilities p[origin, destination], floors 0 ... N.

    ``traffic`` gives the mix shares; None means up-peak (all incoming).
    """
    t = UPPEAK if traffic is None else traffic
    u = np.asarray(building.populations, dtype=float)
    w = u / u.sum()
    n = building.floors + 1
    p = np.zeros((n, n))
    p[0, 1:] += t.incoming * w
    p[1:, 0] += t.outgoing * w
    if t.interfloor > 0:
        inter = np.outer(u, u)
        np.fill_diagonal(inter, 0.0)
        if inter.sum() <= 0:
            raise ValueError("traffic.interfloor = "
                             f"{t.interfloor:g}: interfloor traffic needs at least two populated floors")
        p[1:, 1:] += t.interfloor * inter / inter.sum()
    return p / p.sum()


def alias_table(probabilities) -> tuple[np.ndarray, np.ndarray]:
    """Alias table of a discrete distribution.

    The alias method of "An efficient method for generating discrete random
    variables with general distributions" (ACM Transactions on Mathematical
    Software, 1977), built by the stable small/large-list construction of
    "A linear algorithm for generating random numbers with a given
    distribution" (IEEE Transactions on Software Engineering, 1991).

    Returns (prob, alias): column k keeps cell k with probability prob[k],
    else gives alias[k]. Exact: sum over columns of the mass each assigns to a
    cell equals K p[cell] (checked in the tests).
    """
    p = np.asarray(probabilities, dtype=float).ravel()
    K = p.size
    scaled = p * K / p.sum()
    prob = np.ones(K)
    alias = np.arange(K, dtype=np.int64)
    small = [k for k in range(K) if scaled[k] < 1.0]
    large = [k for k in range(K) if scaled[k] >= 1.0]
    while small and large:
        s = small.pop()
        g = large.pop()
        prob[s] = scaled[s]
        alias[s] = g
        scaled[g] = (scaled[g] + scaled[s]) - 1.0
        (small if scaled[g] < 1.0 else large).append(g)
    for k in small + large:          # numerical leftovers are exactly 1
        prob[k] = 1.0
        alias[k] = k
    return prob, alias


class AliasTable(NamedTuple):
    """The origin-destination matrix as an alias table over its cells (the record the
    compiled sampler reads): cell c is the trip cell_origin[c] -> cell_dest[c]."""

    prob: np.ndarray          # float64, K cells: chance of keeping the column's own cell
    alias: np.ndarray         # int64, K: the column's alias cell
    cell_origin: np.ndarray   # int64, K
    cell_dest: np.ndarray     # int64, K


def od_alias_table(od: np.ndarray) -> AliasTable:
    """The :class:`AliasTable` of an origin-destination matrix (floors 0 ... N square)."""
    n_levels = od.shape[0]
    prob, alias = alias_table(od)
    cells = np.arange(od.size, dtype=np.int64)
    return AliasTable(prob, alias, cells // n_levels, cells % n_levels)


def passenger_counts(rng: np.random.Generator, mean_passengers: float, n_trials: int,
                     poisson: bool) -> np.ndarray:
    """Passengers offered to each of ``n_trials`` trips.

    Poisson: X ~ Poisson(P). Fixed: X = floor(P) + 1{U < P - floor(P)}, whose
    mean is P and whose support is the two nearest integers.
    """
    if poisson:
        return rng.poisson(mean_passengers, n_trials).astype(np.int64)
    base = math.floor(mean_passengers)
    frac = mean_passengers - base
    counts = np.full(n_trials, base, dtype=np.int64)
    if frac > 0:
        counts += rng.random(n_trials) < frac
    return counts
