"""The document model: one frozen tree of sections, paragraphs, tables, figures and notes.

The narrative layer builds it from the results (all wording and number style happen there);
the renderers only walk it. Text is typed: a :class:`~reporter.narrative.numbers.Run` is plain
text plus an italic flag, and renderers escape it. No markup is ever stored here, except the
figure drawings, which renderers produce themselves from :class:`FigureSpec` data.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Union

from reporter.narrative.numbers import Run, Stat

Runs = tuple[Run, ...]


def runs_of(*parts: str | Stat | Run | tuple) -> Runs:
    """Flatten strings (upright text), Stats and Runs into one tuple of runs."""
    out: list[Run] = []
    for p in parts:
        if isinstance(p, str):
            if p:
                out.append(Run(p, False))
        elif isinstance(p, Stat):
            out.extend(p.runs)
        elif isinstance(p, Run):
            out.append(p)
        else:
            out.extend(runs_of(*p))
    return tuple(out)


def plain(runs: Runs) -> str:
    return "".join(r.text for r in runs)


@dataclass(frozen=True)
class Paragraph:
    """Running text. ``style`` is "body", "lead" (summary), "symbols" (a formula line),
    "reading" (the plain-language reading of a test) or "small"."""

    runs: Runs
    style: str = "body"


@dataclass(frozen=True)
class BulletList:
    items: tuple[Runs, ...]


@dataclass(frozen=True)
class Column:
    """A table column. ``nowrap`` keeps each cell on one line (a test statistic such as
    ``t(110) = 2.29, p = .012`` must not break inside)."""

    label: Runs
    align: str = "left"  # "left" | "right" | "center"
    nowrap: bool = False


@dataclass(frozen=True)
class Table:
    """A data table. The first ``header_columns`` cells of each row are row headers
    (``<th scope="row">``). ``highlight`` marks cells by (row, column) for the design
    matrix's colour coding: value "pos", "neg" or "zero"."""

    id: str
    caption: Runs
    columns: tuple[Column, ...]
    rows: tuple[tuple[Runs, ...], ...]
    notes: tuple[Runs, ...] = ()
    header_columns: int = 1
    highlight: tuple[tuple[str, ...], ...] = ()
    compact: bool = False


@dataclass(frozen=True)
class FigureSpec:
    """Data for one figure; the renderer draws it.

    kind "means": groups (labels), means, ci_low, ci_high, points (tuple per group),
      y_label; "interaction": x_levels, traces (label, means, ci_low, ci_high) , y_label;
      "qq": theoretical, sample; "residuals": groups, residuals per group.
    """

    kind: str
    data: tuple[tuple[str, object], ...]

    def get(self, key: str):
        return dict(self.data)[key]


@dataclass(frozen=True)
class Figure:
    id: str
    caption: Runs
    alt: str
    spec: FigureSpec


@dataclass(frozen=True)
class DefinitionList:
    """Term / description pairs (provenance, hypothesis details)."""

    items: tuple[tuple[Runs, Runs], ...]


@dataclass(frozen=True)
class Note:
    """A boxed remark: kind "caution" or "info"."""

    kind: str
    title: str
    blocks: tuple["Block", ...]


@dataclass(frozen=True)
class Section:
    """A titled part of the report. ``number`` (e.g. "1" for the first hypothesis) is shown
    before the title, in the heading and in the contents, which then adds no number of its own."""

    id: str
    title: str
    blocks: tuple["Block", ...]
    subsections: tuple["Section", ...] = ()
    level: int = 2
    number: str = ""


Block = Union[Paragraph, BulletList, Table, Figure, DefinitionList, Note, Section]


@dataclass(frozen=True)
class Document:
    title: str
    subtitle: str
    summary: tuple[Paragraph, ...]
    sections: tuple[Section, ...]
    created: str
    language: str = "en"
    meta: tuple[tuple[str, str], ...] = field(default_factory=tuple)

    def walk(self):
        """Every block, depth first (sections included)."""

        def visit(blocks):
            for b in blocks:
                yield b
                if isinstance(b, Section):
                    yield from visit(b.blocks)
                    yield from visit(b.subsections)
                elif isinstance(b, Note):
                    yield from visit(b.blocks)

        for s in self.sections:
            yield s
            yield from visit(s.blocks)
            yield from visit(s.subsections)
