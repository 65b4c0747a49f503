"""anova-report: from a plan file and a data file to a checkable ANOVA report.

The Python interface mirrors the command::

    import reporter
    report = reporter.report("demo_project/oneway.toml")   # plan path (or a Plan), optional DataFrame
    report.analysis.anova.rows[0].F                         # every number, from the fitting layer
    report.write("out", formats=("html", "json"))           # the same files as `anova-report run`
    report                                                  # in a notebook: the HTML report

or, with the plan given as keyword arguments (see :func:`analyze`)::

    report = reporter.analyze(df, outcome="recalled", factors={"schedule": None},
                              hypotheses={"schedules differ": "effect: schedule"}, alpha=0.01)
    report.to_json()["anova"]; report.to_html("report.html"); print(report.plan_toml())

Heavy modules (scipy, matplotlib, WeasyPrint) load on first use, not on ``import reporter``.
"""

from __future__ import annotations

import os
from typing import TYPE_CHECKING, Any

from reporter.errors import (
    DataError, FitError, FittedModelError, HypothesisError, OptionError, PlanError, RenderError, ReporterError,
)

__all__ = [
    "DataError", "FitError", "FittedModelError", "HypothesisError", "OptionError", "Plan", "PlanError", "Prepared",
    "RenderError", "Report", "ReporterError", "analyze", "from_statsmodels", "load_plan", "plan_toml", "prepare",
    "report",
]

if TYPE_CHECKING:  # pragma: no cover
    from reporter.api import Prepared, Report, analyze
    from reporter.from_fit import from_statsmodels
    from reporter.intake.plan import Plan


def load_plan(path: "str | os.PathLike[str]") -> "Plan":
    """Read and validate a plan file (see :func:`reporter.intake.plan.load_plan`)."""
    from pathlib import Path

    from reporter.intake.plan import load_plan as _load

    return _load(Path(path))


def plan_toml(plan: "Plan") -> str:
    """The plan as the text of a plan file (see :func:`reporter.intake.canonical.plan_toml`)."""
    from reporter.intake.canonical import plan_toml as _plan_toml

    return _plan_toml(plan)


def prepare(plan: "Plan | str | os.PathLike[str]", data: Any = None) -> "Prepared":
    """Match a plan to its data and compile its hypotheses (see :func:`reporter.api.prepare`)."""
    from reporter.api import prepare as _prepare

    return _prepare(plan, data)


def report(plan: "Plan | str | os.PathLike[str]", data: Any = None) -> "Report":
    """Fit a plan and return a :class:`reporter.api.Report` (analysis, document, writers)."""
    from reporter.api import build_report

    return build_report(plan, data)


def __getattr__(name: str) -> Any:
    if name in ("Report", "Prepared", "analyze"):
        from reporter import api

        return getattr(api, name)
    if name == "from_statsmodels":
        from reporter.from_fit import from_statsmodels as _from_statsmodels

        return _from_statsmodels
    if name == "Plan":
        from reporter.intake.plan import Plan as _Plan

        return _Plan
    raise AttributeError(f"module 'reporter' has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__))
