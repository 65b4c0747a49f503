"""Tests of reporter/render/figures.py: the SVG figures of the report.

Sources outside the project behind the checks:

* SVG 1.1 (W3C Recommendation, 2011), section 5.1 and 5.6: the root element is ``svg`` in the
  namespace http://www.w3.org/2000/svg; ``xlink:href`` (namespace http://www.w3.org/1999/xlink)
  of ``use`` points at an element by ``#id``. The XML is read with the standard library's
  ``xml.etree.ElementTree``, an independent parser.
* Colour-vision-deficiency simulation: Machado, Oliveira & Fernandes (2009), "A
  physiologically-based model for simulation of color vision deficiency", IEEE Transactions on
  Visualization and Computer Graphics 15(6), 1291-1298, matrices for severity 1.0 (their
  supplementary table), applied to linear sRGB. sRGB transfer function and the linear sRGB to
  XYZ (D65) matrix: IEC 61966-2-1:1999. CIELAB and the 1976 colour difference ΔE*ab: CIE 15:2004.
  Contrast ratio and relative luminance: WCAG 2.1, success criterion 1.4.11 (non-text
  contrast, 3:1) and the definitions of "contrast ratio" and "relative luminance".
* The thresholds of 30 ΔE*ab between palette colours and 20 L* between neighbouring colours
  are project decisions (common practice, no source): a just-noticeable difference is about
  2.3 ΔE*ab (Sharma, Digital Color Imaging Handbook, 2003; from memory), and colours that
  must be told apart at a glance as separate categories need many times that.
"""

from __future__ import annotations

import hashlib
import io
import itertools
import json
import os
import re
import subprocess
import sys
import textwrap
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest

from reporter.errors import RenderError
from reporter.narrative.document import FigureSpec
from reporter.render.figures import PALETTE, draw_svg

SVG_NS = "http://www.w3.org/2000/svg"
XLINK_NS = "http://www.w3.org/1999/xlink"
REPO = Path(__file__).resolve().parents[2]
HERE = Path(__file__).resolve().parent


# ---------------------------------------------------------------- specs used below


def _points(seed: int = 7) -> tuple[tuple[float, ...], ...]:
    rng = np.random.default_rng(seed)
    return tuple(tuple(np.round(rng.normal(mu, 1.3, 30), 2).tolist()) for mu in (12.4, 14.6, 10.3, 9.2))


def _mean_ci(values):
    v = np.asarray(values)
    half = 2.045 * v.std(ddof=1) / np.sqrt(len(v))  # t(.975, 29) = 2.045 (scipy.stats.t.ppf)
    return float(v.mean()), float(v.mean() - half), float(v.mean() + half)


def means_spec(points=None, groups=("peat", "coir", "bark", "soil")) -> FigureSpec:
    points = _points() if points is None else points
    stats = [_mean_ci(p) if len(p) > 1 else ((p[0], None, None) if p else (None, None, None)) for p in points]
    return FigureSpec("means", (
        ("groups", groups),
        ("means", tuple(s[0] for s in stats)),
        ("ci_low", tuple(s[1] for s in stats)),
        ("ci_high", tuple(s[2] for s in stats)),
        ("points", points),
        ("y_label", "Height (mm)"),
        ("ci_label", "95% CI"),
    ))


def residuals_spec(points=None, groups=("peat", "coir", "bark", "soil")) -> FigureSpec:
    points = _points() if points is None else points
    res = tuple(tuple(float(x - np.mean(p)) for x in p) for p in points)
    return FigureSpec("residuals", (("groups", groups), ("residuals", res)))


def qq_spec(n: int = 120) -> FigureSpec:
    rng = np.random.default_rng(11)
    sample = np.sort(rng.standard_normal(n))
    # Blom plotting positions (Blom 1958), normal quantiles from the standard library.
    from statistics import NormalDist

    theo = [NormalDist().inv_cdf((i - 0.375) / (n + 0.25)) for i in range(1, n + 1)]
    return FigureSpec("qq", (("theoretical", tuple(theo)), ("sample", tuple(sample.tolist()))))


