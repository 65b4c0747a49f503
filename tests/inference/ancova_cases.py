"""Simulated analysis-of-covariance data (seeded) and their statsmodels fits, shared by the tests
of the inference layer with covariates. The data are invented; statsmodels OLS is the reference."""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import statsmodels.api as sm

from reporter.errors import FitError
from reporter.inference.covariate_model import CovariateModel
from reporter.intake.cells import describe_cells, describe_covariates


def simulate(sizes, p=1, seed=2024, hetero=True, effects=None, slopes=None, pivot=0.0):
    """Rows of an unbalanced design: cell codes, outcome, covariates (N, p)."""
    rng = np.random.default_rng(seed)
    k = len(sizes)
    cell = np.repeat(np.arange(k), sizes)
    rng.shuffle(cell)
    x = rng.normal(50.0, 10.0, size=(cell.size, p)) + 2.0 * cell[:, None]
    eff = np.linspace(0.0, 3.0, k) if effects is None else np.asarray(effects, float)
    b = np.linspace(0.6, -0.3, p) if slopes is None else np.asarray(slopes, float)
    sd = (1.0 + cell * 0.5) if hetero else 1.0
    y = pivot + eff[cell] + x @ b + rng.normal(0.0, 1.0, cell.size) * sd
    return cell, y, x


def _modes(mode, p):
    return (mode,) * p if isinstance(mode, str) else tuple(mode)


def design_matrix(cell, x, k, mode):
    """Cell indicators, then per covariate one column (common slope) or one per cell."""
    dummies = np.eye(k)[cell]
    cols = [dummies]
    for j, m in enumerate(_modes(mode, x.shape[1])):
        cols.append(x[:, [j]] if m == "common" else dummies * x[:, [j]])
    return np.hstack(cols)


def adjusting_rows(k, p, mode, reference):
    """A_raw (k, columns): adjusted cell means = A_raw @ beta of :func:`design_matrix`."""
    cols = [np.eye(k)]
    for j, m in enumerate(_modes(mode, p)):
        cols.append(np.full((k, 1), reference[j]) if m == "common" else np.eye(k) * reference[j])
    return np.hstack(cols)


def statsmodels_fit(cell, y, x, k, mode, cov_type="nonrobust"):
    return sm.OLS(y, design_matrix(cell, x, k, mode)).fit(cov_type=cov_type, use_t=True)


def slopes_from(fit, k, p, mode):
    """(k, p) slopes from the statsmodels parameters."""
    beta = np.asarray(fit.params)
    out = np.zeros((k, p))
    at = k
    for j, m in enumerate(_modes(mode, p)):
        width = 1 if m == "common" else k
        out[:, j] = beta[at:at + width]
        at += width
    return out


def model_for(cell, y, x, k, mode, reference=None):
    """(CellStats, CovariateModel, statsmodels fit, raw reference) for the rows."""
    cov = describe_covariates(y, x, cell, k)
    cells = replace(describe_cells(y, cell, k), covariates=cov)
    ref = x.mean(axis=0) if reference is None else np.asarray(reference, float)
    fit = statsmodels_fit(cell, y, x, k, mode)
    model = describe_covariate_model(cells.n, cov.offset_mean, cov.sxx, cov.sxy, mode, ref)
    np.testing.assert_allclose(model.slopes, slopes_from(fit, k, x.shape[1], mode), rtol=1e-9)
    return cells, model, fit, ref


def fitted_model(cell, y, x, k, mode, reference=None):
    """(CovariateModel, outcome cell means) of the reference fit, as the permutation F takes them."""
    cells, model, _, _ = model_for(cell, y, x, k, mode, reference)
    return model, cells.offset_mean


def batches(cell, y, x, size):
    """(cell, y, x) chunks of at most ``size`` rows in row order."""
    for s in range(0, cell.size, size):
        yield cell[s:s + size], y[s:s + size], x[s:s + size]


def slope_layout(n, modes) -> np.ndarray:
    """(k, p) position of each b[c, j] in the slope vector: covariates in order, a common slope
    taking one position and per-cell slopes one per observed cell (-1 for empty cells)."""
    obs = np.flatnonzero(np.asarray(n) > 0)
    index = np.full((np.asarray(n).size, len(modes)), -1, dtype=np.int64)
    nxt = 0
    for j, mode in enumerate(modes):
        if mode == "common":
            index[obs, j] = nxt
            nxt += 1
        elif mode == "per-cell":
            index[obs, j] = np.arange(nxt, nxt + obs.size)
            nxt += obs.size
        else:
            raise FitError(f"'slopes' must be 'common' or 'per-cell' for each covariate (got {mode!r}).")
    return index


def describe_covariate_model(n, xbar, sxx, sxy, modes, reference) -> CovariateModel:
    """A second, independent fit of the covariance analysis (the reference of these tests): cell counts ``n``, covariate means
    ``xbar`` (k, p; offsets), within-cell cross-products ``sxx`` (k, p, p) and ``sxy`` (k, p) (as
    :class:`reporter.intake.cells.CovariateStats` holds them), the slopes' mode of each covariate
    and the reference values (offsets). The slopes solve N·beta = r (module docstring)."""
    n = np.asarray(n)
    obs = n > 0
    xbar = np.asarray(xbar, dtype=float)
    k, p = xbar.shape
    modes = (modes,) * p if isinstance(modes, str) else tuple(modes)
    index = slope_layout(n, modes)
    m = int(index.max()) + 1
    normal = np.zeros((m, m))
    rhs = np.zeros(m)
    for c in np.flatnonzero(obs):
        normal[np.ix_(index[c], index[c])] += np.asarray(sxx[c], dtype=float)
        rhs[index[c]] += np.asarray(sxy[c], dtype=float)
    try:
        slope_cov = np.linalg.inv(normal)
    except np.linalg.LinAlgError:
        raise FitError("the covariates' within-cell cross-product matrix is singular, so the slopes are not "
                       "estimable") from None
    if not np.all(np.isfinite(slope_cov)):
        raise FitError("the covariates' within-cell cross-product matrix is singular, so the slopes are not "
                       "estimable")
    slope_cov = (slope_cov + slope_cov.T) / 2.0
    beta = np.linalg.solve(normal, rhs)
    slopes = np.where(obs[:, None], beta[np.maximum(index, 0)], 0.0)
    return CovariateModel(n=n.astype(np.int64), xbar=np.where(obs[:, None], np.nan_to_num(xbar), 0.0),
                          reference=np.asarray(reference, dtype=float).reshape(p), slopes=slopes, index=index,
                          slope_cov=slope_cov)
