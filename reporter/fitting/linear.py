"""Least squares through the cell statistics, and t and F tests of hypotheses on cell means.

For the full model (one mean per cell) the least-squares fitted value of every row is its cell
mean, the residual SS is the sum of the within-cell SS and X'X restricted to cell-means coding is
diag(n_c). A hypothesis C·mu = h (q rows) on the cell means is therefore tested by the general
linear hypothesis (Searle (1987), *Linear Models for Unbalanced Data*, section 8.5, eq. 8.47;
Kutner et al. (2005), *Applied Linear Statistical Models*, 5th ed., eq. 16.84 and 17.43)::

    F = (C·ȳ − h)' [C·diag(1/n_c)·C']⁻¹ (C·ȳ − h) / (q · MSE),   df = (q, N − k_observed)

and for one row by t = (c'ȳ − h) / sqrt(MSE · Σ c_c²/n_c) on N − k_observed df. Under any other
full-rank parameterization D the same hypothesis is L·β = h with L = C·D, and the statistic is
identical, so it does not depend on the coding.

The constant part of C·ȳ − h (the pivot that intake subtracted, times the row sums of C, minus h)
is computed in exact rational arithmetic.

With covariates (:mod:`reporter.fitting.ancova`) the same tests apply to the adjusted cell means
μ̂ (at the covariates' reference values) with their covariance σ²·V in place of ȳ and
σ²·diag(1/n_c): F = (C·μ̂ − h)' [C·V·C']⁻¹ (C·μ̂ − h) / (q · MSE) on the model's error df
(Searle 1987, sections 8.5 and 9.2). Every test reads ``ModelFit.adjusted_offset_mean`` and
``ModelFit.unscaled_cov``, which are ȳ − pivot and diag(1/n_c) without covariates.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from fractions import Fraction
from typing import Sequence

import numpy as np

from reporter.errors import FitError
from reporter.fitting.ancova import CovariateFit, Slope, describe_slopes, fit_covariates
from reporter.intake.cells import CellStats
from reporter.numerics.distributions import f_sf, t_cdf, t_ppf, t_sf
from reporter.model.design import in_row_space


@dataclass(frozen=True)
class ModelFit:
    """The full model fitted through the cell statistics.

    ``adjusted_offset_mean`` (k,) are the cell means at the covariates' reference values minus
    the outcome pivot (the cell means without covariates; NaN for empty cells); ``unscaled_cov``
    (k, k) their covariance divided by σ² (diag(1/n_c) without covariates; zero rows and columns
    for empty cells). ``slopes`` are the covariates' slopes (empty without covariates),
    ``covariate_reference`` the values the means are adjusted to, ``covariate_slopes_mode``
    "common", "per-cell" or "mixed" (None without covariates). ``df_error`` counts the slopes.
    """

    cells: CellStats
    df_error: int
    ss_error: float
    mse: float
    ss_total: float
    ss_model: float
    coefficients: tuple[float | None, ...]
    coefficient_se: tuple[float | None, ...]
    estimable: tuple[bool, ...]
    adjusted_offset_mean: np.ndarray | None = None
    unscaled_cov: np.ndarray | None = None
    slopes: tuple[Slope, ...] = ()
    covariate_reference: tuple[float, ...] = ()
    covariate_slopes_mode: str | None = None
    covariate_fit: CovariateFit | None = None
    slopes_note: str | None = None

    def __post_init__(self) -> None:
        if self.adjusted_offset_mean is None:
            object.__setattr__(self, "adjusted_offset_mean", self.cells.offset_mean)
        if self.unscaled_cov is None:
            object.__setattr__(self, "unscaled_cov", _diagonal_cov(self.cells))

    @property
    def has_covariates(self) -> bool:
        return self.covariate_fit is not None

    @property
    def r_squared(self) -> float:
        return self.ss_model / self.ss_total

    @property
    def residual_sd(self) -> float:
        return math.sqrt(self.mse)


@dataclass(frozen=True)
class ContrastTest:
    """The test of one compiled hypothesis.

    ``ci`` is ``(low, high)``; a one-sided test has a one-sided 1 − α bound, the open side None.
    ``row_estimates`` are C·ȳ − h per row (for F tests); ``ss`` is the hypothesis sum of squares.
    """

    test: str
    alternative: str
    df: tuple[float, ...]
    statistic: float
    p: float
    ss: float
    q: int
    row_estimates: tuple[float, ...]
    estimate: float | None = None
    se: float | None = None
    ci: tuple[float | None, float | None] | None = None
    ci_sides: int | None = None
    ci_level: float | None = None
    rhs: float | None = None

    def confidence_interval(self) -> tuple[float | None, float | None] | None:
        return self.ci


def fit_model(cells: CellStats, design_matrix: np.ndarray, covariates=None,
              cell_labels: Sequence[str] | None = None) -> ModelFit:
    """Residual SS and df, R², and the coefficients of a parameterization (β = D⁻¹·μ).

    When ``cells.covariates`` is set, the model has the covariates' columns too
    (:func:`reporter.fitting.ancova.fit_covariates`); ``covariates`` are the plan's specs (each
    with ``adjust_to``, ``adjust_to_exact`` and ``slopes``; None: common slopes at the means), and
    μ are the adjusted cell means.

    Raises :class:`FitError` when the data cannot support any test: a single observed cell,
    no residual degrees of freedom, or zero variance within every cell.
    """
    observed = cells.observed
    k_obs = int(observed.sum())
    if k_obs < 2:
        raise FitError(
            f"only {k_obs} cell has data; an ANOVA compares at least two cells. Check the factor "
            "levels in the plan against the data."
        )
    df_error = cells.df_within
    if df_error == 0:
        raise FitError(
            "every cell has exactly one observation, so there are no residual degrees of freedom "
            "and no error variance to test against. Collect more than one observation per cell "
            "(or drop a factor)."
        )
    ss_error = cells.ss_within
    ss_total = cells.ss_total
    cf = None
    if cells.covariates is not None:
        cf = fit_covariates(cells, covariates, cell_labels)
        ss_error, df_error = cf.ss_error, cf.df_error
    if ss_error <= 0.0:
        raise FitError(
            "all values within every cell are equal (zero residual variance), so F and t are "
            "undefined. Check that the outcome column is the measured value and not a group label."
        )
    mse = ss_error / df_error
    if cf is None:
        adjusted = cells.offset_mean
        V = _diagonal_cov(cells)
        ss_model = cells.ss_between
    else:
        adjusted, V = cf.adjusted_offset_mean, cf.unscaled_cov
        ss_model = ss_total - ss_error
    D = np.asarray(design_matrix, dtype=float)
    D_obs = D[observed]
    pinv = np.linalg.pinv(D_obs)  # rows: each beta as a combination of observed cell means
    estimable = tuple(bool(v) for v in in_row_space(D_obs, np.eye(D.shape[1])))
    V_obs = V[np.ix_(observed, observed)]
    coefs, ses = [], []
    for j in range(D.shape[1]):
        if not estimable[j]:
            coefs.append(None)
            ses.append(None)
            continue
        w = pinv[j]
        coefs.append(_weighted_mean_sum(w, adjusted[observed], cells.pivot_exact))
        ses.append(math.sqrt(mse * contrast_variance(w, V_obs)))
    return ModelFit(
        cells=cells,
        df_error=df_error,
        ss_error=ss_error,
        mse=mse,
        ss_total=ss_total,
        ss_model=ss_model,
        coefficients=tuple(coefs),
        coefficient_se=tuple(ses),
        estimable=estimable,
        adjusted_offset_mean=adjusted,
        unscaled_cov=V,
        slopes=() if cf is None else describe_slopes(cells, cf, mse),
        covariate_reference=() if cf is None else cf.reference,
        covariate_slopes_mode=None if cf is None else cf.mode,
        covariate_fit=cf,
        slopes_note=None if cf is None or cf.mode == "common" else _per_cell_note(cells, cf),
    )


def _diagonal_cov(cells: CellStats) -> np.ndarray:
    """diag(1/n_c), zero for empty cells: the cell means' covariance over σ² without covariates."""
    o = cells.observed
    V = np.zeros((cells.k, cells.k))
    V[o, o] = 1.0 / cells.n[o]
    V.setflags(write=False)
    return V


