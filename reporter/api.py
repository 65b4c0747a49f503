"""The Python interface: the same steps as the command, as functions returning frozen values."""

from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction
from pathlib import Path
from typing import Any

import numpy as np

from reporter.errors import DataError
from reporter.intake.cells import CellStats, describe_cells
from reporter.intake.data import Dataset, data_from_frame, load_data
from reporter.intake.memory_rows import MemoryRows
from reporter.intake.plan import Plan, load_plan
from reporter.intake.summary import read_summary, summary_from_frame
from reporter.intake.rows import RowAccess
from reporter.model.design import Design, design_from_plan
from reporter.model.hypotheses import Contrast, compile_hypotheses


@dataclass(frozen=True)
class Prepared:
    """A plan matched to its data: design, cell counts, compiled hypotheses, the cell table
    (``cells``) and the row access of the row-level steps (``rows``; None for a summary table).

    ``cell`` gives each row's cell while the rows are held in memory (None otherwise).
    """

    plan: Plan
    data: Dataset
    design: Design
    cell: np.ndarray | None
    counts: tuple[int, ...]
    contrasts: tuple[Contrast, ...]
    cells: CellStats
    rows: RowAccess | None

    @property
    def empty_cells(self) -> tuple[int, ...]:
        return tuple(i for i, n in enumerate(self.counts) if n == 0)


def prepare(plan: Plan | str | Path, data: Any = None) -> Prepared:
    """Read (or take) the plan and the data, build the design and compile every hypothesis.

    ``data`` may be a pandas DataFrame; by default the plan's data file is read.
    """
    if not isinstance(plan, Plan):
        plan = load_plan(plan)
    if plan.data.layout == "cell-summaries":
        dataset = read_summary(plan) if data is None else summary_from_frame(plan, data)
    else:
        dataset = load_data(plan) if data is None else data_from_frame(plan, data)
    n_rows = dataset.cells.n_total if dataset.cells is not None else dataset.n
    if n_rows == 0:
        raise DataError(
            f"{dataset.source}: no row is left to analyse ({dataset.n_read} read; "
            + "; ".join(f"{e.count} {e.reason}" for e in dataset.exclusions)
            + ")."
        )
    design = design_from_plan(plan)
    cell = None
    if dataset.cells is not None:
        cells, rows = dataset.cells, dataset.row_access
    else:
        cell = design.cell_index(dataset.levels)
        cell.setflags(write=False)
        pivot_exact = Fraction(dataset.pivot_text) if dataset.exact_decimal else Fraction(dataset.pivot)
        cells = describe_cells(dataset.y, cell, design.k, dataset.pivot, pivot_exact)
        rows = MemoryRows(dataset.y, cell, design.k, dataset.rows)
    counts = tuple(int(c) for c in cells.n)
    contrasts = compile_hypotheses(plan, design, counts)
    return Prepared(plan, dataset, design, cell, counts, contrasts, cells, rows)


@dataclass(frozen=True)
class Report:
    """A fitted plan: the prepared inputs, the analysis, and ways to render it."""

    prepared: Prepared
    analysis: Any

    def document(self):
        """The document model of the report (built on demand; nothing is cached)."""
        from reporter.narrative.build import build_document
        from reporter.provenance import collect_provenance

        return build_document(self.prepared, self.analysis, collect_provenance(self.prepared))

    def render(self, fmt: str) -> bytes:
        """The bytes of one format: "html", "json", "md" or "pdf"."""
        from reporter.run import render_outputs

        return render_outputs(self.prepared, self.analysis, (fmt,))[fmt]

    def write(self, out: str | Path, formats=("html", "json")) -> list[Path]:
        """Write the report files, as ``anova-report run`` does."""
        from reporter.run import write_files

        return write_files(self.prepared, self.analysis, out, tuple(formats))

    def _repr_html_(self) -> str:
        return self.render("html").decode("utf-8")


def build_report(plan: Plan | str | Path, data: Any = None) -> Report:
    """Prepare and fit a plan."""
    from reporter.run import analyse

    prep = prepare(plan, data)
    return Report(prep, analyse(prep))
