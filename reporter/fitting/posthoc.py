"""Simultaneous post-hoc comparisons among group means.

A *group* is either one cell of the design or one factor's unweighted marginal mean. Every
function here takes the group estimates together with their variance structure under the
cell-means model: the per-cell counts ``n`` (length k) and a weights matrix ``W`` (g x k) that
maps cell means to group means (the identity when the groups are the cells). The estimates
are then W @ cell_means and, with MSE the pooled within-cell variance,

    var(group_i - group_j) = MSE * sum_c (W_ic - W_jc)^2 / n_c,

the variance used by every family below. For cells this is MSE * (1/n_i + 1/n_j).

Families:

* all pairs, Tukey-Kramer: Tukey (1953), "The problem of multiple comparisons" (unpublished
  manuscript, printed in The Collected Works of John W. Tukey, vol. VIII, 1994); Kramer (1956),
  Biometrics 12(3), 307-310, for unequal sample sizes;
* every group against a control, Dunnett (1955), JASA 50(272), 1096-1121, with the
  multivariate t probabilities evaluated by randomized quasi-Monte Carlo (Genz & Bretz 2009,
  *Computation of Multivariate Normal and t Probabilities*, Springer) through
  ``scipy.stats.multivariate_t``;
* any contrast, Scheffe (1953), Biometrika 40(1/2), 87-104.

Each comparison carries the difference ``estimate[first] - estimate[second]``, its standard
error, the statistic difference / SE (on the t scale for every family; Tukey's studentized range
is sqrt(2) times it), the adjusted p value, and the simultaneous confidence interval at level
1 - alpha.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np

from reporter.errors import FitError
from reporter.fitting.distributions import f_isf, f_sf, t_cdf, t_isf, t_sf
from reporter.fitting.roots import find_root

__all__ = [
    "Comparison",
    "ComparisonFamily",
    "ContrastComparison",
    "dunnett",
    "scheffe_contrast",
    "scheffe_pairs",
    "tukey_kramer",
]

Alternative = Literal["two-sided", "greater", "less"]


@dataclass(frozen=True)
class Comparison:
    """One comparison of two groups within a simultaneous family.

    ``difference`` is ``estimate[first] - estimate[second]``; ``statistic`` is difference / se;
    ``critical_value`` is the |statistic| beyond which the adjusted p falls below alpha, so that
    the interval is difference -/+ critical_value * se.
    """

    first: int
    second: int
    difference: float
    se: float
    statistic: float
    df: float
    p_adjusted: float
    critical_value: float
    ci_low: float
    ci_high: float


@dataclass(frozen=True)
class ComparisonFamily:
    """A family of simultaneous comparisons and the settings that produced it.

    ``control`` is the control group's index for Dunnett's family (None otherwise); ``seed`` is
    the seed of the quasi-Monte Carlo integration when the family needed one (None otherwise).
    """

    method: str
    alpha: float
    alternative: str
    comparisons: tuple[Comparison, ...]
    n_groups: int
    control: int | None = None
    seed: int | None = None

    @property
    def confidence_level(self) -> float:
        """The simultaneous coverage of the intervals, 1 - alpha."""
        return 1.0 - self.alpha

    def comparison(self, first: int, second: int) -> Comparison:
        """The comparison of group ``first`` with group ``second`` (in that order)."""
        for item in self.comparisons:
            if item.first == first and item.second == second:
                return item
        pairs = ", ".join(f"({c.first}, {c.second})" for c in self.comparisons)
        raise KeyError(
            f"the family has no comparison ({first}, {second}); it holds {pairs}."
        )


@dataclass(frozen=True)
class ContrastComparison:
    """One contrast among group means judged against Scheffe's simultaneous critical value."""

    coefficients: tuple[float, ...]
    estimate: float
    se: float
    statistic: float
    df: float
    family_df: int
    p_adjusted: float
    critical_value: float
    ci_low: float
    ci_high: float
    alpha: float


# ---------------------------------------------------------------------------------------------
# input handling shared by the families


def _check_alpha(alpha: float) -> float:
    value = float(alpha)
    if not (0.0 < value < 1.0):
        raise FitError(f"'alpha' must be between 0 and 1 (got {alpha!r}).")
    return value


