"""A small report document built by hand, shared by the rendering tests.

It holds one of every block kind: paragraphs of each style with italic runs, a bullet list,
a design-matrix table with highlight classes, a results table whose level name is an HTML
injection attempt, a figure, a definition list, a caution note and an info note.
"""

from __future__ import annotations

import pytest

from reporter.narrative.document import (
    BulletList,
    Column,
    DefinitionList,
    Document,
    Figure,
    FigureSpec,
    Note,
    Paragraph,
    Section,
    Table,
    runs_of,
)
from reporter.narrative.numbers import Run, join_stats, stat_f, stat_p

#: A level name that would run a script if it reached the page as markup.
HOSTILE_LEVEL = "<img src=x onerror=alert(1)>"
#: A level name full of Markdown syntax; it must come out as written.
MARKDOWN_LEVEL = "a|b *c* _d_ `e`"

SUMMARY_TEXT = "Seedlings grown in coir were taller than seedlings grown in bark."
METHODS_TEXT = "Each hypothesis about the means was tested against the pooled within-cell variance"


def _cell(text: str) -> tuple[Run, ...]:
    return runs_of(text)


def _design_table() -> Table:
    labels = ("peat", "coir", "bark", "soil")
    matrix = ((1, 0, 0, 0), (1, 1, 0, 0), (1, 0, 1, 0), (1, 0, 0, 1))
    contrast = ((0, 1, -1, 0),)
    rows = []
    tones = []
    for label, values in zip(labels, matrix):
        rows.append((_cell(label), *(_cell(str(v)) for v in values)))
        tones.append(("", *("pos" if v > 0 else "neg" if v < 0 else "zero" for v in values)))
    for values in contrast:
        rows.append((_cell("coir vs bark"),
                     *(_cell(str(v).replace("-", "\u2212")) for v in values)))
        tones.append(("", *("pos" if v > 0 else "neg" if v < 0 else "zero" for v in values)))
    return Table(
        id="design-matrix",
        caption=runs_of("Design matrix ", Run("X", True), " (reference coding) and one contrast"),
        columns=(Column(runs_of("Row")), *(Column(runs_of(f"β{i}"), "center") for i in range(4))),
        rows=tuple(rows),
        notes=(runs_of("Shaded cells: positive weights (blue, underlined), negative weights "
                       "(orange, hatched); zeros are grey."),),
        highlight=tuple(tones),
        compact=True,
    )


def _results_table() -> Table:
    def row(level, n, m, sd):
        return (_cell(level), _cell(str(n)), _cell(m), _cell(sd))

    return Table(
        id="cell-means",
        caption=runs_of("Height (mm) by growing medium"),
        columns=(
            Column(runs_of("Medium")),
            Column(runs_of(Run("n", True)), "right"),
            Column(runs_of(Run("M", True)), "right"),
            Column(runs_of(Run("SD", True)), "right"),
        ),
        rows=(
            row("peat", 4, "12.55", "0.71"),
            row("coir", 3, "14.37", "0.67"),
            row("bark", 5, "10.36", "0.52"),
            row(HOSTILE_LEVEL, 4, "9.28", "0.52"),
            row(MARKDOWN_LEVEL, 4, "\u22121.00", "0.10"),
        ),
        notes=(runs_of(Run("Note.", True), " Standard deviations use ", Run("n", True), " \u2212 1."),),
    )


def _hypotheses_table() -> Table:
    """A table wider than a phone screen: it must scroll inside its wrapper."""
    labels = ("Hypothesis", "Statement", "Test", "df", "Statistic", "p", "p (Holm)",
              "Estimate", "95% CI", "Role")
    rows = (
        ("coir beats bark", "coir > bark", "t", "12", "9.93", "< .001", "< .001",
         "4.01", "[3.29, ∞]", "planned"),
        ("media differ", "peat = coir = bark = soil", "F", "3, 12", "43.10", "< .001",
         "< .001", "—", "—", "planned"),
        ("peat above soil", "peat > soil", "t", "12", "6.93", "< .001", "< .001",
         "3.27", "[2.43, ∞]", "exploratory"),
    )
    return Table(
        id="hypotheses",
        caption=runs_of("Tests of the hypotheses in the plan, in the order written"),
        columns=tuple(Column(runs_of(label), "left" if i < 3 or i == 9 else "right")
                      for i, label in enumerate(labels)),
        rows=tuple(tuple(runs_of(v) for v in row) for row in rows),
    )


