"""Simultaneous post-hoc comparisons among group means.

A *group* is either one cell of the design or one factor's unweighted marginal mean. Every
function here takes the group estimates together with their variance structure under the
cell-means model: the per-cell counts ``n`` (length k) and a weights matrix ``W`` (g x k) that
maps cell means to group means (the identity when the groups are the cells). The estimates
are then W @ cell_means and, with MSE the pooled within-cell variance,

    var(group_i - group_j) = MSE * sum_c (W_ic - W_jc)^2 / n_c,

the variance used by every family below. For cells this is MSE * (1/n_i + 1/n_j).

With covariates the groups are adjusted means and every function takes ``cov``, the covariance
of the adjusted cell means divided by sigma^2 (U, k x k, from the covariance-analysis fit), in
place of diag(1/n): var(group_i - group_j) = MSE * (w_i - w_j)' U (w_i - w_j), MSE and df_error
those of the adjusted model. Scheffe's intervals hold exactly for any U. Tukey-Kramer with a
general U is the generalized Tukey-Kramer procedure of Hochberg & Tamhane (1987), *Multiple
Comparison Procedures*, Wiley (chapter 3, the general linear model): its simultaneous coverage
of at least 1 - alpha is proven for diagonal U (Hayter 1984) but not for every U, and is reported
by them as holding in the covariance-analysis settings studied (value from memory; no page is
quoted). Dunnett's computation needs the one-factor correlation of the differences from the
control (lam_i lam_j). Two or three differences with positive correlations always have it
exactly (lam_i^2 = r_ij r_ik / r_jk); with every slope per cell the adjusted means are
uncorrelated (U diagonal), so the structure holds for any number; with four or more differences
and a slope common to several cells, the shared slope estimate breaks that structure in general,
and the family is then refused with that reason.

Families:

* all pairs, Tukey-Kramer: Tukey (1953), "The problem of multiple comparisons" (unpublished
  manuscript, printed in The Collected Works of John W. Tukey, vol. VIII, 1994); Kramer (1956),
  Biometrics 12(3), 307-310, for unequal sample sizes;
* every group against a control, Dunnett (1955), JASA 50(272), 1096-1121, with the
  many-to-one probabilities reduced to a deterministic double integral (normal times chi) and
  evaluated by adaptive Gauss–Kronrod quadrature to about 1e-10;
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
from reporter.numerics.distributions import f_isf, f_sf, t_cdf, t_isf, t_sf
from reporter.numerics.quadrature import integrate
from reporter.numerics.roots import find_root

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

    ``control`` is the control group's index for Dunnett's family (None otherwise).
    """

    method: str
    alpha: float
    alternative: str
    comparisons: tuple[Comparison, ...]
    n_groups: int
    control: int | None = None

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
    estimates, n, mse, df_error, weights, cov=None
) -> tuple[np.ndarray, np.ndarray, float, float]:
    """Validate the inputs; return estimates, V = W diag(1/n) W' (or W U W' for a given unscaled
    covariance U of the cell means), mse and df_error."""
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
    if cov is None:
        v = (wu / counts[used]) @ wu.T
    else:
        u = np.asarray(cov, dtype=np.float64)
        if u.shape != (counts.size, counts.size) or not np.all(np.isfinite(u[np.ix_(used, used)])):
            raise FitError(f"'cov' must be a finite ({counts.size}, {counts.size}) covariance of the cell means "
                           f"(got shape {u.shape}).")
        v = wu @ u[np.ix_(used, used)] @ wu.T
        v = (v + v.T) / 2.0
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
    cov=None,
) -> ComparisonFamily:
    """All pairwise differences with Tukey-Kramer simultaneous intervals.

    For groups i < j the difference d = est_i - est_j has standard error
    se = sqrt(MSE * sum_c (W_ic - W_jc)^2 / n_c). The adjusted p value is the upper tail of the
    studentized range with g groups and ``df_error`` degrees of freedom at q = sqrt(2)|d|/se
    (:func:`studentized_range_sf`, one quadrature for all pairs), and the interval is d -/+ q_(1-alpha; g, df) / sqrt(2) * se (Tukey 1953; Kramer 1956,
    Biometrics 12, 307-310; Hayter 1984, Annals of Statistics 12, 61-75, proves the intervals
    conservative for unequal n).

    Parameters: ``estimates`` (g,) group estimates; ``n`` (k,) cell counts; ``mse`` and
    ``df_error`` of the full cell-means model; ``weights`` (g, k) maps cell means to group
    means (default: the groups are the cells).
    """
    alpha = _check_alpha(alpha)
    est, v, mse, df_error = _group_structure(estimates, n, mse, df_error, weights, cov)
    g = est.size
    crit = studentized_range_isf(alpha, g, df_error) / np.sqrt(2.0)
    pairs = [(i, j) for i in range(g) for j in range(i + 1, g)]
    se = [_pair_se(v, mse, i, j) for i, j in pairs]
    diff = [float(est[i] - est[j]) for i, j in pairs]
    # One quadrature for every pair: the studentized range with g means and df_error df.
    p = studentized_range_sf([abs(d / e) * np.sqrt(2.0) for d, e in zip(diff, se)], g, df_error)
    out = [pairwise_comparison(i, j, d, e, df_error, float(pp), crit) for (i, j), d, e, pp in zip(pairs, diff, se, p)]
    return two_sided_family("Tukey-Kramer", alpha, out, g)


