"""The variance-check verdict warns about little power only when the smallest cell is small
(below SMALL_CELL rows: common practice, no source), never for cells of thousands of rows."""

from __future__ import annotations

import numpy as np

from reporter.api import analyze
from reporter.narrative.assumptions import SMALL_CELL


def _verdict(n_per_cell: int) -> str:
    rng = np.random.default_rng(11)
    g = np.repeat(["a", "b", "c"], n_per_cell)
    y = rng.normal(10.0, 2.0, g.size)  # equal variances: the test should not reject
    import pandas as pd

    rep = analyze(pd.DataFrame({"g": g, "y": y}), outcome="y", factors=["g"], hypotheses={"all equal": "a = b = c"})
    return rep.to_markdown()


def test_small_cells_get_the_power_caution():
    text = _verdict(SMALL_CELL - 20)
    assert "with small cells such a test has little power" in text


def test_large_cells_do_not():
    text = _verdict(SMALL_CELL * 40)
    assert "does not indicate unequal variances" in text
    assert "little power" not in text