def interaction_spec(traces=None) -> FigureSpec:
    if traces is None:
        traces = (
            ("orange juice", (13.23, 22.70, 26.06), (10.0, 19.5, 23.2), (16.4, 25.9, 28.9)),
            ("ascorbic acid", (7.98, 16.77, 26.14), (5.0, 13.6, 23.0), (10.9, 19.9, 29.3)),
        )
    return FigureSpec("interaction", (
        ("x_factor", "Dose (mg/day)"),
        ("x_levels", ("0.5", "1", "2")),
        ("trace_factor", "Supplement"),
        ("traces", traces),
        ("y_label", "Tooth length"),
    ))


def all_specs() -> dict[str, FigureSpec]:
    return {
        "means": means_spec(),
        "interaction": interaction_spec(),
        "qq": qq_spec(),
        "residuals": residuals_spec(),
    }


# ---------------------------------------------------------------- helpers


def _run_python(code: str, **env) -> str:
    result = subprocess.run(
        [sys.executable, "-c", textwrap.dedent(code)],
        capture_output=True, text=True, cwd=REPO, env={**os.environ, **env}, timeout=120,
    )
    assert result.returncode == 0, result.stderr
    return result.stdout


def _parse(svg: str) -> ET.Element:
    return ET.fromstring(svg)


def _ids(root: ET.Element) -> list[str]:
    return [e.get("id") for e in root.iter() if e.get("id") is not None]


def _group(root: ET.Element, gid: str) -> ET.Element | None:
    for e in root.iter(f"{{{SVG_NS}}}g"):
        if e.get("id") == gid:
            return e
    return None


def _count_markers(root: ET.Element, gid: str) -> int:
    group = _group(root, gid)
    return 0 if group is None else sum(1 for _ in group.iter(f"{{{SVG_NS}}}use"))


# ---------------------------------------------------------------- imports


def test_importing_the_module_does_not_import_matplotlib():
    """Importing reporter.render.figures leaves matplotlib unloaded (it loads on first draw)."""
    out = _run_python("""
        import sys
        import reporter.render.figures
        print(sorted(m for m in sys.modules if m == "matplotlib" or m.startswith("matplotlib.")))
    """)
    assert out.strip() == "[]"


def test_drawing_never_imports_pyplot():
    """Drawing every kind uses the Figure API only: matplotlib.pyplot is never imported, nor
    the network modules that xml.sax.saxutils would pull in (urllib.request, ssl)."""
    out = _run_python(f"""
        import sys
        sys.path.insert(0, {str(HERE)!r})
        import test_figures as t
        from reporter.render.figures import draw_svg
        for spec in t.all_specs().values():
            draw_svg(spec)
        print("matplotlib" in sys.modules, "matplotlib.pyplot" in sys.modules,
              "urllib.request" in sys.modules, "ssl" in sys.modules)
    """)
    assert out.split() == ["True", "False", "False", "False"]


def _stock_canvas_svg(spec: FigureSpec, prefix: str) -> str:
    """The drawing as matplotlib's own SVG canvas prints it (FigureCanvasSVG.print_svg, which
    lays the figure out with a throw-away renderer and draws it with a second one)."""
    import matplotlib
    from matplotlib.backends.backend_svg import FigureCanvasSVG
    from matplotlib.figure import Figure
    from matplotlib.layout_engine import TightLayoutEngine

    import reporter.render.figures as F

    data = {key: F._plain(value) for key, value in dict(spec.data).items()}
    with matplotlib.rc_context(F._RC):
        fig = Figure(figsize=F.FIGSIZE, layout=TightLayoutEngine(pad=0.4, rect=None))
        FigureCanvasSVG(fig)
        ax = fig.add_subplot()
        F._style_axes(ax)
        F._DRAWERS[spec.kind](ax, data)
        buf = io.StringIO()
        fig.canvas.print_svg(buf, metadata={"Date": None, "Creator": None, "Format": None, "Type": None})
    return F._clean_svg(buf.getvalue(), prefix)


