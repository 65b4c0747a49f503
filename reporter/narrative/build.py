"""Build the report's document model from fitted results: this module assembles the sections.

The wording lives in one module per part of the report, each a mixin of :class:`_Builder`:
:mod:`~reporter.narrative.summary_methods` (summary and Methods), :mod:`~reporter.narrative.means`
(cell and marginal means), :mod:`~reporter.narrative.matrices` (notation, design and contrast
matrices), :mod:`~reporter.narrative.hypothesis_tests` (each hypothesis and its reading),
:mod:`~reporter.narrative.results` (ANOVA table, results sentences, cautions),
:mod:`~reporter.narrative.assumptions` (checks, robust and permutation tests, follow-up families),
:mod:`~reporter.narrative.provenance_lock` (provenance and the comparison with the locked plan),
:mod:`~reporter.narrative.cell_summaries` (what a table of cell summaries changes) and
:mod:`~reporter.narrative.phrases` (shared helpers). This module keeps the builder's state, the
statistic pieces every section quotes, and the order of the sections.

The numbers come from the fitting layer (``Analysis``) and are formatted only through
:mod:`reporter.narrative.numbers`. Nothing is computed here beyond choosing words (for example
"larger" or "smaller" from the sign of an estimate) and picking values to show.

Reporting guidance followed: APA Journal Article Reporting Standards for quantitative research
(Appelbaum et al. (2018), American Psychologist 73(1), 3-25) and Wilkinson & the Task Force on
Statistical Inference (1999), American Psychologist 54(8), 594-604: every test with an effect size
and interval, assumptions with their checks, multiplicity stated, no claim from a non-significant
result that an effect is absent.
"""

from __future__ import annotations

from reporter.narrative import numbers as N
from reporter.narrative.assumptions import AssumptionSections
from reporter.narrative.cell_summaries import CellSummarySections
from reporter.narrative.covariate_figures import CovariateFigures
from reporter.narrative.covariates import CovariateSections
from reporter.narrative.document import Document, Section, plain
from reporter.narrative.hypothesis_tests import HypothesisSections
from reporter.narrative.matrices import MatrixSections
from reporter.narrative.means import MeansSections
from reporter.narrative.phrases import CORRECTION_SHORT, _rows_phrase  # noqa: F401  (importable from here, as before)
from reporter.narrative.provenance_lock import ProvenanceSections, lock_sections
from reporter.narrative.results import ResultsSections
from reporter.narrative.summary_methods import SummaryMethods


class _Builder(SummaryMethods, MeansSections, MatrixSections, HypothesisSections, ResultsSections,
               AssumptionSections, ProvenanceSections, CovariateSections, CovariateFigures):
    """One report's wording: the sections come from the mixins, the state and the shared statistic
    pieces (the confirmatory test, its p values and interval) from here."""

    def __init__(self, prep, analysis, provenance):
        self.prep = prep
        self.a = analysis
        self.prov = provenance
        self.plan = prep.plan
        self.design = analysis.design
        self.alpha = analysis.alpha
        self.level = 1 - analysis.alpha
        self.multi = len(self.design.factors) > 1
        self.inf = getattr(analysis, "inference", None)
        self._explained: dict[str, int] = {}  # robust method -> the hypothesis under which it is explained

    # -- helpers ------------------------------------------------------------------------------
    def cell_name(self, cell) -> str:
        return cell.label if self.multi else cell.levels[0]

    def robust_confirmatory(self, h) -> bool:
        return h.extras is not None and h.extras.confirmatory == "robust"

    def confirm_stat(self, h) -> N.Stat:
        """The statistic of the confirmatory test (classical or robust, as the plan's policy chose)."""
        if self.robust_confirmatory(h):
            r = h.extras.robust
            stat = N.stat_t(r.statistic, r.df[0]) if r.test == "t" else N.stat_f(r.statistic, r.df[0], r.df[1])
            name = {"HC3 Wald F": "HC3 Wald test", "HC3 t": "HC3 t test", "Welch–Satterthwaite t": "Welch–Satterthwaite test"}.get(r.method, r.method)
            return N.text(f"{name}, ") + stat
        return self.test_stat(h.test)

    def p_text(self, h) -> N.Stat:
        adj = h.p_adjusted
        p = h.extras.robust.p if self.robust_confirmatory(h) else h.test.p
        parts = [N.stat_p(p)]
        if h.correction != "none" and adj is not None:
            parts.append(N.text(f"{CORRECTION_SHORT[h.correction]} ") + N.stat_p(adj))
        return N.join_stats(parts)

    def test_stat(self, t) -> N.Stat:
        if t.test == "t":
            return N.stat_t(t.statistic, t.df[0])
        return N.stat_f(t.statistic, t.df[0], t.df[1])

    def ci_stat(self, t) -> N.Stat:
        low, high = t.ci
        return N.stat_ci(float("-inf") if low is None else low, float("inf") if high is None else high, t.ci_level)

    def confirm_ci(self, h) -> tuple[float | None, float | None]:
        """The interval of the confirmatory test: Welch's when the robust t is confirmatory."""
        if self.robust_confirmatory(h) and h.extras.robust.ci is not None:
            return h.extras.robust.ci
        return h.test.ci

    def confirm_ci_stat(self, h) -> N.Stat:
        low, high = self.confirm_ci(h)
        return N.stat_ci(float("-inf") if low is None else low, float("inf") if high is None else high, h.test.ci_level)

    def decision_p(self, h) -> float:
        return h.p_adjusted if h.p_adjusted is not None else h.test.p

    # -- the order of the sections ------------------------------------------------------------
    def build(self) -> Document:
        sections = [self.methods(), *lock_sections(getattr(self.prep, "lock", None)), self.cells_section(), self.model_section()]
        marg = self.marginal_section()
        if marg:
            sections.append(marg)
        sections += [self.hypotheses_section(), self.anova_section()]
        rounding = self.rounding_section()
        if rounding:
            sections.append(rounding)
        extra = self.assumption_section()
        if extra:
            sections.append(extra)
        sections += [self.results_section(), self.cautions(), self.provenance()]
        return Document(
            title=self.plan.title,
            subtitle=f"Analysis of {'co' if self.has_covariates else ''}variance report · {self.design_phrase()}",
            summary=self.summary(),
            sections=tuple(sections),
            created=self.prov.created,
        )

    def rounding_section(self) -> Section | None:
        return None


class _SummaryBuilder(CellSummarySections, _Builder):
    """The builder for a table of cell summaries: the wording of :class:`CellSummarySections` first."""


def build_document(prep, analysis, provenance) -> Document:
    """The complete document model of one report."""
    builder = _SummaryBuilder if prep.data.summary is not None else _Builder
    return builder(prep, analysis, provenance).build()


__all__ = ["build_document", "plain"]
