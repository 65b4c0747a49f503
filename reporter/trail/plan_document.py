"""The analysis-plan document of ``anova-report lock``: what will be done, before any data exist.

The same document model, templates and stylesheet as the report (:mod:`reporter.narrative.document`,
``templates/plan.html.j2`` extending ``report.html.j2``); the methods are written in the future
tense, and there is no results section: no data have been read. The contrast tables are the
report's own (:func:`reporter.narrative.matrices.contrast_tables`).

Reporting guidance followed: the preregistration items of the APA Journal Article Reporting
Standards (Appelbaum et al. (2018), American Psychologist 73(1), 3-25, table 1: hypotheses,
planned analyses, sample-size determination, exclusion rules) and Cohen (1988) for the power table.
"""

from __future__ import annotations

from fractions import Fraction

from reporter.intake.defaults import FOLLOW_UPS, plan_value
from reporter.narrative import numbers as N
from reporter.narrative.document import (
    Column, DefinitionList, Document, Note, Paragraph, Section, Table, runs_of,
)
from reporter.narrative.equivalence import test_kind
from reporter.narrative.matrices import contrast_tables
from reporter.narrative.phrases import CODING_NAMES, CORRECTION_NAMES, PARAM_WORDS, _literal

SS_WORDS = {
    "III": "Type III sums of squares (unweighted means): each effect will be a hypothesis about the "
    "unweighted marginal means, whatever the number of observations each cell ends up with",
    "II": "Type II sums of squares: each effect will be adjusted for the other main effects",
    "I": "Type I sums of squares: each effect will be adjusted only for the effects listed before it in the plan",
}
POLICY_WORDS = {
    "classical": "The classical (equal-variance) tests will be the confirmatory ones; the heteroscedasticity-robust "
    "versions will be shown beside them for comparison.",
    "robust-if-heterogeneous": "If the Brown–Forsythe test indicates unequal variances, the heteroscedasticity-robust "
    "versions will be the confirmatory tests; otherwise the classical ones. Such a two-stage choice distorts error "
    "rates somewhat (Zimmerman, 2004).",
    "always-robust": "The heteroscedasticity-robust versions (Welch's t for a one-row contrast, Welch's ANOVA for a "
    "one-way effect, otherwise a Wald F test with HC3 standard errors) will be the confirmatory tests, whatever the "
    "variance check shows (Zimmerman, 2004).",
}


def _lead(head: str, body) -> tuple:
    return runs_of(f"{head}. ", body)


def _count(n: int, one: str, many: str) -> str:
    return f"{N.format_count(n)} {one if n == 1 else many}"


