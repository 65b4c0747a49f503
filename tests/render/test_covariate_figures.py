"""Tests of the two covariate figures of reporter/render/figures.py ("adjusted-means" and
"covariate").

Sources outside the project: SVG 1.1 (W3C Recommendation, 2011) read with the standard
library's ``xml.etree.ElementTree``, and matplotlib's own SVG canvas (FigureCanvasSVG) as the
reference of the drawing (see test_figures.py). The bounded-points check at 10^5 rows compares
the drawn bins with a whole-array pandas groupby.
"""

from __future__ import annotations

import hashlib
import json
import re

import numpy as np
import pandas as pd
import pytest

from reporter.errors import RenderError
from reporter.inference.scatter import covariate_points
from reporter.narrative.document import FigureSpec
from reporter.render.figures import PALETTE, draw_svg

from .test_figures import HERE, SVG_NS, _count_markers, _group, _parse, _run_python, _stock_canvas_svg

GROUPS = ("restudy", "quiz-paper", "quiz-screen")


def adjusted_spec(adjusted=(17.7, 20.7, 21.7)) -> FigureSpec:
    return FigureSpec("adjusted-means", (
        ("groups", GROUPS),
        ("means", (17.9, 20.6, 22.1)), ("ci_low", (16.1, 18.7, 20.3)), ("ci_high", (19.7, 22.5, 23.9)),
        ("adjusted", adjusted), ("adjusted_low", tuple(a - 1.05 for a in adjusted)),
        ("adjusted_high", tuple(a + 1.05 for a in adjusted)),
        ("y_label", "recalled"), ("ci_label", "95% CI"), ("x_label", "practice"),
    ))


def covariate_spec(n=40, seed=3, reference=20.0) -> FigureSpec:
    rng = np.random.default_rng(seed)
    xs, ys, lines = [], [], []
    for mu in (18.0, 21.0, 21.0):
        x = np.round(rng.normal(20, 6, n))
        y = np.round(mu + 0.72 * (x - 20) + rng.normal(0, 3.4, n), 1)
        xs.append(tuple(x.tolist()))
        ys.append(tuple(y.tolist()))
        lines.append((float(x.min()), mu + 0.72 * (x.min() - 20), float(x.max()), mu + 0.72 * (x.max() - 20)))
    return FigureSpec("covariate", (
        ("groups", GROUPS), ("x", tuple(xs)), ("y", tuple(ys)), ("lines", tuple(lines)),
        ("x_label", "pretest"), ("y_label", "recalled"), ("legend_title", "practice"), ("reference", reference),
    ))


SPECS = {"adjusted-means": adjusted_spec, "covariate": covariate_spec}


@pytest.mark.parametrize("kind", list(SPECS), ids=str)
def test_drawing_is_the_stock_svg_canvas_output(kind):
    """The figures' canvas writes what matplotlib's stock SVG canvas writes, byte for byte."""
    spec = SPECS[kind]()
    assert draw_svg(spec, id_prefix="s") == _stock_canvas_svg(spec, "s")


_DIGESTS = f"""
    import hashlib, json, sys
    sys.path.insert(0, {str(HERE.parent)!r})
    import render.test_covariate_figures as t
    from reporter.render.figures import draw_svg
    print(json.dumps({{k: hashlib.sha256(draw_svg(f()).encode()).hexdigest() for k, f in t.SPECS.items()}}))
"""


def test_same_spec_gives_identical_bytes_in_two_processes():
    """Two fresh processes with different hash seeds draw byte-identical SVG, equal to this one's."""
    first = json.loads(_run_python(_DIGESTS, PYTHONHASHSEED="1"))
    second = json.loads(_run_python(_DIGESTS, PYTHONHASHSEED="2"))
    assert first == second
    assert first == {k: hashlib.sha256(draw_svg(f()).encode()).hexdigest() for k, f in SPECS.items()}
    assert draw_svg(covariate_spec(seed=4)) != draw_svg(covariate_spec())
    assert draw_svg(adjusted_spec((17.0, 20.0, 21.0))) != draw_svg(adjusted_spec())


@pytest.mark.parametrize("kind", list(SPECS), ids=str)
def test_one_self_contained_svg_element(kind):
    """One <svg> element with size and viewBox; no script, style or reference outside it."""
    svg = draw_svg(SPECS[kind]())
    for forbidden in ("<?xml", "<!--", "<metadata", "<style", "<script", "https://"):
        assert forbidden not in svg
    root = _parse(svg)
    assert root.tag == f"{{{SVG_NS}}}svg" and root.get("viewBox") == "0 0 460.8 259.2"
    ids = {e.get("id") for e in root.iter() if e.get("id")}
    for e in root.iter():
        for name, value in e.attrib.items():
            if name.split("}")[-1] == "href":
                assert value.startswith("#") and value[1:] in ids


