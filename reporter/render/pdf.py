"""The report as an archival PDF (PDF/A-3b) with the analysis files embedded.

WeasyPrint lays out the same page as the HTML report (``for_print=True``): A4, the title in
the running header, "Page n of m" in the footer, page numbers in the contents. PDF/A-3
(ISO 19005-3:2012) is the archival variant that allows embedded files of any type, so the
results JSON, the plan and the data can travel inside the report they produced.

The page needs no resource from outside: CSS and figures are inline. WeasyPrint is given a
URL fetcher that refuses every URL, so a stray reference can neither reach the network nor
read a local file; if anything was asked for, rendering fails and names it.

WeasyPrint takes a noticeable time to import, so it is imported only when a PDF is asked for.
"""

from __future__ import annotations

import io
from datetime import datetime, timezone
from typing import Mapping

from reporter.errors import RenderError
from reporter.narrative.document import Document
from reporter.render.html import render_html_text

__all__ = ["PDF_VARIANT", "refusing_url_fetcher", "render_pdf"]

#: ISO 19005-3, conformance level B (visual appearance preserved), embedded files allowed.
PDF_VARIANT = "pdf/a-3b"

# ISO 32000-2:2020, 7.11.3: "Data" marks a file holding the information the document's
# tables and figures were derived from.
_ATTACHMENT_RELATIONSHIP = "Data"


def _weasyprint():
    try:
        import weasyprint
    except ImportError as exc:
        raise RenderError(
            "The PDF report needs the package 'weasyprint' (a dependency of anova-report); "
            f"install it with: pip install 'weasyprint>=62' (import failed: {exc})."
        ) from exc
    except OSError as exc:
        raise RenderError(
            "The PDF report needs WeasyPrint's system libraries (Pango 1.44 or newer); "
            f"install them with your system's package manager (loading failed: {exc})."
        ) from exc
    return weasyprint


def refusing_url_fetcher():
    """A WeasyPrint URL fetcher that refuses every URL and keeps a list of what was asked.

    Every request raises an error (WeasyPrint then leaves the resource out); the refused
    URLs are in the fetcher's ``refused`` list, in the order asked. Recent WeasyPrint versions
    (70 here) take a subclass of ``weasyprint.urls.URLFetcher``; older ones a plain callable.
    """
    _weasyprint()
    try:
        from weasyprint.urls import URLFetcher
    except ImportError:
        URLFetcher = None

    def refuse(refused: list[str], url: str):
        refused.append(url)
        raise ValueError(f"the report is self-contained and fetches nothing (refused {url!r})")

    if URLFetcher is None:

        class RefusingCallable:
            def __init__(self):
                self.refused: list[str] = []

            def __call__(self, url, *args, **kwargs):
                refuse(self.refused, url)

        return RefusingCallable()

    class RefusingURLFetcher(URLFetcher):
        def __init__(self):
            super().__init__(allowed_protocols=())
            self.refused: list[str] = []

        def fetch(self, url, headers=None):
            refuse(self.refused, url)

    return RefusingURLFetcher()


def _timestamp(created: str) -> datetime | None:
    try:
        stamp = datetime.fromisoformat(created.strip())
    except (AttributeError, ValueError):
        return None
    if stamp.tzinfo is not None:
        stamp = stamp.astimezone(timezone.utc).replace(tzinfo=None)
    return stamp


def render_pdf(document: Document, attachments: Mapping[str, bytes], *, template: str = "report.html.j2") -> bytes:
    """The report as PDF/A-3b bytes, with each ``attachments`` item embedded under its name.

    Attachments keep their exact bytes; their dates are ``document.created`` when that is an
    ISO 8601 timestamp, so that the same inputs give the same file.
    """
    weasyprint = _weasyprint()
    for name, data in attachments.items():
        if not isinstance(name, str) or not name or "/" in name or "\\" in name:
            raise RenderError(
                f"A PDF attachment needs a plain file name (got {name!r}); "
                "pass e.g. 'results.json'."
            )
        if not isinstance(data, (bytes, bytearray)):
            raise RenderError(
                f"PDF attachment {name!r} must be bytes (got {type(data).__name__}); "
                "encode text first, e.g. text.encode('utf-8')."
            )

    fetcher = refusing_url_fetcher()
    stamp = _timestamp(document.created)
    files = [
        weasyprint.Attachment(
            file_obj=io.BytesIO(bytes(data)),
            url_fetcher=fetcher,
            name=name,
            description=name,
            created=stamp,
            modified=stamp,
            relationship=_ATTACHMENT_RELATIONSHIP,
        )
        for name, data in sorted(attachments.items())
    ]
    html = render_html_text(document, for_print=True, template=template)
    pdf = weasyprint.HTML(string=html, url_fetcher=fetcher).write_pdf(
        pdf_variant=PDF_VARIANT, attachments=files
    )
    if fetcher.refused:
        raise RenderError(
            "The report page asked for outside resources, which the PDF does not fetch: "
            f"{', '.join(fetcher.refused)}. Everything in the report must be inline; this is a "
            "fault in the templates or figures."
        )
    return pdf
