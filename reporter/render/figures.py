"""Figures of the report, drawn as inline SVG from the document model's :class:`FigureSpec`.

One public function, :func:`draw_svg`, turns a spec into the text of ONE ``<svg>`` element that
the HTML and PDF renderers paste into their output. The palette is exported as :data:`PALETTE`
so that the report's CSS can use the same colours.

What :func:`draw_svg` returns, and why:

* a single ``<svg>`` element: no XML declaration, no DOCTYPE, no comments, no ``<metadata>``
  (so no date and no creator), no ``<style>`` element (its ``*`` selector would reach every SVG
  of the page once inlined; the two default stroke properties sit on the root as inherited
  presentation attributes instead), and nothing that points outside the element: every
  ``href`` is a ``#fragment`` of the element itself;
* ``width`` and ``height`` in points (the natural size, 6.4 x 3.6 inches) **and** a ``viewBox``,
  so a standalone file or a PDF page has a definite size, and the page's CSS may scale it
  (``width: 100%; height: auto`` keeps the aspect ratio from the viewBox);
* every ``id`` inside carries a prefix (``id_prefix``, by default derived from a SHA-256 of the
  spec), so several figures inlined into one HTML page never share an id;
* text drawn as glyph outlines (``svg.fonttype = "path"``) from the DejaVu Sans font shipped
  with matplotlib: the figure looks the same in every browser and in WeasyPrint whatever fonts
  the reader's machine has, at the price of text that cannot be selected. The figure's caption
  and alternative text live in the document model, not in the drawing;
* user text (level, factor and outcome names, legend entries) drawn literally: the maths
  parser and TeX are off for every text of the figure (``text.parse_math`` and
  ``text.usetex`` in the style, read by each label, tick label and legend entry when it is
  created), so ``$x$``, backslashes and braces are drawn as typed; control and bidirectional
  characters are shown as ``\\uXXXX`` (:mod:`reporter.render.visible`), and so is a character
  the font has no glyph for (say a CJK level name), which would otherwise be drawn as an empty
  box with a warning on stderr (the report's text, caption and tables show it as written);
* byte-identical output for the same spec in any process: fixed ``svg.hashsalt``, no metadata,
  seeded jitter, ids derived from the content.

Kinds (keys of :class:`FigureSpec`; a value of ``None`` is a missing value):

``"means"``
    ``groups``, ``means``, ``ci_low``, ``ci_high``, ``points``, ``y_label``, ``ci_label``; optional
    ``x_label``. The raw values of each group as small, semi-transparent dots spread horizontally
    by a seeded jitter, the mean as a larger dark marker and its confidence interval as an error
    bar drawn on top. An empty group is labelled "no data".
``"interaction"``
    ``x_factor``, ``x_levels``, ``trace_factor``, ``traces`` ((label, means, ci_low, ci_high), ...),
    ``y_label``. One line per trace through the cell means with confidence-interval error bars,
    the traces dodged slightly sideways so the bars do not overlap; every trace has its own
    colour, marker and dash pattern (the figure survives grey-scale printing); the legend is
    titled with the trace factor. A missing cell mean leaves a gap in its line.
``"qq"``
    ``theoretical``, ``sample``. The normal quantile-quantile plot of standardized residuals with
    the reference line y = x: a standardized residual already has the model's scale, so under
    normality the points follow y = x itself (no line is fitted to the data, so a wrong scale
    shows as a slope other than 1). Method: Wilk & Gnanadesikan (1968), "Probability plotting
    methods for the analysis of data", Biometrika 55(1), 1-17.
``"residuals"``
    ``groups``, ``residuals`` (one tuple per group); optional ``y_label`` (default "Residual").
    The residuals of each cell as jittered dots, with a horizontal line at 0.
``"adjusted-means"``
    ``groups``, ``means``, ``ci_low``, ``ci_high`` (the raw cell means and their intervals),
    ``adjusted``, ``adjusted_low``, ``adjusted_high`` (the covariate-adjusted means and their
    intervals), ``y_label``, ``ci_label``; optional ``x_label``. Each group shows its raw mean
    (open circle, grey interval) just left of its adjusted mean (dark diamond, dark interval),
    joined by a faint line, so the shift made by the adjustment can be read off. An empty group
    is labelled "no data".
``"covariate"``
    ``groups``, ``x``, ``y`` (one tuple of values per group, paired in order), ``lines`` (per
    group, the fitted line as ``(x0, y0, x1, y1)`` or None), ``x_label``, ``y_label``; optional
    ``legend_title`` and ``reference`` (a covariate value marked by a dashed vertical line, the
    value at which adjusted means are taken). The outcome against a covariate: each group's
    points and its fitted line in the group's colour, marker and dash pattern. The drawing
    shows the points it is given; the caller bounds them (at most 200 per cell, see
    :mod:`reporter.inference.scatter`).
``"equivalence"``
    ``claims``, ``estimates``, ``ci_low``, ``ci_high``, ``bound_low``, ``bound_high``; optional
    ``x_label`` and ``ci_label``. One row per equivalence claim, top to bottom: its bounds as a
    light band, the 1 − 2α interval as a dark line with end caps and the estimate as a dot, and a
    dotted vertical line at 0. An interval inside its band is the picture of equivalence.

The jitter is uniform within ±0.17 of a group's position, drawn from one generator with a
fixed seed in group order; given values in the same order, a row sits at the same sideways
offset in the "means" and "residuals" figures. Series beyond the sixth reuse the palette (the
interaction plot's markers and dashes still tell them apart).

The palette
-----------
Six colours in two lightness tiers that alternate in palette order (CIELAB L* about 30 and
about 60), so that neighbouring series differ in lightness, which no colour-vision deficiency
removes, and within a tier differ along the blue-yellow axis, which red-green dichromats keep:

=========  ===========  =====  ===============================
hex        name         L*     contrast on white (WCAG 2.1)
=========  ===========  =====  ===============================
#0D4687    navy         29.9   9.4 : 1
#E0731D    orange       60.1   3.2 : 1
#7C2E06    brown        30.0   9.3 : 1
#1A9FB5    cyan         60.2   3.1 : 1
#5F444B    plum grey    32.0   8.7 : 1
#A57BFF    lavender     61.1   3.0 : 1
=========  ===========  =====  ===============================

Every pair stays at least 33 CIELAB ΔE*ab (1976) apart for normal vision and under the
protanopia, deuteranopia and tritanopia simulations of Machado, Oliveira & Fernandes (2009),
"A physiologically-based model for simulation of color vision deficiency", IEEE TVCG 15(6),
1291-1298 (severity 1.0, applied to linear sRGB); every colour has at least the 3:1 contrast
against white that WCAG 2.1 success criterion 1.4.11 asks of graphical objects. The values
were found by a small search maximising the smallest such distance, then rounded; the test
suite recomputes all of it.
"""

