"""The Python interface: the same steps as the command, as functions returning frozen values."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from reporter.errors import DataError
from reporter.intake.data import Dataset, data_from_frame, load_data
from reporter.intake.plan import Plan, load_plan
from reporter.model.design import Design, design_from_plan
from reporter.model.hypotheses import Contrast, compile_hypotheses


@dataclass(frozen=True)
class Prepared:
    """A plan matched to its data: design, cell of each row, cell counts, compiled hypotheses."""

    plan: Plan
    data: Dataset
    design: Design
    cell: np.ndarray
    counts: tuple[int, ...]
    contrasts: tuple[Contrast, ...]

    @property
    def empty_cells(self) -> tuple[int, ...]:
        return tuple(i for i, n in enumerate(self.counts) if n == 0)


def prepare(plan: Plan | str | Path, data: Any = None) -> Prepared:
    """Read (or take) the plan and the data, build the design and compile every hypothesis.

    ``data`` may be a pandas DataFrame; by default the plan's data file is read.
    """
    if not isinstance(plan, Plan):
        plan = load_plan(plan)
    dataset = load_data(plan) if data is None else data_from_frame(plan, data)
    if dataset.n == 0:
        raise DataError(
            f"{dataset.source}: no row is left to analyse ({dataset.n_read} read; "
            + "; ".join(f"{e.count} {e.reason}" for e in dataset.exclusions)
            + ")."
        )
    design = design_from_plan(plan)
    cell = design.cell_index(dataset.levels)
    cell.setflags(write=False)
    counts = tuple(int(c) for c in np.bincount(cell, minlength=design.k))
    contrasts = compile_hypotheses(plan, design, counts)
    return Prepared(plan, dataset, design, cell, counts, contrasts)