def _check_alternative(alternative: str) -> str:
    if alternative not in ("two-sided", "greater", "less"):
        raise FitError(
            "'alternative' must be 'two-sided', 'greater' or 'less' "
            f"(got {alternative!r})."
        )
    return alternative


def _group_structure(
    estimates, n, mse, df_error, weights
) -> tuple[np.ndarray, np.ndarray, float, float]:
    """Validate the inputs; return estimates, V = W diag(1/n) W', mse and df_error."""
    est = np.asarray(estimates, dtype=np.float64)
    if est.ndim != 1 or est.size < 2:
        raise FitError(
            "'estimates' must be a 1-D array of at least 2 group estimates "
            f"(got shape {est.shape}); pass one estimate per group."
        )
    if not np.all(np.isfinite(est)):
        raise FitError("'estimates' must be finite (got NaN or infinity); check the group means.")
    counts = np.asarray(n)
    if counts.ndim != 1 or not np.issubdtype(counts.dtype, np.number):
        raise FitError(f"'n' must be a 1-D array of cell counts (got shape {counts.shape}).")
    if np.any(counts < 0) or np.any(counts != np.round(counts)):
        raise FitError(f"'n' must hold non-negative whole numbers (got {counts.tolist()}).")
    counts = counts.astype(np.float64)
    if weights is None:
        if counts.size != est.size:
            raise FitError(
                f"without 'weights' the groups are the cells, so 'n' needs one count per "
                f"estimate (got {counts.size} counts for {est.size} estimates); pass 'weights' "
                "for marginal means."
            )
        w = np.eye(est.size)
    else:
        w = np.asarray(weights, dtype=np.float64)
        if w.shape != (est.size, counts.size):
            raise FitError(
                f"'weights' must have shape (groups, cells) = ({est.size}, {counts.size}) "
                f"(got {w.shape})."
            )
        if not np.all(np.isfinite(w)):
            raise FitError("'weights' must be finite (got NaN or infinity).")
    touched_empty = (counts == 0) & np.any(w != 0.0, axis=0)
    if np.any(touched_empty):
        cells = np.flatnonzero(touched_empty).tolist()
        raise FitError(
            f"a group mean uses empty cells {cells}, so it cannot be estimated; drop the group "
            "or give those cells zero weight."
        )
    mse = float(mse)
    if not (np.isfinite(mse) and mse > 0.0):
        raise FitError(
            f"'mse' must be a positive finite number (got {mse!r}); a zero MSE means there is "
            "no within-cell variation to compare against."
        )
    df_error = float(df_error)
    if not (df_error > 0.0):
        raise FitError(
            f"'df_error' must be positive (got {df_error!r}); the design needs more rows than "
            "non-empty cells."
        )
    used = counts > 0
    wu = w[:, used]
    v = (wu / counts[used]) @ wu.T
    return est, v, mse, df_error


def _pair_variance(v: np.ndarray, i: int, j: int) -> float:
    return float(v[i, i] + v[j, j] - 2.0 * v[i, j])


def _pair_se(v: np.ndarray, mse: float, i: int, j: int) -> float:
    factor = _pair_variance(v, i, j)
    if not factor > 1e-14 * max(v[i, i], v[j, j]):
        raise FitError(
            f"groups {i} and {j} have identical weights, so their difference has no variance; "
            "each group must be a different combination of cell means."
        )
    return float(np.sqrt(mse * factor))


# ---------------------------------------------------------------------------------------------
# Tukey-Kramer


def pairwise_comparison(i: int, j: int, diff: float, se: float, df: float, p: float, crit: float) -> Comparison:
    """One pair i < j: statistic diff/se, p clipped to [0, 1], interval diff -/+ crit * se."""
    return Comparison(
        first=i,
        second=j,
        difference=diff,
        se=se,
        statistic=diff / se,
        df=float(df),
        p_adjusted=min(max(p, 0.0), 1.0),
        critical_value=crit,
        ci_low=diff - crit * se,
        ci_high=diff + crit * se,
    )


def two_sided_family(method: str, alpha: float, comparisons, n_groups: int) -> ComparisonFamily:
    """A family of two-sided pairwise comparisons."""
    return ComparisonFamily(
        method=method,
        alpha=alpha,
        alternative="two-sided",
        comparisons=tuple(comparisons),
        n_groups=n_groups,
    )