from __future__ import annotations

import functools
import hashlib
import io
import math
import re
import textwrap
from html import escape as _html_escape

from reporter.errors import RenderError
from reporter.narrative.document import FigureSpec
from reporter.render import FIGURE_JITTER_SEED
from reporter.render.visible import show_controls

PALETTE: tuple[str, ...] = ("#0D4687", "#E0731D", "#7C2E06", "#1A9FB5", "#5F444B", "#A57BFF")
"""Series colours, in the order they are used (see the module docstring for why)."""

INK = "#222222"
"""Text, means and error bars."""

MUTED = "#6B6B6B"
"""Axis lines, reference lines and "no data" labels."""

GRID = "#E4E4E4"
"""The light horizontal grid."""

KINDS = ("means", "interaction", "qq", "residuals", "adjusted-means", "covariate", "equivalence")

FIGSIZE = (6.4, 3.6)
"""Natural size in inches; 460.8 x 259.2 pt in the SVG."""

_JITTER_SEED = FIGURE_JITTER_SEED
_JITTER_HALF_WIDTH = 0.17
_MARKERS = ("o", "s", "^", "D", "v", "p")
_DASHES = ("-", "--", ":", "-.")

_RC = {
    "text.parse_math": False,
    "text.usetex": False,
    "svg.fonttype": "path",
    "svg.hashsalt": "anova-report figures",
    "svg.id": None,
    "font.family": "DejaVu Sans",
    "font.size": 9.5,
    "axes.labelsize": 10,
    "axes.titlesize": 10,
    "xtick.labelsize": 9.5,
    "ytick.labelsize": 9,
    "legend.fontsize": 9,
    "legend.title_fontsize": 9,
    "text.color": INK,
    "axes.labelcolor": INK,
    "xtick.color": INK,
    "ytick.color": INK,
    "axes.edgecolor": MUTED,
    "axes.linewidth": 0.8,
    "axes.axisbelow": True,
    "axes.unicode_minus": True,
    "path.simplify": True,
    "lines.solid_capstyle": "round",
    "figure.facecolor": "white",
    "axes.facecolor": "white",
    "savefig.facecolor": "white",
}