class _PlanBuilder:
    def __init__(self, locked):
        self.locked = locked
        self.plan = locked.plan
        self.design = locked.design
        self.contrasts = locked.contrasts
        self.alpha = self.plan.analysis.alpha

    def design_phrase(self) -> str:
        fs = self.design.factors
        if len(fs) == 1:
            return f"a one-factor between-subjects design ({fs[0].name}: {len(fs[0].levels)} levels)"
        dims = " × ".join(str(len(f.levels)) for f in fs)
        return f"a {dims} between-subjects design"

    def summary(self) -> tuple[Paragraph, ...]:
        text = (self.plan.summary.strip() + " ") if self.plan.summary else ""
        text += (f"This document states how {self.plan.data.outcome} will be analysed in {self.design_phrase()}, "
                 "before any data have been analysed. It holds no results.")
        return (
            Paragraph(runs_of(text), "lead"),
            Paragraph(runs_of("The plan was locked at the time shown above; the lock file records it together with the "
                              "SHA-256 of its canonical form (see “About this plan”). A report made later from this plan "
                              "lists every way its analysis departs from the locked plan."), "small"),
        )

    def methods(self) -> Section:
        plan, d, a = self.plan, self.design, self.plan.analysis
        blocks = []
        if len(d.factors) == 1:
            f = d.factors[0]
            design = (f"One between-subjects factor, {f.name}, with {len(f.levels)} levels ({', '.join(f.levels)}), "
                      f"so the analysis will have {d.k} cells (groups).")
        else:
            listed = "; ".join(f"{f.name}: {', '.join(f.levels)}" for f in d.factors)
            design = (f"{N.format_count(len(d.factors))} between-subjects factors, fully crossed into {d.k} cells "
                      f"({listed}).")
        blocks.append(Paragraph(_lead("Design", design)))
        blocks.append(Paragraph(_lead("Data", self.data_words())))
        if plan.covariates:
            blocks.append(Paragraph(_lead("Covariates", self.covariate_words())))
        blocks.append(Paragraph(_lead("Model",
            f"The outcome, {plan.data.outcome}, will be modelled by a linear model with one mean per cell (the full "
            f"model, including all interactions), fitted by ordinary least squares, with {PARAM_WORDS[d.parameterization]}. "
            f"The ANOVA table will use {SS_WORDS[a.ss_type]}.")))
        planned = [c for c in self.contrasts if c.role == "planned"]
        explor = [c for c in self.contrasts if c.role != "planned"]
        if self.contrasts:
            blocks.append(Paragraph(_lead("Hypotheses",
                f"The plan states {_count(len(planned), 'planned hypothesis', 'planned hypotheses')} (the confirmatory "
                f"family) and {_count(len(explor), 'exploratory one', 'exploratory ones')}; each is set out below with "
                "its null and alternative and its contrast matrices.")))
        else:
            blocks.append(Paragraph(_lead("Hypotheses", "The plan states no hypothesis; only the ANOVA table will be reported.")))
        blocks.append(Paragraph(_lead("Error rates",
            f"Every test will use α = {N.format_bounded(self.alpha, 2)}. Directional hypotheses (written with > or <) "
            "will be tested one-sided, in the stated direction; the others two-sided. p values will be adjusted with "
            f"{CORRECTION_NAMES[a.correction]} within the planned family"
            + (", and separately within the exploratory family" if explor else "")
            + f". Confidence intervals will be at {N.format_confidence_level(1 - self.alpha)} (one-sided bounds for "
            "one-sided tests). Hypotheses added to the plan after this lock will be reported as exploratory.")))
        blocks.append(Paragraph(_lead("Unequal variances", POLICY_WORDS[a.unequal_variances])))
        extra = []
        if a.posthoc:
            on = "the cells" if a.posthoc_on == "cells" else f"the unweighted marginal means of {a.posthoc_on}"
            fams = ", ".join(plan_value(FOLLOW_UPS, f) for f in a.posthoc)
            extra.append(f"Follow-up families ({fams}) will compare {on}, as exploratory analyses with their own "
                         "family-wise error control.")
        if a.permutations:
            extra.append(f"A permutation F test with up to {N.format_count(a.permutations)} permutations (seed {a.seed}) "
                         f"will be reported beside each F test when at most {N.format_count(a.permutation_max_rows)} "
                         "rows are analysed.")
        if extra:
            blocks.append(Paragraph(_lead("Further analyses", " ".join(extra))))
        study = plan.study
        fields = [("Sample-size rationale", study.sample_size_rationale), ("Allocation and randomization", study.allocation),
                  ("Blinding", study.blinding), ("Stopping rule", study.stopping_rule),
                  ("Pre-set exclusion rules", study.exclusion_rules)]
        given = [(k, v) for k, v in fields if v]
        if given:
            blocks.append(DefinitionList(tuple((runs_of(k), runs_of(v.strip())) for k, v in given)))
        return Section("methods", "Planned methods", tuple(blocks))

    def data_words(self) -> str:
        plan = self.plan
        ds = plan.data
        where = ds.path.name
        what = "a table of cell summaries (one row per cell)" if ds.layout == "cell-summaries" else "one row per observation"
        text = f"The data will be read from {where} ({what}), outcome column {ds.outcome}."
        if ds.layout != "cell-summaries":
            shown = ", ".join(f"“{m}”" for m in ds.missing) or "none"
            text += (f" Texts that mark a missing outcome: {shown}. Rows with a missing or non-numeric outcome or a "
                     "missing factor value will be left out and counted by reason, never dropped silently.")
        excluded = [f"{f.name}: {', '.join(f.exclude)}" for f in plan.factors if f.exclude]
        if excluded:
            text += f" Rows at these levels will be left out: {'; '.join(excluded)}."
        text += " A level in the data that the plan does not list will stop the analysis with a message."
        return text

    def covariate_words(self) -> str:
        """The plan's covariates as the analysis-plan document states them."""
        parts = []
        for c in self.plan.covariates:
            slope = "one slope common to all cells" if c.slopes == "common" else "a separate slope in each cell"
            at = ("the mean of the rows analysed" if c.adjust_to is None
                  else f"the value {c.adjust_to_exact if c.adjust_to_exact.denominator == 1 else repr(c.adjust_to)}")
            parts.append(f"{c.name} ({slope}; adjusted means at {at})")
        many = len(parts) > 1
        return (f"The model will adjust for {'the covariates' if many else 'the covariate'} {'; '.join(parts)} "
                "(analysis of covariance): hypotheses about means will concern the adjusted means. Rows with a "
                "missing covariate value will be left out and counted by reason; a value that is not a number will "
                "stop the analysis with a message. In Type I sums of squares the covariates will enter first, and the "
                "homogeneity of the slopes across cells will be checked among the assumptions. The adjustment assumes "
                "the factors cannot change the covariates, as when they are measured before allocation.")

    def model_section(self) -> Section:
        d = self.design
        names = [f.name for f in d.factors]
        cols = [Column(runs_of("/".join(names) if len(names) > 1 else "cell"))]
        cols += [Column(runs_of(c.symbol), "center") for c in d.coefficients]
        rows, marks = [], []
        for c in d.cells:
            vals = [int(v) for v in d.matrix[c.index]]
            rows.append((runs_of(c.short), *(runs_of(str(Fraction(v))) for v in vals)))
            marks.append(("",) + tuple("pos" if v > 0 else "neg" if v < 0 else "zero" for v in vals))
        matrix = Table("plan-design-matrix",
                       runs_of(f"Design matrix of the cells ({CODING_NAMES[d.parameterization]} coding): one row per cell"),
                       tuple(cols), tuple(rows), highlight=tuple(marks), compact=True,
                       notes=(runs_of("Each observation will get the row of its cell; columns: "
                                      + "; ".join(f"{c.symbol} = {c.label}" for c in d.coefficients) + "."),))
        meanings = Table(
            "plan-coefficients", runs_of("What each coefficient will estimate, as a combination of cell means (",
                                         N.symbol("β = D⁻¹μ"), ")"),
            (Column(runs_of("β")), Column(runs_of("column")), Column(runs_of("in symbols")), Column(runs_of("in words"))),
            tuple((runs_of(c.symbol), runs_of(c.label), runs_of(c.meaning_text(d)), runs_of(c.meaning_words(d)))
                  for c in d.coefficients),
            notes=(runs_of(f"μ is a cell mean; μ̄ the average of the {d.k} cell means, each cell counted once."),),
        )
        note = Note("info", "Notation", (DefinitionList((
            (runs_of("μ"), runs_of("A cell mean; μ alone stands for all cell means in the order of the table below.")),
            (runs_of(N.symbol("D")), runs_of("The design matrix of the cells, so that ", N.symbol("μ = D·β"), ".")),
            (runs_of(N.symbol("C·μ = h")), runs_of("A hypothesis about the cell means: a matrix ", N.symbol("C"),
                                                   " of weights, one column per cell; H0 states that the equation holds.")),
            (runs_of(N.symbol("L = [C·D, 0]" if getattr(self.design, "covariates", ()) else "L = C·D")),
             runs_of("The same hypothesis over the coefficients: ", N.symbol("L·β = h"), ".",
                     " The zeros stand for the covariate slopes." if getattr(self.design, "covariates", ()) else "")),
        )),))
        return Section("model", "The model", (note, matrix, meanings))

    def hypotheses_section(self) -> Section:
        subs = []
        size = {r: sum(1 for c in self.contrasts if c.role == r) for r in ("planned", "exploratory")}
        corr = CORRECTION_NAMES[self.plan.analysis.correction]
        for i, c in enumerate(self.contrasts, start=1):
            kind = test_kind(c)
            blocks = [
                Paragraph(runs_of("Statement in the plan: ", c.statement if c.kind == "means" else f'effect = "{c.statement}"'),
                          "small"),
                Paragraph(runs_of("H0: ", c.null_text()), "symbols"),
                Paragraph(runs_of("H1: ", c.alternative_text()), "symbols"),
                Paragraph(runs_of(f"Test: {kind}. Family: {c.role}, {_count(size[c.role], 'hypothesis', 'hypotheses')}, "
                                  f"{corr}.")),
            ]
            blocks += [Paragraph(runs_of("Note: " + n), "small") for n in c.notes]
            blocks += contrast_tables(i, c, self.design)
            subs.append(Section(f"h{i}", c.name, tuple(blocks), level=3, number=str(i)))
        intro = Paragraph(runs_of(
            "Each hypothesis is shown as written in the plan, as the null and alternative it implies, and as a contrast "
            "over the cell means and over the model's coefficients." if subs else "The plan states no hypothesis."))
        return Section("hypotheses", "Hypotheses to be tested", (intro,), tuple(subs))

    def power_section(self) -> Section:
        spec, rows = self.plan.planning, self.locked.power
        if spec is None:
            return Section("power", "Sample size", (Paragraph(runs_of(
                "The plan has no [planning] table, so no a-priori power is computed. Add one with "
                "smallest_effect_f (Cohen's f, for F tests) and smallest_effect_d (or smallest_difference with "
                "assumed_sd, for one-row contrasts) to get the cell size each planned test needs.")),))
        if not rows:
            return Section("power", "Sample size", (Paragraph(runs_of("The plan states no planned hypothesis to power.")),))
        k = self.design.k
        cols = [Column(runs_of("hypothesis")), Column(runs_of("test")), Column(runs_of("smallest effect"), "right")]
        cols += [Column(runs_of(f"n per cell, {N.format_confidence_level(p)} power"), "right") for p in spec.powers]
        table_rows = []
        for r in rows:
            test = (f"F({r.df1}, N − {k})" if r.test == "F" else "two one-sided t" if r.test == "TOST" else
                    ("t, one-sided" if r.sides == 1 else "t, two-sided"))
            effect = "—" if r.effect is None else f"{r.effect_kind} = {N.format_number(r.effect, 2)}"
            if r.bounds is not None:
                effect = (f"bounds {N.format_number(r.bounds[0], 2)} to {N.format_number(r.bounds[1], 2)} SD, "
                          "true difference 0")
            ns = [("—" if n is None else f"{N.format_count(n)} (N = {N.format_count(n * k)})") for n in r.n_per_cell]
            table_rows.append((runs_of(r.name), runs_of(test), runs_of(effect), *(runs_of(x) for x in ns)))
        notes = [runs_of(
            "F tests: Cohen's ", N.symbol("f"), ", noncentrality λ = f²·N with N = n·k observations and N − k error df "
            f"(Cohen, 1988, ch. 8). t tests: d is the contrast's value as the statement writes it divided by the "
            "within-cell SD; noncentrality d·√(n / Σc²) for weights c, on k(n − 1) df. "
            f"Each n is the smallest equal cell size reaching the power at α = {N.format_bounded(self.alpha, 2)} for the "
            "test on its own, before the multiplicity adjustment, which lowers the power of all but the first test.")]
        if any(r.test == "TOST" for r in rows):
            notes.append(runs_of(
                "Equivalence claims: the exact power of the two one-sided tests when the true difference is 0, "
                "from the joint distribution of the two t statistics (Phillips, 1990); bounds in the outcome's "
                "units are divided by assumed_sd."))
        if spec.smallest_difference is not None:
            notes.append(runs_of(f"d = smallest_difference / assumed_sd = {N.format_number(spec.smallest_difference, 2)} / "
                                 f"{N.format_number(spec.assumed_sd, 2)}."))
        for r in rows:
            if r.reason:
                notes.append(runs_of(f"{r.name}: no cell size, because {r.reason}."))
        table = Table("power", runs_of("A-priori power: the cell size each planned test needs at the smallest effect of "
                                       "interest"), tuple(cols), tuple(table_rows), notes=tuple(notes))
        largest = [max((n for r in rows if (n := r.n_per_cell[j]) is not None), default=None)
                   for j in range(len(spec.powers))]
        words = "; ".join(f"{N.format_count(n)} per cell for {N.format_confidence_level(p)} power in every planned test"
                          for n, p in zip(largest, spec.powers) if n is not None)
        blocks = [table]
        if words:
            blocks.append(Paragraph(runs_of(f"At these effects the study needs {words}.")))
        return Section("power", "Sample size", tuple(blocks))

    def about(self) -> Section:
        lock = self.locked.content
        items = [
            (runs_of("Plan file"), runs_of(_literal(lock["plan_file"]) if lock["plan_file"] else "(built in Python)")),
            (runs_of("Plan file SHA-256"), runs_of(_literal(lock["plan_file_sha256"]) if lock["plan_file_sha256"] else "—")),
            (runs_of("Canonical plan SHA-256"), runs_of(_literal(lock["canonical_plan_sha256"]))),
            (runs_of("Locked"), runs_of(lock["created"])),
            (runs_of("Software"), runs_of(", ".join(f"{k} {v}" for k, v in lock["software"].items()))),
        ]
        return Section("about-plan", "About this plan", (
            Paragraph(runs_of("The canonical plan is the plan as read, with every default filled in, written as JSON with "
                              "sorted keys; its SHA-256 does not change when only comments or spacing of the plan file do.")),
            DefinitionList(tuple(items)),
        ))

    def build(self) -> Document:
        sections = (self.methods(), self.model_section(), self.hypotheses_section(), self.power_section(), self.about())
        return Document(
            title=self.plan.title,
            subtitle=f"Analysis plan · {self.design_phrase()}",
            summary=self.summary(),
            sections=sections,
            created=self.locked.content["created"],
        )


def build_plan_document(locked) -> Document:
    """The analysis-plan document of a :class:`~reporter.trail.lock.LockedPlan`."""
    return _PlanBuilder(locked).build()


__all__ = ["build_plan_document"]
