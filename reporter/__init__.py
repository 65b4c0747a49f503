"""anova-report: from a plan file and a data file to a checkable ANOVA report.

The Python interface mirrors the command::

    import reporter
    report = reporter.report("demo_project/oneway.toml")   # plan path (or a Plan), optional DataFrame
    report.analysis.anova.rows[0].F                         # every number, from the fitting layer
    report.write("out", formats=("html", "json"))           # the same files as `anova-report run`
    report                                                  # in a notebook: the HTML report

Heavy modules (scipy, matplotlib, WeasyPrint) load on first use, not on ``import reporter``.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from reporter.errors import (
    DataError, FitError, HypothesisError, OptionError, PlanError, RenderError, ReporterError,
)

__all__ = [
    "DataError", "FitError", "HypothesisError", "OptionError", "PlanError", "RenderError", "Report",
    "ReporterError", "load_plan", "prepare", "report",
]

if TYPE_CHECKING:  # pragma: no cover
    from reporter.api import Prepared, Report


def load_plan(path):
    """Read and validate a plan file (see :func:`reporter.intake.plan.load_plan`)."""
    from reporter.intake.plan import load_plan as _load

    return _load(path)


def prepare(plan, data: Any = None) -> "Prepared":
    """Match a plan to its data and compile its hypotheses (see :func:`reporter.api.prepare`)."""
    from reporter.api import prepare as _prepare

    return _prepare(plan, data)


def report(plan, data: Any = None) -> "Report":
    """Fit a plan and return a :class:`reporter.api.Report` (analysis, document, writers)."""
    from reporter.api import build_report

    return build_report(plan, data)


def __getattr__(name: str):
    if name == "Report":
        from reporter.api import Report as _Report

        return _Report
    raise AttributeError(f"module 'reporter' has no attribute {name!r}")