@pytest.mark.parametrize("case", ["means", "interaction", "qq", "residuals", "means-long-labels",
                                  "means-empty-group", "qq-empty", "interaction-missing-cell"], ids=str)
def test_drawing_is_the_stock_svg_canvas_output_byte_for_byte(case):
    """The figures' canvas (one renderer for the layout pass and the drawing) writes exactly
    what matplotlib's stock SVG canvas writes; reference: matplotlib's FigureCanvasSVG."""
    spec = all_specs()[case] if case in all_specs() else EDGE_CASES[case]()
    assert draw_svg(spec, id_prefix="s") == _stock_canvas_svg(spec, "s")


# ---------------------------------------------------------------- determinism


_DIGEST_CODE = f"""
    import hashlib, json, sys
    sys.path.insert(0, {str(HERE)!r})
    import test_figures as t
    from reporter.render.figures import draw_svg
    print(json.dumps({{k: hashlib.sha256(draw_svg(s).encode()).hexdigest()
                      for k, s in t.all_specs().items()}}))
"""


def test_same_spec_gives_identical_bytes_in_two_processes():
    """Two fresh processes (different hash seeds) draw byte-identical SVG for every kind."""
    first = json.loads(_run_python(_DIGEST_CODE, PYTHONHASHSEED="1"))
    second = json.loads(_run_python(_DIGEST_CODE, PYTHONHASHSEED="2"))
    assert first.keys() == {"means", "interaction", "qq", "residuals"}
    assert first == second
    here = {k: hashlib.sha256(draw_svg(s).encode()).hexdigest() for k, s in all_specs().items()}
    assert here == first


def test_different_data_gives_different_drawing():
    """The determinism above is not an accident of ignoring the data."""
    assert draw_svg(means_spec()) != draw_svg(means_spec(_points(seed=8)))


# ---------------------------------------------------------------- the SVG text


@pytest.mark.parametrize("kind", ["means", "interaction", "qq", "residuals"], ids=str)
def test_output_is_one_svg_element(kind):
    """The text is one <svg> element in the SVG namespace with size and viewBox, nothing else."""
    svg = draw_svg(all_specs()[kind])
    assert svg.startswith("<svg ") and svg.endswith("</svg>")
    for forbidden in ("<?xml", "<!DOCTYPE", "<!--", "<metadata", "<style", "<script"):
        assert forbidden not in svg
    root = _parse(svg)
    assert root.tag == f"{{{SVG_NS}}}svg"
    assert root.get("width") == "460.8pt" and root.get("height") == "259.2pt"
    assert root.get("viewBox") == "0 0 460.8 259.2"
    assert root.get("role") == "img"


@pytest.mark.parametrize("kind", ["means", "interaction", "qq", "residuals"], ids=str)
def test_nothing_points_outside_the_document(kind):
    """Every href/src is a #fragment naming an id in the same element; the only URIs are the
    SVG and XLink namespace names."""
    svg = draw_svg(all_specs()[kind])
    root = _parse(svg)
    ids = set(_ids(root))
    for e in root.iter():
        assert e.tag.split("}")[-1] not in {"image", "script", "foreignObject", "a", "iframe"}
        for name, value in e.attrib.items():
            local = name.split("}")[-1]
            if local in {"href", "src"}:
                assert value.startswith("#") and value[1:] in ids, (name, value)
            for target in re.findall(r"url\(([^)]*)\)", value):
                assert target.startswith("#") and target[1:] in ids, (name, value)
    uris = re.findall(r"[a-z]+://[^\"'\s)]*", svg)
    assert sorted(set(uris)) == [XLINK_NS, SVG_NS]
    assert svg.count("http://") == 2 and "https://" not in svg


def test_ids_are_unique_and_prefixed():
    """Every id carries the prefix once, so figures inlined in one page never clash."""
    svgs = [draw_svg(s, id_prefix=f"figure-{k}") for k, s in all_specs().items()]
    seen: list[str] = []
    for k, svg in zip(all_specs(), svgs):
        ids = _ids(_parse(svg))
        assert len(ids) == len(set(ids))
        assert all(i == f"figure-{k}" or i.startswith(f"figure-{k}-") for i in ids)
        seen.extend(ids)
    assert len(seen) == len(set(seen))