def draw_svg(spec: FigureSpec, *, id_prefix: str | None = None, title: str | None = None) -> str:
    """Draw ``spec`` and return the text of one self-contained ``<svg>`` element.

    ``title``, when given (say the figure's alternative text), becomes the ``<title>`` child
    that gives the ``role="img"`` element its accessible name; it is escaped here.

    ``id_prefix`` is put before every id inside the drawing (give the figure's own id when
    several figures share a page); by default it is ``"fig-"`` plus the first 10 hex digits of
    the SHA-256 of the spec's kind and data, stable across processes.
    """
    if not isinstance(spec, FigureSpec):
        raise RenderError(f"draw_svg needs a FigureSpec (got {type(spec).__name__}).")
    if spec.kind not in KINDS:
        raise RenderError(
            f"Figure kind {spec.kind!r} is not one the renderer draws; use one of "
            f"{', '.join(repr(k) for k in KINDS)}."
        )
    if id_prefix is None:
        digest = hashlib.sha256(repr((spec.kind, spec.data)).encode("utf-8")).hexdigest()
        id_prefix = f"fig-{digest[:10]}"
    if not re.fullmatch(r"[A-Za-z][A-Za-z0-9_.-]*", id_prefix):
        raise RenderError(
            f"'id_prefix' must start with a letter and hold only letters, digits, '_', '.' "
            f"and '-' (got {id_prefix!r})."
        )
    data = {key: _plain(value) for key, value in dict(spec.data).items()}

    import matplotlib
    from matplotlib.figure import Figure
    from matplotlib.layout_engine import TightLayoutEngine

    with matplotlib.rc_context(_RC):
        # One axes: a single pass of the tight layout is exact (rect=None skips the second).
        # 72 dpi: one SVG unit per point, as the SVG writer would set while printing.
        fig = Figure(figsize=FIGSIZE, dpi=72, layout=TightLayoutEngine(pad=0.4, rect=None))
        buf = io.StringIO()
        canvas = _canvas_type()(fig, buf)
        ax = fig.add_subplot()
        _style_axes(ax)
        _DRAWERS[spec.kind](ax, data)
        canvas.write_svg()
    return _clean_svg(buf.getvalue(), id_prefix, title)


@functools.cache
def _canvas_type():
    """An SVG canvas that writes into one text buffer with one renderer, made up front.

    The layout pass asks the canvas for a renderer to measure text with (matplotlib's
    ``Figure._get_renderer`` uses ``canvas.get_renderer()`` where a canvas has one). Handing it
    the renderer that then draws the figure means every label is measured once: matplotlib
    caches text metrics per renderer, and the stock SVG canvas makes a throw-away renderer for
    the layout and a second one for the drawing. The SVG text is the same, byte for byte.
    """
    from matplotlib.backends.backend_mixed import MixedModeRenderer
    from matplotlib.backends.backend_svg import FigureCanvasSVG, RendererSVG

    class Canvas(FigureCanvasSVG):
        def __init__(self, figure, out):
            super().__init__(figure)
            width, height = figure.get_size_inches()
            self._renderer = MixedModeRenderer(
                figure, width, height, figure.dpi,
                RendererSVG(width * 72, height * 72, out, image_dpi=figure.dpi,
                            metadata={"Date": None, "Creator": None, "Format": None, "Type": None}),
            )

        def get_renderer(self):
            return self._renderer

        def write_svg(self) -> None:
            """Lay out and draw the figure into the buffer, then close the document."""
            self.figure.draw(self._renderer)
            self._renderer.finalize()

    return Canvas


# ---------------------------------------------------------------- the kinds


def _draw_means(ax, data: dict) -> None:
    groups = _strings(data, "groups")
    k = len(groups)
    means = _numbers(data, "means", k)
    lows = _numbers(data, "ci_low", k)
    highs = _numbers(data, "ci_high", k)
    points = _groups_of_numbers(data, "points", k)
    ci_label = str(data.get("ci_label") or "CI")

    empty = [i for i in _jittered_points(ax, points, 0.5) if means[i] is None]
    for i in range(k):
        if means[i] is None:
            continue
        if lows[i] is not None and highs[i] is not None:
            bars = ax.errorbar(
                [i], [means[i]],
                yerr=[[max(0.0, means[i] - lows[i])], [max(0.0, highs[i] - means[i])]],
                fmt="none", ecolor=INK, elinewidth=1.3, capsize=4, capthick=1.3, zorder=4,
            )
            bars.lines[2][0].set_gid(f"ci-{i}")
        ax.plot(
            [i], [means[i]], linestyle="none", marker="D", markersize=6.5, color=INK,
            markeredgecolor="white", markeredgewidth=0.9, zorder=5, gid=f"mean-{i}",
        )
    _no_data_labels(ax, empty)
    _category_axis(ax, groups, data.get("x_label"))
    ax.set_ylabel(_y_label(data, "y_label", None))
    _ensure_ylim(ax)
    _means_legend(
        ax, ci_label,
        points=any(points),
        means=any(m is not None for m in means),
        intervals=any(None not in (m, lo, hi) for m, lo, hi in zip(means, lows, highs)),
    )


