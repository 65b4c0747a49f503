"""The Jinja2 environments of the report and the view of a document that the templates walk.

All markup lives in the package ``reporter.templates`` (the top-level ``templates/`` folder of
the source tree, shipped inside the wheel). Python never writes a tag: it loads the templates,
adds a few filters, and turns the frozen :class:`~reporter.narrative.document.Document` into a
tree of :class:`Node` values that carry what the templates cannot compute by themselves
(unique anchors, table and figure numbers, cells padded to the column count, highlight classes,
the drawn figure). The templates then walk that tree with one recursive macro per block type.

Two environments:

* HTML (``*.html.j2``): autoescape on, so every piece of text from the document is escaped.
  The only markup that is not escaped is our own CSS and the SVG drawn by
  :mod:`reporter.render.figures`, both wrapped in :class:`markupsafe.Markup` here.
* Markdown (``*.md.j2``): HTML escaping does not apply to Markdown, so the environment's
  ``finalize`` hook escapes every interpolated value for Markdown instead (backslash escapes
  of CommonMark, section 2.4); nothing reaches the output unescaped unless it is a
  :class:`MarkdownText`: text escaped by :func:`markdown_escape`, or the output of a template
  macro, which templates mark with the ``rendered`` filter.

In both, control and bidirectional-formatting characters in user text are written visibly as
``\\uXXXX`` (:mod:`reporter.render.visible`) before escaping: the HTML environment's
``finalize`` hook and :func:`keep_numbers` do it for HTML (tab and newline kept, since HTML
treats them as spaces), :func:`markdown_escape` for Markdown.
"""

from __future__ import annotations

import functools
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable

import jinja2
from markupsafe import Markup, escape

from reporter.errors import RenderError
from reporter.render.visible import show_controls
from reporter.narrative.document import (
    BulletList,
    DefinitionList,
    Document,
    Figure,
    Note,
    Paragraph,
    Runs,
    Section,
    Table,
)

TEMPLATE_PACKAGE = "reporter.templates"

#: Anchors the page template uses itself; document anchors never take these.
RESERVED_ANCHORS = ("report-title", "report-contents", "report-summary", "report-about")

_KINDS = (
    (Section, "section"),
    (Paragraph, "paragraph"),
    (BulletList, "list"),
    (Table, "table"),
    (Figure, "figure"),
    (DefinitionList, "definitions"),
    (Note, "note"),
)
_PARAGRAPH_STYLES = ("body", "lead", "symbols", "reading", "small")
_NOTE_KINDS = ("caution", "info")
_ALIGNS = ("left", "right", "center")
_TONES = ("pos", "neg", "zero", "")


@dataclass(frozen=True)
class Cell:
    """One table cell as the templates need it: text, header or data, alignment, tone."""

    runs: Runs
    header: bool
    align: str
    tone: str


@dataclass(frozen=True)
class Node:
    """One block of the document with what the templates need beside it.

    ``kind`` names the macro that renders it; ``block`` is the model object itself;
    ``anchor`` is a unique HTML id (sections, tables, figures); ``number`` counts tables
    and figures separately in reading order; ``level`` is the heading level of a section
    (2 to 6); ``children`` are the nested blocks of a section or note; ``header`` and ``rows``
    the cells of a table, every row padded to the same width; ``svg`` the drawn figure (HTML only).
    """

    kind: str
    block: Any
    anchor: str = ""
    number: int = 0
    level: int = 2
    children: tuple["Node", ...] = ()
    header: tuple[Cell, ...] = ()
    rows: tuple[tuple[Cell, ...], ...] = ()
    svg: Markup | None = None


@dataclass(frozen=True)
class View:
    """The document ready for a template: the model plus its section tree of nodes."""

    document: Document
    summary: tuple[Node, ...]
    sections: tuple[Node, ...]
    css: Markup | None = None
    for_print: bool = False


def _anchor_text(raw: str) -> str:
    text = re.sub(r"[^A-Za-z0-9_-]+", "-", raw).strip("-")
    if not text or not text[0].isalpha():
        text = "x-" + text if text else "x"
    return text


