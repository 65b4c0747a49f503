"""The exceptions a user of anova-report can meet.

Every error a person can fix by changing their plan, data or options derives from
:class:`ReporterError`; the command turns it into one line on stderr and exit code 2.
A message names the object, the rule, the value received and the fix.
"""

from __future__ import annotations


class ReporterError(Exception):
    """Root of all user-facing errors (bad plan, bad data, bad hypothesis, bad option)."""

    exit_code = 2


class PlanError(ReporterError):
    """The plan file breaks a rule: wrong key, wrong type, impossible value."""


class DataError(ReporterError):
    """The data file cannot be read or does not match the plan."""


class HypothesisError(ReporterError):
    """A hypothesis statement cannot be parsed or compiled into a testable contrast."""


class FitError(ReporterError):
    """The data cannot support the requested fit (no residual df, zero variance, ...)."""


class RenderError(ReporterError):
    """A report format cannot be produced (missing optional dependency, unwritable folder)."""


class OptionError(ReporterError):
    """A command-line option is invalid."""


class FittedModelError(ReporterError):
    """A model fitted elsewhere cannot become a report as it stands (not an ordinary least-squares
    fit of categorical factors with every interaction, weights, no formula, ...)."""