def _draw_interaction(ax, data: dict) -> None:
    levels = _strings(data, "x_levels")
    k = len(levels)
    traces = data.get("traces")
    if traces is None or not isinstance(traces, tuple):
        raise RenderError(
            "Figure 'interaction' needs 'traces' as a tuple of (label, means, ci_low, ci_high) "
            f"(got {traces!r})."
        )
    t = len(traces)
    step = min(0.09, 0.36 / max(t, 1))
    drawn_any = False
    for j, trace in enumerate(traces):
        if not (isinstance(trace, tuple) and len(trace) == 4):
            raise RenderError(
                f"Trace {j + 1} of figure 'interaction' must be (label, means, ci_low, ci_high) "
                f"(got {trace!r})."
            )
        label = textwrap.fill(str(trace[0]), width=24)
        m, lo, hi = (_as_numbers(v, f"traces[{j}][{n}]", k) for n, v in zip((1, 2, 3), trace[1:]))
        x = [i + (j - (t - 1) / 2) * step for i in range(k)]
        colour = PALETTE[j % len(PALETTE)]
        y = [v if v is not None else math.nan for v in m]
        ax.plot(
            x, y, color=colour, linestyle=_DASHES[j % len(_DASHES)], linewidth=1.6,
            marker=_MARKERS[j % len(_MARKERS)], markersize=6, markeredgecolor="white",
            markeredgewidth=0.8, label=label, zorder=4, gid=f"trace-{j}",
        )
        full = [i for i in range(k) if None not in (m[i], lo[i], hi[i])]
        if full:
            ax.errorbar(
                [x[i] for i in full], [m[i] for i in full],
                yerr=[[max(0.0, m[i] - lo[i]) for i in full],
                      [max(0.0, hi[i] - m[i]) for i in full]],
                fmt="none", ecolor=colour, elinewidth=1.2, capsize=3, capthick=1.2, zorder=3,
            )
        drawn_any = drawn_any or any(v is not None for v in m)
    if not drawn_any:
        _no_data_labels(ax, list(range(k)))
    _category_axis(ax, levels, str(data.get("x_factor") or ""))
    ax.set_ylabel(_y_label(data, "y_label", None))
    _ensure_ylim(ax)
    if t:
        ax.legend(
            title=textwrap.fill(str(data.get("trace_factor") or ""), width=24), loc="upper left",
            bbox_to_anchor=(1.01, 1.0), frameon=False, handlelength=2.6, borderaxespad=0,
            alignment="left",
        )


def _draw_qq(ax, data: dict) -> None:
    theo = data.get("theoretical")
    if not isinstance(theo, tuple):
        raise RenderError(f"Figure 'qq' needs 'theoretical' as a tuple of numbers (got {theo!r}).")
    n = len(theo)
    x = _as_numbers(theo, "theoretical", n)
    y = _as_numbers(data.get("sample"), "sample", n)
    pairs = [(a, b) for a, b in zip(x, y) if a is not None and b is not None]
    ax.set_xlabel("Theoretical normal quantile")
    ax.set_ylabel("Standardized residual")
    if pairs:
        px, py = zip(*pairs)
        lo = min(min(px), min(py))
        hi = max(max(px), max(py))
        pad = 0.05 * (hi - lo) if hi - lo >= 1 else 0.5
        ax.plot([lo - pad, hi + pad], [lo - pad, hi + pad], color=MUTED, linewidth=1,
                linestyle="--", zorder=1, gid="reference", label="y = x")
        ax.plot(px, py, linestyle="none", marker="o", markersize=4, markeredgewidth=0,
                color=PALETTE[0], alpha=0.65, zorder=3, gid="points")
        ax.set_xlim(min(px) - pad, max(px) + pad)
        ax.set_ylim(min(py) - pad, max(py) + pad)
        ax.legend(loc="upper left", frameon=False, handlelength=2.2)
    else:
        ax.text(0.5, 0.5, "no data", transform=ax.transAxes, ha="center", va="center",
                color=MUTED, style="italic", gid="no-data")
        ax.set_xticks([])
        ax.set_yticks([])