# ---------------------------------------------------------------------------------------------
# Dunnett


def _draw_seed() -> int:
    """A fresh 53-bit seed from the operating system's entropy (exact as a JSON number)."""
    return int(np.random.SeedSequence().generate_state(1, dtype=np.uint64)[0] >> np.uint64(11))


def _check_seed(seed) -> int:
    """A validated seed (used by the permutation test); None draws one."""
    if seed is None:
        return _draw_seed()
    if isinstance(seed, (bool, np.bool_)) or not isinstance(seed, (int, np.integer)) or seed < 0:
        raise FitError(
            f"'seed' must be a non-negative whole number or None (got {seed!r}); a fixed "
            "seed makes the result reproducible."
        )
    return int(seed)


# Error tolerances of the nested quadrature (absolute, on a probability) and of the root search
# for the critical value; see :func:`dunnett_exceedance`.
_INNER_TOL = 1e-12
_OUTER_TOL = 1e-10
_CRIT_XTOL = 1e-10
_Z_EDGES = np.linspace(-8.5, 8.5, 9)  # beyond |z| = 8.5 the normal mass is below 2e-17


def _chi_at_normal_quantile(w: np.ndarray, df: float) -> np.ndarray:
    """s with P(S <= s) = Phi(w), S = sqrt(chi2_df / df), each tail from its own exact argument."""
    from scipy import special

    lower = w <= 0.0
    x = np.empty_like(w)
    x[lower] = special.gammaincinv(df / 2.0, special.ndtr(w[lower]))
    x[~lower] = special.gammainccinv(df / 2.0, special.ndtr(-w[~lower]))
    return np.sqrt(2.0 * x / df)


