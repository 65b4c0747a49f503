"""Power and sensitivity of ANOVA F tests in terms of Cohen's f.

Convention (Cohen 1988, Statistical Power Analysis for the Behavioral Sciences, 2nd ed., ch. 8):
an effect of size f in a design with N observations in total gives the F test the noncentrality
``lambda = f**2 * N``, with df1 the effect's degrees of freedom and df2 = N - k the residual
degrees of freedom of a design with k cells. statsmodels' ``FTestAnovaPower`` uses the same
convention (``nobs`` = total N, noncentrality ``effect_size**2 * nobs``), which the tests use as
the reference. Power is ``P(F' > F_crit)`` with ``F_crit`` the upper-alpha point of the central
F(df1, df2) and ``F'`` noncentral F(df1, df2, lambda).

Three questions are answered: the power of a given f (:func:`compute_power`), the smallest f a
design detects with a given power (:func:`solve_detectable_f`, :func:`describe_sensitivity`),
and the cell size a planned f needs (:func:`solve_cell_size`). Roots are found with Brent's method
on expanding brackets.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from reporter.errors import FitError, PlanError
from reporter.numerics.distributions import f_isf
from reporter.inference.effectsizes import noncentral_f_sf
from reporter.numerics.roots import find_root

__all__ = [
    "CellSizePlan",
    "NONCENTRALITY_CONVENTION",
    "Sensitivity",
    "compute_power",
    "describe_sensitivity",
    "solve_cell_size",
    "solve_detectable_f",
]

NONCENTRALITY_CONVENTION = "lambda = f**2 * N_total (Cohen 1988)"

_MAX_DOUBLINGS = 80


@dataclass(frozen=True)
class Sensitivity:
    """The smallest Cohen's f an F test detects, one value per requested power.

    ``detectable_f[i]`` is the f at which the test with ``df1`` and ``df_error`` degrees of
    freedom and ``n_total`` observations reaches ``powers[i]`` at level ``alpha``.
    """

    df1: float
    df_error: float
    n_total: float
    alpha: float
    powers: tuple[float, ...]
    detectable_f: tuple[float, ...]
    convention: str


@dataclass(frozen=True)
class CellSizePlan:
    """The equal cell size a planned Cohen's f needs.

    ``n_per_cell`` is the smallest whole cell size whose power reaches ``target_power``;
    ``n_total = n_per_cell * n_cells``, ``df_error = n_total - n_cells``; ``achieved_power`` is
    the power at that size; ``n_total_exact`` is the (fractional) total N at which the power
    equals the target exactly.
    """

    effect_f: float
    df1: float
    n_cells: int
    alpha: float
    target_power: float
    n_per_cell: int
    n_total: int
    df_error: int
    achieved_power: float
    n_total_exact: float
    convention: str


def _check_probability(value: float, name: str, example: str) -> float:
    value = float(value)
    if not (0.0 < value < 1.0):
        raise PlanError(f"'{name}' must be between 0 and 1, e.g. {example} (got {value:g}).")
    return value


def _check_alpha_power(alpha: float, power: float) -> tuple[float, float]:
    alpha = _check_probability(alpha, "alpha", "0.05")
    power = _check_probability(power, "power", "0.80")
    if power <= alpha:
        raise PlanError(
            f"'power' must exceed 'alpha' ({alpha:g}): even a zero effect is detected with "
            f"probability alpha (got power {power:g})."
        )
    return alpha, power


def _check_df(df1: float, df_error: float) -> tuple[float, float]:
    df1 = float(df1)
    df_error = float(df_error)
    if not (math.isfinite(df1) and df1 > 0):
        raise FitError(f"'df1' must be a positive number of degrees of freedom (got {df1:g}).")
    if not (math.isfinite(df_error) and df_error > 0):
        raise FitError(
            f"'df_error' must be positive (got {df_error:g}); the design needs more "
            "observations than cells."
        )
    return df1, df_error


def _resolve_df_error(df1: float, n_total: float, df_error: float | None) -> float:
    if df_error is None:
        return float(n_total) - float(df1) - 1.0
    return float(df_error)


def _power_at(lam: float, df1: float, df2: float, alpha: float) -> float:
    crit = f_isf(alpha, df1, df2)
    return noncentral_f_sf(crit, df1, df2, lam)


def compute_power(
    effect_f: float,
    df1: float,
    n_total: float,
    df_error: float | None = None,
    alpha: float = 0.05,
) -> float:
    """Power of the F test of an effect with ``df1`` df for Cohen's f = ``effect_f``.

    ``lambda = effect_f**2 * n_total`` (Cohen 1988); ``df_error`` defaults to
    ``n_total - df1 - 1``, the one-way case; pass ``n_total - n_cells`` for an effect in a
    factorial design.
    """
    alpha = _check_probability(alpha, "alpha", "0.05")
    effect_f = float(effect_f)
    if not (math.isfinite(effect_f) and effect_f >= 0):
        raise PlanError(f"'effect_f' must be a finite number >= 0, e.g. 0.25 (got {effect_f:g}).")
    df1, df2 = _check_df(df1, _resolve_df_error(df1, n_total, df_error))
    return _power_at(effect_f**2 * float(n_total), df1, df2, alpha)


def _solve_increasing_from_zero(func, start: float) -> float:
    """Root of an increasing function negative at 0, by expanding bracket then Brent's method."""
    lo, hi = 0.0, max(start, 1.0)
    for _ in range(_MAX_DOUBLINGS):
        if func(hi) >= 0:
            return float(find_root(func, lo, hi, xtol=1e-12, rtol=1e-12))
        lo, hi = hi, hi * 2.0
    raise FitError(f"the power equation could not be bracketed (searched up to {hi:.3g}).")


