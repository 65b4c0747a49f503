"""Covariates read by the in-memory reader: the exact-decimal route for text, float64 for Parquet
and DataFrames, missing values left out under their own reason, the cell table's covariate
statistics, and the covariate rows (covariate_arrays, adjusted, batches).

References: pandas (groupby means and covariances: the within-cell cross-products are (n − 1)
times the sample covariance) and Python's decimal module (exact differences of decimal texts).
"""

from __future__ import annotations

import decimal
import textwrap
from fractions import Fraction

import numpy as np
import pandas as pd
import pytest

from reporter.api import prepare
from reporter.errors import DataError
from reporter.intake.memory_rows import MemoryRows

PLAN = """
title = "Recall after three study schedules (simulated)"
[data]
path = "{data}"
outcome = "recall"
[[factors]]
name = "schedule"
levels = ["massed", "spaced", "mixed"]
{covariates}
"""

COVS = '[[covariates]]\nname = "pretest"\n'


def simulated(n: int = 60, seed: int = 4) -> pd.DataFrame:
    """Seeded simulated data: recall depends on the schedule and on a pretest score."""
    rng = np.random.default_rng(seed)
    schedule = np.array(["massed", "spaced", "mixed"])[np.arange(n) % 3]
    pretest = np.round(rng.normal(50, 8, n), 1)
    age = np.round(rng.uniform(18, 30, n), 0)
    recall = np.round(20 + 0.4 * pretest + 2.0 * (schedule == "spaced") + rng.normal(0, 2, n), 2)
    return pd.DataFrame({"recall": recall, "schedule": schedule, "pretest": pretest, "age": age})


def project(tmp_path, frame: pd.DataFrame | str, covariates: str = COVS, name: str = "data.csv", reader: str | None = None):
    data = tmp_path / name
    if isinstance(frame, str):
        data.write_text(frame, encoding="utf-8")
    elif name.endswith(".parquet"):
        frame.to_parquet(data, index=False)
    else:
        frame.to_csv(data, index=False)
    text = textwrap.dedent(PLAN).format(data=name, covariates=covariates)
    if reader:
        text = text.replace('outcome = "recall"', f'outcome = "recall"\nreader = "{reader}"')
    plan = tmp_path / "plan.toml"
    plan.write_text(text, encoding="utf-8")
    return plan


def reference_stats(frame: pd.DataFrame, names, levels=("massed", "spaced", "mixed")):
    """Cell means and within-cell cross-products from pandas (covariance times n − 1)."""
    means, sxx, sxy = [], [], []
    for level in levels:
        part = frame[frame.schedule == level][[*names, "recall"]].astype(float)
        cov = part.cov(ddof=1).to_numpy() * (len(part) - 1)
        means.append(part[list(names)].mean().to_numpy())
        sxx.append(cov[: len(names), : len(names)])
        sxy.append(cov[: len(names), -1])
    return np.array(means), np.array(sxx), np.array(sxy)


@pytest.mark.parametrize("name", ["data.csv", "data.parquet"])
def test_cell_statistics_match_pandas(tmp_path, name):
    frame = simulated()
    covs = COVS + '[[covariates]]\nname = "age"\nslopes = "per-cell"\n'
    prep = prepare(project(tmp_path, frame, covs, name))
    st = prep.cells.covariates
    assert st.names == ("pretest", "age")
    means, sxx, sxy = reference_stats(frame, ["pretest", "age"])
    np.testing.assert_allclose(st.mean, means, rtol=1e-13)
    np.testing.assert_allclose(st.sxx, sxx, rtol=1e-11)
    np.testing.assert_allclose(st.sxy, sxy, rtol=1e-11)
    assert prep.data.covariates.exact == name.endswith(".csv")


def test_dataframe_gives_the_same_cell_table_as_the_text_file(tmp_path):
    frame = simulated()
    from_file = prepare(project(tmp_path, frame)).cells.covariates
    from_frame = prepare(project(tmp_path, frame), frame).cells.covariates
    np.testing.assert_allclose(from_frame.mean, from_file.mean, rtol=1e-14)
    np.testing.assert_allclose(from_frame.sxx, from_file.sxx, rtol=1e-12)