def tukey_kramer(
    estimates,
    n,
    mse: float,
    df_error: float,
    *,
    weights=None,
    alpha: float = 0.05,
) -> ComparisonFamily:
    """All pairwise differences with Tukey-Kramer simultaneous intervals.

    For groups i < j the difference d = est_i - est_j has standard error
    se = sqrt(MSE * sum_c (W_ic - W_jc)^2 / n_c). The adjusted p value is the upper tail of the
    studentized range with g groups and ``df_error`` degrees of freedom at q = sqrt(2)|d|/se,
    and the interval is d -/+ q_(1-alpha; g, df) / sqrt(2) * se (Tukey 1953; Kramer 1956,
    Biometrics 12, 307-310; Hayter 1984, Annals of Statistics 12, 61-75, proves the intervals
    conservative for unequal n).

    Parameters: ``estimates`` (g,) group estimates; ``n`` (k,) cell counts; ``mse`` and
    ``df_error`` of the full cell-means model; ``weights`` (g, k) maps cell means to group
    means (default: the groups are the cells).
    """
    # Imported here: scipy.stats is slow to import and only post-hoc families need it.
    from scipy.stats import studentized_range

    alpha = _check_alpha(alpha)
    est, v, mse, df_error = _group_structure(estimates, n, mse, df_error, weights)
    g = est.size
    q_crit = float(studentized_range.ppf(1.0 - alpha, g, df_error))
    crit = q_crit / np.sqrt(2.0)
    out = []
    for i in range(g):
        for j in range(i + 1, g):
            se = _pair_se(v, mse, i, j)
            diff = float(est[i] - est[j])
            t = diff / se
            p = float(studentized_range.sf(abs(t) * np.sqrt(2.0), g, df_error))
            out.append(pairwise_comparison(i, j, diff, se, df_error, p, crit))
    return two_sided_family("Tukey-Kramer", alpha, out, g)


# ---------------------------------------------------------------------------------------------
# Dunnett


def _draw_seed() -> int:
    """A fresh 53-bit seed from the operating system's entropy (exact as a JSON number)."""
    return int(np.random.SeedSequence().generate_state(1, dtype=np.uint64)[0] >> np.uint64(11))


def _check_seed(seed) -> int:
    if seed is None:
        return _draw_seed()
    if isinstance(seed, (bool, np.bool_)) or not isinstance(seed, (int, np.integer)) or seed < 0:
        raise FitError(
            f"'seed' must be a non-negative whole number or None (got {seed!r}); a fixed "
            "seed makes the result reproducible."
        )
    return int(seed)


def _mvt_exceedance(
    corr: np.ndarray,
    df: float,
    values: np.ndarray,
    alternative: str,
    seed: int,
    maxpts: int,
) -> float:
    """P(the extreme of T exceeds the given level), T multivariate t with correlation ``corr``.

    The same seed is used at every call, so that the quasi-Monte Carlo estimate is a
    deterministic, monotone function of the limits (common random numbers): p values and the
    critical value are then mutually consistent.
    """
    m = corr.shape[0]
    if m == 1:
        x = float(values[0])
        if alternative == "two-sided":
            return float(2.0 * t_sf(abs(x), df))
        if alternative == "greater":
            return float(t_sf(x, df))
        return float(t_cdf(x, df))
    # Imported here: scipy.stats is slow to import and only post-hoc families need it.
    from scipy.stats import multivariate_t

    dist = multivariate_t(shape=corr, df=df)
    if alternative == "two-sided":
        upper = np.abs(values)
        lower = -upper
    elif alternative == "greater":
        upper = values
        lower = np.full(m, -np.inf)
    else:
        upper = np.full(m, np.inf)
        lower = values
    inside = float(
        dist.cdf(
            upper, lower_limit=lower, maxpts=maxpts, random_state=np.random.default_rng(seed)
        )
    )
    return min(max(1.0 - inside, 0.0), 1.0)