def solve_detectable_f(
    df1: float,
    n_total: float,
    df_error: float | None = None,
    alpha: float = 0.05,
    power: float = 0.80,
) -> float:
    """Smallest Cohen's f the F test detects with probability ``power`` at level ``alpha``.

    Solves ``P(F'(df1, df2, lambda) > F_crit) = power`` for lambda, then ``f = sqrt(lambda / N)``
    (Cohen 1988 convention). ``df_error`` defaults to ``n_total - df1 - 1`` (one-way).
    """
    alpha, power = _check_alpha_power(alpha, power)
    n_total = float(n_total)
    if not (math.isfinite(n_total) and n_total > 0):
        raise FitError(f"'n_total' must be a positive number of observations (got {n_total:g}).")
    df1, df2 = _check_df(df1, _resolve_df_error(df1, n_total, df_error))
    crit = f_isf(alpha, df1, df2)

    def func(lam: float) -> float:
        return noncentral_f_sf(crit, df1, df2, lam) - power

    lam = _solve_increasing_from_zero(func, start=df1 + 10.0)
    return math.sqrt(lam / n_total)


def describe_sensitivity(
    df1: float,
    n_total: float,
    df_error: float | None = None,
    alpha: float = 0.05,
    powers: tuple[float, ...] = (0.80, 0.90),
) -> Sensitivity:
    """Minimum detectable Cohen's f of an F test at each of ``powers`` (default 80% and 90%)."""
    powers = tuple(float(p) for p in powers)
    if not powers:
        raise PlanError("'powers' must list at least one power, e.g. (0.80, 0.90) (got none).")
    df2 = _resolve_df_error(df1, n_total, df_error)
    detectable = tuple(solve_detectable_f(df1, n_total, df2, alpha, p) for p in powers)
    return Sensitivity(
        df1=float(df1),
        df_error=df2,
        n_total=float(n_total),
        alpha=float(alpha),
        powers=powers,
        detectable_f=detectable,
        convention=NONCENTRALITY_CONVENTION,
    )