def _per_cell_note(cells: CellStats, cf: CovariateFit) -> str:
    names = [n for n, m in zip(cells.covariates.names, cf.modes) if m == "per-cell"]
    at = ", ".join(f"{n} = {v:.6g}" for n, v, m in zip(cells.covariates.names, cf.reference, cf.modes) if m == "per-cell")
    return (f"Each cell has its own slope for {', '.join(names)}, so differences between adjusted means depend on "
            f"the covariate value; every effect is evaluated at {at} (the reference value).")


def contrast_variance(w: np.ndarray, V: np.ndarray) -> float:
    """w'·V·w over the non-zero weights (V: unscaled covariance); an exactly rounded sum when V is
    diagonal there (no covariates: Σ w_c²/n_c, as always), a matrix product otherwise."""
    nz = np.flatnonzero(w)
    ww = w[nz]
    sub = V[np.ix_(nz, nz)]
    d = np.diag(sub)
    if not np.count_nonzero(sub - np.diag(d)):
        return math.fsum((ww * ww * d).tolist())
    return float(ww @ sub @ ww)


def _weighted_mean_sum(w: np.ndarray, offset_means: np.ndarray, pivot: Fraction) -> float:
    """Σ w_c·ȳ_c with ȳ_c = pivot + offset_c; the pivot part is exact when the weights are rational."""
    rational = [Fraction(x).limit_denominator(10**6) for x in w]
    if all(abs(float(r) - x) < 1e-12 for r, x in zip(rational, w)):
        const = float(pivot * sum(rational, Fraction(0)))
        return math.fsum([*(w * offset_means).tolist(), const])
    return math.fsum((w * offset_means).tolist()) + float(pivot) * math.fsum(w.tolist())


