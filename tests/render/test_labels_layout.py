"""Layout of the report's labels in the PDF and the HTML: the contents list numbers each
hypothesis once, the notation box comes before the symbols, a caption spans the text column
even over a narrow table, and a test statistic in a table never breaks inside.

The PDF is read back with pypdf (an independent reader); the layout is read from WeasyPrint's
own boxes, the engine that draws the PDF. A4 minus the report's 18 mm side margins leaves a
174 mm text column (ISO 216; 174 mm = 657.6 CSS px at 96 px per inch, CSS Values 4, 6.2).
"""

from __future__ import annotations

import io
import re
from html.parser import HTMLParser
from pathlib import Path

import pytest
from pypdf import PdfReader

from reporter.api import build_report
from reporter.narrative.document import Table, plain
from reporter.render.html import render_html_text

DEMO = Path(__file__).resolve().parents[2] / "demo_project"
TEXT_COLUMN_PX = 174 / 25.4 * 96


@pytest.fixture(scope="module")
def oneway():
    return build_report(DEMO / "oneway.toml")


@pytest.fixture(scope="module")
def pdf_lines(oneway) -> list[list[str]]:
    reader = PdfReader(io.BytesIO(oneway.render("pdf")))
    return [[" ".join(line.split()) for line in page.extract_text().split("\n")] for page in reader.pages]


class _Contents(HTMLParser):
    """The entries of the page's contents list: (list tag, entry text)."""

    def __init__(self, html: str):
        super().__init__(convert_charrefs=True)
        self.stack: list[str] = []
        self.entries: list[list] = []
        self.in_nav = False
        self.feed(html)

    def handle_starttag(self, tag, attrs):
        if tag == "nav":
            self.in_nav = True
        if self.in_nav and tag in ("ol", "ul"):
            self.stack.append(tag)
        if self.in_nav and tag == "li":
            self.entries.append([self.stack[-1], ""])

    def handle_endtag(self, tag):
        if tag == "nav":
            self.in_nav = False
        if self.in_nav and tag in ("ol", "ul"):
            self.stack.pop()

    def handle_data(self, data):
        if self.in_nav and self.entries and data.strip():
            if not self.entries[-1][1]:
                self.entries[-1][1] = data.strip()


def test_contents_list_numbers_each_hypothesis_once_in_html(oneway):
    """An entry that carries its own number ("1. long spacing ...") sits in an unnumbered list."""
    entries = _Contents(oneway.render("html").decode("utf-8")).entries
    own = [(tag, text) for tag, text in entries if re.match(r"\d+\. ", text)]
    assert [text for _, text in own] == [
        "1. long spacing beats massing", "2. spacing on average beats massing",
        "3. schedules differ", "4. long and short spacing differ"]
    assert {tag for tag, _ in own} == {"ul"}
    assert all(tag == "ol" for tag, text in entries if not re.match(r"\d+\. ", text))


def test_contents_list_numbers_each_hypothesis_once_in_pdf(pdf_lines):
    """The printed contents read "1. long spacing beats massing ... 5", never "1. 1. long spacing"."""
    first = pdf_lines[0]
    assert not any(re.match(r"\d+\.\s+\d+\.\s", line) for line in first)
    assert any(re.fullmatch(r"1\. long spacing beats massing[ .]*\d+", line) for line in first)


def test_notation_box_precedes_the_first_d_inverse_in_pdf(pdf_lines):
    """Reading the PDF from the start, the notation box's title comes before any D⁻¹."""
    lines = [line for page in pdf_lines for line in page]
    title = next(i for i, line in enumerate(lines) if "Notation used from here on" in line)
    first = next(i for i, line in enumerate(lines) if "D⁻¹" in line)
    assert title < first


def _boxes(box):
    yield box
    for child in getattr(box, "children", None) or ():
        yield from _boxes(child)


@pytest.fixture(scope="module")
def layout(oneway):
    import weasyprint

    return weasyprint.HTML(string=render_html_text(oneway.document(), for_print=True)).render()


def _text_of(box) -> str:
    return "".join(getattr(b, "text", "") for b in _boxes(box))


def _lines(box) -> int:
    return sum(1 for b in _boxes(box) if type(b).__name__ == "LineBox")


def test_captions_span_the_text_column_in_pdf(oneway, layout):
    """Every table caption is as wide as the text column, however narrow its table; a short
    caption over a narrow table (the contrast tables) is one line."""
    captions = []
    for page in layout.pages:
        column = page._page_box.width
        assert column == pytest.approx(TEXT_COLUMN_PX, abs=0.5)
        captions += [(box, column) for box in _boxes(page._page_box) if type(box).__name__ == "TableCaptionBox"]
    assert len(captions) == sum(1 for b in oneway.document().walk() if isinstance(b, Table))
    for box, column in captions:
        assert box.width == pytest.approx(column, abs=0.5), _text_of(box)
    narrow = [box for box, _ in captions if "as the same contrast over the coefficients" in _text_of(box)]
    assert len(narrow) == 4
    for box in narrow:
        assert _lines(box) == 1, _text_of(box)


def test_statistics_in_tables_stay_on_one_line(oneway, layout):
    """The table columns that hold "t(110) = 2.29, p = .012" are no-wrap: in the PDF each such
    cell is one line, and the HTML marks every one of them."""
    from reporter.render.templating import template_source

    assert re.search(r"td\.nowrap[^{]*\{[^}]*white-space:\s*nowrap", template_source("report.css"))
    document = oneway.document()
    expected = sum(len(t.rows) * sum(c.nowrap for c in t.columns)
                   for t in document.walk() if isinstance(t, Table))
    assert expected >= 14  # robust table: 4 rows x 2 columns; outlier table: 3 x 2
    html = oneway.render("html").decode("utf-8")
    assert len(re.findall(r'<td class="[^"]*\bnowrap\b', html)) == expected
    cells = [box for page in layout.pages for box in _boxes(page._page_box)
             if type(box).__name__ == "TableCellBox" and "nowrap" in (box.element.get("class") or "")]
    assert len(cells) == expected
    for box in cells:
        assert _lines(box) == 1, _text_of(box)