def test_default_prefix_depends_on_the_spec():
    """Without a prefix, two different figures still get different ids."""
    a = _parse(draw_svg(means_spec())).get("id")
    b = _parse(draw_svg(residuals_spec())).get("id")
    assert a != b and a.startswith("fig-") and b.startswith("fig-")


def test_title_is_escaped_and_first():
    """A title with markup characters arrives as text in the first child <title>."""
    root = _parse(draw_svg(qq_spec(), title='Residuals <&> "quoted"'))
    first = root[0]
    assert first.tag == f"{{{SVG_NS}}}title"
    assert first.text == 'Residuals <&> "quoted"'


# ---------------------------------------------------------------- content


@pytest.mark.parametrize("kind", ["means", "residuals"], ids=str)
def test_every_point_is_plotted(kind):
    """Each group's dots number exactly its values; missing values (None, NaN) are left out."""
    pts = list(_points())
    pts[1] = pts[1][:5] + (None, float("nan")) + pts[1][5:12]
    pts = tuple(pts)
    if kind == "means":
        clean = tuple(tuple(v for v in p if v is not None and v == v) for p in pts)
        spec = means_spec(clean)
        spec = FigureSpec("means", tuple((k, pts if k == "points" else v) for k, v in spec.data))
    else:
        spec = FigureSpec("residuals", (("groups", ("peat", "coir", "bark", "soil")), ("residuals", pts)))
    root = _parse(draw_svg(spec, id_prefix="f"))
    counts = [_count_markers(root, f"f-points-{i}") for i in range(4)]
    assert counts == [30, 12, 30, 30]


def test_qq_plots_every_pair_and_the_reference_line():
    """The Q-Q plot has one dot per (theoretical, sample) pair and a y = x reference line."""
    root = _parse(draw_svg(qq_spec(57), id_prefix="q"))
    assert _count_markers(root, "q-points") == 57
    assert _group(root, "q-reference") is not None


def test_means_marks_each_mean_and_interval():
    """Every non-empty group has a mean marker and a CI bar; an empty group has "no data"."""
    pts = _points()
    spec = means_spec((pts[0], (), pts[2], pts[3]))
    root = _parse(draw_svg(spec, id_prefix="m"))
    assert [_group(root, f"m-mean-{i}") is not None for i in range(4)] == [True, False, True, True]
    assert [_group(root, f"m-ci-{i}") is not None for i in range(4)] == [True, False, True, True]
    assert [_group(root, f"m-no-data-{i}") is not None for i in range(4)] == [False, True, False, False]


def test_interaction_draws_one_line_per_trace():
    """An interaction plot with six traces (more than markers repeat) draws six lines."""
    traces = tuple(
        (f"strain {j}", tuple(10.0 + j + i for i in range(3)), tuple(9.0 + j + i for i in range(3)),
         tuple(11.0 + j + i for i in range(3)))
        for j in range(6)
    )
    root = _parse(draw_svg(interaction_spec(traces), id_prefix="i"))
    assert [_group(root, f"i-trace-{j}") is not None for j in range(7)] == [True] * 6 + [False]


EDGE_CASES = {
    "means-empty-group": lambda: means_spec((_points()[0], (), (3.0, 4.0))[:3], ("a", "b", "c")),
    "means-one-group-one-point": lambda: means_spec(((5.0,),), ("only",)),
    "means-all-empty": lambda: means_spec(((), ()), ("a", "b")),
    "means-long-labels": lambda: means_spec(
        _points(), tuple(f"a rather long level name number {i} of the factor" for i in range(4))
    ),
    "means-flat-values": lambda: means_spec(((2.0, 2.0, 2.0), (2.0, 2.0)), ("a", "b")),
    "residuals-empty-group": lambda: residuals_spec(((1.0, 2.0, 3.0), ()), ("a", "b")),
    "residuals-one-point": lambda: residuals_spec(((1.0,),), ("a",)),
    "qq-one-point": lambda: qq_spec(1),
    "qq-empty": lambda: FigureSpec("qq", (("theoretical", ()), ("sample", ()))),
    "interaction-missing-cell": lambda: interaction_spec(
        (
            ("a", (1.0, None, 3.0), (0.5, None, 2.5), (1.5, None, 3.5)),
            ("b", (2.0, 2.5, None), (None, None, None), (None, None, None)),
        )
    ),
    "interaction-one-level-one-trace": lambda: FigureSpec("interaction", (
        ("x_factor", "A"), ("x_levels", ("a1",)), ("trace_factor", "B"),
        ("traces", (("b1", (1.0,), (None,), (None,)),)), ("y_label", "y"),
    )),
    "interaction-no-means": lambda: interaction_spec(
        (("a", (None, None, None), (None, None, None), (None, None, None)),)
    ),
}


