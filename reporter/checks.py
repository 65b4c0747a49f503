"""The data checks of ``anova-report check``: a valid plan whose data cannot give the planned report.

``check`` first reads the plan and the data; anything wrong with either (a key, a statement, a
file, a column, a level the plan does not list) is bad input and stops with exit code 2. When
both are readable, the data are put through the checks below. A **failed** check means that
``run`` would refuse these data; ``check`` then exits with code 1 and names every failed check.
A **note** is something the report will say about the data; it does not change the exit code.

Failed checks (each is the rule ``run`` applies, on the same code path):

* ``model``: the cell-means model can be fitted: at least two cells have data, there are more
  rows than cells with data (so the residual has degrees of freedom), and the values within the
  cells are not all equal (:func:`reporter.fitting.linear.fit_model`).
* ``estimable``: every planned hypothesis is estimable from the cells that have data: it puts
  no weight on an empty cell (:func:`reporter.model.hypotheses.check_estimable`; Searle 1987,
  *Linear Models for Unbalanced Data*, on estimable functions with empty cells).

Notes:

* ``empty cells``: a combination of levels without rows; an effect of the ANOVA table that
  involves it is tested only in its estimable part (or not at all), as the report says.
* ``rows left out``: rows not analysed, counted by reason (missing or non-numeric outcome,
  missing factor value, a level the plan excludes).

What ``check`` does not do: it fits no test, so a follow-up family or a robust test that the
data cannot support is reported by ``run`` (exit code 2), not here.
"""

from __future__ import annotations

from dataclasses import dataclass

from reporter.errors import FitError, HypothesisError
from reporter.fitting.linear import fit_model
from reporter.model.hypotheses import check_estimable

FAILED, NOTE = "failed", "note"


@dataclass(frozen=True)
class Finding:
    """One check's outcome: ``status`` is "passed", "failed" or "note"; ``check`` its name."""

    check: str
    status: str
    message: str


def data_checks(prep) -> tuple[Finding, ...]:
    """Every data check on a prepared plan (compiled with ``require_estimable=False``), in order."""
    out: list[Finding] = []
    try:
        fit_model(prep.cells, prep.design.matrix)
    except FitError as exc:
        out.append(Finding("model", FAILED, str(exc)))
    else:
        out.append(Finding("model", "passed", "the cell-means model can be fitted "
                           f"({prep.data.n} rows in {sum(1 for n in prep.counts if n)} cells with data)"))
    bad = 0
    for c in prep.contrasts:
        try:
            check_estimable(c, prep.design, prep.counts, f'hypothesis "{c.name}"')
        except HypothesisError as exc:
            bad += 1
            out.append(Finding("estimable", FAILED, str(exc)))
    if not bad:
        out.append(Finding("estimable", "passed", f"every planned hypothesis ({len(prep.contrasts)}) "
                           "is estimable from the cells with data"))
    empty = [prep.design.cells[i].label for i in prep.empty_cells]
    if empty:
        shown = ", ".join(f"({e})" for e in empty[:8]) + (f" and {len(empty) - 8} more" if len(empty) > 8 else "")
        out.append(Finding("empty cells", NOTE, f"{len(empty)} of {prep.design.k} cells have no rows: {shown}; "
                           "an ANOVA effect that involves them is tested only in its estimable part"))
    for e in prep.data.exclusions:
        out.append(Finding("rows left out", NOTE, f"{e.count} row(s) left out: {e.reason}"))
    return tuple(out)


def failed(findings) -> tuple[Finding, ...]:
    return tuple(f for f in findings if f.status == FAILED)