def _draw_residuals(ax, data: dict) -> None:
    groups = _strings(data, "groups")
    k = len(groups)
    residuals = _groups_of_numbers(data, "residuals", k)
    ax.axhline(0, color=MUTED, linewidth=1, zorder=1, gid="zero")
    _no_data_labels(ax, _jittered_points(ax, residuals, 0.6))
    _category_axis(ax, groups, data.get("x_label"))
    ax.set_ylabel(_y_label(data, "y_label", "Residual"))
    _ensure_ylim(ax, symmetric=True)


def _draw_adjusted_means(ax, data: dict) -> None:
    groups = _strings(data, "groups")
    k = len(groups)
    raw = tuple(_numbers(data, key, k) for key in ("means", "ci_low", "ci_high"))
    adjusted = tuple(_numbers(data, key, k) for key in ("adjusted", "adjusted_low", "adjusted_high"))
    ci_label = str(data.get("ci_label") or "CI")
    dx = 0.15
    empty = []
    for i in range(k):
        if raw[0][i] is None and adjusted[0][i] is None:
            empty.append(i)
            continue
        if raw[0][i] is not None and adjusted[0][i] is not None:
            ax.plot([i - dx, i + dx], [raw[0][i], adjusted[0][i]], color=MUTED, linewidth=0.8,
                    linestyle=":", zorder=3, gid=f"shift-{i}")
        for name, (m, lo, hi), x, colour, marker, face in (
            ("raw", raw, i - dx, MUTED, "o", "white"),
            ("adjusted", adjusted, i + dx, INK, "D", INK),
        ):
            if m[i] is None:
                continue
            if lo[i] is not None and hi[i] is not None:
                bars = ax.errorbar(
                    [x], [m[i]], yerr=[[max(0.0, m[i] - lo[i])], [max(0.0, hi[i] - m[i])]],
                    fmt="none", ecolor=colour, elinewidth=1.3, capsize=4, capthick=1.3, zorder=4,
                )
                bars.lines[2][0].set_gid(f"{name}-ci-{i}")
            ax.plot([x], [m[i]], linestyle="none", marker=marker, markersize=6.5, color=colour,
                    markerfacecolor=face, markeredgewidth=1.2 if name == "raw" else 0.9,
                    markeredgecolor=colour if name == "raw" else "white", zorder=5,
                    gid=f"{name}-{i}")
    _no_data_labels(ax, empty)
    _category_axis(ax, groups, data.get("x_label"))
    ax.set_ylabel(_y_label(data, "y_label", None))
    _ensure_ylim(ax)
    from matplotlib.lines import Line2D

    handles = [
        Line2D([], [], color=MUTED, linewidth=1.3, marker="o", markersize=6, markerfacecolor="white",
               markeredgecolor=MUTED, markeredgewidth=1.2, label=f"Raw mean and {ci_label}"),
        Line2D([], [], color=INK, linewidth=1.3, marker="D", markersize=6, markeredgecolor="white",
               label=f"Adjusted mean and {ci_label}"),
    ]
    drawn = (any(v is not None for v in raw[0]), any(v is not None for v in adjusted[0]))
    handles = [h for h, d in zip(handles, drawn) if d]
    if handles:
        ax.legend(handles=handles, loc="lower left", bbox_to_anchor=(0, 1.0), ncols=len(handles),
                  frameon=False, borderaxespad=0.2, handlelength=1.8, columnspacing=1.6)