@pytest.mark.parametrize("case", list(EDGE_CASES), ids=str)
def test_edge_cases_draw(case):
    """Empty groups, single groups, single points and flat data draw a valid SVG."""
    svg = draw_svg(EDGE_CASES[case](), id_prefix="e")
    root = _parse(svg)
    assert root.tag == f"{{{SVG_NS}}}svg"


def test_empty_groups_are_labelled_no_data():
    """Each empty group gets its own "no data" label, the others none."""
    root = _parse(draw_svg(EDGE_CASES["means-all-empty"](), id_prefix="e"))
    assert _group(root, "e-no-data-0") is not None and _group(root, "e-no-data-1") is not None
    root = _parse(draw_svg(EDGE_CASES["residuals-empty-group"](), id_prefix="e"))
    assert _group(root, "e-no-data-0") is None and _group(root, "e-no-data-1") is not None
    assert _count_markers(root, "e-points-0") == 3


BAD_SPECS = {
    "unknown-kind": (FigureSpec("pie", ()), "kind 'pie'"),
    "means-length-mismatch": (
        FigureSpec("means", (("groups", ("a", "b")), ("means", (1.0,)), ("ci_low", (0.0, 0.0)),
                             ("ci_high", (2.0, 2.0)), ("points", ((1.0,), (2.0,))),
                             ("y_label", "y"), ("ci_label", "95% CI"))),
        "'means' must be a tuple of 2",
    ),
    "not-a-number": (
        FigureSpec("residuals", (("groups", ("a",)), ("residuals", (("x",),)))),
        "'x', which is not a number",
    ),
    "bad-trace": (interaction_spec((("a", (1.0, 2.0, 3.0)),)), "Trace 1"),
}


@pytest.mark.parametrize("case", list(BAD_SPECS), ids=str)
def test_malformed_specs_raise_render_error(case):
    """A malformed spec raises RenderError naming the offending key or value."""
    spec, fragment = BAD_SPECS[case]
    with pytest.raises(RenderError, match=re.escape(fragment)):
        draw_svg(spec)


def test_bad_prefix_is_refused():
    """An id prefix that would not make valid ids is refused with the value shown."""
    with pytest.raises(RenderError, match="got 'two words'"):
        draw_svg(qq_spec(), id_prefix="two words")


# ---------------------------------------------------------------- the palette

# Machado, Oliveira & Fernandes (2009), severity 1.0, on linear sRGB.
MACHADO = {
    "protanopia": ((0.152286, 1.052583, -0.204868), (0.114503, 0.786281, 0.099216), (-0.003882, -0.048116, 1.051998)),
    "deuteranopia": ((0.367322, 0.860646, -0.227968), (0.280085, 0.672501, 0.047413), (-0.011820, 0.042940, 0.968881)),
    "tritanopia": ((1.255528, -0.076749, -0.178779), (-0.078411, 0.930809, 0.147602), (0.004733, 0.691367, 0.303900)),
}
# IEC 61966-2-1: linear sRGB to CIE XYZ, D65 white.
SRGB_TO_XYZ = np.array([
    [0.4124564, 0.3575761, 0.1804375],
    [0.2126729, 0.7151522, 0.0721750],
    [0.0193339, 0.1191920, 0.9503041],
])
D65 = np.array([0.95047, 1.0, 1.08883])