def _dunnett_critical(
    corr: np.ndarray, df: float, alpha: float, alternative: str, seed: int, maxpts: int
) -> float:
    """The c with P(max |T_j| > c) = alpha (two-sided) or P(max T_j > c) = alpha (one-sided)."""
    m = corr.shape[0]
    sides = 2.0 if alternative == "two-sided" else 1.0
    if m == 1:
        return float(t_isf(alpha / sides, df))

    def excess(c: float) -> float:
        level = np.full(m, c) if alternative != "less" else np.full(m, -c)
        return _mvt_exceedance(corr, df, level, alternative, seed, maxpts) - alpha

    # A single comparison's quantile bounds c from below, Bonferroni's from above.
    low = float(t_isf(alpha / sides, df)) * 0.9
    high = float(t_isf(alpha / (sides * m), df)) * 1.1 + 0.1
    return float(find_root(excess, low, high, xtol=1e-7))


def dunnett(
    estimates,
    n,
    mse: float,
    df_error: float,
    *,
    control: int = 0,
    weights=None,
    alpha: float = 0.05,
    alternative: Alternative = "two-sided",
    seed: int | None = None,
    maxpts_per_dim: int = 10_000,
) -> ComparisonFamily:
    """Every group against a control group, Dunnett's simultaneous tests and intervals.

    For group i the difference d_i = est_i - est_control has covariance
    cov(d_i, d_j) = MSE * (V_ij - V_i0 - V_j0 + V_00), V = W diag(1/n) W'; the statistics
    t_i = d_i / se_i jointly follow a multivariate t with ``df_error`` degrees of freedom and the
    correlation of the d_i (Dunnett 1955, JASA 50, 1096-1121, eq. 1 and p. 1103, there for
    cells; the same argument holds for any W). The adjusted p value of comparison i is
    P(max_j |T_j| >= |t_i|) (two-sided; max_j T_j >= t_i for "greater", min_j T_j <= t_i for
    "less"), and the interval is d_i -/+ c * se_i with c the 1 - alpha quantile of that maximum.

    The probabilities are quasi-Monte Carlo integrals (Genz & Bretz 2009) with
    ``maxpts_per_dim`` points per dimension, all taken with the same ``seed`` so that p values and
    the critical value agree; their absolute error is of order 1e-5. With ``seed=None`` a seed is
    drawn and recorded in the result.
    """
    alpha = _check_alpha(alpha)
    alternative = _check_alternative(alternative)
    seed = _check_seed(seed)
    est, v, mse, df_error = _group_structure(estimates, n, mse, df_error, weights)
    g = est.size
    if isinstance(control, bool) or not isinstance(control, (int, np.integer)) or not (
        0 <= control < g
    ):
        raise FitError(
            f"'control' must be the index of one of the {g} groups, 0 to {g - 1} "
            f"(got {control!r})."
        )
    control = int(control)
    others = [i for i in range(g) if i != control]
    cov = (
        v[np.ix_(others, others)]
        - v[others, control][:, None]
        - v[control, others][None, :]
        + v[control, control]
    )
    se = np.array([_pair_se(v, mse, i, control) for i in others])
    corr = cov / np.sqrt(np.outer(np.diag(cov), np.diag(cov)))
    corr = (corr + corr.T) / 2.0
    np.fill_diagonal(corr, 1.0)
    if np.linalg.eigvalsh(corr).min() <= 1e-10:
        raise FitError(
            "the differences from the control are linearly dependent (their correlation matrix "
            "is singular); each group must be a different, independent combination of cells."
        )
    if (
        isinstance(maxpts_per_dim, bool)
        or not isinstance(maxpts_per_dim, (int, np.integer))
        or maxpts_per_dim < 100
    ):
        raise FitError(
            f"'maxpts_per_dim' must be a whole number of at least 100 (got {maxpts_per_dim!r})."
        )
    maxpts = int(maxpts_per_dim) * corr.shape[0]
    crit = _dunnett_critical(corr, df_error, alpha, alternative, seed, maxpts)
    out = []
    for pos, i in enumerate(others):
        diff = float(est[i] - est[control])
        t = diff / float(se[pos])
        p = _mvt_exceedance(corr, df_error, np.full(len(others), t), alternative, seed, maxpts)
        low = diff - crit * se[pos] if alternative != "less" else -np.inf
        high = diff + crit * se[pos] if alternative != "greater" else np.inf
        out.append(
            Comparison(
                first=i,
                second=control,
                difference=diff,
                se=float(se[pos]),
                statistic=t,
                df=df_error,
                p_adjusted=p,
                critical_value=crit,
                ci_low=float(low),
                ci_high=float(high),
            )
        )
    return ComparisonFamily(
        method="Dunnett",
        alpha=alpha,
        alternative=alternative,
        comparisons=tuple(out),
        n_groups=g,
        control=control,
        seed=seed,
    )