def dunnett_exceedance(lam, df: float, c: float, two_sided: bool) -> float:
    """P(max_i |T_i| >= c) (two-sided) or P(max_i T_i >= c) for Dunnett's many-to-one statistics.

    T_i = Z_i / S with corr(Z_i, Z_j) = lam_i lam_j (i != j) and S = sqrt(chi2_df / df)
    independent of Z. Writing Z_i = lam_i Z_0 + sqrt(1 - lam_i^2) X_i with independent standard
    normal Z_0, X_i reduces the m-dimensional probability to a double integral (Dunnett 1955,
    JASA 50, 1096-1121, for this product correlation structure; Hochberg & Tamhane 1987,
    *Multiple Comparison Procedures*, Wiley, on one-factor correlation structures):

        P(max |T_i| < c) = E_S ∫ phi(z) prod_i [Phi((cS - lam_i z)/tau_i) - Phi((-cS - lam_i z)/tau_i)] dz,

    tau_i = sqrt(1 - lam_i^2). The exceedance 1 - prod_i(1 - q_i) is integrated directly (as
    -expm1(sum log1p(-q_i))), so small p values keep their relative accuracy. The inner integral
    over z runs on [-8.5, 8.5]; the outer one is over S written as its quantile at Phi(w), w
    standard normal on [-8.5, 8.5] (a smooth change of variable for every df); both are
    adaptive Gauss–Kronrod (:mod:`reporter.numerics.quadrature`) with error estimates below 1e-11
    (each inner integral) and 1e-10 (the outer), so the probability is accurate to about 1e-10
    absolute (truncating z adds less than 2e-17).
    """
    from scipy import special

    lam = np.asarray(lam, dtype=float)
    tau = np.sqrt(1.0 - lam * lam)

    def inner(s: np.ndarray) -> np.ndarray:
        def f(z: np.ndarray) -> np.ndarray:
            zz = z[:, None, None] * lam[None, None, :]
            cs = (c * s)[None, :, None]
            q = special.ndtr((zz - cs) / tau)  # P(Z_i > cS | z, s)
            if two_sided:
                q = q + special.ndtr((-cs - zz) / tau)  # P(Z_i < -cS | z, s)
            with np.errstate(divide="ignore"):  # q = 1: log1p(-1) = -inf, exceedance 1
                out = -np.expm1(np.sum(np.log1p(-np.minimum(q, 1.0)), axis=2))
            return out * (np.exp(-0.5 * z * z) / np.sqrt(2.0 * np.pi))[:, None]

        return integrate(f, _Z_EDGES, _INNER_TOL)[0]

    def outer(w: np.ndarray) -> np.ndarray:
        density = np.exp(-0.5 * w * w) / np.sqrt(2.0 * np.pi)
        return (inner(_chi_at_normal_quantile(w, df)) * density)[:, None]

    value = float(integrate(outer, _Z_EDGES, _OUTER_TOL)[0][0])
    return min(max(value, 0.0), 1.0)


def _many_to_one_lambdas(cov: np.ndarray) -> np.ndarray:
    """The lam_i with corr(d_i, d_j) = lam_i lam_j, when the differences share only the control.

    For groups built from disjoint cells cov(d_i, d_j) = var(control) for i != j, so
    lam_i = sqrt(var(control) / var(d_i)) (Dunnett 1955, p. 1100).
    """
    sd = np.sqrt(np.diag(cov))
    corr = cov / np.outer(sd, sd)
    m = corr.shape[0]
    off = corr[~np.eye(m, dtype=bool)]
    if m == 1:
        return np.array([0.0])
    if np.any(off <= 0.0):
        raise FitError(
            "Dunnett's comparisons need positively correlated differences from the control "
            "(groups built from disjoint cells); these groups share cells in another way."
        )
    # lam_i^2 = corr_ij corr_ik / corr_jk for any j, k distinct from i; average over pairs.
    if m == 2:
        lam = np.full(2, np.sqrt(off[0]))
    else:
        lam = np.empty(m)
        for i in range(m):
            others = [j for j in range(m) if j != i]
            vals = [corr[i, j] * corr[i, k] / corr[j, k] for a, j in enumerate(others) for k in others[a + 1:]]
            lam[i] = np.sqrt(np.mean(vals))
        fitted = np.outer(lam, lam)
        np.fill_diagonal(fitted, 1.0)
        if np.max(np.abs(fitted - corr)) > 1e-10:
            raise FitError(
                "Dunnett's comparisons need the many-to-one correlation structure "
                "corr(d_i, d_j) = lam_i lam_j (groups built from disjoint cells); these groups "
                "share cells in another way."
            )
    if np.any(lam >= 1.0):
        raise FitError("a difference from the control has no variance of its own; check the weights.")
    return lam


