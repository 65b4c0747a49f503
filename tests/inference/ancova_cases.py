"""Simulated analysis-of-covariance data (seeded) and their statsmodels fits, shared by the tests
of the inference layer with covariates. The data are invented; statsmodels OLS is the reference."""

from __future__ import annotations

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


def design_matrix(cell, x, k, mode):
    """Cell indicators and the covariates (one column per covariate, or per cell and covariate)."""
    dummies = np.eye(k)[cell]
    if mode == "common":
        return np.hstack([dummies, x])
    return np.hstack([dummies] + [dummies * x[:, [j]] for j in range(x.shape[1])])


def adjusting_rows(k, p, mode, reference):
    """A_raw (k, columns): adjusted cell means = A_raw @ beta of :func:`design_matrix`."""
    if mode == "common":
        return np.hstack([np.eye(k), np.tile(reference, (k, 1))])
    return np.hstack([np.eye(k)] + [np.eye(k) * reference[j] for j in range(p)])


def statsmodels_fit(cell, y, x, k, mode, cov_type="nonrobust"):
    return sm.OLS(y, design_matrix(cell, x, k, mode)).fit(cov_type=cov_type, use_t=True)


def slopes_from(fit, k, p, mode):
    """(k, p) slopes from the statsmodels parameters."""
    beta = np.asarray(fit.params)
    if mode == "common":
        return np.tile(beta[k:], (k, 1))
    return np.column_stack([beta[k + j * k: k + (j + 1) * k] for j in range(p)])


def model_for(cell, y, x, k, mode, reference=None):
    """(CellStats, CovariateModel, statsmodels fit, raw reference) for the rows."""
    cells = describe_cells(y, cell, k)
    cov = describe_covariates(y, x, cell, k)
    ref = x.mean(axis=0) if reference is None else np.asarray(reference, float)
    fit = statsmodels_fit(cell, y, x, k, mode)
    model = describe_covariate_model(cells.n, cov.offset_mean, cov.sxx, slopes_from(fit, k, x.shape[1], mode), mode, ref)
    return cells, model, fit, ref


def batches(cell, y, x, size):
    """(cell, y, x) chunks of at most ``size`` rows in row order."""
    for s in range(0, cell.size, size):
        yield cell[s:s + size], y[s:s + size], x[s:s + size]