def _draw_covariate(ax, data: dict) -> None:
    groups = _strings(data, "groups")
    k = len(groups)
    xs = data.get("x")
    ys = data.get("y")
    lines = data.get("lines")
    for key, value in (("x", xs), ("y", ys), ("lines", lines)):
        if not isinstance(value, tuple) or len(value) != k:
            raise RenderError(
                f"Figure data {key!r} must be a tuple of {k} entries, one per group (got {value!r})."
            )
    drawn_any = False
    for i in range(k):
        colour = PALETTE[i % len(PALETTE)]
        gx = tuple(xs[i] or ())
        gy = tuple(ys[i] or ())
        if len(gx) != len(gy):
            raise RenderError(
                f"Figure data 'x[{i}]' and 'y[{i}]' must pair up ({len(gx)} and {len(gy)} values)."
            )
        pairs = [(a, b) for a, b in zip(_as_numbers(gx, f"x[{i}]", len(gx)), _as_numbers(gy, f"y[{i}]", len(gy)))
                 if a is not None and b is not None]
        if pairs:
            px, py = zip(*pairs)
            ax.plot(px, py, linestyle="none", marker=_MARKERS[i % len(_MARKERS)], markersize=3.8,
                    markeredgewidth=0, color=colour, alpha=_alpha(len(pairs), 0.55),
                    gid=f"points-{i}", zorder=2)
        line = lines[i]
        ends = None if line is None else _as_numbers(tuple(line), f"lines[{i}]", 4)
        if ends is not None and None not in ends:
            ax.plot([ends[0], ends[2]], [ends[1], ends[3]], color=colour, linewidth=1.8,
                    linestyle=_DASHES[i % len(_DASHES)], zorder=4, gid=f"line-{i}")
        drawn_any = drawn_any or bool(pairs) or (ends is not None and None not in ends)
    reference = data.get("reference")
    if drawn_any and isinstance(reference, (int, float)) and math.isfinite(reference):
        ax.axvline(float(reference), color=MUTED, linewidth=1, linestyle="--", zorder=1, gid="reference")
    ax.set_xlabel(_y_label(data, "x_label", None))
    ax.set_ylabel(_y_label(data, "y_label", None))
    ax.grid(True, axis="x", color=GRID, linewidth=0.6)
    if not drawn_any:
        ax.text(0.5, 0.5, "no data", transform=ax.transAxes, ha="center", va="center",
                color=MUTED, style="italic", gid="no-data")
        ax.set_xticks([])
        ax.set_yticks([])
        return
    from matplotlib.lines import Line2D

    handles = [
        Line2D([], [], color=PALETTE[i % len(PALETTE)], linewidth=1.6, linestyle=_DASHES[i % len(_DASHES)],
               marker=_MARKERS[i % len(_MARKERS)], markersize=5, markeredgewidth=0,
               label=textwrap.fill(groups[i], width=24))
        for i in range(k)
    ]
    ax.legend(
        handles=handles, title=textwrap.fill(str(data.get("legend_title") or ""), width=24) or None,
        loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False, handlelength=2.6,
        borderaxespad=0, alignment="left",
    )


def _draw_equivalence(ax, data: dict) -> None:
    claims = _strings(data, "claims")
    k = len(claims)
    est = _numbers(data, "estimates", k)
    lows, highs = _numbers(data, "ci_low", k), _numbers(data, "ci_high", k)
    b_lo, b_hi = _numbers(data, "bound_low", k), _numbers(data, "bound_high", k)
    band = PALETTE[3]
    for i in range(k):
        y = k - 1 - i  # the first claim on top
        if b_lo[i] is not None and b_hi[i] is not None:
            ax.fill_between([b_lo[i], b_hi[i]], y - 0.32, y + 0.32, color=band, alpha=0.22, linewidth=0,
                            gid=f"bounds-{i}")
            for x in (b_lo[i], b_hi[i]):
                ax.plot([x, x], [y - 0.32, y + 0.32], color=band, linewidth=1.2, zorder=3)
        if lows[i] is not None and highs[i] is not None:
            ax.plot([lows[i], highs[i]], [y, y], color=INK, linewidth=1.6, marker="|", markersize=9,
                    markeredgewidth=1.6, zorder=4, gid=f"ci-{i}")
        if est[i] is not None:
            ax.plot([est[i]], [y], linestyle="none", marker="o", markersize=6, color=INK,
                    markeredgecolor="white", markeredgewidth=0.9, zorder=5, gid=f"estimate-{i}")
    ax.axvline(0.0, color=MUTED, linewidth=0.9, linestyle=":", zorder=2)
    ax.set_ylim(-0.7, k - 0.3)
    ax.set_yticks(range(k))
    ax.set_yticklabels([textwrap.fill(s, width=28, max_lines=2, placeholder=" …") for s in reversed(claims)],
                       fontsize=9)
    ax.grid(False, axis="y")
    ax.grid(True, axis="x", color=GRID, linewidth=0.6)
    if data.get("x_label"):
        ax.set_xlabel(str(data["x_label"]))
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    handles = [Patch(color=band, alpha=0.35, label="Equivalence bounds"),
               Line2D([], [], color=INK, linewidth=1.6, marker="o", markersize=5, label=str(data.get("ci_label") or "CI"))]
    ax.legend(handles=handles, loc="lower left", bbox_to_anchor=(0, 1.0), ncols=2, frameon=False,
              borderaxespad=0.2, handlelength=1.4, columnspacing=1.6)


_DRAWERS = {
    "equivalence": _draw_equivalence,
    "means": _draw_means,
    "interaction": _draw_interaction,
    "qq": _draw_qq,
    "residuals": _draw_residuals,
    "adjusted-means": _draw_adjusted_means,
    "covariate": _draw_covariate,
}


# ---------------------------------------------------------------- look


