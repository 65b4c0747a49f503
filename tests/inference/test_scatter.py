"""Tests of reporter/inference/scatter.py: the bounded points of the outcome-against-covariate
figure.

Reference values are computed here with numpy and pandas directly on the whole arrays (every
row, bin sums by ``pandas.DataFrame.groupby``), independently of the batched two-pass code; the
binned scatter plot with equal-width bins is described by Cattaneo, Crump, Farrell & Feng
(2024), "On binscatter", American Economic Review 114(5), 1488-1514.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from reporter.inference.scatter import covariate_points


class ArrayRows:
    """The ``batches`` answer of the row-access protocol over numpy arrays, in file order."""

    def __init__(self, cell, y, x):
        self.cell, self.y, self.x = np.asarray(cell), np.asarray(y, dtype=float), np.asarray(x, dtype=float)

    def batches(self, size):
        for start in range(0, self.cell.size, size):
            end = start + size
            yield self.cell[start:end], self.y[start:end], self.x[start:end]


def _data(n, k, p, seed=5):
    rng = np.random.default_rng(seed)
    cell = rng.integers(0, k, n)
    x = rng.normal(0.0, 3.0, (n, p)) + np.arange(p)
    y = cell * 2.0 + x @ np.linspace(0.8, 0.2, p) + rng.normal(0.0, 1.0, n)
    return cell, y, x


def _partial(cell, y, x, b, r, j):
    centred = x - r
    fitted = (centred * b[cell]).sum(axis=1)
    return y - fitted + b[cell, j] * centred[:, j]


def test_small_cells_give_every_row_in_file_order():
    """Cells of at most max_points rows give each row, in file order, unbinned; with one
    covariate the outcome is drawn as it is."""
    cell, y, x = _data(90, 3, 1)
    out = covariate_points(ArrayRows(cell, y, x), 3, np.full((3, 1), 0.7), np.array([0.5]), max_points=200,
                           batch_rows=17)
    assert len(out) == 1 and len(out[0]) == 3
    for c, pts in enumerate(out[0]):
        mask = cell == c
        assert pts.n == mask.sum() and not pts.summarized
        assert pts.x == tuple(x[mask, 0]) and pts.y == tuple(y[mask])
        assert pts.low == x[mask, 0].min() and pts.high == x[mask, 0].max()


def test_other_covariates_are_adjusted_out():
    """With two covariates, the outcome drawn against covariate j is y − b·(x_l − r_l) for the
    other covariate l (partial residual), cell by cell with per-cell slopes."""
    cell, y, x = _data(60, 2, 2)
    b = np.array([[0.9, -0.4], [0.5, 0.3]])
    r = np.array([0.2, 1.1])
    out = covariate_points(ArrayRows(cell, y, x), 2, b, r, batch_rows=7)
    for j in range(2):
        expected = _partial(cell, y, x, b, r, j)
        for c in range(2):
            mask = cell == c
            np.testing.assert_allclose(out[j][c].y, expected[mask], rtol=0, atol=1e-12)
            assert out[j][c].x == tuple(x[mask, j])


@pytest.mark.parametrize("batch_rows", [1_000, 65_536])
def test_large_cells_are_binned_at_1e5_rows(batch_rows):
    """At 10^5 rows each cell has at most 200 points: the means of equal-width covariate bins,
    equal to a whole-array pandas groupby, whatever the batch size."""
    n, k, p, bins = 100_000, 4, 2, 200
    cell, y, x = _data(n, k, p)
    cell[:150] = 3  # cell 3 also big; make cell 0 small by moving its rows away
    cell[cell == 0] = 1
    cell[:120] = 0
    b = np.tile([0.8, 0.2], (k, 1))
    r = x.mean(axis=0)
    out = covariate_points(ArrayRows(cell, y, x), k, b, r, max_points=bins, batch_rows=batch_rows)
    for j in range(p):
        partial = _partial(cell, y, x, b, r, j)
        small = out[j][0]
        assert small.n == 120 and not small.summarized and len(small.x) == 120
        for c in range(1, k):
            pts = out[j][c]
            mask = cell == c
            assert pts.summarized and pts.n == mask.sum()
            assert 0 < len(pts.x) <= bins and len(pts.x) == len(pts.y)
            xc = x[mask, j]
            lo, hi = xc.min(), xc.max()
            assert (pts.low, pts.high) == (lo, hi)
            idx = np.clip(np.floor((xc - lo) / (hi - lo) * bins).astype(int), 0, bins - 1)
            ref = pd.DataFrame({"bin": idx, "x": xc, "y": partial[mask]}).groupby("bin").mean()
            np.testing.assert_allclose(pts.x, ref["x"].to_numpy(), rtol=1e-12, atol=1e-12)
            np.testing.assert_allclose(pts.y, ref["y"].to_numpy(), rtol=1e-12, atol=1e-12)
            assert list(pts.x) == sorted(pts.x)


def test_empty_and_constant_cells():
    """An empty cell has no points and no range; a cell whose covariate never varies puts all
    its rows into one bin."""
    cell = np.r_[np.zeros(300, int), np.full(5, 2)]
    x = np.r_[np.full(300, 4.0), np.arange(5.0)][:, None]
    y = np.arange(305.0)
    out = covariate_points(ArrayRows(cell, y, x), 3, np.zeros((3, 1)), np.zeros(1), max_points=200)[0]
    assert out[0].summarized and out[0].x == (4.0,) and out[0].y == (pytest.approx(149.5),)
    assert out[1].n == 0 and out[1].x == () and out[1].low is None
    assert out[2].n == 5 and not out[2].summarized


def test_bad_shapes_are_refused():
    """Slopes that do not match the cells and covariates, or no points at all, are refused."""
    rows = ArrayRows(np.zeros(3, int), np.zeros(3), np.zeros((3, 1)))
    with pytest.raises(ValueError, match="shape"):
        covariate_points(rows, 2, np.zeros((1, 1)), np.zeros(1))
    with pytest.raises(ValueError, match="at least 1"):
        covariate_points(rows, 1, np.zeros((1, 1)), np.zeros(1), max_points=0)


@pytest.mark.parametrize("reader", ["in-memory", "out-of-core"])
def test_both_readers_give_the_same_points(tmp_path, reader):
    """Through the real row access of each reader (numpy in memory, DuckDB out of core), the
    points equal the whole-array reference computed here from the written values."""
    from reporter.api import prepare

    rng = np.random.default_rng(21)
    n = 900
    group = np.where(rng.random(n) < 0.8, "big", "small")
    x = np.round(rng.normal(50.0, 8.0, n), 1)
    y = np.round(3.0 + 0.5 * x + (group == "big") + rng.normal(0.0, 2.0, n), 2)
    lines = ["g,x,y"] + [f"{g},{a:.1f},{b:.2f}" for g, a, b in zip(group, x, y)]
    (tmp_path / "d.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    (tmp_path / "p.toml").write_text(
        f'title = "t"\n[data]\npath = "d.csv"\noutcome = "y"\nreader = "{reader}"\n'
        '[[factors]]\nname = "g"\nlevels = ["small", "big"]\n[[covariates]]\nname = "x"\n', encoding="utf-8")
    prep = prepare(tmp_path / "p.toml")
    cov = prep.cells.covariates
    out = covariate_points(prep.rows, 2, np.full((2, 1), 0.5), np.zeros(1), max_points=200)[0]
    for c, name in enumerate(("small", "big")):
        mask = group == name
        pts = out[c]
        xs = x[mask]
        assert pts.n == mask.sum()
        assert pts.low + cov.pivot[0] == pytest.approx(xs.min(), abs=1e-9)
        assert pts.high + cov.pivot[0] == pytest.approx(xs.max(), abs=1e-9)
        if not pts.summarized:
            np.testing.assert_allclose(np.sort(np.array(pts.x) + cov.pivot[0]), np.sort(xs), atol=1e-9)
            np.testing.assert_allclose(np.sort(np.array(pts.y) + prep.cells.pivot), np.sort(y[mask]), atol=1e-9)
            continue
        idx = np.clip(np.floor((xs - xs.min()) / (xs.max() - xs.min()) * 200).astype(int), 0, 199)
        ref = pd.DataFrame({"b": idx, "x": xs, "y": y[mask]}).groupby("b").mean()
        np.testing.assert_allclose(np.array(pts.x) + cov.pivot[0], ref["x"], atol=1e-9)
        np.testing.assert_allclose(np.array(pts.y) + prep.cells.pivot, ref["y"], atol=1e-9)
    assert out[0].summarized is False and out[1].summarized is True
