"""Simulated analysis-of-covariance data (seeded) and their statsmodels fits, shared by the tests
of the inference layer with covariates. The data are invented; statsmodels OLS is the reference."""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import statsmodels.api as sm

from reporter.inference.covariate_model import describe_covariate_model
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


def batches(cell, y, x, size):
    """(cell, y, x) chunks of at most ``size`` rows in row order."""
    for s in range(0, cell.size, size):
        yield cell[s:s + size], y[s:s + size], x[s:s + size]