class _Builder:
    """Walks a document once, in reading order, and builds its nodes."""

    def __init__(self, draw: Callable[[Figure], Markup] | None):
        self.draw = draw
        self.used: set[str] = set(RESERVED_ANCHORS)
        self.tables = 0
        self.figures = 0

    def anchor(self, raw: str, derived: tuple[str, ...] = ()) -> str:
        """A unique id from ``raw``; ids made by appending a ``derived`` suffix stay free too."""
        base = _anchor_text(raw)
        candidate, n = base, 1
        while any(candidate + s in self.used for s in ("", *derived)):
            n += 1
            candidate = f"{base}-{n}"
        self.used.update(candidate + s for s in ("", *derived))
        return candidate

    def blocks(self, blocks, depth: int) -> tuple[Node, ...]:
        return tuple(self.block(b, depth) for b in blocks)

    def block(self, block, depth: int) -> Node:
        kind = next((name for cls, name in _KINDS if isinstance(block, cls)), None)
        if kind is None:
            raise RenderError(
                f"The document holds a block of type {type(block).__name__!r}, which no renderer "
                f"knows; a block must be one of {', '.join(cls.__name__ for cls, _ in _KINDS)}."
            )
        if kind == "section":
            return self.section(block, depth)
        if kind == "paragraph" and block.style not in _PARAGRAPH_STYLES:
            raise RenderError(
                f"Paragraph style must be one of {', '.join(_PARAGRAPH_STYLES)} "
                f"(got {block.style!r}); fix the narrative that built it."
            )
        if kind == "note":
            if block.kind not in _NOTE_KINDS:
                raise RenderError(
                    f"Note {block.title!r}: kind must be 'caution' or 'info' (got {block.kind!r})."
                )
            return Node("note", block, children=self.blocks(block.blocks, depth))
        if kind == "table":
            self.tables += 1
            header, rows = _cells(block)
            return Node("table", block, anchor=self.anchor(block.id or "table", ("-caption",)),
                        number=self.tables, header=header, rows=rows)
        if kind == "figure":
            self.figures += 1
            svg = self.draw(block) if self.draw is not None else None
            return Node("figure", block, anchor=self.anchor(block.id or "figure"),
                        number=self.figures, svg=svg)
        return Node(kind, block)

    def section(self, section: Section, depth: int) -> Node:
        anchor = self.anchor(section.id or section.title or "section")
        level = min(max(int(section.level or 2), 2, depth), 6)
        children = self.blocks((*section.blocks, *section.subsections), level + 1)
        return Node("section", section, anchor=anchor, level=level, children=children)


def _cells(table: Table) -> tuple[tuple[Cell, ...], tuple[tuple[Cell, ...], ...]]:
    aligns = tuple(c.align for c in table.columns)
    for a in aligns:
        if a not in _ALIGNS:
            raise RenderError(
                f"Table {table.id!r}: column align must be 'left', 'right' or 'center' (got {a!r})."
            )
    width = max([len(aligns), *(len(r) for r in table.rows)]) if table.rows or aligns else 0
    rows = []
    for r, row in enumerate(table.rows):
        tones = table.highlight[r] if r < len(table.highlight) else ()
        cells = []
        for c in range(width):
            tone = tones[c] if c < len(tones) else ""
            if tone not in _TONES:
                raise RenderError(
                    f"Table {table.id!r}, row {r + 1}, column {c + 1}: highlight must be "
                    f"'pos', 'neg', 'zero' or '' (got {tone!r})."
                )
            cells.append(Cell(
                runs=row[c] if c < len(row) else (),
                header=c < table.header_columns,
                align=aligns[c] if c < len(aligns) else "left",
                tone=tone,
            ))
        rows.append(tuple(cells))
    header = tuple(
        Cell(runs=table.columns[c].label if c < len(aligns) else (), header=True,
             align=aligns[c] if c < len(aligns) else "left", tone="")
        for c in range(width)
    )
    return header, tuple(rows)


def build_view(document: Document, *, draw: Callable[[Figure], Markup] | None = None,
               css: Markup | None = None, for_print: bool = False) -> View:
    """Number, anchor and (with ``draw``) draw every block of ``document`` in reading order."""
    builder = _Builder(draw)
    summary = builder.blocks(document.summary, 2)
    sections = builder.blocks(document.sections, 2)
    return View(document=document, summary=summary, sections=sections, css=css, for_print=for_print)


# --- Markdown escaping -------------------------------------------------------------------


class MarkdownText(str):
    """Text already escaped for Markdown; the Markdown environment passes it through as is."""


# CommonMark 0.31, section 2.4: any ASCII punctuation may be backslash-escaped. These are the
# characters that start or end inline syntax (code, emphasis, links, autolinks and raw HTML,
# GFM tables and strikethrough) or an ATX heading's closing sequence.
_MD_INLINE = re.compile(r"([\\`*_\[\]<>|~#])")
# An entity or numeric character reference (section 6.2) would be decoded; escape its "&".
_MD_ENTITY = re.compile(r"&(?=#?[A-Za-z0-9]+;)")
# A value that starts with a list marker ("-", "+", "1." or "1)") would open a list when it
# begins a line; mid-line runs start with a space and are left alone.
_MD_LINE_START = re.compile(r"^([-+])(?=\s|$|[-+])|^(\d{1,9})([.)])(?=\s|$)")