def _jittered_points(ax, groups, base_alpha: float) -> list[int]:
    """Draw each group's values as jittered dots at x = group index (seeded jitter, so a group's
    dots sit at the same offsets in every figure); return the indices of empty groups."""
    rng = _rng()
    empty = []
    for i, values in enumerate(groups):
        offsets = rng.uniform(-_JITTER_HALF_WIDTH, _JITTER_HALF_WIDTH, len(values))
        if values:
            ax.plot(
                i + offsets, values, linestyle="none", marker="o", markersize=3.6,
                markeredgewidth=0, color=PALETTE[i % len(PALETTE)],
                alpha=_alpha(len(values), base_alpha), gid=f"points-{i}", zorder=2,
            )
        else:
            empty.append(i)
    return empty


def _style_axes(ax) -> None:
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    ax.spines["left"].set_visible(False)
    ax.grid(True, axis="y", color=GRID, linewidth=0.6)
    ax.tick_params(axis="y", length=0, pad=4)
    ax.tick_params(axis="x", length=3, color=MUTED, pad=3)


def _category_axis(ax, labels: tuple[str, ...], title) -> None:
    """Groups at 0..k-1 with readable labels.

    A label is wrapped at word boundaries to the width of its slot (about 64 characters of
    9.5 pt text fit across the axes; beyond 8 groups the text is 8.5 pt and about 70 fit).
    If some label still needs more than four lines or has a word wider than its slot, all
    labels are turned 35 degrees instead, wrapped at 28 characters, at most three lines.
    """
    k = max(len(labels), 1)
    ax.set_xlim(-0.6, k - 0.4)
    ax.set_xticks(range(len(labels)))
    size = 9.5 if k <= 8 else 8.5
    width = max(4, round((64 if k <= 8 else 70) / k))
    wrapped = [textwrap.wrap(s, width=width, break_long_words=False) or [""] for s in labels]
    fits = all(len(w) <= 4 and max(map(len, w)) <= width + 1 for w in wrapped)
    if fits:
        ax.set_xticklabels(["\n".join(w) for w in wrapped], fontsize=size, linespacing=1.1)
    else:
        turned = [textwrap.fill(s, width=28, max_lines=3, placeholder=" …") for s in labels]
        ax.set_xticklabels(turned, fontsize=size, rotation=35, ha="right",
                           rotation_mode="anchor", linespacing=1.1)
    if title:
        ax.set_xlabel(str(title))


def _no_data_labels(ax, positions) -> None:
    for i in positions:
        ax.text(i, 0.5, "no data", transform=ax.get_xaxis_transform(), ha="center",
                va="center", color=MUTED, style="italic", fontsize=9, gid=f"no-data-{i}")


def _ensure_ylim(ax, symmetric: bool = False) -> None:
    """Give a flat or empty plot a visible range instead of matplotlib's singular limits."""
    ax.relim()
    ax.autoscale_view(scalex=False)
    lo, hi = ax.get_ylim()
    if not ax.lines and not ax.collections:
        ax.set_ylim(0, 1)
        ax.set_yticks([])
        return
    if symmetric:
        m = max(abs(lo), abs(hi))
        ax.set_ylim(-m, m)


def _means_legend(ax, ci_label: str, *, points: bool, means: bool, intervals: bool) -> None:
    """A one-row key above the axes naming only what was drawn."""
    from matplotlib.lines import Line2D

    handles = []
    if points:
        handles.append(Line2D([], [], linestyle="none", marker="o", markersize=4,
                              markeredgewidth=0, color=MUTED, alpha=0.6, label="Observation"))
    if means:
        handles.append(Line2D([], [], linestyle="none", marker="D", markersize=6, color=INK,
                              markeredgecolor="white", label="Mean"))
    if intervals:
        handles.append(Line2D([], [], color=INK, linewidth=1.3, marker="_", markersize=8,
                              markeredgewidth=1.3, label=ci_label))
    if handles:
        ax.legend(handles=handles, loc="lower left", bbox_to_anchor=(0, 1.0),
                  ncols=len(handles), frameon=False, borderaxespad=0.2, handlelength=1.4,
                  columnspacing=1.6)


def _y_label(data: dict, key: str, default) -> str:
    value = data.get(key, default)
    return "" if value is None else str(value)


def _alpha(n: int, base: float) -> float:
    """Fainter dots for crowded groups, so that density still shows (common practice, no
    source): ``base`` up to 40 points, then falling as 1/sqrt(n), never below 0.15."""
    return base if n <= 40 else max(0.15, base * math.sqrt(40 / n))


def _rng():
    import numpy as np

    return np.random.default_rng(_JITTER_SEED)


# ---------------------------------------------------------------- reading the spec


