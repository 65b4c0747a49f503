"""Assumption checks on the residuals of the covariance analysis: the cell table of z = y − b'x
and row checks on it, against statsmodels OLS residuals and leverages and scipy.stats."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats
from statsmodels.stats.outliers_influence import OLSInfluence

from reporter.inference.assumptions import adjusted_cells, homogeneity_both, normality, qq_quantiles, screen_outliers
from reporter.intake.memory_rows import MemoryRows

from ancova_cases import model_for, simulate

CASES = {"common, 2 covariates": ([9, 14, 11, 16], 2, "common"),
         "per-cell, 1 covariate": ([9, 14, 11], 1, "per-cell"),
         "mixed": ([10, 13, 12], 2, ("per-cell", "common"))}


def _case(name):
    sizes, p, mode = CASES[name]
    k = len(sizes)
    cell, y, x = simulate(sizes, p=p, seed=40 + k)
    cells, model, fit, ref = model_for(cell, y, x, k, mode)
    z = y - np.einsum("ij,ij->i", x, model.slopes[cell])
    rows = MemoryRows(z, cell, k, np.arange(1, cell.size + 1))
    return cell, cells, model, fit, rows, adjusted_cells(cells, model.slopes)


@pytest.mark.parametrize("name", list(CASES), ids=list(CASES))
def test_adjusted_cells_hold_the_ancova_residual_ss(name):
    """The within-cell SS of z sum to statsmodels' residual SS (reference library) and each cell's
    deviations are its OLS residuals."""
    cell, cells, model, fit, rows, zc = _case(name)
    assert zc.ss_within == pytest.approx(float(fit.ssr), rel=1e-10)
    for c in range(cells.k):
        assert zc.ss[c] == pytest.approx(float(np.sum(fit.resid[cell == c] ** 2)), rel=1e-9)


@pytest.mark.parametrize("name", list(CASES), ids=list(CASES))
def test_levene_brown_forsythe_and_shapiro_on_ancova_residuals(name):
    """Levene and Brown–Forsythe on z equal scipy.stats.levene(center='mean' / 'median') on the OLS
    residuals by cell, and Shapiro–Wilk equals scipy.stats.shapiro of the residuals (reference
    libraries statsmodels and scipy)."""
    cell, cells, model, fit, rows, zc = _case(name)
    groups = [fit.resid[cell == c] for c in range(cells.k)]
    bf, lev = homogeneity_both(rows, zc)
    assert lev.statistic == pytest.approx(stats.levene(*groups, center="mean").statistic, rel=1e-9)
    assert bf.statistic == pytest.approx(stats.levene(*groups, center="median").statistic, rel=1e-9)
    sw = normality(rows, zc)
    ref = stats.shapiro(np.asarray(fit.resid))
    assert sw.statistic == pytest.approx(ref.statistic, rel=1e-6)
    assert sw.p == pytest.approx(ref.pvalue, rel=1e-4)


@pytest.mark.parametrize("name", list(CASES), ids=list(CASES))
def test_mean_leverage_is_the_cell_average_of_statsmodels_leverage(name):
    """(1 + tr(Q_c S_xx,c))/n_c equals the mean of statsmodels' hat-matrix diagonal over the
    cell's rows (reference library), and the exact leverage of each row
    (CovariateModel.leverage) equals the diagonal itself."""
    cell, cells, model, fit, rows, zc = _case(name)
    hat = OLSInfluence(fit).hat_matrix_diag
    lev = model.mean_leverage(cells.covariates.sxx)
    for c in range(cells.k):
        assert lev[c] == pytest.approx(hat[cell == c].mean(), rel=1e-9)
    sizes, p, mode = CASES[name]
    _, _, x = simulate(sizes, p=p, seed=40 + len(sizes))
    np.testing.assert_allclose(model.leverage(cell, x - model.xbar[cell]), hat, rtol=1e-9)


def test_outlier_screen_uses_the_adjusted_model_and_cell_leverage():
    """A planted outlier is flagged; each flagged row's internal r is its OLS residual over
    sqrt(MSE (1 − h_c)) with the adjusted model's MSE and df and the cell's average leverage
    (the documented choice), OLS values from statsmodels (reference library)."""
    sizes, p, mode = [12, 15, 13], 1, "common"
    cell, y, x = simulate(sizes, p=p, seed=77)
    y[5] += 12.0
    cells, model, fit, _ = model_for(cell, y, x, 3, mode)
    z = y - x[:, 0] * model.slopes[cell, 0]
    rows = MemoryRows(z, cell, 3, np.arange(1, cell.size + 1))
    zc = adjusted_cells(cells, model.slopes)
    h = model.mean_leverage(cells.covariates.sxx)
    scan, flagged = screen_outliers(rows, zc, mse=float(fit.mse_resid), df_e=int(fit.df_resid), leverage=h)
    assert 6 in [o.row for o in scan.outliers]
    for o in scan.outliers:
        e = float(fit.resid[o.row - 1])
        assert o.residual == pytest.approx(e, rel=1e-9)
        assert o.internal == pytest.approx(e / np.sqrt(fit.mse_resid * (1 - h[o.cell])), rel=1e-9)
    qq = qq_quantiles(rows, zc, float(fit.mse_resid), leverage=h)
    assert qq.n_residuals == cell.size