# ---------------------------------------------------------------------------------------------
# Scheffe


def _scheffe_critical(family_df: int, df_error: float, alpha: float) -> float:
    return float(np.sqrt(family_df * f_isf(alpha, family_df, df_error)))


def _scheffe_p(t: float, family_df: int, df_error: float) -> float:
    return float(f_sf(t * t / family_df, family_df, df_error))


def scheffe_pairs(
    estimates,
    n,
    mse: float,
    df_error: float,
    *,
    weights=None,
    alpha: float = 0.05,
) -> ComparisonFamily:
    """All pairwise differences judged by Scheffe's criterion.

    The critical value sqrt((g - 1) F_(1-alpha; g-1, df_error)) covers every contrast among the
    g group means simultaneously (Scheffe 1953, Biometrika 40, 87-104; Scheffe 1959, *The
    Analysis of Variance*, sec. 3.5), so these pairwise intervals may be joined by any other
    contrast tested with :func:`scheffe_contrast` without loss of coverage. For a factor's
    marginal means g - 1 is that factor's degrees of freedom. The adjusted p value is
    P(F_(g-1, df) >= t^2 / (g - 1)).
    """
    alpha = _check_alpha(alpha)
    est, v, mse, df_error = _group_structure(estimates, n, mse, df_error, weights)
    g = est.size
    family_df = g - 1
    crit = _scheffe_critical(family_df, df_error, alpha)
    out = []
    for i in range(g):
        for j in range(i + 1, g):
            se = _pair_se(v, mse, i, j)
            diff = float(est[i] - est[j])
            p = _scheffe_p(diff / se, family_df, df_error)
            out.append(pairwise_comparison(i, j, diff, se, df_error, p, crit))
    return two_sided_family("Scheffe", alpha, out, g)


def scheffe_contrast(
    coefficients,
    estimates,
    n,
    mse: float,
    df_error: float,
    *,
    weights=None,
    alpha: float = 0.05,
) -> ContrastComparison:
    """One contrast sum_i a_i est_i (sum a_i = 0) among g group means, Scheffe's interval.

    se = sqrt(MSE * a' V a) with V = W diag(1/n) W'; critical value and p value as in
    :func:`scheffe_pairs` with g - 1 numerator degrees of freedom (Scheffe 1953).
    """
    alpha = _check_alpha(alpha)
    est, v, mse, df_error = _group_structure(estimates, n, mse, df_error, weights)
    a = np.asarray(coefficients, dtype=np.float64)
    if a.shape != est.shape:
        raise FitError(
            f"'coefficients' needs one weight per group ({est.size}) (got shape {a.shape})."
        )
    if not np.all(np.isfinite(a)) or not np.any(a != 0.0):
        raise FitError(
            f"'coefficients' must be finite and not all zero (got {a.tolist()})."
        )
    if abs(a.sum()) > 1e-9 * np.abs(a).sum():
        raise FitError(
            f"Scheffe's criterion covers contrasts, whose coefficients sum to 0 (got sum "
            f"{a.sum():g}); subtract the mean coefficient or test the sum another way."
        )
    g = est.size
    family_df = g - 1
    var = mse * float(a @ v @ a)
    if not var > 0.0:
        raise FitError(
            "the contrast has zero variance: it gives no weight to any observed cell; check "
            "'coefficients' and 'weights'."
        )
    se = float(np.sqrt(var))
    estimate = float(a @ est)
    t = estimate / se
    crit = _scheffe_critical(family_df, df_error, alpha)
    return ContrastComparison(
        coefficients=tuple(float(x) for x in a),
        estimate=estimate,
        se=se,
        statistic=t,
        df=df_error,
        family_df=family_df,
        p_adjusted=_scheffe_p(t, family_df, df_error),
        critical_value=crit,
        ci_low=estimate - crit * se,
        ci_high=estimate + crit * se,
        alpha=alpha,
    )