def _figure() -> Figure:
    spec = FigureSpec(
        kind="means",
        data=(
            ("groups", ("peat", "coir", "bark", "soil")),
            ("means", (12.55, 14.37, 10.36, 9.28)),
            ("ci_low", (11.4, 12.7, 9.7, 8.4)),
            ("ci_high", (13.7, 16.0, 11.0, 10.1)),
            ("points", ((12.1, 13.4, 11.8, 12.9), (14.2, 15.1, 13.8),
                        (10.2, 11.0, 9.7, 10.8, 10.1), (9.1, 8.7, 9.9, 9.4))),
            ("y_label", "Height (mm)"),
        ),
    )
    return Figure(
        id="means-figure",
        caption=runs_of("Cell means with 95% confidence intervals; dots are single seedlings."),
        alt="Dot plot of seedling height for peat, coir, bark and soil; coir highest, soil lowest.",
        spec=spec,
    )


def make_document(level_name: str = HOSTILE_LEVEL) -> Document:
    """The hand-made report used by every rendering test."""
    f_test = join_stats([stat_f(43.1, 3, 12), stat_p(0.0000008)])
    methods = Section(
        id="methods",
        title="Methods",
        blocks=(
            Paragraph(runs_of(
                METHODS_TEXT, " (", Run("MSE", True), "); one-sided ", Run("t", True),
                " tests for directional statements, ", Run("F", True), " tests otherwise.",
            )),
            Paragraph(runs_of("H0: \u03bc(coir) \u2264 \u03bc(bark)    H1: \u03bc(coir) > \u03bc(bark)"),
                      style="symbols"),
            BulletList((
                runs_of("Outcome: height_mm (millimetres)"),
                runs_of("Factor: medium, levels peat, coir, bark, ", level_name),
                runs_of("\u03b1 = .05, Holm correction over the planned family"),
            )),
            DefinitionList((
                (runs_of("Data file"), runs_of("heights.csv (16 rows, none excluded)")),
                (runs_of("Data SHA-256"),
                 runs_of("9f86d081884c7d659a2feaa0c55ad015a3bf4f1b2b0b822cd15d6c15b0f00a08")),
                (runs_of("Software"), runs_of("anova-report 0.1.0, numpy, scipy")),
            )),
        ),
        subsections=(
            Section(
                id="design",
                title="Design and coefficients",
                blocks=(
                    Paragraph(runs_of("Each ", Run("β", False), " is a combination of cell means.")),
                    _design_table(),
                ),
                level=3,
            ),
        ),
    )
    results = Section(
        id="results",
        title="Results",
        blocks=(
            Paragraph(runs_of("The media differ in mean height, ", f_test, "."), style="lead"),
            _results_table(),
            _hypotheses_table(),
            _figure(),
            Paragraph(runs_of("Reading: if the media did not differ, differences this large "
                              "would be very rare."), style="reading"),
            Note("caution", "Small cells", (
                Paragraph(runs_of("The coir cell holds only ", Run("n", True),
                                  " = 3 seedlings; its interval is wide.")),
            )),
            Note("info", "Simulated data", (
                Paragraph(runs_of("These numbers come from a seeded simulation."), style="small"),
            )),
        ),
    )
    return Document(
        title="Seedling height under four growing media",
        subtitle="Between-subjects analysis of variance, one factor",
        summary=(Paragraph(runs_of(SUMMARY_TEXT), style="lead"),),
        sections=(methods, results),
        created="2024-05-01T12:00:00+00:00",
        language="en",
        meta=(("Plan", "plan.toml"), ("Data", "heights.csv")),
    )


@pytest.fixture
def document() -> Document:
    return make_document()


@pytest.fixture(scope="session")
def attachments() -> dict[str, bytes]:
    """Two files to embed: a JSON text and bytes that are not text at all."""
    return {
        "results.json": b'{"schema": "anova-report/results/1", "cells": []}\n',
        "data.bin": bytes(range(256)) * 3,
    }


@pytest.fixture(scope="session")
def build_document():
    """The factory behind ``document``, for tests that need a fresh or altered copy."""
    return make_document


@pytest.fixture
def hostile_level() -> str:
    return HOSTILE_LEVEL


@pytest.fixture
def markdown_level() -> str:
    return MARKDOWN_LEVEL


@pytest.fixture
def methods_text() -> str:
    return METHODS_TEXT


@pytest.fixture
def summary_text() -> str:
    return SUMMARY_TEXT
