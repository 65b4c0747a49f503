"""The HTML report: well-formed, semantic, self-contained, escaped and deterministic.

The page is checked with the standard library's HTML parser (html.parser), not with our own
code; the rules checked are those of the HTML Living Standard (table scope, lang, charset).
"""

from __future__ import annotations

import re
import subprocess
import sys
from dataclasses import replace
from html.parser import HTMLParser

import pytest

from reporter.errors import RenderError
from reporter.narrative.document import Document, Paragraph, Section, Table, runs_of
from reporter.render.html import render_html
from reporter.render.templating import template_source

VOID = {"area", "base", "br", "col", "embed", "hr", "img", "input", "link", "meta", "source",
        "track", "wbr"}


class Page(HTMLParser):
    """Every element with its attributes and ancestors, plus nesting errors and text."""

    def __init__(self, text: str):
        super().__init__(convert_charrefs=True)
        self.elements: list[tuple[str, dict, tuple[str, ...]]] = []
        self.stack: list[str] = []
        self.errors: list[str] = []
        self.text: list[str] = []
        self.style = ""
        self.feed(text)
        self.close()

    def handle_starttag(self, tag, attrs):
        self.elements.append((tag, dict(attrs), tuple(self.stack)))
        if tag not in VOID:
            self.stack.append(tag)

    def handle_startendtag(self, tag, attrs):
        self.elements.append((tag, dict(attrs), tuple(self.stack)))

    def handle_endtag(self, tag):
        if not self.stack or self.stack[-1] != tag:
            self.errors.append(f"</{tag}> closes {self.stack[-1:] or 'nothing'}")
            return
        self.stack.pop()

    def handle_data(self, data):
        if self.stack and self.stack[-1] == "style":
            self.style += data
        else:
            self.text.append(data)

    def all(self, tag):
        return [(a, anc) for t, a, anc in self.elements if t == tag]


@pytest.fixture
def html(document) -> str:
    return render_html(document).decode("utf-8")


@pytest.fixture
def page(html) -> Page:
    return Page(html)


def test_html_is_well_nested(page):
    """Every element is closed in order and nothing is left open (html.parser)."""
    assert page.errors == []
    assert page.stack == []


def test_head_declares_language_charset_and_viewport(page, document):
    """<html lang>, <meta charset="utf-8"> and the mobile viewport are in the page."""
    (html_attrs, _), = page.all("html")
    assert html_attrs["lang"] == document.language
    metas = [a for a, _ in page.all("meta")]
    assert {"charset": "utf-8"} in metas
    assert {"name": "viewport", "content": "width=device-width, initial-scale=1"} in metas
    (title, ) = [t for t in page.text if t == document.title][:1]
    assert title == document.title


def test_tables_are_semantic(page, document):
    """Each table has a caption, column headers scope="col", row headers scope="row"."""
    tables = [b for b in document.walk() if isinstance(b, Table)]
    assert len(page.all("table")) == len(tables) == 3
    assert len(page.all("caption")) == len(tables)
    col_heads = [a for a, anc in page.all("th") if "thead" in anc]
    row_heads = [a for a, anc in page.all("th") if "tbody" in anc]
    assert col_heads and all(a.get("scope") == "col" for a in col_heads)
    assert row_heads and all(a.get("scope") == "row" for a in row_heads)
    assert len(col_heads) == sum(len(t.columns) for t in tables)
    assert len(row_heads) == sum(len(t.rows) * t.header_columns for t in tables)


def test_no_script_and_no_external_reference(html, page):
    """No script, no stylesheet link, no src/href/url( that leaves the page."""
    assert not page.all("script")
    assert not page.all("link")
    assert not page.all("img") and not page.all("iframe")
    for tag, attrs, _ in page.elements:
        for name, value in attrs.items():
            assert not name.startswith("on"), (tag, name)
            if name in {"src", "href", "xlink:href", "action", "srcset", "poster"}:
                assert value.startswith("#"), (tag, name, value)
    assert not re.search(r"url\(\s*['\"]?\s*(?!#)", html)
    assert "@import" not in html
    assert not re.search(r"(src|href)\s*=\s*[\"']?\s*(https?:)?//", html)


def test_in_page_links_resolve_to_unique_ids(page):
    """Every contents link points to an id on the page, and ids are unique."""
    ids = [a["id"] for _, a, _ in page.elements if "id" in a]
    assert len(ids) == len(set(ids))
    links = [a["href"] for a, _ in page.all("a")]
    assert {"#methods", "#design", "#results"} <= set(links)
    assert all(href[1:] in ids for href in links)


def test_hostile_text_is_escaped(html, page, hostile_level):
    """A level named like an <img onerror> tag shows as text and creates no element."""
    assert hostile_level == "<img src=x onerror=alert(1)>"
    assert hostile_level not in html
    assert "&lt;img src=x onerror=alert(1)&gt;" in html
    assert any(hostile_level in t for t in page.text)
    assert not page.all("img")