def solve_cell_size(
    effect_f: float,
    df1: float,
    n_cells: int,
    alpha: float = 0.05,
    power: float = 0.80,
) -> CellSizePlan:
    """Smallest equal cell size n giving the F test of an effect with ``df1`` df the ``power``.

    Total N = n * n_cells, df_error = N - n_cells, lambda = effect_f**2 * N (Cohen 1988). The
    fractional N solving the power equation is found by Brent's method; n is its per-cell ceiling,
    then checked against the power of whole cell sizes (power grows with n).
    """
    alpha, power = _check_alpha_power(alpha, power)
    effect_f = float(effect_f)
    if not (math.isfinite(effect_f) and effect_f > 0):
        raise PlanError(
            f"'effect_f' must be a positive finite number, e.g. 0.25 (got {effect_f:g}); no "
            "sample size detects a zero effect."
        )
    if int(n_cells) != n_cells or n_cells < 1:
        raise PlanError(f"'n_cells' must be a whole number >= 1 (got {n_cells}).")
    n_cells = int(n_cells)
    df1 = float(df1)
    if not (math.isfinite(df1) and 0 < df1 <= max(n_cells - 1, 1)):
        raise PlanError(
            f"'df1' must be positive and at most n_cells - 1 = {n_cells - 1} (got {df1:g})."
        )

    def power_for_total(n_total: float) -> float:
        return _power_at(effect_f**2 * n_total, df1, n_total - n_cells, alpha)

    n_min = n_cells + 1.0
    if power_for_total(n_min) >= power:
        n_total_exact = n_min
    else:
        n_total_exact = n_min + _solve_increasing_from_zero(
            lambda extra: power_for_total(n_min + extra) - power, start=10.0 * n_cells
        )

    n = max(2, math.ceil(n_total_exact / n_cells - 1e-9))
    while power_for_total(n * n_cells) < power:
        n += 1
    while n > 2 and power_for_total((n - 1) * n_cells) >= power:
        n -= 1
    n_total = n * n_cells
    return CellSizePlan(
        effect_f=effect_f,
        df1=df1,
        n_cells=n_cells,
        alpha=alpha,
        target_power=power,
        n_per_cell=n,
        n_total=n_total,
        df_error=n_total - n_cells,
        achieved_power=power_for_total(n_total),
        n_total_exact=n_total_exact,
        convention=NONCENTRALITY_CONVENTION,
    )


# ---------------------------------------------------------------------------------------------
# Equivalence: the power of two one-sided tests

#: The largest equal cell size searched for an equivalence claim.
TOST_MAX_CELL_SIZE = 10**9
_TOST_TOL = 1e-12


def tost_power(low: float, high: float, se_factor: float, df: float, alpha: float = 0.05,
               true_difference: float = 0.0) -> float:
    """Exact power of the two one-sided t tests of ``low < c'mu < high`` (bounds and the true
    difference in residual SDs; ``se_factor`` = SE of the estimate / sigma, i.e. sqrt(sum c_i^2/n_i)).

    Both tests reject when low + q·S·v < D < high − q·S·v, with D ~ N(delta, v^2) (sigma = 1),
    S the residual SD estimate (df·S^2 ~ chi^2 on df) independent of D, and q = t(1 − alpha; df).
    Given S = u the probability is Phi((high − delta)/v − q·u) − Phi((low − delta)/v + q·u), positive
    only for u < (high − low)/(2·q·v); the power is its integral against the density of u
    (Owen 1965, "A special case of a bivariate non-central t-distribution", Biometrika 52, 437-446;
    Phillips 1990, "Power of the two one-sided tests procedure in bioequivalence", Journal of
    Pharmacokinetics and Biopharmaceutics 18, 137-144), by adaptive Gauss–Kronrod quadrature.
    """
    from scipy import special

    from reporter.numerics.distributions import norm_cdf, t_isf
    from reporter.numerics.quadrature import integrate

    low, high, v, df = float(low), float(high), float(se_factor), float(df)
    if not (low < high) or not (v > 0) or not (df > 0):
        raise FitError(f"the power of an equivalence test needs low < high, a positive SE and df (got {low:g}, "
                       f"{high:g}, {v:g}, {df:g})")
    q = float(t_isf(alpha, df))
    top = (high - low) / (2.0 * q * v)
    a0, b0 = (high - true_difference) / v, (low - true_difference) / v
    log_norm = math.log(2.0 * df) - (df / 2.0) * math.log(2.0) - special.gammaln(df / 2.0)

    def f(u):
        u = np.asarray(u, dtype=float)
        a, b = a0 - q * u, b0 + q * u
        # Phi(a) - Phi(b), from the side that keeps the digits
        inside = np.where(a + b > 0, norm_cdf(-b) - norm_cdf(-a), norm_cdf(a) - norm_cdf(b))
        with np.errstate(divide="ignore"):
            x = df * u * u
            log_density = log_norm + np.log(u) + (df / 2.0 - 1.0) * np.log(x) - x / 2.0
        dens = np.where(u > 0, np.exp(log_density), 0.0)
        return (np.maximum(inside, 0.0) * dens)[:, None]

    width = 1.0 / math.sqrt(2.0 * df)
    marks = {0.0, top}
    for j in range(-10, 11):
        marks.add(min(top, max(0.0, 1.0 + j * width)))
    edges = sorted(marks)
    value = float(integrate(f, edges, _TOST_TOL)[0][0])
    return min(1.0, max(0.0, value))