def _dunnett_p(lam: np.ndarray, df: float, t: float, alternative: str) -> float:
    if lam.size == 1:
        if alternative == "two-sided":
            return float(min(2.0 * t_sf(abs(t), df), 1.0))
        return float(t_sf(t, df)) if alternative == "greater" else float(t_cdf(t, df))
    if alternative == "two-sided":
        return dunnett_exceedance(lam, df, abs(t), True)
    return dunnett_exceedance(lam, df, t if alternative == "greater" else -t, False)


def studentized_range_sf(q, k: int, df: float) -> np.ndarray:
    """P(Q >= q) for the studentized range of k means with df degrees of freedom, for each q.

    Q = R / S with R the range of k independent standard normals and S = sqrt(chi2_df / df)
    independent of them, so (Hartley 1942, Biometrika 32, 309-310; Lund & Lund 1983, Applied
    Statistics 32, 204-210)

        P(R >= w) = k ∫ phi(z) [Phi(z)^(k-1) - (Phi(z) - Phi(z - w))^(k-1)] dz,

    integrated in the form -k ∫ phi(z) Phi(z)^(k-1) expm1((k-1) log1p(-Phi(z - w)/Phi(z))) dz so
    that small tail probabilities keep their relative accuracy, and P(Q >= q) = E_S P(R >= qS).
    Both integrals are adaptive Gauss–Kronrod with the change of variable used for Dunnett's
    probabilities (:func:`dunnett_exceedance`); the result is accurate to about 1e-10 absolute
    and agrees with ``scipy.stats.studentized_range.sf`` to its accuracy. All q values share
    the quadrature, so a family of comparisons costs about as much as one.
    """
    from scipy import special

    qv = np.atleast_1d(np.asarray(q, dtype=float))
    if k < 2:
        raise FitError(f"the studentized range needs at least 2 means (got {k}).")

    def inner(s: np.ndarray) -> np.ndarray:
        w = (s[:, None] * qv[None, :]).ravel()

        def f(z: np.ndarray) -> np.ndarray:
            pz = special.ndtr(z)[:, None]
            ratio = special.ndtr(z[:, None] - w[None, :]) / pz
            with np.errstate(divide="ignore"):
                tail = -np.expm1((k - 1) * np.log1p(-np.minimum(ratio, 1.0)))
            logpz = special.log_ndtr(z)[:, None]
            dens = np.exp(-0.5 * z * z)[:, None] / np.sqrt(2.0 * np.pi)
            return k * dens * np.exp((k - 1) * logpz) * tail

        return integrate(f, _Z_EDGES, _INNER_TOL)[0].reshape(s.size, qv.size)

    def outer(w: np.ndarray) -> np.ndarray:
        density = np.exp(-0.5 * w * w) / np.sqrt(2.0 * np.pi)
        return inner(_chi_at_normal_quantile(w, df)) * density[:, None]

    value = integrate(outer, _Z_EDGES, _OUTER_TOL * max(1, qv.size))[0]
    return np.clip(value, 0.0, 1.0)


def studentized_range_isf(alpha: float, k: int, df: float) -> float:
    """The q with P(Q >= q) = alpha (Brent's method to 1e-10), for Tukey's critical value."""
    # Bracket: the Bonferroni bound on the pairs from above, the two-mean case from below.
    pairs = k * (k - 1) / 2.0
    low = float(np.sqrt(2.0) * t_isf(alpha / 2.0, df))
    high = float(np.sqrt(2.0) * t_isf(alpha / (2.0 * pairs), df))
    if k == 2:
        return low
    return float(find_root(lambda q: float(studentized_range_sf(q, k, df)[0]) - alpha, low * 0.999,
                           high * 1.001 + 1e-9, xtol=_CRIT_XTOL))


