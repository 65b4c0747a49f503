"""Effect sizes of ANOVA rows and of single-row contrasts, with confidence intervals.

Pure numbers in, frozen dataclasses out; wording and rounding belong to the narrative layer.

ANOVA rows (Lakens 2013, Frontiers in Psychology 4:863, between-subjects formulas)::

    eta squared            SS_effect / SS_total
    partial eta squared    SS_effect / (SS_effect + SS_error)
    omega squared          (SS_effect - df_effect * MSE) / (SS_total + MSE)
    partial omega squared  (SS_effect - df_effect * MSE) / (SS_effect + (N - df_effect) * MSE)
    Cohen's f              sqrt(partial eta squared / (1 - partial eta squared))   (Cohen 1988)

Cohen 1988: *Statistical Power Analysis for the Behavioral Sciences*, 2nd ed., Lawrence Erlbaum.

Partial omega squared is the form of Olejnik & Algina (2003, Psychological Methods 8, 434-447) that Lakens (2013) reproduces; it
equals df_effect (F - 1) / (df_effect (F - 1) + N). Omega squared, in a one-way design, equals
(F - 1) / (F + (df_error + 1) / df_effect). Both omegas are unbiased-type estimators and are
returned as computed, negative values included (they are negative exactly when F < 1); truncating
at zero is a reporting choice left to the caller. The equation numbers of Lakens (2013) are not
quoted here because they were not checked against the printed paper.

The confidence interval of partial eta squared inverts the noncentral F distribution (Steiger 2004,
Psychological Methods 9:164): the noncentrality bounds solve F_cdf(F_obs; df1, df2, lambda) =
1 - a and a, with a = (1 - level) / 2, and each bound maps to partial eta squared by
lambda / (lambda + df1 + df2 + 1) (Steiger 2004; in a one-way design df1 + df2 + 1 = N, so this is
lambda / (lambda + N)). The default level is 1 - 2 alpha (90% for alpha = .05): the lower bound is
then above zero exactly when the F test rejects at alpha.

The standardized contrast of one contrast row is d = (c'y - h) / sqrt(MSE) after the weights (and h
with them) are scaled so the positive weights sum to 1 and the negative weights to -1; its interval
inverts the noncentral t distribution (Steiger & Fouladi 1997, chapter 9 of Harlow, Mulaik & Steiger
(eds.), *What If There Were No Significance Tests?*, Lawrence Erlbaum; Cumming & Finch 2001,
Educational and Psychological Measurement 61, 532-574), and the
small-sample correction is g = J d with Hedges' (1981) exact gamma-function J; g's interval is
d's noncentral-t interval times the same J (Hedges 1981, JEBS 6, 107-128; Hedges & Olkin 1985,
*Statistical Methods for Meta-Analysis*, Academic Press, chapter 5). A standardized contrast is defined only for
weights that sum to zero.

scipy.stats.ncf.sf returns -cdf instead of 1 - cdf when the noncentrality is exactly 0 (scipy
issue 26188); :func:`noncentral_f_cdf` and :func:`noncentral_f_sf` switch to the central F
distribution at and near zero noncentrality.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

import numpy as np
from scipy import special

from reporter.errors import FitError, PlanError
from reporter.numerics.distributions import f_sf, ncf_sf
from reporter.numerics.roots import find_root

__all__ = [
    "AnovaEffectSizes",
    "ContrastEffectSize",
    "EffectSize",
    "PARTIAL_ETA_SQUARED_MAPPING",
    "describe_anova_effect_sizes",
    "f_noncentrality_ci",
    "hedges_correction",
    "noncentral_f_cdf",
    "noncentral_f_sf",
    "noncentral_t_cdf",
    "partial_eta_squared_ci",
    "standardized_contrast",
    "t_noncentrality_ci",
]

# Below this noncentrality the central distribution is used: the noncentral and central cdfs
# then differ by less than ~1e-13, and scipy's ncf.sf is wrong at exactly zero (scipy issue 26188).
_TINY_NONCENTRALITY = 1e-12

PARTIAL_ETA_SQUARED_MAPPING = "steiger2004: lambda / (lambda + df1 + df2 + 1)"

_ROOT_XTOL = 1e-12
_ROOT_RTOL = 1e-12
_MAX_DOUBLINGS = 80

Alternative = Literal["two-sided", "greater", "less"]


@dataclass(frozen=True)
class EffectSize:
    """One effect size with its (optional) confidence interval.

    ``name`` is a machine name (``"partial_eta_squared"``); ``method`` names the formula and its
    source; ``ci`` is ``(low, high)`` or ``None`` when no interval is computed, at ``ci_level``;
    ``ci_method`` names how the interval was obtained.
    """

    name: str
    value: float
    ci: tuple[float, float] | None
    ci_level: float | None
    method: str
    ci_method: str | None = None


@dataclass(frozen=True)
class AnovaEffectSizes:
    """The effect sizes of one ANOVA row (one effect tested against the residual mean square).

    ``ci_level`` is the level of the partial-eta-squared and Cohen's-f intervals, ``1 - 2*alpha``
    (``ci_rule`` says so in words); ``noncentrality_ci`` holds the bounds on the noncentrality
    parameter before they were mapped by ``noncentrality_mapping``.
    """

    eta_squared: EffectSize
    partial_eta_squared: EffectSize
    omega_squared: EffectSize
    partial_omega_squared: EffectSize
    cohens_f: EffectSize
    F: float
    df_effect: float
    df_error: float
    n_total: int
    alpha: float
    ci_level: float
    ci_rule: str
    noncentrality_ci: tuple[float, float]
    noncentrality_mapping: str

    def effect_sizes(self) -> tuple[EffectSize, ...]:
        """All five effect sizes, in a fixed order."""
        return (
            self.eta_squared,
            self.partial_eta_squared,
            self.omega_squared,
            self.partial_omega_squared,
            self.cohens_f,
        )


@dataclass(frozen=True)
class ContrastEffectSize:
    """The standardized effect size of a single-row contrast ``c'mu = h``.

    ``d`` carries the interval for the population standardized contrast (noncentral t
    inversion); ``g`` is the Hedges-corrected estimate with that interval times the same exact J
    (Hedges 1981). ``scale`` is the factor applied to the weights
    and to ``h``; ``weights`` are the scaled weights; ``t`` and ``df`` are the contrast's t test;
    ``noncentrality_ci`` bounds the noncentrality of t; ``alternative`` says which bounds are
    finite.
    """

    d: EffectSize
    g: EffectSize
    scale: float
    weights: tuple[float, ...]
    t: float
    df: float
    hedges_j: float
    noncentrality_ci: tuple[float, float]
    alternative: str


# ---------------------------------------------------------------------------------------------
# Noncentral distributions with a correct zero-noncentrality case
# ---------------------------------------------------------------------------------------------


def noncentral_f_cdf(x: float, df1: float, df2: float, nc: float) -> float:
    """P(F' <= x) for the noncentral F(df1, df2, nc); the central F at (near) zero noncentrality.

    Uses ``scipy.special.ncfdtr`` (the function behind ``scipy.stats.ncf.cdf``) for speed in
    root finding, and ``scipy.special.fdtr`` when ``nc`` is 0 or below 1e-12.
    """
    if nc <= _TINY_NONCENTRALITY:
        return float(special.fdtr(df1, df2, x))
    return float(special.ncfdtr(df1, df2, nc, x))


def noncentral_f_sf(x: float, df1: float, df2: float, nc: float) -> float:
    """P(F' > x) for the noncentral F(df1, df2, nc); the central F at (near) zero noncentrality.

    Boost's complement behind ``scipy.stats.ncf.sf`` returns ``-cdf`` at ``nc == 0`` (scipy
    issue 26188), hence the switch to the central F survival function at and near zero
    (:func:`reporter.numerics.distributions.f_sf` and ``ncf_sf``, the ``scipy.stats`` values
    computed without importing ``scipy.stats``).
    """
    if nc <= _TINY_NONCENTRALITY:
        return float(f_sf(x, df1, df2))
    return float(ncf_sf(x, df1, df2, nc))


def noncentral_t_cdf(x: float, df: float, nc: float) -> float:
    """P(T' <= x) for the noncentral t(df, nc); Student's t when ``nc`` is (near) zero."""
    if abs(nc) <= _TINY_NONCENTRALITY:
        return float(special.stdtr(df, x))
    return float(special.nctdtr(df, nc, x))


# ---------------------------------------------------------------------------------------------
# Validation
# ---------------------------------------------------------------------------------------------


def _check_level(level: float, name: str = "level") -> float:
    level = float(level)
    if not (0.0 < level < 1.0):
        raise PlanError(f"'{name}' must be between 0 and 1, e.g. 0.90 (got {level:g}).")
    return level


def _check_alpha(alpha: float) -> float:
    alpha = float(alpha)
    if not (0.0 < alpha < 0.5):
        raise PlanError(
            f"'alpha' must be between 0 and 0.5 so that the interval level 1 - 2*alpha is "
            f"positive (got {alpha:g})."
        )
    return alpha


def _check_positive(value: float, name: str, hint: str) -> float:
    value = float(value)
    if not (math.isfinite(value) and value > 0):
        raise FitError(f"'{name}' must be a positive finite number (got {value:g}); {hint}")
    return value


def _check_f(F: float) -> float:
    F = float(F)
    if not (math.isfinite(F) and F >= 0):
        raise FitError(
            f"'F' must be a finite number >= 0 (got {F:g}); an infinite or undefined F means the "
            "residual mean square is zero, so no interval can be formed."
        )
    return F


# ---------------------------------------------------------------------------------------------
# Root finding
# ---------------------------------------------------------------------------------------------


def _solve_decreasing(func, start: float, lower: float | None) -> float:
    """Root of a decreasing function known to be positive at ``start``, searching upwards.

    Expands the bracket by doubling the step until the function turns negative, then refines
    with Brent's method (:func:`reporter.numerics.roots.find_root`). ``lower`` is a floor the search may reuse as
    the bracket's left end.
    """
    lo = start if lower is None else lower
    step = max(1.0, abs(start))
    hi = start + step
    for _ in range(_MAX_DOUBLINGS):
        if func(hi) < 0:
            return float(find_root(func, lo, hi, xtol=_ROOT_XTOL, rtol=_ROOT_RTOL))
        lo = hi
        step *= 2.0
        hi = start + step
    raise FitError(
        "the confidence bound could not be bracketed (noncentrality beyond "
        f"{hi:.3g}); the test statistic is too extreme for an interval."
    )


def _solve_decreasing_downwards(func, start: float) -> float:
    """Root of a decreasing function known to be negative at ``start``, searching downwards."""
    hi = start
    step = max(1.0, abs(start))
    lo = start - step
    for _ in range(_MAX_DOUBLINGS):
        if func(lo) > 0:
            return float(find_root(func, lo, hi, xtol=_ROOT_XTOL, rtol=_ROOT_RTOL))
        hi = lo
        step *= 2.0
        lo = start - step
    raise FitError(
        "the confidence bound could not be bracketed (noncentrality below "
        f"{lo:.3g}); the test statistic is too extreme for an interval."
    )


def f_noncentrality_ci(F: float, df1: float, df2: float, level: float = 0.90) -> tuple[float, float]:
    """Two-sided interval for the noncentrality of an observed F (Steiger 2004).

    Solves ``cdf(F; df1, df2, lam_low) = 1 - a`` and ``cdf(F; df1, df2, lam_high) = a`` with
    ``a = (1 - level) / 2``. The cdf falls as the noncentrality grows; when even lambda = 0 gives
    a cdf at or below a target, that bound is 0 (the interval is truncated at the parameter's
    boundary, as in Steiger 2004).
    """
    F = _check_f(F)
    df1 = _check_positive(df1, "df1", "the effect needs at least one degree of freedom.")
    df2 = _check_positive(df2, "df2", "the residual needs at least one degree of freedom.")
    level = _check_level(level)
    a = (1.0 - level) / 2.0
    cdf_central = noncentral_f_cdf(F, df1, df2, 0.0)
    start = max(0.0, df1 * (F - 1.0))

    def bound(target: float) -> float:
        if cdf_central <= target:
            return 0.0

        def func(lam: float) -> float:
            return noncentral_f_cdf(F, df1, df2, lam) - target

        if func(start) > 0:
            return _solve_decreasing(func, start, lower=start)
        return float(find_root(func, 0.0, start, xtol=_ROOT_XTOL, rtol=_ROOT_RTOL))

    return bound(1.0 - a), bound(a)


def _lambda_to_partial_eta_squared(lam: float, df1: float, df2: float) -> float:
    return lam / (lam + df1 + df2 + 1.0)


def partial_eta_squared_ci(F: float, df1: float, df2: float, level: float = 0.90) -> tuple[float, float]:
    """Confidence interval for partial eta squared from an observed F (Steiger 2004).

    The noncentrality bounds of :func:`f_noncentrality_ci` are mapped by
    ``lambda / (lambda + df1 + df2 + 1)`` (:data:`PARTIAL_ETA_SQUARED_MAPPING`). Use
    ``level = 1 - 2*alpha`` (the default 0.90 for alpha = .05) for an interval that excludes zero
    exactly when the F test rejects at alpha. A bound at the boundary is returned as 0.
    """
    lam_low, lam_high = f_noncentrality_ci(F, df1, df2, level)
    return (
        _lambda_to_partial_eta_squared(lam_low, df1, df2),
        _lambda_to_partial_eta_squared(lam_high, df1, df2),
    )


# ---------------------------------------------------------------------------------------------
# ANOVA rows
# ---------------------------------------------------------------------------------------------


def describe_anova_effect_sizes(
    ss_effect: float,
    df_effect: float,
    ss_error: float,
    df_error: float,
    ss_total: float,
    n_total: int,
    F: float | None = None,
    alpha: float = 0.05,
) -> AnovaEffectSizes:
    """Eta², partial eta², omega², partial omega² and Cohen's f of one ANOVA row, with intervals.

    ``ss_total`` is the total sum of squares of the data about the grand mean (also in unbalanced
    designs with Type III rows, where the rows need not add up to it); ``n_total`` is the number of
    observations N used by partial omega squared. ``F`` defaults to
    ``(ss_effect / df_effect) / (ss_error / df_error)``; a given F must agree with it.
    Formulas: see the module docstring (Lakens 2013; Olejnik & Algina 2003; Cohen 1988).
    Partial eta squared and Cohen's f get a ``1 - 2*alpha`` interval from the noncentral F
    (Steiger 2004); f's bounds are ``sqrt(lambda / (df1 + df2 + 1))``, the same mapping.
    """
    alpha = _check_alpha(alpha)
    df_effect = _check_positive(df_effect, "df_effect", "an effect has at least one degree of freedom.")
    df_error = _check_positive(
        df_error, "df_error", "effect sizes need residual degrees of freedom (more rows than cells)."
    )
    ss_error = _check_positive(
        ss_error, "ss_error", "a zero residual sum of squares leaves the effect sizes undefined."
    )
    ss_total = _check_positive(ss_total, "ss_total", "the outcome has no variation.")
    ss_effect = float(ss_effect)
    if not (math.isfinite(ss_effect) and ss_effect >= 0):
        raise FitError(f"'ss_effect' must be a finite number >= 0 (got {ss_effect:g}).")
    if int(n_total) != n_total or n_total <= df_effect:
        raise FitError(
            f"'n_total' must be a whole number of observations larger than df_effect "
            f"({df_effect:g}) (got {n_total})."
        )
    n_total = int(n_total)

    mse = ss_error / df_error
    f_from_ss = (ss_effect / df_effect) / mse
    if F is None:
        F = f_from_ss
    else:
        F = _check_f(F)
        if not math.isclose(F, f_from_ss, rel_tol=1e-6, abs_tol=1e-12):
            raise FitError(
                f"'F' ({F:.10g}) does not match (ss_effect/df_effect)/(ss_error/df_error) = "
                f"{f_from_ss:.10g}; pass the F of this row or leave F out."
            )

    level = 1.0 - 2.0 * alpha
    lam_low, lam_high = f_noncentrality_ci(F, df_effect, df_error, level)
    pes_ci = (
        _lambda_to_partial_eta_squared(lam_low, df_effect, df_error),
        _lambda_to_partial_eta_squared(lam_high, df_effect, df_error),
    )
    denom = df_effect + df_error + 1.0
    f_ci = (math.sqrt(lam_low / denom), math.sqrt(lam_high / denom))
    ci_method = f"noncentral F inversion (Steiger 2004); {PARTIAL_ETA_SQUARED_MAPPING}"

    eta2 = ss_effect / ss_total
    pes = ss_effect / (ss_effect + ss_error)
    omega_num = ss_effect - df_effect * mse
    omega2 = omega_num / (ss_total + mse)
    partial_omega2 = omega_num / (ss_effect + (n_total - df_effect) * mse)
    cohens_f = math.sqrt(pes / (1.0 - pes)) if pes < 1.0 else math.inf

    return AnovaEffectSizes(
        eta_squared=EffectSize(
            name="eta_squared",
            value=eta2,
            ci=None,
            ci_level=None,
            method="SS_effect / SS_total (Lakens 2013)",
        ),
        partial_eta_squared=EffectSize(
            name="partial_eta_squared",
            value=pes,
            ci=pes_ci,
            ci_level=level,
            method="SS_effect / (SS_effect + SS_error) (Lakens 2013)",
            ci_method=ci_method,
        ),
        omega_squared=EffectSize(
            name="omega_squared",
            value=omega2,
            ci=None,
            ci_level=None,
            method="(SS_effect - df_effect*MSE) / (SS_total + MSE) (Lakens 2013)",
        ),
        partial_omega_squared=EffectSize(
            name="partial_omega_squared",
            value=partial_omega2,
            ci=None,
            ci_level=None,
            method=(
                "(SS_effect - df_effect*MSE) / (SS_effect + (N - df_effect)*MSE) "
                "(Olejnik & Algina 2003; Lakens 2013)"
            ),
        ),
        cohens_f=EffectSize(
            name="cohens_f",
            value=cohens_f,
            ci=f_ci,
            ci_level=level,
            method="sqrt(partial_eta_squared / (1 - partial_eta_squared)) (Cohen 1988)",
            ci_method="noncentral F inversion (Steiger 2004); sqrt(lambda / (df1 + df2 + 1))",
        ),
        F=F,
        df_effect=df_effect,
        df_error=df_error,
        n_total=n_total,
        alpha=alpha,
        ci_level=level,
        ci_rule="two-sided level 1 - 2*alpha: the lower bound exceeds 0 exactly when p < alpha",
        noncentrality_ci=(lam_low, lam_high),
        noncentrality_mapping=PARTIAL_ETA_SQUARED_MAPPING,
    )


# ---------------------------------------------------------------------------------------------
# Single-row contrasts
# ---------------------------------------------------------------------------------------------


def hedges_correction(df: float) -> float:
    """Hedges' (1981) exact small-sample factor J = Gamma(df/2) / (sqrt(df/2) Gamma((df-1)/2)).

    Computed through log-gamma so large df do not overflow; J tends to 1 as df grows and is close
    to 1 - 3 / (4 df - 1) (Hedges 1981).
    """
    df = float(df)
    if not (math.isfinite(df) and df > 1.0):
        raise FitError(
            f"Hedges' correction needs more than 1 residual degree of freedom (got {df:g})."
        )
    return math.exp(
        special.gammaln(df / 2.0) - 0.5 * math.log(df / 2.0) - special.gammaln((df - 1.0) / 2.0)
    )


def t_noncentrality_ci(
    t: float, df: float, level: float = 0.95, alternative: Alternative = "two-sided"
) -> tuple[float, float]:
    """Interval for the noncentrality of an observed t (Steiger & Fouladi 1997).

    Two-sided: ``cdf(t; df, d_low) = 1 - a`` and ``cdf(t; df, d_high) = a`` with
    ``a = (1 - level) / 2``. ``"greater"`` gives ``(d_low, inf)`` with ``cdf = level``;
    ``"less"`` gives ``(-inf, d_high)`` with ``cdf = 1 - level``. The noncentral t cdf falls as
    the noncentrality grows.
    """
    t = float(t)
    if not math.isfinite(t):
        raise FitError(f"'t' must be finite (got {t:g}); the residual mean square is zero.")
    df = _check_positive(df, "df", "the residual needs at least one degree of freedom.")
    level = _check_level(level)
    if alternative == "two-sided":
        a = (1.0 - level) / 2.0
        upper_target, lower_target = 1.0 - a, a
    elif alternative == "greater":
        upper_target, lower_target = level, None
    elif alternative == "less":
        upper_target, lower_target = None, 1.0 - level
    else:
        raise PlanError(
            f"'alternative' must be one of 'two-sided', 'greater', 'less' (got {alternative!r})."
        )

    def solve(target: float) -> float:
        def func(delta: float) -> float:
            return noncentral_t_cdf(t, df, delta) - target

        value = func(t)
        if value > 0:
            return _solve_decreasing(func, t, lower=None)
        if value < 0:
            return _solve_decreasing_downwards(func, t)
        return t

    low = solve(upper_target) if upper_target is not None else -math.inf
    high = solve(lower_target) if lower_target is not None else math.inf
    return low, high


def standardized_contrast(
    weights,
    h: float,
    estimate: float,
    n,
    mse: float,
    df_error: float,
    level: float = 0.95,
    alternative: Alternative = "two-sided",
    cov=None,
) -> ContrastEffectSize:
    """Standardized contrast d, Hedges' g, and the noncentral-t interval for the population value.

    ``weights`` are the contrast weights over the k cells, ``estimate`` is ``c'y`` with those
    weights, ``n`` the cell sizes, ``mse`` the residual mean square with ``df_error`` df.

    Scaling: the weights must sum to zero (a contrast); weights and ``h`` are divided by the sum
    of the positive weights, so positive weights sum to 1 and negative weights to -1 and
    ``2a - 2b`` gives the same d as ``a - b``. Weights that do not sum to zero (``a = 5``,
    ``2*a - b``) state a combination that is not a difference of means: its size in SD units
    depends on where the measurement scale starts, so :class:`FitError` says so.

    d = (s*estimate - s*h) / sqrt(MSE); t = d / sqrt(sum(c_s^2 / n)) is the contrast's t
    statistic; the noncentrality bounds of t (Steiger & Fouladi 1997; Cumming & Finch 2001) times
    sqrt(sum(c_s^2 / n)) bound the population standardized contrast. g = J d with Hedges' (1981)
    exact J, and g's interval is J times d's (Hedges 1981; Hedges & Olkin 1985, chapter 5).
    Cells with weight 0 may have n = 0 (empty cells).

    With covariates, ``estimate`` is c'mu_adj over the adjusted cell means, ``mse`` and
    ``df_error`` are those of the covariate-adjusted model (its df count the slopes) and ``cov``
    is the covariance of the adjusted means divided by sigma^2 (k x k); then
    t = d / sqrt(c_s' U c_s) and d is in units of the residual SD of the adjusted model, which the
    method string states. That SD is smaller than the raw within-cell SD by the share of variance
    the covariates explain, so d is larger than a d standardized by the unadjusted SD.
    """
    c = np.asarray(weights, dtype=float).ravel()
    n_arr = np.asarray(n, dtype=float).ravel()
    if c.size == 0 or c.shape != n_arr.shape:
        raise FitError(
            f"'weights' and 'n' must be non-empty and of the same length (got {c.size} weights "
            f"and {n_arr.size} cell sizes)."
        )
    if not np.all(np.isfinite(c)):
        raise FitError("'weights' must be finite numbers (got a NaN or infinite weight).")
    used = c != 0
    if not np.any(used):
        raise FitError("'weights' are all zero; a contrast needs at least one non-zero weight.")
    if np.any(n_arr[used] <= 0):
        bad = int(np.flatnonzero(used & (n_arr <= 0))[0])
        raise FitError(
            f"cell {bad} has weight {c[bad]:g} but n = {n_arr[bad]:g}; a contrast can only "
            "weight cells that hold data."
        )
    mse = _check_positive(mse, "mse", "a zero residual mean square leaves d undefined.")
    hedges_j = hedges_correction(df_error)
    df_error = float(df_error)

    total = math.fsum(c.tolist())
    positive = float(c[c > 0].sum())
    if not math.isclose(total, 0.0, abs_tol=1e-12 * float(np.abs(c).sum())):
        raise FitError(
            f"the weights sum to {total:g}, not 0, so the combination is not a difference of means "
            "and its size in SD units depends on where the scale starts"
        )
    scale = 1.0 / positive
    scaling = "weights / sum(positive weights)"
    cs = c * scale
    if cov is None:
        spread = math.sqrt(float(np.sum(cs[used] ** 2 / n_arr[used])))
        standard = "(c'y - h) / sqrt(MSE)"
    else:
        u = np.asarray(cov, dtype=float)
        spread = math.sqrt(float(cs[used] @ u[np.ix_(used, used)] @ cs[used]))
        standard = "(c'y_adj - h) / sqrt(MSE of the covariate-adjusted model), y_adj the adjusted means"
    d = scale * (float(estimate) - float(h)) / math.sqrt(mse)
    t = d / spread
    delta_low, delta_high = t_noncentrality_ci(t, df_error, level, alternative)
    ci = (delta_low * spread, delta_high * spread)

    return ContrastEffectSize(
        d=EffectSize(
            name="standardized_contrast_d",
            value=d,
            ci=ci,
            ci_level=level,
            method=f"{standard}, {scaling}",
            ci_method=(
                f"noncentral t inversion, {alternative} "
                "(Steiger & Fouladi 1997; Cumming & Finch 2001)"
            ),
        ),
        g=EffectSize(
            name="hedges_g",
            value=hedges_j * d,
            ci=(hedges_j * ci[0], hedges_j * ci[1]),
            ci_level=level,
            method="J*d, J = Gamma(df/2) / (sqrt(df/2) Gamma((df-1)/2)) (Hedges 1981)",
            ci_method=(
                f"J times the noncentral t interval of d, {alternative} "
                "(Hedges 1981; Hedges & Olkin 1985, ch. 5)"
            ),
        ),
        scale=scale,
        weights=tuple(float(x) for x in cs),
        t=t,
        df=df_error,
        hedges_j=hedges_j,
        noncentrality_ci=(delta_low, delta_high),
        alternative=alternative,
    )