def test_italic_runs_become_em(html, methods_text):
    """Runs marked italic are set in <em>, upright runs are not."""
    assert "(<em>MSE</em>)" in html
    assert '<em>F</em>(3, 12)<span class="nb"> = 43.10</span>, <em>p</em><span class="nb"> &lt; .001</span>' in html
    assert methods_text in html


def test_decimal_numbers_do_not_break_across_lines():
    """A decimal number, its relation and the space before that stay on one line: ' = .012' is
    wrapped in a no-break span, so no line starts with '= .012' (a break before a space is not
    allowed, UAX #14 rule LB7)."""
    from reporter.render.templating import keep_numbers

    assert str(keep_numbers("p = .012 and 3 < 4.5")) == (
        'p<span class="nb"> = .012</span> and 3<span class="nb"> &lt; 4.5</span>')
    assert str(keep_numbers("<b>1.5</b>")) == '&lt;b&gt;<span class="nb">1.5</span>&lt;/b&gt;'



def test_matrix_highlight_classes(page, document):
    """Each highlighted cell carries its tone class: as many pos/neg/zero cells as marked."""
    table = next(b for b in document.walk() if isinstance(b, Table) and b.highlight)
    marked = [tone for row in table.highlight for tone in row if tone]
    cells = [a.get("class", "") for a, _ in page.all("td")]
    for tone in ("pos", "neg", "zero"):
        assert sum(f"tone-{tone}" in c.split() for c in cells) == marked.count(tone), tone
    assert marked.count("neg") >= 1


def test_figure_is_accessible_inline_svg(page, document):
    """A figure is a <figure> with a figcaption and an inline SVG inside role="img"."""
    figure = next(b for b in document.walk() if type(b).__name__ == "Figure")
    wrappers = [a for a, _ in page.all("div") if a.get("class") == "figure-art"]
    assert wrappers == [{"class": "figure-art", "role": "img", "aria-label": figure.alt}]
    svgs = page.all("svg")
    assert svgs and all("figure" in anc for _, anc in svgs)
    assert len(page.all("figcaption")) == 1


def test_css_is_inlined_from_the_templates(page):
    """The page's <style> holds templates/report.css and screen.css, with print rules."""
    assert template_source("report.css").strip() in page.style
    assert template_source("screen.css").strip() in page.style
    assert "@media print" in page.style
    assert "break-inside: avoid" in page.style
    assert "@page" in page.style


def test_render_is_deterministic(build_document):
    """Two renders of equal documents give byte-identical HTML."""
    assert render_html(build_document()) == render_html(build_document())


def test_repeated_ids_get_distinct_anchors(build_document):
    """Two sections with the same id still get unique anchors, and the contents follow them."""
    doc = build_document()
    twin = Section(id="results", title="Results again", blocks=(Paragraph(runs_of("x")),))
    doc = replace(doc, sections=(*doc.sections, twin))
    page = Page(render_html(doc).decode("utf-8"))
    ids = [a["id"] for _, a, _ in page.elements if "id" in a]
    assert len(ids) == len(set(ids))
    assert {"#results", "#results-2"} <= {a["href"] for a, _ in page.all("a")}


def test_unknown_highlight_is_refused():
    """A highlight value other than pos/neg/zero/'' is an error that names the table."""
    table = Table(id="odd", caption=runs_of("Odd"), columns=(), rows=((runs_of("a"),),),
                  highlight=(("up",),))
    doc = Document(title="t", subtitle="", summary=(), created="",
                   sections=(Section(id="s", title="S", blocks=(table,)),))
    with pytest.raises(RenderError, match=r"Table 'odd'.*'up'"):
        render_html(doc)


@pytest.mark.parametrize(
    "svg",
    [
        '<svg xmlns="http://www.w3.org/2000/svg"><script>alert(1)</script></svg>',
        '<svg xmlns="http://www.w3.org/2000/svg"><image href="https://example.org/a.png"/></svg>',
        '<svg xmlns="http://www.w3.org/2000/svg"><rect style="fill:url(http://x.org/p)"/></svg>',
        '<svg xmlns="http://www.w3.org/2000/svg" onload="alert(1)"></svg>',
        "<div>not an svg</div>",
    ],
    ids=["script", "external-image", "external-url", "event-handler", "not-svg"],
)
def test_unsafe_drawing_is_refused(monkeypatch, document, svg):
    """A drawing with script, handlers or outside references never reaches the page."""
    import reporter.render.figures as figures

    monkeypatch.setattr(figures, "draw_svg", lambda spec: svg)
    with pytest.raises(RenderError, match="Figure 'means-figure'"):
        render_html(document)


def test_html_does_not_import_weasyprint():
    """Rendering HTML leaves WeasyPrint unimported (it is slow to import)."""
    code = (
        "import sys\n"
        "from reporter.narrative.document import Document, Section, Paragraph, runs_of\n"
        "from reporter.render.html import render_html\n"
        "doc = Document(title='t', subtitle='', summary=(), created='', sections=(\n"
        "    Section(id='s', title='S', blocks=(Paragraph(runs_of('x')),)),))\n"
        "assert render_html(doc).startswith(b'<!DOCTYPE html>')\n"
        "print('weasyprint' in sys.modules)\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"
