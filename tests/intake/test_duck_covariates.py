"""The out-of-core reader's covariates against the in-memory reader's, on the same small files:
the cell table's covariate statistics agree to 1e-12 relative, the exclusions and pivots are the
same, and the covariate rows (adjusted, batches) give identical numbers.

The in-memory reader is itself checked against pandas in test_data_covariates.py; here the two
readers are compared row for row (same files, same pivots, the same doubles subtracted).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from reporter.api import prepare
from reporter.errors import DataError
from test_data_covariates import project, simulated

COVS = ('[[covariates]]\nname = "pretest"\n[[covariates]]\nname = "age"\nslopes = "per-cell"\n')


def both(tmp_path, frame, name="data.csv", covariates=COVS):
    out = []
    for reader in ("in-memory", "out-of-core"):
        folder = tmp_path / reader
        folder.mkdir()
        out.append(prepare(project(folder, frame, covariates, name, reader=reader)))
    assert out[1].data.reader == "out-of-core" and out[0].data.reader == "in-memory"
    return out


def with_gaps(n=90, seed=11):
    """Simulated data with missing covariates, a missing outcome and a missing factor value."""
    frame = simulated(n, seed).astype({"pretest": object, "age": object, "schedule": object, "recall": object})
    frame.loc[[2, 17, 40], "pretest"] = "NA"
    frame.loc[[17, 33], "age"] = ""
    frame.loc[5, "recall"] = ""
    frame.loc[8, "schedule"] = ""
    return frame


@pytest.mark.parametrize("name", ["data.csv", "data.parquet"])
def test_cell_tables_agree(tmp_path, name):
    frame = simulated(120, 7) if name.endswith(".parquet") else with_gaps()
    mem, duck = both(tmp_path, frame, name)
    a, b = mem.cells.covariates, duck.cells.covariates
    assert a.names == b.names == ("pretest", "age")
    np.testing.assert_array_equal(mem.cells.n, duck.cells.n)
    np.testing.assert_allclose(b.mean, a.mean, rtol=1e-12)
    np.testing.assert_allclose(b.sxx, a.sxx, rtol=1e-12)
    np.testing.assert_allclose(b.sxy, a.sxy, rtol=1e-12)
    assert a.pivot.tolist() == b.pivot.tolist() and a.pivot_exact == b.pivot_exact
    assert mem.data.covariates.pivot_text == duck.data.covariates.pivot_text
    assert mem.data.covariates.exact == duck.data.covariates.exact == name.endswith(".csv")


def test_exclusions_agree(tmp_path):
    mem, duck = both(tmp_path, with_gaps())
    assert mem.data.exclusions == duck.data.exclusions
    reasons = {e.reason: e.count for e in duck.data.exclusions}
    assert reasons["missing covariate 'pretest'"] == 3 and reasons["missing covariate 'age'"] == 1
    assert mem.data.n_read == duck.data.n_read == 90


def test_constant_leading_digits_agree(tmp_path):
    """Covariates with 13 constant leading digits: both readers take the exact decimal offsets."""
    frame = simulated(60, 3)
    frame["pretest"] = [f"1000000000{v:.3f}" for v in frame["pretest"]]
    frame["age"] = [f"-7.{int(v)}e-5" for v in frame["age"]]  # exponents take the DECIMAL(37) route
    mem, duck = both(tmp_path, frame)
    np.testing.assert_allclose(duck.cells.covariates.sxx, mem.cells.covariates.sxx, rtol=1e-12)
    np.testing.assert_allclose(duck.cells.covariates.offset_mean, mem.cells.covariates.offset_mean, rtol=1e-12)


def _slopes(k=3, p=2):
    return np.array([[0.5, -0.25], [0.75, 0.125], [-1.5, 2.0]])[:k, :p]


def test_adjusted_rows_are_identical(tmp_path):
    """Values on a grid of quarters: offsets are exact in both readers, so z must be identical."""
    rng = np.random.default_rng(5)
    n = 75
    frame = pd.DataFrame({"recall": rng.integers(0, 400, n) / 4, "schedule": np.array(["massed", "spaced", "mixed"])[
        rng.integers(0, 3, n)], "pretest": rng.integers(100, 300, n) / 4, "age": rng.integers(72, 120, n) / 4})
    mem, duck = both(tmp_path, frame)
    b = _slopes()
    zm, zd = mem.rows.adjusted(b), duck.rows.adjusted(b)
    assert zd.kind == "duckdb" and zd.n == zm.n
    np.testing.assert_array_equal(zd.medians(), zm.medians())
    for got, want in zip(zd.deviation_stats(zm.medians()), zm.deviation_stats(zm.medians())):
        np.testing.assert_allclose(got, want, rtol=1e-13)
    np.testing.assert_array_equal(zd.sample(30, 1)[0], zm.sample(30, 1)[0])
    np.testing.assert_array_equal(zd.sample(10_000, 1)[0], zm.arrays()[0])
    assert zd.cell_points(10) == zm.cell_points(10)
    # common slopes as a (p,) vector; adjusting adjusted rows adjusts again, in both
    np.testing.assert_array_equal(duck.rows.adjusted(b[0]).sample(1000, 2)[0], mem.rows.adjusted(b[0]).arrays()[0])
    twice_m, twice_d = zm.adjusted(b[::-1]), zd.adjusted(b[::-1])
    np.testing.assert_array_equal(twice_d.sample(1000, 2)[0], twice_m.arrays()[0])
    # the adjusted rows keep the owner's database open, and closing them leaves it open
    del zd, twice_d
    assert duck.rows.medians().shape == (3,)


def test_batches_are_identical_and_bounded(tmp_path):
    frame = with_gaps(200, 2)
    mem, duck = both(tmp_path, frame)
    for size in (1, 7, 64, 10_000):
        got = list(duck.rows.batches(size))
        want = list(mem.rows.batches(size))
        assert max(len(c) for c, _, _ in got) <= size
        for i in range(3):
            np.testing.assert_array_equal(np.concatenate([g[i] for g in got]), np.concatenate([w[i] for w in want]))
    z = list(duck.rows.adjusted(_slopes()).batches(50))
    zm = list(mem.rows.adjusted(_slopes()).batches(50))
    np.testing.assert_array_equal(np.concatenate([v for _, v, _ in z]), np.concatenate([v for _, v, _ in zm]))
    assert duck.rows.covariate_arrays() is None
    assert mem.rows.covariate_arrays().shape == (duck.rows.n, 2)


def test_rows_without_covariates_have_none(tmp_path):
    mem, duck = both(tmp_path, simulated(30), covariates="")
    assert mem.cells.covariates is None and duck.cells.covariates is None
    assert mem.rows.covariate_arrays() is None and duck.rows.covariate_arrays() is None
    assert [x.shape[1] for _, _, x in duck.rows.batches(8)] == [0, 0, 0, 0]


from hypothesis import HealthCheck, event, given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402

_number = st.builds(lambda m, e, neg: f"{'-' if neg else ''}{m}e{e}" if e % 3 == 0 else
                    f"{'-' if neg else ''}{m / 10 ** (e % 4):.{e % 4}f}",
                    st.integers(1, 999_999), st.integers(-4, 4), st.booleans())


@settings(max_examples=12, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])
@given(values=st.lists(st.tuples(st.sampled_from(["massed", "spaced", "mixed"]), _number, _number, _number,
                                 st.sampled_from(["", "x", "xy"])), min_size=12, max_size=40))
def test_random_text_files_agree(tmp_path_factory, values):
    """Random decimal texts (exponents, signs, up to six digits), some covariate values missing:
    the two readers' covariate statistics agree to 1e-12 relative to each cell's scale."""
    rows = ["recall,schedule,pretest,age"]
    for level, y, a, b, gap in values:
        rows.append(f"{y},{level},{'NA' if gap == 'x' else a},{'' if gap == 'xy' else b}")
    folder = tmp_path_factory.mktemp("random")
    got = []
    for reader in ("in-memory", "out-of-core"):
        (folder / reader).mkdir()
        try:
            got.append(prepare(project(folder / reader, "\n".join(rows) + "\n", COVS, reader=reader)))
        except DataError as exc:  # data the intake refuses (a constant covariate): the same refusal from both
            got.append(str(exc).replace(str(folder / reader), ""))
    if isinstance(got[0], str) or isinstance(got[1], str):
        event("refused by both")
        assert got[0] == got[1]
        return
    event("compared")
    mem, duck = got
    a, b = mem.cells.covariates, duck.cells.covariates
    np.testing.assert_array_equal(mem.cells.n, duck.cells.n)
    scale = np.sqrt(np.einsum("cjj->cj", a.sxx))  # (k, p)
    ok = mem.cells.n > 0
    np.testing.assert_allclose(b.offset_mean[ok], a.offset_mean[ok], rtol=1e-12,
                               atol=1e-12 * float(np.nanmax(np.abs(a.offset_mean))))
    tol = 1e-12 * (scale[:, :, None] * scale[:, None, :] + 1e-300)
    assert np.all(np.abs(b.sxx - a.sxx) <= tol)
    ssy = np.sqrt(np.where(ok, mem.cells.ss, 0.0))
    assert np.all(np.abs(b.sxy - a.sxy) <= 1e-12 * scale * ssy[:, None] + 1e-300)


def test_decimal_commas_and_unicode_minus(tmp_path):
    """A ';'-separated file with decimal commas and U+2212 minus signs: the covariate is read by the
    outcome's rules in both readers, to the same exact offsets."""
    frame = simulated(45, 9)
    lines = ["recall;schedule;pretest;age"]
    for r in frame.itertuples():
        pre = f"{r.pretest - 50:.1f}".replace(".", ",").replace("-", "\u2212")
        lines.append(f"{str(r.recall).replace('.', ',')};{r.schedule};{pre};{int(r.age)}")
    out = []
    for reader in ("in-memory", "out-of-core"):
        folder = tmp_path / reader
        folder.mkdir()
        plan = project(folder, "\n".join(lines) + "\n", COVS, reader=reader)
        plan.write_text(plan.read_text(encoding="utf-8").replace(
            'outcome = "recall"', 'outcome = "recall"\ndelimiter = ";"\ndecimal = ","'), encoding="utf-8")
        out.append(prepare(plan))
    mem, duck = out
    expected = np.round(frame.pretest.to_numpy() - 50, 1)
    np.testing.assert_allclose(mem.rows.covariate_arrays()[:, 0] + mem.data.covariates.pivot[0], expected, rtol=1e-12)
    assert mem.data.covariates.pivot_text == duck.data.covariates.pivot_text
    got = np.concatenate([x for _, _, x in duck.rows.batches(16)])
    np.testing.assert_array_equal(got, mem.rows.covariate_arrays())
