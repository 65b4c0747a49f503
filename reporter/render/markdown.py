"""The report as Markdown (GitHub-flavoured), to paste into a manuscript or a notebook.

Headings, prose, lists, pipe tables and notes (as block quotes) come from
``templates/report.md.j2``; a figure becomes its caption and the line "(figure in the HTML
and PDF report)". Italic runs are set as ``*...*``; every piece of text is escaped for
Markdown (CommonMark backslash escapes), so a level called ``a|b`` or ``<b>`` reads as
written. Plain UTF-8, the true minus sign kept (see :mod:`reporter.narrative.numbers`).
"""

from __future__ import annotations

import re

from reporter.narrative.document import Document
from reporter.render.templating import build_view, markdown_environment

__all__ = ["render_markdown"]


def _tidy(text: str) -> str:
    """Trailing spaces off every line, at most one blank line in a row, one final newline."""
    lines = [line.rstrip() for line in text.split("\n")]
    return re.sub(r"\n{3,}", "\n\n", "\n".join(lines)).strip("\n") + "\n"


def render_markdown(document: Document) -> bytes:
    """The report as Markdown text, UTF-8 encoded; the same document gives the same bytes."""
    view = build_view(document)
    text = markdown_environment().get_template("report.md.j2").render(view=view)
    return _tidy(text).encode("utf-8")