def test_adjusted_means_marks_raw_and_adjusted_with_intervals():
    """Each group has a raw mean, an adjusted mean, an interval for each and the line joining
    them; a group with neither is labelled "no data"."""
    root = _parse(draw_svg(adjusted_spec(), id_prefix="a"))
    for i in range(3):
        for gid in (f"a-raw-{i}", f"a-adjusted-{i}", f"a-raw-ci-{i}", f"a-adjusted-ci-{i}", f"a-shift-{i}"):
            assert _group(root, gid) is not None, gid
    spec = FigureSpec("adjusted-means", tuple(
        (key, value[:2] + (None,) if key in ("means", "ci_low", "ci_high", "adjusted", "adjusted_low",
                                             "adjusted_high") else value)
        for key, value in adjusted_spec().data))
    root = _parse(draw_svg(spec, id_prefix="e"))
    assert _group(root, "e-no-data-2") is not None and _group(root, "e-raw-2") is None
    assert _group(root, "e-no-data-1") is None


def test_covariate_draws_every_point_a_line_per_group_and_the_reference():
    """Each group's pairs are drawn (missing values left out) in the group's palette colour, with
    its own fitted line; the reference value is a vertical line."""
    spec = covariate_spec()
    data = dict(spec.data)
    ys = list(data["y"])
    ys[1] = ys[1][:5] + (None,) + ys[1][6:]
    data["y"] = tuple(ys)
    root = _parse(draw_svg(FigureSpec("covariate", tuple(data.items())), id_prefix="c"))
    assert [_count_markers(root, f"c-points-{i}") for i in range(3)] == [40, 39, 40]
    assert all(_group(root, f"c-line-{i}") is not None for i in range(3))
    assert _group(root, "c-reference") is not None
    for i in range(3):
        uses = list(_group(root, f"c-points-{i}").iter(f"{{{SVG_NS}}}use"))
        assert all(f"fill: {PALETTE[i].lower()}" in u.get("style", "") for u in uses)


def test_covariate_without_data_says_so():
    """No points and no lines: "no data" and no reference line."""
    spec = FigureSpec("covariate", (("groups", ("a", "b")), ("x", ((), ())), ("y", ((), ())),
                                    ("lines", (None, None)), ("x_label", "x"), ("y_label", "y"),
                                    ("reference", 1.0)))
    root = _parse(draw_svg(spec, id_prefix="n"))
    assert _group(root, "n-no-data") is not None and _group(root, "n-reference") is None


@pytest.mark.parametrize("spec, fragment", [
    (FigureSpec("covariate", (("groups", ("a",)), ("x", ((1.0,),)), ("y", ((1.0, 2.0),)), ("lines", (None,)))),
     "must pair up"),
    (FigureSpec("covariate", (("groups", ("a", "b")), ("x", ((1.0,),)), ("y", ((1.0,),)), ("lines", (None,)))),
     "'x' must be a tuple of 2"),
    (FigureSpec("adjusted-means", tuple((k, v[:2] if k == "adjusted" else v) for k, v in adjusted_spec().data)),
     "'adjusted' must be a tuple of 3"),
], ids=["unpaired", "groups-mismatch", "adjusted-length"])
def test_malformed_specs_raise_render_error(spec, fragment):
    """A malformed spec raises RenderError naming the key."""
    with pytest.raises(RenderError, match=re.escape(fragment)):
        draw_svg(spec)


class _Rows:
    def __init__(self, cell, y, x):
        self.cell, self.y, self.x = cell, y, x

    def batches(self, size):
        for s in range(0, self.cell.size, size):
            yield self.cell[s:s + size], self.y[s:s + size], self.x[s:s + size]


def test_points_stay_bounded_at_1e5_rows():
    """10^5 rows in three cells: the drawing holds at most 200 markers per cell, and they sit at
    the bin means a whole-array pandas groupby gives."""
    rng = np.random.default_rng(9)
    n = 100_000
    cell = rng.integers(0, 3, n)
    x = rng.normal(20.0, 6.0, (n, 1))
    y = 18.0 + 1.5 * cell + 0.75 * (x[:, 0] - 20.0) + rng.normal(0.0, 3.5, n)
    pts = covariate_points(_Rows(cell, y, x), 3, np.full((3, 1), 0.75), np.array([20.0]))[0]
    spec = FigureSpec("covariate", (
        ("groups", GROUPS), ("x", tuple(p.x for p in pts)), ("y", tuple(p.y for p in pts)),
        ("lines", tuple((p.low, 0.0, p.high, 1.0) for p in pts)), ("x_label", "pretest"), ("y_label", "recalled"),
    ))
    svg = draw_svg(spec, id_prefix="b")
    root = _parse(svg)
    counts = [_count_markers(root, f"b-points-{i}") for i in range(3)]
    assert all(0 < c <= 200 for c in counts) and counts == [len(p.x) for p in pts]
    assert len(svg) < 400_000
    xc = x[cell == 0, 0]
    idx = np.clip(np.floor((xc - xc.min()) / (xc.max() - xc.min()) * 200).astype(int), 0, 199)
    ref = pd.Series(y[cell == 0]).groupby(idx).mean().to_numpy()
    np.testing.assert_allclose(pts[0].y, ref, rtol=1e-12)