def markdown_escape(value: object) -> MarkdownText:
    """Escape a value for Markdown text: backslash escapes, one line, nothing interpreted."""
    if isinstance(value, MarkdownText):
        return value
    text = "" if value is None else str(value)
    text = re.sub(r"\s*[\r\n]+\s*", " ", text)
    text = show_controls(text, keep="\t")
    text = _MD_INLINE.sub(r"\\\1", text)
    text = _MD_ENTITY.sub(r"\\&", text)
    text = _MD_LINE_START.sub(
        lambda m: (f"\\{m[1]}" if m[1] else f"{m[2]}\\{m[3]}"), text
    )
    return MarkdownText(text)


def markdown_code(value: object) -> MarkdownText:
    """A literal (hash, path, command line) as a Markdown code span, shown exactly as it is.

    CommonMark 0.31, section 6.1: the fence is one backtick longer than the longest run of
    backticks inside, and a space pads a literal that starts or ends with a backtick. A literal
    holding "|" (a GFM table cell would end there even inside a code span) is escaped as text."""
    text = show_controls(re.sub(r"\s*[\r\n]+\s*", " ", "" if value is None else str(value)), keep="\t")
    if not text or "|" in text:
        return markdown_escape(text)
    fence = "`" * (max((len(r) for r in re.findall(r"`+", text)), default=0) + 1)
    pad = " " if text.startswith("`") or text.endswith("`") else ""
    return MarkdownText(f"{fence}{pad}{text}{pad}{fence}")


def _leading_space(text: str) -> str:
    return text[: len(text) - len(text.lstrip())]


def _trailing_space(text: str) -> str:
    return text[len(text.rstrip()):]


def _quote(text: str) -> MarkdownText:
    """Prefix every line of already rendered Markdown with '> ' (a block quote)."""
    body = re.sub(r"\n{3,}", "\n\n", str(text).strip("\n"))
    return MarkdownText("\n".join(("> " + line) if line else ">" for line in body.split("\n")))


# --- Environments ------------------------------------------------------------------------


_DECIMAL = re.compile(r"(\s?(?:=|&lt;|&gt;|≤|≥)\s)?[−-]?(?:\d[\d,]*)?\.\d+")


def keep_numbers(text: str) -> Markup:
    """Escape ``text`` and keep each decimal number (with a relation before it and the space
    before that, as in `` = .012``) on one line: some line breakers allow a break after a
    leading decimal point, and a line that starts with "= .012" loses its symbol ("p")."""
    escaped = str(escape(_html_text(text)))
    return Markup(_DECIMAL.sub(lambda m: f'<span class="nb">{m.group(0)}</span>', escaped))


def _html_text(value):
    """The HTML environment's ``finalize``: user text with hidden characters made visible;
    markup (our CSS, the drawn SVG, macro output) passes through, and autoescape follows."""
    if isinstance(value, str) and not isinstance(value, Markup):
        return show_controls(value, keep="\t\n")
    return value


def _common(env: jinja2.Environment) -> jinja2.Environment:
    env.filters["leading_space"] = _leading_space
    env.filters["trailing_space"] = _trailing_space
    return env


def _template_loader() -> jinja2.BaseLoader:
    """The installed templates package; else, when ``reporter`` is imported from a source checkout
    that was installed without ``-e`` (Python started in the checkout's folder finds the source
    tree's ``reporter`` first, which holds no ``templates`` package), the checkout's ``templates/``."""
    try:
        return jinja2.PackageLoader(TEMPLATE_PACKAGE, ".")
    except (ModuleNotFoundError, ValueError):
        checkout = Path(__file__).resolve().parents[2] / "templates"
        if (checkout / "report.html.j2").is_file():
            return jinja2.FileSystemLoader(checkout)
        raise


@functools.cache
def html_environment() -> jinja2.Environment:
    """The environment for ``*.html.j2`` templates: autoescape always on."""
    env = jinja2.Environment(
        loader=_template_loader(),
        autoescape=True,
        finalize=_html_text,
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
    )
    env.filters["keep_numbers"] = keep_numbers
    return _common(env)


@functools.cache
def markdown_environment() -> jinja2.Environment:
    """The environment for ``*.md.j2`` templates: every interpolated value Markdown-escaped."""
    env = jinja2.Environment(
        loader=_template_loader(),
        autoescape=False,
        finalize=markdown_escape,
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=True,
    )
    env.filters["quote"] = _quote
    env.filters["code"] = markdown_code
    env.filters["rendered"] = MarkdownText
    return _common(env)


def template_source(name: str) -> str:
    """The text of one file of the templates package (e.g. ``report.css``)."""
    env = html_environment()
    try:
        source, _, _ = env.loader.get_source(env, name)
    except jinja2.TemplateNotFound as exc:
        raise RenderError(
            f"The report template file {name!r} is missing from the package "
            f"{TEMPLATE_PACKAGE!r}; reinstall anova-report."
        ) from exc
    return source
