"""The covariate-adjusted model as the inference layer needs it: its parameters, leverages and
the map from parameters to adjusted cell means.

The analysis of covariance with cells c and covariates x (p of them) is written with the
covariates centred within each cell (Searle (1987), *Linear Models for Unbalanced Data*,
section 9.2; Maxwell, Delaney & Kelley (2018), *Designing Experiments and Analyzing Data*,
3rd ed., chapter 9)::

    y_i = alpha_c + sum_j b[c, j] (x_ij - xbar_cj) + e_i

where each covariate has one slope for all cells ("common") or one per cell ("per-cell"); the
m distinct slopes form a vector beta and ``index[c, j]`` is the position of b[c, j] in it. The
columns (cell indicators, centred covariates) span the same space as (cell indicators, raw
covariates), so fitted values, residuals, leverages and every test are the same; but X'X is block
diagonal, diag(n) beside the slopes' cross-product matrix N (whose inverse is the slopes'
covariance over sigma^2), so (X'X)^-1 needs no large inverse. The estimates are alpha_c = ybar_c
and beta = N^-1 r (r the within-cell covariate x outcome cross-products in the same layout). The
adjusted mean of cell c at the reference values x* is alpha_c + b_c'(x* - xbar_c), a linear map A
of the parameters.

The leverage of row i in cell c is h_i = 1/n_c + d_i' Q_c d_i with d_i = x_i - xbar_c and Q_c
the block of N^-1 for cell c's slopes: the diagonal of X (X'X)^-1 X' for this block form.

Everything is on the offsets from the pivots (the outcome's and each covariate's); only
differences of covariate values enter, so the pivots never meet.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["CovariateModel", "covariate_model_of"]


@dataclass(frozen=True, eq=False)
class CovariateModel:
    """The parameter structure of a fitted analysis of covariance over k cells (g observed).

    ``xbar`` (k, p) cell means of the covariates (offsets; zero rows for empty cells),
    ``reference`` (p,) the covariate values the adjusted means are evaluated at (offsets),
    ``slopes`` (k, p) the slope of each covariate in each cell (zero rows for empty cells),
    ``index`` (k, p) the position of each b[c, j] in the slope vector (-1 for empty cells) and
    ``slope_cov`` (m, m) the slope vector's covariance divided by sigma^2.
    """

    n: np.ndarray
    xbar: np.ndarray
    reference: np.ndarray
    slopes: np.ndarray
    index: np.ndarray
    slope_cov: np.ndarray

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
        """The number of slope parameters."""
        return int(self.slope_cov.shape[0])

    def cell_blocks(self) -> np.ndarray:
        """(k, p, p) Q_c: the block of the slopes' covariance over sigma^2 that cell c's slopes
        use (zeros for empty cells)."""
        k, p = self.xbar.shape
        out = np.zeros((k, p, p))
        for c in np.flatnonzero(self.observed):
            out[c] = self.slope_cov[np.ix_(self.index[c], self.index[c])]
        return out

    def gram_inverse(self) -> np.ndarray:
        """(X'X)^-1 over (alpha of the observed cells, the slope vector): block diagonal."""
        g, m = self.g, self.m
        out = np.zeros((g + m, g + m))
        out[np.arange(g), np.arange(g)] = 1.0 / self.n[self.observed]
        out[g:, g:] = self.slope_cov
        return out

    def adjusting_matrix(self) -> np.ndarray:
        """A (k, g + m): adjusted cell means = A·theta; zero rows for empty cells."""
        k, g = self.n.size, self.g
        a = np.zeros((k, g + self.m))
        for s, c in enumerate(np.flatnonzero(self.observed)):
            a[c, s] = 1.0
            a[c, g + self.index[c]] += self.reference - self.xbar[c]
        return a

    def scatter(self) -> np.ndarray:
        """(g·p, m): per-cell sums of d-weighted quantities, cell-major, added into the slope
        vector's layout (a sum over cells for a common slope)."""
        p = self.p
        out = np.zeros((self.g * p, self.m))
        for s, c in enumerate(np.flatnonzero(self.observed)):
            out[s * p + np.arange(p), self.index[c]] = 1.0
        return out

    def mean_leverage(self, sxx) -> np.ndarray:
        """(k,) each cell's average leverage (1 + tr(Q_c S_xx,c)) / n_c, since the d_i of cell c
        sum their outer products to S_xx,c (the within-cell cross-products); NaN for empty cells."""
        q = self.cell_blocks()
        out = np.full(self.n.size, np.nan)
        for c in np.flatnonzero(self.observed):
            out[c] = (1.0 + float(np.trace(q[c] @ np.asarray(sxx[c], dtype=float)))) / self.n[c]
        return out

    def leverage(self, cell: np.ndarray, d: np.ndarray, blocks: np.ndarray | None = None) -> np.ndarray:
        """h_i = 1/n_c + d_i' Q_c d_i for rows in ``cell`` with centred covariates ``d``."""
        q = self.cell_blocks() if blocks is None else blocks
        return 1.0 / self.n[cell] + np.einsum("ij,ijl,il->i", d, q[cell], d)


def covariate_model_of(fit) -> CovariateModel:
    """The :class:`CovariateModel` of a :class:`reporter.fitting.linear.ModelFit` with covariates
    (its slopes, their layout and covariance, the reference values and the covariate cell means):
    the numbers the fit computed, not a second fit."""
    cells = fit.cells
    cf = fit.covariate_fit
    obs = cells.observed
    xbar = np.where(obs[:, None], np.nan_to_num(np.asarray(cells.covariates.offset_mean, dtype=float)), 0.0)
    return CovariateModel(n=np.asarray(cells.n, dtype=np.int64), xbar=xbar,
                          reference=np.asarray(cf.reference_offset, dtype=float),
                          slopes=np.where(obs[:, None], np.asarray(cf.slope_matrix, dtype=float), 0.0),
                          index=np.asarray(cf.slope_index, dtype=np.int64),
                          slope_cov=np.asarray(cf.slope_cov, dtype=float))
