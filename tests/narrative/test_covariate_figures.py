"""The covariate figures in the report's document: their specs, captions and bounds.

Reference values: statsmodels OLS (``recalled ~ C(practice) + pretest``, the usual analysis of
covariance) for the slope and the adjusted means the fitted lines pass through at the reference
value; the binned points at 10^5 rows against a whole-array pandas groupby of equal-width
covariate bins (Cattaneo, Crump, Farrell & Feng 2024, "On binscatter", American Economic Review
114(5), 1488-1514). The data are simulated here with a fixed seed.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.formula.api as smf

import reporter
from reporter.narrative.document import Figure

LEVELS = ("restudy", "quiz-paper", "quiz-screen")


def _data(n_per_cell: int, seed: int = 12) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    practice = np.repeat(LEVELS, n_per_cell)
    pretest = rng.normal(20.0, 6.0, practice.size).round(1)
    means = {"restudy": 18.0, "quiz-paper": 21.0, "quiz-screen": 21.0}
    recalled = np.array([means[p] for p in practice]) + 0.75 * (pretest - 20.0) + rng.normal(0.0, 3.5, practice.size)
    order = rng.permutation(practice.size)
    return pd.DataFrame({"practice": practice[order], "pretest": pretest[order], "recalled": recalled[order].round(2)})


def _figures(report) -> dict[str, Figure]:
    out = {}

    def walk(blocks):
        for b in blocks:
            if isinstance(b, Figure):
                out[b.id] = b
            for attr in ("blocks", "sections"):
                walk(getattr(b, attr, ()) or ())

    walk(report.document().sections)
    return out


def _caption(fig: Figure) -> str:
    return "".join(r.text for r in fig.caption)


@pytest.fixture(scope="module")
def small():
    frame = _data(30)
    report = reporter.analyze(frame, outcome="recalled", factors={"practice": list(LEVELS)}, covariates="pretest",
                              hypotheses={"quizzing beats restudy": "(`quiz-paper` + `quiz-screen`)/2 > restudy"},
                              permutations=0)
    return frame, report, _figures(report)


def test_adjusted_means_figure_shows_both_means(small):
    """The adjusted-means figure carries each cell's raw mean and the adjusted mean statsmodels
    predicts at the mean pretest, and its caption names the reference value."""
    frame, report, figs = small
    fig = figs["fig-adjusted-means"]
    data = dict(fig.spec.data)
    ols = smf.ols("recalled ~ C(practice) + pretest", frame).fit()
    at = frame["pretest"].mean()
    expected = ols.predict(pd.DataFrame({"practice": list(LEVELS), "pretest": [at] * 3}))
    np.testing.assert_allclose(data["adjusted"], expected, rtol=1e-9)
    np.testing.assert_allclose(data["means"], frame.groupby("practice")["recalled"].mean()[list(LEVELS)], rtol=1e-12)
    assert all(lo < m < hi for lo, m, hi in zip(data["adjusted_low"], data["adjusted"], data["adjusted_high"]))
    caption = _caption(fig)
    assert "adjusted means are taken at" in caption and "95% confidence" in caption


def test_covariate_figure_lines_pass_through_the_adjusted_means(small):
    """Each cell's line has the common statsmodels slope and passes through the adjusted mean at
    the reference value; every observation is drawn and the caption says so."""
    frame, report, figs = small
    fig = figs["fig-covariate-1"]
    data = dict(fig.spec.data)
    ols = smf.ols("recalled ~ C(practice) + pretest", frame).fit()
    adjusted = dict(figs["fig-adjusted-means"].spec.data)["adjusted"]
    for c, (x0, y0, x1, y1) in enumerate(data["lines"]):
        slope = (y1 - y0) / (x1 - x0)
        assert slope == pytest.approx(ols.params["pretest"], rel=1e-9)
        assert y0 + slope * (data["reference"] - x0) == pytest.approx(adjusted[c], rel=1e-9)
    assert [len(x) for x in data["x"]] == [30, 30, 30]
    assert sorted(data["y"][0]) == sorted(frame.loc[frame.practice == "restudy", "recalled"])
    caption = _caption(fig)
    assert "one common slope, so the lines are parallel" in caption and "Every observation is drawn." in caption


def test_no_covariate_no_covariate_figures():
    """A plan without covariates draws neither figure."""
    frame = _data(10)
    report = reporter.analyze(frame, outcome="recalled", factors={"practice": list(LEVELS)}, permutations=0)
    figs = _figures(report)
    assert "fig-means" in figs and "fig-adjusted-means" not in figs
    assert not any(i.startswith("fig-covariate") for i in figs)


def test_figures_stay_bounded_at_1e5_rows_and_say_so():
    """At about 10^5 rows every cell is drawn as at most 200 bin means, equal to a pandas groupby
    of equal-width pretest bins, and the caption says the points are bin means."""
    frame = _data(33_334)
    report = reporter.analyze(frame, outcome="recalled", factors={"practice": list(LEVELS)}, covariates="pretest",
                              permutations=0)
    fig = _figures(report)["fig-covariate-1"]
    data = dict(fig.spec.data)
    assert all(0 < len(x) <= 200 for x in data["x"])
    cell = frame[frame.practice == "quiz-paper"]
    x = cell["pretest"].to_numpy()
    bins = np.clip(np.floor((x - x.min()) / (x.max() - x.min()) * 200).astype(int), 0, 199)
    ref = cell.groupby(bins)[["pretest", "recalled"]].mean()
    np.testing.assert_allclose(data["x"][1], ref["pretest"], rtol=1e-9)
    np.testing.assert_allclose(data["y"][1], ref["recalled"], rtol=1e-9)
    caption = _caption(fig)
    assert "Cells of more than 200 rows are drawn as the means of 200 equal-width bins of pretest" in caption
    assert "quiz-paper (33,334 rows)" in caption
    from reporter.render.figures import draw_svg

    assert len(draw_svg(fig.spec)) < 400_000
