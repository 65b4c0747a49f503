"""The report as one self-contained HTML file.

The page comes from ``templates/report.html.j2`` (blocks in ``templates/blocks.html.j2``),
the stylesheets ``templates/report.css`` and ``templates/screen.css`` are inlined, and every
figure is drawn as inline SVG by :mod:`reporter.render.figures`: the file needs nothing from
a network or from disk, carries no script, and reads the same on a phone, a desktop and
paper. The same page, with
``for_print=True`` (which leaves out the screen-only stylesheet and adds page numbers to the
contents), is what the PDF renderer lays out.

Rendering is deterministic: the same :class:`~reporter.narrative.document.Document` gives the
same bytes (the only date in the file is ``document.created``).
"""

from __future__ import annotations

import re

from markupsafe import Markup

from reporter.errors import RenderError
from reporter.narrative.document import Document, Figure
from reporter.render.templating import build_view, html_environment, template_source

__all__ = ["draw_figure", "render_html", "render_html_text"]

_SVG_ELEMENT = re.compile(r"\A\s*<svg[\s>].*</svg>\s*\Z", re.DOTALL)
# What a drawing must never contain: script, event handlers, foreign content, or a reference
# to anything outside the drawing itself.
_SVG_FORBIDDEN = re.compile(
    r"<\s*(script|foreignObject|iframe)\b"
    r"|\son[a-z]+\s*="
    r"|(?:href|src)\s*=\s*[\"']?\s*(?!#)[^\"'\s>]"
    r"|url\(\s*[\"']?\s*(?!#)"
    r"|@import",
    re.IGNORECASE,
)


def draw_figure(figure: Figure) -> Markup:
    """Draw one figure as an inline ``<svg>`` element, checked to be self-contained.

    The drawing is the only markup that reaches the page without escaping, so it is checked
    first: one ``<svg>`` element, with no script, event handler, embedded image or reference
    outside itself (fragment links such as ``url(#clip)`` are allowed).
    """
    from reporter.render.figures import draw_svg

    svg = draw_svg(figure.spec)
    if not isinstance(svg, str) or not _SVG_ELEMENT.match(svg):
        raise RenderError(
            f"Figure {figure.id!r}: the drawing must be one <svg> element "
            f"(got {str(svg)[:60]!r}); this is a fault in reporter.render.figures."
        )
    bad = _SVG_FORBIDDEN.search(svg)
    if bad:
        raise RenderError(
            f"Figure {figure.id!r}: the drawing must not contain scripts or external "
            f"references (found {bad.group(0).strip()!r}); this is a fault in "
            "reporter.render.figures."
        )
    return Markup(svg.strip())


def render_html_text(document: Document, *, for_print: bool = False, template: str = "report.html.j2") -> str:
    """The report page as text; ``for_print`` switches on the PDF-only touches. ``template``
    names the page template ("plan.html.j2" for the analysis-plan document)."""
    sheets = ("report.css",) if for_print else ("report.css", "screen.css")
    css = Markup("\n").join(Markup(template_source(name).strip()) for name in sheets)
    view = build_view(document, draw=draw_figure, css=css, for_print=for_print)
    text = html_environment().get_template(template).render(view=view)
    return text if text.endswith("\n") else text + "\n"


def render_html(document: Document, *, template: str = "report.html.j2") -> bytes:
    """The report as one self-contained HTML file, UTF-8 encoded."""
    return render_html_text(document, template=template).encode("utf-8")