def constant_part(rows: Sequence[Sequence[Fraction]], rhs: Sequence[Fraction], pivot: Fraction) -> np.ndarray:
    """pivot·(row sums of C) − h, exactly, then rounded once."""
    return np.array([float(pivot * sum(row, Fraction(0)) - h) for row, h in zip(rows, rhs)])


def fit_contrast(
    fit: ModelFit,
    weights: Sequence[Sequence[Fraction]],
    rhs: Sequence[Fraction],
    alternative: str = "two-sided",
    alpha: float = 0.05,
    test: str | None = None,
) -> ContrastTest:
    """t (one row) or F (several rows) test of C·μ = h on the full model.

    ``alternative`` is "greater", "less" (one-sided t, H1 as stated) or "two-sided".
    ``test = "F"`` forces the F form for one row (an effect with 1 df: F = t²).
    """
    cells = fit.cells
    C = np.array([[float(w) for w in row] for row in weights])
    q = C.shape[0]
    observed = cells.observed
    if np.any(C[:, ~observed] != 0):
        raise FitError("internal: a contrast with weight on an empty cell reached the fitting layer")
    Co = C[:, observed]
    m = fit.adjusted_offset_mean[observed]
    Vo = fit.unscaled_cov[np.ix_(observed, observed)]
    const = constant_part(weights, rhs, cells.pivot_exact)
    d = np.array([math.fsum([*(row * m).tolist(), c]) for row, c in zip(Co, const)])
    V = Co @ Vo @ Co.T
    dfe = fit.df_error
    if q == 1 and test != "F":
        var = contrast_variance(Co[0], Vo)
        se = math.sqrt(fit.mse * var)
        t = d[0] / se
        h = float(rhs[0])
        estimate = d[0] + h
        level = 1.0 - alpha
        if alternative == "greater":
            p = float(t_sf(t, dfe))
            ci = (float(estimate - t_ppf(1 - alpha, dfe) * se), None)
            sides = 1
        elif alternative == "less":
            p = float(t_cdf(t, dfe))
            ci = (None, float(estimate + t_ppf(1 - alpha, dfe) * se))
            sides = 1
        else:
            p = float(2 * t_sf(abs(t), dfe))
            half = float(t_ppf(1 - alpha / 2, dfe)) * se
            ci = (float(estimate - half), float(estimate + half))
            sides = 2
        return ContrastTest(
            test="t",
            alternative=alternative,
            df=(float(dfe),),
            statistic=float(t),
            p=p,
            ss=float(d[0] ** 2 / var),
            q=1,
            row_estimates=(float(d[0]),),
            estimate=float(estimate),
            se=se,
            ci=ci,
            ci_sides=sides,
            ci_level=level,
            rhs=h,
        )
    ss = _quadratic_form(V, d)
    F = ss / q / fit.mse
    return ContrastTest(
        test="F",
        alternative="two-sided",
        df=(float(q), float(dfe)),
        statistic=float(F),
        p=float(f_sf(F, q, dfe)),
        ss=float(ss),
        q=q,
        row_estimates=tuple(float(x) for x in d),
    )


def _quadratic_form(V: np.ndarray, d: np.ndarray) -> float:
    """d' V⁻¹ d for a symmetric positive definite V, via Cholesky (V is q x q and small)."""
    try:
        L = np.linalg.cholesky(V)
    except np.linalg.LinAlgError:
        raise FitError("internal: contrast rows are linearly dependent after reduction") from None
    z = np.linalg.solve(L, d)
    return math.fsum((z * z).tolist())