def _plain(value):
    """``value`` with hidden characters, and characters the font cannot draw, in every string
    inside it written as code points."""
    if isinstance(value, str):
        text = show_controls(value, keep="\t\n")
        if text.isascii():
            return text
        glyphs = _glyphs()
        return "".join(c if c.isascii() or ord(c) in glyphs else _code_point(c) for c in text)
    if isinstance(value, tuple):
        return tuple(_plain(v) for v in value)
    return value


def _strings(data: dict, key: str) -> tuple[str, ...]:
    value = data.get(key)
    if not isinstance(value, tuple) or not all(isinstance(v, str) for v in value):
        raise RenderError(f"Figure data {key!r} must be a tuple of labels (got {value!r}).")
    return value


def _as_numbers(value, key: str, k: int) -> tuple[float | None, ...]:
    if not isinstance(value, tuple) or len(value) != k:
        raise RenderError(
            f"Figure data {key!r} must be a tuple of {k} numbers or None (got {value!r})."
        )
    out = []
    for v in value:
        if v is None:
            out.append(None)
            continue
        try:
            f = float(v)
        except (TypeError, ValueError):
            raise RenderError(f"Figure data {key!r} holds {v!r}, which is not a number.") from None
        out.append(f if math.isfinite(f) else None)
    return tuple(out)


def _numbers(data: dict, key: str, k: int) -> tuple[float | None, ...]:
    return _as_numbers(data.get(key), key, k)


def _groups_of_numbers(data: dict, key: str, k: int) -> tuple[tuple[float, ...], ...]:
    """One tuple of finite values per group; missing values (None, NaN) are left out."""
    value = data.get(key)
    if not isinstance(value, tuple) or len(value) != k:
        raise RenderError(
            f"Figure data {key!r} must be a tuple of {k} tuples of values (got {value!r})."
        )
    out = []
    for i, group in enumerate(value):
        if group is None:
            group = ()
        nums = _as_numbers(tuple(group), f"{key}[{i}]", len(group))
        out.append(tuple(v for v in nums if v is not None))
    return tuple(out)


def _code_point(c: str) -> str:
    cp = ord(c)
    return f"\\u{cp:04x}" if cp <= 0xFFFF else f"\\U{cp:08x}"


@functools.cache
def _glyphs() -> frozenset[int]:
    """The code points the figures' font (DejaVu Sans, shipped with matplotlib) can draw."""
    from matplotlib import font_manager
    from matplotlib.ft2font import FT2Font

    path = font_manager.findfont(font_manager.FontProperties(family=_RC["font.family"]),
                                 fallback_to_default=False)
    return frozenset(FT2Font(path).get_charmap())


# ---------------------------------------------------------------- the SVG text

_ID_REF = re.compile(r'(\bid=")([^"]+)(")|(href="#)([^"]+)(")|(url\(#)([^)]+)(\))')
_STYLE_BLOCK = re.compile(r"\s*<defs>\s*<style[^>]*>.*?</style>\s*</defs>", re.S)
_COMMENT = re.compile(r"[ \t]*<!--.*?-->\n?", re.S)


def _escape(text: str) -> str:
    """``&``, ``<`` and ``>`` as entities (text content and double-quoted attribute values with no
    quotes in them). ``html.escape`` rather than ``xml.sax.saxutils``, which pulls in
    ``urllib.request`` and ``ssl`` on import."""
    return _html_escape(text, quote=False)


def _clean_svg(text: str, prefix: str, title: str | None = None) -> str:
    """Cut matplotlib's prolog, style block and comments (the text of each label, written
    beside its glyph outlines), prefix every id, put the stroke defaults on the root."""
    start = text.index("<svg")
    svg = text[start:].strip()
    svg = _STYLE_BLOCK.sub("", svg, count=1)
    svg = _COMMENT.sub("", svg)
    if "<metadata" in svg or "<!--" in svg:
        raise RenderError("Internal: the SVG writer added metadata or a comment; please report.")

    def rename(m: re.Match) -> str:
        if m.group(1):
            return f"{m.group(1)}{prefix}-{m.group(2)}{m.group(3)}"
        if m.group(4):
            return f"{m.group(4)}{prefix}-{m.group(5)}{m.group(6)}"
        return f"{m.group(7)}{prefix}-{m.group(8)}{m.group(9)}"

    svg = _ID_REF.sub(rename, svg)
    head_end = svg.index(">")
    head = svg[:head_end] + (
        f' id="{_escape(prefix)}" class="report-figure" role="img"'
        ' stroke-linejoin="round" stroke-linecap="butt">'
    )
    if title:
        head += f"\n <title>{_escape(title)}</title>"
    return head + svg[head_end + 1:]