def tost_cell_size(low: float, high: float, sum_sq: float, k: int, alpha: float, power: float,
                   true_difference: float = 0.0) -> int | None:
    """The smallest equal cell size n >= 2 at which the two one-sided tests of a contrast (weights
    with sum of squares ``sum_sq``, k cells, df = k(n − 1)) reach ``power``; None when the true
    difference is not inside the bounds (the power never exceeds alpha) or beyond
    :data:`TOST_MAX_CELL_SIZE`."""
    if not (low < true_difference < high):
        return None

    def enough(n: int) -> bool:
        return tost_power(low, high, math.sqrt(sum_sq / n), k * (n - 1), alpha, true_difference) >= power

    return smallest_cell_size(enough, TOST_MAX_CELL_SIZE)


def smallest_cell_size(enough, limit: int) -> int | None:
    """The smallest n >= 2 with ``enough(n)`` true, for a condition that stays true once it holds
    (power grows with n): doubling, then bisection. None when no n up to ``limit`` is enough."""
    lo, hi = 1, 2
    while not enough(hi):
        lo, hi = hi, hi * 2
        if hi > limit:
            return None
    while hi - lo > 1:  # enough(hi) holds; enough(lo) does not (or lo = 1, below the smallest n)
        mid = (lo + hi) // 2
        if enough(mid):
            hi = mid
        else:
            lo = mid
    return hi


@dataclass(frozen=True)
class EquivalencePower:
    """The power of an equivalence claim's two one-sided tests at the study's cell sizes, and the
    equal cell size each of ``powers`` needs, for a true difference ``true_difference`` (residual
    SDs). ``bounds_sd`` are the bounds in residual SDs (raw bounds divided by ``sd``, the fitted
    residual SD, which the sensitivity then takes as known)."""

    bounds_sd: tuple[float, float]
    sd: float
    true_difference: float
    alpha: float
    power_now: float
    powers: tuple[float, ...]
    n_per_cell: tuple[int | None, ...]


def describe_equivalence_power(weights, n_cells, bounds, sd: float, df_error: float, alpha: float = 0.05,
                               powers: tuple[float, ...] = (0.80, 0.90),
                               true_difference: float = 0.0, unscaled_cov=None) -> EquivalencePower:
    """Power of the TOST of a fitted equivalence claim (cell sizes ``n_cells``, error df) and the
    equal n per cell for each power; ``bounds`` in the outcome's units, divided by ``sd``. The SE
    factor is sqrt(c'Uc) with U the fit's covariance of the cell means over sigma^2 when given
    (covariate-adjusted means), else sqrt(sum c_i^2/n_i)."""
    c = np.asarray([float(w) for w in weights], dtype=float)
    n = np.asarray(n_cells, dtype=float)
    used = c != 0
    if unscaled_cov is not None:
        v = math.sqrt(float(c @ np.asarray(unscaled_cov, dtype=float) @ c))
    else:
        v = math.sqrt(math.fsum((c[used] ** 2 / n[used]).tolist()))
    low, high = float(bounds[0]) / sd, float(bounds[1]) / sd
    now = tost_power(low, high, v, df_error, alpha, true_difference)
    sum_sq = math.fsum((c * c).tolist())
    sizes = tuple(tost_cell_size(low, high, sum_sq, int(n.size), alpha, p, true_difference) for p in powers)
    return EquivalencePower((low, high), float(sd), float(true_difference), float(alpha), now, tuple(powers), sizes)
