"""The covariate-adjusted model as the inference layer needs it: its parameters, leverages and
the map from parameters to adjusted cell means.

The analysis of covariance with cells c and covariates x (p of them) is written with the
covariates centred within each cell (Searle (1987), *Linear Models for Unbalanced Data*,
section 9.2; Maxwell, Delaney & Kelley (2018), *Designing Experiments and Analyzing Data*,
3rd ed., chapter 9)::

    y_i = alpha_c + b_c'(x_i - xbar_c) + e_i

with one slope vector b for every cell ("common" slopes) or one per cell ("per-cell"). The
columns (cell indicators, centred covariates) span the same space as (cell indicators, raw
covariates), so fitted values, residuals, leverages and every test are the same; but X'X is
block diagonal, diag(n) beside the within-cell cross-products of the covariates (pooled over
cells for common slopes, per cell otherwise), so (X'X)^-1 needs no large inverse. The estimates
are alpha_c = ybar_c and b = Sxx^-1 Sxy. The adjusted mean of cell c at the reference values x*
is alpha_c + b_c'(x* - xbar_c), a linear map A of the parameters.

The leverage of row i in cell c is h_i = 1/n_c + d_i' Sxx_c^-1 d_i with d_i = x_i - xbar_c
(Sxx_c the pooled matrix for common slopes): the diagonal of X (X'X)^-1 X' for this block form.

Everything is on the offsets from the pivots (the outcome's and each covariate's), as elsewhere;
only differences of covariate values enter, so the pivots never meet.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from reporter.errors import FitError

__all__ = ["CovariateModel", "describe_covariate_model", "slope_matrix"]


@dataclass(frozen=True, eq=False)
class CovariateModel:
    """The parameter structure of a fitted analysis of covariance over k cells (g observed).

    ``xbar`` (k, p) cell means of the covariates (offsets; zero rows for empty cells),
    ``reference`` (p,) the covariate values the adjusted means are evaluated at (offsets),
    ``slopes`` (k, p) the slope of each covariate in each cell (the same row repeated for common
    slopes; zero rows for empty cells), ``inv_sxx`` (k, p, p) the inverse of the slopes'
    cross-product matrix of each cell (the pooled matrix repeated for common slopes).
    """

    mode: str
    n: np.ndarray
    xbar: np.ndarray
    reference: np.ndarray
    slopes: np.ndarray
    inv_sxx: np.ndarray

    @property
    def observed(self) -> np.ndarray:
        return self.n > 0

    @property
    def p(self) -> int:
        return int(self.xbar.shape[1])

    @property
    def g(self) -> int:
        return int(np.count_nonzero(self.n))

    @property
    def m(self) -> int:
        """The number of slope parameters: p (common) or g·p (per-cell)."""
        return self.p if self.mode == "common" else self.g * self.p

    def slot(self) -> np.ndarray:
        """(k,) each cell's block of slope parameters: 0 for common slopes, the cell's position
        among the observed cells for per-cell slopes (-1 for empty cells)."""
        if self.mode == "common":
            return np.where(self.observed, 0, -1)
        out = np.full(self.n.size, -1)
        out[self.observed] = np.arange(self.g)
        return out

    def gram_inverse(self) -> np.ndarray:
        """(X'X)^-1 over (alpha of the observed cells, slope blocks): block diagonal."""
        g, p, m = self.g, self.p, self.m
        out = np.zeros((g + m, g + m))
        obs = np.flatnonzero(self.observed)
        out[np.arange(g), np.arange(g)] = 1.0 / self.n[obs]
        if self.mode == "common":
            out[g:, g:] = self.inv_sxx[obs[0]]
        else:
            for s, c in enumerate(obs):
                out[g + s * p: g + (s + 1) * p, g + s * p: g + (s + 1) * p] = self.inv_sxx[c]
        return out

    def adjusting_matrix(self) -> np.ndarray:
        """A (k, g + m): adjusted cell means = A·theta; zero rows for empty cells."""
        k, g, p = self.n.size, self.g, self.p
        a = np.zeros((k, g + self.m))
        slot = self.slot()
        for s, c in enumerate(np.flatnonzero(self.observed)):
            a[c, s] = 1.0
            a[c, g + slot[c] * p: g + (slot[c] + 1) * p] = self.reference - self.xbar[c]
        return a

    def leverage(self, cell: np.ndarray, d: np.ndarray) -> np.ndarray:
        """h_i = 1/n_c + d_i' Sxx_c^-1 d_i for rows in ``cell`` with centred covariates ``d``."""
        w = np.einsum("ij,ijl,il->i", d, self.inv_sxx[cell], d)
        return 1.0 / self.n[cell] + w


def slope_matrix(slopes, names: tuple[str, ...], k: int) -> tuple[np.ndarray, str]:
    """(k, p) slopes b[c, j] from the fit's ``Slope`` records, and the mode.

    A record with ``cell`` None is a common slope (copied to every cell); otherwise it belongs to
    its cell; cells without a record keep 0 (empty cells).
    """
    b = np.zeros((k, len(names)))
    mode = "common"
    for s in slopes:
        j = names.index(s.covariate)
        if s.cell is None:
            b[:, j] = s.estimate
        else:
            mode = "per-cell"
            b[int(s.cell), j] = s.estimate
    return b, mode


def _inverse(s: np.ndarray, what: str) -> np.ndarray:
    try:
        inv = np.linalg.inv(s)
    except np.linalg.LinAlgError:
        raise FitError(f"{what} is singular, so the slopes are not estimable") from None
    if not np.all(np.isfinite(inv)):
        raise FitError(f"{what} is singular, so the slopes are not estimable")
    return (inv + inv.T) / 2.0


def describe_covariate_model(n, xbar, sxx, slopes, mode: str, reference) -> CovariateModel:
    """The :class:`CovariateModel` of a fit from the cell counts, the covariates' cell means
    ``xbar`` (k, p; offsets) and within-cell cross-products ``sxx`` (k, p, p) (as
    :class:`reporter.intake.cells.CovariateStats` holds them), the (k, p) slopes, the slopes'
    mode ("common" or "per-cell") and the reference values (offsets from the covariates' pivots)."""
    n = np.asarray(n)
    obs = n > 0
    xbar = np.asarray(xbar, dtype=float)
    k, p = xbar.shape
    xbar = np.where(obs[:, None], np.nan_to_num(xbar), 0.0)
    sxx = np.asarray(sxx, dtype=float)
    inv = np.zeros((k, p, p))
    if mode == "common":
        inv[:] = _inverse(sxx[obs].sum(axis=0), "the pooled within-cell cross-product matrix of the covariates")
    else:
        for c in np.flatnonzero(obs):
            inv[c] = _inverse(sxx[c], f"the cross-product matrix of the covariates in cell {c}")
    b = np.where(obs[:, None], np.asarray(slopes, dtype=float), 0.0)
    return CovariateModel(mode=mode, n=n.astype(np.int64), xbar=xbar,
                          reference=np.asarray(reference, dtype=float).reshape(p), slopes=b, inv_sxx=inv)
