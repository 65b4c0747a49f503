"""The PDF report: PDF/A-3b with embedded files, A4 pages, readable text, nothing fetched.

The PDF is read back with pypdf, an independent PDF reader. PDF/A-3 is ISO 19005-3:2012
(identification in the XMP metadata as pdfaid:part 3 and pdfaid:conformance B, clause 6.6.4;
embedded files associated through /AF with an /AFRelationship, clause 6.8); A4 is
210 mm x 297 mm (ISO 216), i.e. 595.28 pt x 841.89 pt.
"""

from __future__ import annotations

import io
import logging
import re
import sys
from dataclasses import replace

import pytest
from pypdf import PdfReader

from reporter.errors import RenderError
from reporter.narrative.document import Figure
from reporter.render import pdf as pdf_module
from reporter.render.pdf import refusing_url_fetcher, render_pdf


@pytest.fixture(scope="module")
def pdf_bytes(build_document, attachments) -> bytes:
    return render_pdf(build_document(), attachments)


@pytest.fixture(scope="module")
def reader(pdf_bytes) -> PdfReader:
    return PdfReader(io.BytesIO(pdf_bytes))


def _text(page) -> str:
    return " ".join(page.extract_text().split())


def test_paragraph_text_is_extractable(reader, methods_text, summary_text):
    """The words of a paragraph can be read back from the PDF's text layer."""
    text = " ".join(_text(p) for p in reader.pages)
    assert summary_text in text
    assert methods_text in text
    assert "Table 2. Height (mm) by growing medium" in text


def test_attachments_keep_their_exact_bytes(reader, attachments):
    """Each attachment is embedded once, under its name, byte for byte."""
    assert reader.attachments == {name: [data] for name, data in attachments.items()}


def test_attachments_are_associated_files(reader, attachments):
    """The catalog lists every embedded file in /AF with the relationship /Data."""
    catalog = reader.trailer["/Root"]
    specs = {ref.get_object()["/UF"]: ref.get_object() for ref in catalog["/AF"]}
    assert set(specs) == set(attachments)
    assert {spec["/AFRelationship"] for spec in specs.values()} == {"/Data"}


def test_pdfa_3b_identification(reader):
    """The XMP metadata identifies PDF/A-3b, with an sRGB output intent."""
    xmp = reader.xmp_metadata
    assert xmp is not None
    assert (xmp.pdfaid_part, xmp.pdfaid_conformance) == ("3", "B")
    intents = reader.trailer["/Root"]["/OutputIntents"]
    assert [i.get_object()["/S"] for i in intents] == ["/GTS_PDFA1"]


def test_document_metadata(reader, build_document):
    """Title and creation date come from the document."""
    doc = build_document()
    assert reader.metadata.title == doc.title
    assert reader.metadata["/CreationDate"].startswith("D:20240501120000")


def test_pages_are_a4_with_header_and_numbered_footer(reader, build_document):
    """A4 pages; 'Page n of m' on every page, the title in the header after page 1."""
    title = build_document().title
    pages = reader.pages
    assert len(pages) >= 2
    for number, page in enumerate(pages, start=1):
        width, height = float(page.mediabox.width), float(page.mediabox.height)
        assert (width, height) == pytest.approx((595.28, 841.89), abs=0.01)
        assert f"Page {number} of {len(pages)}" in _text(page)
    assert f"{title} Page 2 of {len(pages)}" in _text(pages[1])


def _outline(reader, items=None) -> dict[str, int]:
    pages = {}
    for item in reader.outline if items is None else items:
        if isinstance(item, list):
            pages.update(_outline(reader, item))
        else:
            pages[item.title] = reader.get_destination_page_number(item) + 1
    return pages


def test_contents_show_page_numbers(reader):
    """Each entry of the printed contents ends with the page of its heading (PDF outline)."""
    starts = _outline(reader)
    assert {"Methods", "Design and coefficients", "Results"} <= starts.keys()
    first = _text(reader.pages[0])
    for title in ("Methods", "Design and coefficients", "Results"):
        assert re.search(rf"{title} \.{{5,}} {starts[title]}\b", first), title
    assert starts["Results"] > 1


def test_pdf_is_deterministic(pdf_bytes, build_document, attachments):
    """The same document and attachments give the same PDF bytes."""
    assert render_pdf(build_document(), attachments) == pdf_bytes


def test_no_weasyprint_warnings(caplog, build_document):
    """WeasyPrint understands every rule of the report's stylesheet and misses no resource.

    Figures are left out: their SVG carries style attributes for WeasyPrint's SVG renderer,
    which its HTML style parser reports as unknown properties.
    """
    doc = build_document()
    sections = tuple(
        replace(s, blocks=tuple(b for b in s.blocks if not isinstance(b, Figure)))
        for s in doc.sections
    )
    with caplog.at_level(logging.WARNING, logger="weasyprint"):
        render_pdf(replace(doc, sections=sections), {})
    assert [r.getMessage() for r in caplog.records if r.name.startswith("weasyprint")] == []


@pytest.mark.parametrize(
    "url",
    [
        "https://example.org/font.woff2",
        "http://example.org/a.png",
        "file:///etc/hostname",
        "data:image/png;base64,iVBORw0KGgo=",
    ],
    ids=["https", "http", "file", "data"],
)
def test_url_fetcher_refuses_every_url(url):
    """The fetcher given to WeasyPrint fetches nothing at all and records what was asked."""
    fetcher = refusing_url_fetcher()
    with pytest.raises(ValueError, match="fetches nothing"):
        fetcher(url)
    assert fetcher.refused == [url]


def test_stray_external_image_is_not_fetched():
    """An outside image and stylesheet in a page reach the fetcher, which refuses both."""
    import weasyprint

    fetcher = refusing_url_fetcher()
    page = ('<html><head><style>p { background: url("https://example.org/bg.png") }</style>'
            '</head><body><p>x</p><img src="https://example.org/x.png" alt=""></body></html>')
    pdf = weasyprint.HTML(string=page, url_fetcher=fetcher).write_pdf()
    assert pdf.startswith(b"%PDF")
    assert sorted(fetcher.refused) == ["https://example.org/bg.png", "https://example.org/x.png"]


def test_outside_reference_fails_the_render(monkeypatch, document):
    """If the page ever asks for an outside resource, render_pdf fails and names it."""
    stray = '<!DOCTYPE html><html lang="en"><body><img src="https://example.org/x.png"></body></html>'
    monkeypatch.setattr(pdf_module, "render_html_text", lambda doc, for_print, template="report.html.j2": stray)
    with pytest.raises(RenderError, match=r"https://example\.org/x\.png"):
        render_pdf(document, {})


def test_missing_weasyprint_is_a_render_error(monkeypatch, document):
    """Without WeasyPrint, render_pdf raises RenderError naming the package to install."""
    monkeypatch.setitem(sys.modules, "weasyprint", None)
    with pytest.raises(RenderError, match="pip install 'weasyprint"):
        render_pdf(document, {})


@pytest.mark.parametrize(
    ("attachments", "message"),
    [
        ({"dir/results.json": b"{}"}, "plain file name"),
        ({"": b"{}"}, "plain file name"),
        ({"results.json": "{}"}, "must be bytes"),
    ],
    ids=["path", "empty-name", "text"],
)
def test_bad_attachment_is_refused(document, attachments, message):
    """Attachment names must be plain file names and contents bytes."""
    with pytest.raises(RenderError, match=message):
        render_pdf(document, attachments)