def dunnett_critical(lam, df: float, alpha: float, alternative: str = "two-sided") -> float:
    """The c with P(max |T_i| >= c) = alpha (two-sided) or P(max T_i >= c) = alpha (one-sided).

    Found by Brent's method to 1e-10 on the probability of :func:`dunnett_exceedance`; the
    single-test t quantile bounds c from below and Bonferroni's from above.
    """
    lam = np.asarray(lam, dtype=float)
    m = lam.size
    sides = 2.0 if alternative == "two-sided" else 1.0
    if m == 1:
        return float(t_isf(alpha / sides, df))
    two = alternative == "two-sided"
    low = float(t_isf(alpha / sides, df))
    high = float(t_isf(alpha / (sides * m), df))
    return float(find_root(lambda c: dunnett_exceedance(lam, df, c, two) - alpha, low * 0.999, high * 1.001 + 1e-9,
                           xtol=_CRIT_XTOL))


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
    cov=None,
) -> ComparisonFamily:
    """Every group against a control group, Dunnett's simultaneous tests and intervals.

    For group i the difference d_i = est_i - est_control has covariance
    cov(d_i, d_j) = MSE * (V_ij - V_i0 - V_j0 + V_00), V = W diag(1/n) W'; the statistics
    t_i = d_i / se_i jointly follow a multivariate t with ``df_error`` degrees of freedom and the
    correlation of the d_i, which for groups built from disjoint cells is lam_i lam_j with
    lam_i = sqrt(V_00 / (V_ii + V_00)) (Dunnett 1955, JASA 50, 1096-1121, eq. 1 and p. 1103,
    there for cells; the same argument holds for marginal means of one factor). The adjusted p
    value of comparison i is P(max_j |T_j| >= |t_i|) (two-sided; max_j T_j >= t_i for "greater",
    min_j T_j <= t_i for "less"), and the interval is d_i -/+ c * se_i with c the 1 - alpha
    quantile of that maximum.

    The probabilities are deterministic double integrals (:func:`dunnett_exceedance`): error
    below about 1e-10 on every p value and below 1e-9 on the critical value (checked to 1e-6
    against published tables and scipy.stats.dunnett in the tests).
    """
    alpha = _check_alpha(alpha)
    alternative = _check_alternative(alternative)
    est, v, mse, df_error = _group_structure(estimates, n, mse, df_error, weights, cov)
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
    cov_d = (
        v[np.ix_(others, others)]
        - v[others, control][:, None]
        - v[control, others][None, :]
        + v[control, control]
    )
    se = np.array([_pair_se(v, mse, i, control) for i in others])
    try:
        lam = _many_to_one_lambdas((cov_d + cov_d.T) / 2.0)
    except FitError as exc:
        if cov is None:
            raise
        raise FitError(
            "Dunnett's adjusted p values need differences from the control that are correlated only "
            "through the control (a one-factor correlation lam_i lam_j); adjusted means also share the "
            "estimated covariate slopes, which breaks that structure here, and a general multivariate t "
            "probability is not computed. Compare the groups with the control through the all-pairs "
            "Tukey–Kramer or Scheffé family, or state the comparisons as planned hypotheses"
        ) from exc
    crit = dunnett_critical(lam, df_error, alpha, alternative)
    out = []
    for pos, i in enumerate(others):
        diff = float(est[i] - est[control])
        t = diff / float(se[pos])
        p = _dunnett_p(lam, df_error, t, alternative)
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
    cov=None,
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
    est, v, mse, df_error = _group_structure(estimates, n, mse, df_error, weights, cov)
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
    cov=None,
) -> ContrastComparison:
    """One contrast sum_i a_i est_i (sum a_i = 0) among g group means, Scheffe's interval.

    se = sqrt(MSE * a' V a) with V = W diag(1/n) W'; critical value and p value as in
    :func:`scheffe_pairs` with g - 1 numerator degrees of freedom (Scheffe 1953).
    """
    alpha = _check_alpha(alpha)
    est, v, mse, df_error = _group_structure(estimates, n, mse, df_error, weights, cov)
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