def test_text_is_read_through_the_exact_decimal_pivot(tmp_path):
    """Values with constant leading digits: each offset is the exact decimal difference, rounded once."""
    values = ["1000000000000.4", "1000000000000.1", "1000000000000.7", "1000000000000.2", "1000000000000.9",
              "1000000000000.3", "1000000000000.8", "1000000000000.5", "1000000000000.6"]
    rows = ["recall,schedule,pretest"] + [f"{1 + (i * 7) % 5},{['massed', 'spaced', 'mixed'][i % 3]},{v}"
                                          for i, v in enumerate(values)]
    prep = prepare(project(tmp_path, "\n".join(rows) + "\n"))
    cov = prep.data.covariates
    assert cov.pivot_text == ("1000000000000.4",) and cov.pivot_exact == (Fraction("1000000000000.4"),)
    expected = [float(decimal.Decimal(v) - decimal.Decimal(values[0])) for v in values]
    assert prep.rows.covariate_arrays()[:, 0].tolist() == expected
    # exact cell means: (.4 + .2 + .8)/3 − .4 etc., computed with decimal
    for c, level in enumerate(("massed", "spaced", "mixed")):
        own = [decimal.Decimal(v) for i, v in enumerate(values) if i % 3 == c]
        ref = sum(own) / len(own) - decimal.Decimal(values[0])
        assert abs(prep.cells.covariates.offset_mean[c, 0] - float(ref)) <= 1e-15


def test_missing_covariate_rows_are_excluded_under_their_own_reason(tmp_path):
    frame = simulated(30).astype({"pretest": object, "age": object})
    frame.loc[[3, 7], "pretest"] = "NA"
    frame.loc[[7, 11], "age"] = ""
    frame.loc[12, "recall"] = np.nan  # the outcome's reason comes first
    frame.loc[12, "pretest"] = "NA"
    covs = COVS + '[[covariates]]\nname = "age"\n'
    prep = prepare(project(tmp_path, frame, covs))
    reasons = {e.reason: (e.count, e.rows) for e in prep.data.exclusions}
    assert reasons["missing outcome 'recall'"] == (1, (14,))
    assert reasons["missing covariate 'pretest'"] == (2, (5, 9))  # lines: the header is line 1
    assert reasons["missing covariate 'age'"] == (1, (13,))  # row 7 is counted once, under pretest
    assert prep.cells.n_total == 30 - 4
    assert prep.rows.covariate_arrays().shape == (26, 2)


def test_provenance_counts_the_covariate_exclusions(tmp_path):
    from reporter.provenance import collect_provenance

    frame = simulated(30).astype({"pretest": object})
    frame.loc[[3, 7], "pretest"] = "NA"
    prep = prepare(project(tmp_path, frame))
    prov = collect_provenance(prep)
    assert dict(prov.rows_excluded)["missing covariate 'pretest'"] == 2
    assert prov.rows_used == 28


# ---------------------------------------------------------------------------------------------
# Rows


def _rows(seed=3, n=50, p=2, k=4):
    rng = np.random.default_rng(seed)
    cell = rng.integers(0, k, n)
    y = rng.normal(0, 3, n)
    x = rng.normal(0, 2, (n, p))
    return MemoryRows(y, cell, k, np.arange(n) + 2, x=x), y, cell, x


def test_adjusted_rows_hold_the_outcome_minus_the_slopes_times_the_covariates():
    rows, y, cell, x = _rows()
    b = np.array([[0.5, -1.0], [0.25, 2.0], [1.5, 0.0], [-0.75, 0.125]])
    z, zc = rows.adjusted(b).arrays()
    np.testing.assert_array_equal(zc, cell)
    np.testing.assert_allclose(z, y - (b[cell] * x).sum(axis=1), rtol=1e-14, atol=1e-14)
    common = rows.adjusted(np.array([0.5, -1.0]))  # one slope per covariate, every cell
    np.testing.assert_allclose(common.arrays()[0], y - x @ np.array([0.5, -1.0]), rtol=1e-14, atol=1e-14)
    # every row-level question then concerns z (Brown–Forsythe medians of ANCOVA residuals)
    np.testing.assert_allclose(rows.adjusted(b).medians(), [np.median(z[cell == c]) for c in range(4)])
    with pytest.raises(ValueError, match="expected \\(4, 2\\)"):
        rows.adjusted(np.ones((3, 2)))


def test_batches_cover_the_rows_in_order_in_bounded_chunks():
    rows, y, cell, x = _rows(n=103)
    got = list(rows.batches(10))
    assert [len(c) for c, _, _ in got] == [10] * 10 + [3]
    np.testing.assert_array_equal(np.concatenate([c for c, _, _ in got]), cell)
    np.testing.assert_array_equal(np.concatenate([v for _, v, _ in got]), y)
    np.testing.assert_array_equal(np.concatenate([w for _, _, w in got]), x)
    plain = MemoryRows(y, cell, 4)
    assert plain.covariate_arrays() is None
    assert all(w.shape == (len(c), 0) for c, _, w in plain.batches(50))