def _linear(hex_colour: str) -> np.ndarray:
    c = np.array([int(hex_colour[i:i + 2], 16) / 255 for i in (1, 3, 5)])
    return np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)


def _lab(linear_rgb: np.ndarray) -> np.ndarray:
    """CIE 15:2004 CIELAB of a linear sRGB colour (clipped to the gamut first)."""
    xyz = SRGB_TO_XYZ @ np.clip(linear_rgb, 0.0, 1.0) / D65
    d = 6 / 29
    f = np.where(xyz > d**3, np.cbrt(xyz), xyz / (3 * d * d) + 4 / 29)
    return np.array([116 * f[1] - 16, 500 * (f[0] - f[1]), 200 * (f[1] - f[2])])


def _seen(hex_colour: str, vision: str) -> np.ndarray:
    rgb = _linear(hex_colour)
    if vision != "normal":
        rgb = np.array(MACHADO[vision]) @ rgb
    return _lab(rgb)


def test_lab_conversion_matches_known_values():
    """The CIELAB code reproduces textbook values: white L*=100, sRGB red L*=53.24, a*=80.09,
    b*=67.20 (Lindbloom's calculator values, from memory), mid-grey #777777 L*=50.03."""
    assert np.allclose(_lab(_linear("#FFFFFF")), [100, 0, 0], atol=0.01)
    assert np.allclose(_lab(_linear("#FF0000")), [53.24, 80.09, 67.20], atol=0.02)
    assert abs(_lab(_linear("#777777"))[0] - 50.03) < 0.02


def test_simulation_merges_red_and_green_for_dichromats():
    """The simulation does what it should: pure red and a green of equal lightness, far apart
    for normal vision, come much closer under deuteranopia and protanopia."""
    red, green = "#D03030", "#3E8E2E"
    normal = np.linalg.norm(_seen(red, "normal") - _seen(green, "normal"))
    for vision in ("deuteranopia", "protanopia"):
        assert np.linalg.norm(_seen(red, vision) - _seen(green, vision)) < normal / 3


@pytest.mark.parametrize("vision", ["normal", "protanopia", "deuteranopia", "tritanopia"], ids=str)
def test_palette_colours_stay_apart(vision):
    """Every pair of palette colours is at least 30 ΔE*ab (1976) apart, as seen with normal
    vision and under each Machado et al. (2009) dichromacy simulation."""
    labs = {c: _seen(c, vision) for c in PALETTE}
    worst = min(np.linalg.norm(labs[a] - labs[b]) for a, b in itertools.combinations(PALETTE, 2))
    assert worst >= 30.0


def test_palette_neighbours_differ_in_lightness():
    """Consecutive palette colours (series drawn side by side) differ by at least 20 L*,
    which survives every colour-vision deficiency and grey-scale printing."""
    lightness = [_lab(_linear(c))[0] for c in PALETTE]
    assert all(abs(a - b) >= 20 for a, b in zip(lightness, lightness[1:]))


def test_palette_contrast_on_white():
    """Each colour has at least the 3:1 contrast with white that WCAG 2.1 SC 1.4.11 asks of
    graphical objects (WCAG relative luminance, with its 0.03928 threshold)."""
    def luminance(c):
        v = np.array([int(c[i:i + 2], 16) / 255 for i in (1, 3, 5)])
        v = np.where(v <= 0.03928, v / 12.92, ((v + 0.055) / 1.055) ** 2.4)
        return float(v @ [0.2126, 0.7152, 0.0722])

    assert all((1.0 + 0.05) / (luminance(c) + 0.05) >= 3.0 for c in PALETTE)


def test_palette_is_used_for_series():
    """The exported palette is the one drawn: group i's dots carry PALETTE[i]."""
    svg = draw_svg(residuals_spec(), id_prefix="r")
    root = _parse(svg)
    for i in range(4):
        uses = list(_group(root, f"r-points-{i}").iter(f"{{{SVG_NS}}}use"))
        assert uses and all(f"fill: {PALETTE[i].lower()}" in u.get("style", "") for u in uses)
