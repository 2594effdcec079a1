"""How sharp a Monte Carlo check is: the smallest bias it detects with 90 % power.

A check ``|mean - exact| <= k se`` (se the standard error of the mean) passes an
unbiased estimator except with probability 2 (1 - Phi(k)) (k = 4: about 6e-5). An
estimator whose mean is off by b is flagged with probability at least
Phi(b / se - k), which is 90 % once

    b >= (k + z_0.9) se,        z_0.9 = 1.2816 (the 90 % normal quantile),

the smallest bias the check detects with 90 % power. Every Monte Carlo check of the
suite asserts, beside its verdict, that this bias is at most 1 % of the quantity
checked, so a check that passes says something (standard normal-theory power of a
two-sided z test; the normal approximation holds for the sample sizes used).
"""
from __future__ import annotations

import math

import numpy as np

K_SIGMA = 4.0                    # tolerance in standard errors
Z90 = 1.2815515655446004         # one-sided 90 % standard normal quantile
RESOLUTION = 0.01                # every check must see a 1 % bias with 90 % power


def detectable_bias(se: float, k: float = K_SIGMA) -> float:
    """The smallest bias that ``|mean - exact| <= k se`` flags with 90 % power."""
    return (k + Z90) * se


def assert_unbiased(samples, exact: float, name: str, k: float = K_SIGMA,
                    resolution: float = RESOLUTION) -> None:
    """The sample mean equals ``exact`` within k standard errors, and the check is sharp
    enough to see a bias of ``resolution`` x |exact| with 90 % power."""
    x = np.asarray(samples, dtype=float)
    se = float(x.std(ddof=1)) / math.sqrt(x.size)
    assert_mean(float(x.mean()), se, exact, name, k, resolution)


def assert_mean(mean: float, se: float, exact: float, name: str, k: float = K_SIGMA,
                resolution: float = RESOLUTION) -> None:
    """As :func:`assert_unbiased`, from a mean and its standard error."""
    power_bias = detectable_bias(se, k)
    assert power_bias <= resolution * abs(exact), (
        f"{name}: the check sees only biases above {power_bias:.4g} "
        f"({100 * power_bias / abs(exact):.2f} % of {exact:.6g}) with 90 % power; "
        f"it must see {100 * resolution:g} %: more trials")
    assert abs(mean - exact) <= k * se + 1e-12, (
        f"{name}: {mean:.6g} vs exact {exact:.6g}, off by {abs(mean - exact) / se:.1f} "
        f"standard errors (se {se:.3g})")


def assert_estimate(est, exact: float, name: str, k: float = K_SIGMA,
                    resolution: float = RESOLUTION) -> None:
    """As :func:`assert_unbiased` for a :class:`roundtrip.montecarlo.Estimate`."""
    assert_mean(est.mean, est.std / math.sqrt(est.n), exact, name, k, resolution)


def bonferroni_z(cells: int, family_alpha: float = 1e-4) -> float:
    """Two-sided z threshold that keeps the false-alarm rate of ``cells`` simultaneous
    z tests below ``family_alpha`` (Bonferroni)."""
    from scipy.stats import norm
    return float(norm.isf(family_alpha / (2 * cells)))


def assert_cell_frequencies(observed, expected_p, name: str, resolution: float = RESOLUTION,
                            family_alpha: float = 1e-4) -> None:
    """Observed counts against cell probabilities, one z test per cell (Bonferroni over the
    cells, family false-alarm rate ``family_alpha``).

    Cell c with probability p among n draws has count sd sqrt(n p (1 - p)); a relative
    error r of its probability is seen with 90 % power once r n p >= (z + z_0.9)
    sqrt(n p (1 - p)). The check asserts that every cell's detectable relative error
    is at most ``resolution``, which is sharper than one chi-square over all cells
    against an error in a single cell.
    """
    observed = np.asarray(observed, dtype=float)
    p = np.asarray(expected_p, dtype=float)
    n = observed.sum()
    live = p > 0
    assert observed[~live].sum() == 0, f"{name}: impossible cells drawn"
    z = bonferroni_z(int(live.sum()), family_alpha)
    sd = np.sqrt(n * p[live] * (1 - p[live]))
    detectable = (z + Z90) * sd / (n * p[live])
    assert detectable.max() <= resolution, (
        f"{name}: the smallest cell's detectable relative error is "
        f"{100 * detectable.max():.2f} %; it must be {100 * resolution:g} %: more draws")
    zs = (observed[live] - n * p[live]) / sd
    worst = int(np.argmax(np.abs(zs)))
    assert np.all(np.abs(zs) <= z), (
        f"{name}: cell {np.flatnonzero(live)[worst]} off by {zs[worst]:.1f} sd (limit {z:.2f})")
