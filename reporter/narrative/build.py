"""Build the report's document model from fitted results: all wording lives here.

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

import shlex
from fractions import Fraction
from typing import Sequence

from reporter.inference.permutation import SEQUENTIAL_EXCEEDANCES
from reporter.intake.defaults import CODINGS
from reporter.intake.summary import ROW_LEVEL_STEPS, SPREAD_WORDS
from reporter.narrative import numbers as N
from reporter.narrative.document import (
    BulletList, Column, DefinitionList, Document, Figure, FigureSpec, Note, Paragraph, Section, Table, plain, runs_of,
)

CORRECTION_NAMES = {
    "holm": "Holm's (1979) step-down procedure",
    "hochberg": "Hochberg's (1988) step-up procedure",
    "bonferroni": "the Bonferroni correction",
    "benjamini-hochberg": "the Benjamini–Hochberg (1995) false-discovery-rate procedure",
    "none": "no correction",
}
CORRECTION_SHORT = {
    "holm": "Holm-adjusted",
    "hochberg": "Hochberg-adjusted",
    "bonferroni": "Bonferroni-adjusted",
    "benjamini-hochberg": "Benjamini–Hochberg-adjusted",
    "none": "unadjusted",
}
#: The plan key that chooses between the classical and the robust tests, as the report names it.
POLICY_KEY = "unequal_variances"
#: The plan's name of each coding (the key ``coding``), by its internal value.
CODING_NAMES = {internal: name for name, internal in CODINGS.items()}
PARAM_WORDS = {
    "cell-means": "cell-means coding (one coefficient per cell, each the mean of its cell)",
    "effects": "sum-to-zero coding (the last listed level of each factor is coded −1, "
    "so each coefficient is a deviation from an average of cell means)",
    "reference": "reference-level coding (the first listed level of each factor is the reference, "
    "so each coefficient is a difference from the reference cell)",
}
SS_WHY = {
    "III": "Type III sums of squares (unweighted means): each effect is a hypothesis about the "
    "unweighted marginal means, so it does not depend on how many observations each cell happens to have",
    "II": "Type II sums of squares (each effect adjusted for the other main effects): appropriate "
    "when interactions are assumed absent",
    "I": "Type I sums of squares (sequential, in the order the factors are listed in the plan): "
    "each effect is adjusted only for the effects listed before it",
}


def _fr(x: Fraction) -> str:
    if x == 0:
        return "0"
    s = str(abs(x.numerator)) if x.denominator == 1 else f"{abs(x.numerator)}/{x.denominator}"
    return (N.MINUS if x < 0 else "") + s


def _unquote(statement: str) -> str:
    """A statement for display: the backticks that quote names in the plan are dropped."""
    return statement.replace("`", "")


def _lead(head: str, body: str) -> tuple:
    """A paragraph that starts with an italic run-in heading (APA style for minor headings)."""
    return runs_of(N.Run(head + ".", True), " " + body)


def _num(x, d=2) -> str:
    return N.format_number(x, d)


def _interval(ci, bounded: bool = False) -> str:
    """A table cell for an interval: [low, high], or — when there is none."""
    if ci is None:
        return N.MISSING
    fmt = (lambda v: N.format_bounded(v, 2)) if bounded else _num
    return f"[{fmt(ci[0])}, {fmt(ci[1])}]"


def _words_list(items: Sequence[str]) -> str:
    items = list(items)
    if len(items) <= 1:
        return "".join(items)
    if len(items) == 2:
        return f"{items[0]} and {items[1]}"
    return ", ".join(items[:-1]) + f", and {items[-1]}"


# Outlier rows listed in the report (results.json lists up to the scan's limit).
OUTLIERS_SHOWN = 20


def _count_noun(n: int, noun: str) -> str:
    """A count in figures with its noun in the right number: "1 row", "1,204 rows"."""
    return f"{N.format_count(n)} {noun if n == 1 else noun + 's'}"


def _rows_phrase(rows) -> str:
    """Data-file rows named with the right noun: "row 68", "rows 68 and 70", "rows 3, 9, and 12"."""
    rows = [str(r) for r in rows]
    return f"{'row' if len(rows) == 1 else 'rows'} {_words_list(rows)}"


_NUMBER_WORDS = ["no", "one", "two", "three", "four", "five", "six", "seven", "eight", "nine", "ten"]


def _count_words(n: int, noun: str, plural: str | None = None) -> str:
    word = _NUMBER_WORDS[n] if 0 <= n < len(_NUMBER_WORDS) else str(n)
    return f"{word} {noun if n == 1 else (plural or noun + 's')}"


def _literal(text: str) -> N.Run:
    """A hash, path or command line, set so that it can be copied exactly (fixed width, no hyphens)."""
    return N.Run(text, False, True)


class _Builder:
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
            name = {"HC3 Wald F": "HC3 Wald test", "Welch–Satterthwaite t": "Welch–Satterthwaite test"}.get(r.method, r.method)
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

    # -- sections -----------------------------------------------------------------------------
    def summary(self) -> tuple[Paragraph, ...]:
        a, plan = self.a, self.plan
        planned = [h for h in a.hypotheses if h.family == "planned"]
        supported = [h for h in planned if self.decision_p(h) < self.alpha]
        text = (plan.summary.strip() + " ") if plan.summary else ""
        text += (f"This report analyses {N.format_count(self.prep.data.n)} observations of "
                 f"{self.prep.data.outcome} in {self.design_phrase()}. ")
        if planned:
            text += (f"{self.supported_phrase(len(supported), len(planned))} supported at "
                     f"α = {N.format_bounded(self.alpha, 2)} after {CORRECTION_NAMES[planned[0].correction]}; "
                     "each is reported below with its estimate, interval and effect size.")
        else:
            text += "The plan states no planned hypothesis."
        lock = getattr(self.prep, "lock", None)
        if lock is not None and not lock.matched:
            text += (f" The analysis departs from the plan locked at {lock.created} in "
                     f"{_count_noun(len(lock.deviations), 'way')}, listed under “Comparison with the locked plan”.")
        return (
            Paragraph(runs_of(text), "lead"),
            Paragraph(runs_of(
                "The data are analysed exactly as the plan file states; every number below can be recomputed "
                "from the recorded inputs (see “Where this report came from”)."), "small"),
        )

    @staticmethod
    def supported_phrase(k: int, total: int) -> str:
        """The start of the summary's verdict, in words: "Two of the three planned hypotheses were"."""
        def word(n):
            return _NUMBER_WORDS[n] if 0 <= n < len(_NUMBER_WORDS) else N.format_count(n)
        if total == 1:
            return "The one planned hypothesis was" + ("" if k else " not")
        if k == total:
            return f"{'Both' if total == 2 else 'All ' + word(total)} planned hypotheses were"
        if k == 0:
            return f"{'Neither of the two' if total == 2 else 'None of the ' + word(total)} planned hypotheses was"
        return f"{word(k).capitalize()} of the {word(total)} planned hypotheses {'was' if k == 1 else 'were'}"

    def design_phrase(self) -> str:
        fs = self.design.factors
        if len(fs) == 1:
            f = fs[0]
            return f"a one-factor between-subjects design ({f.name}: {len(f.levels)} levels)"
        parts = [f"{f.name} ({len(f.levels)} levels)" for f in fs]
        dims = " × ".join(str(len(f.levels)) for f in fs)
        return f"a {dims} between-subjects design crossing {_words_list(parts)}"

    def methods(self) -> Section:
        plan, a, d, data = self.plan, self.a, self.design, self.prep.data
        blocks = []
        fs = d.factors
        if len(fs) == 1:
            f = fs[0]
            design_txt = (
                f"One between-subjects factor, {f.name}, with {len(f.levels)} levels "
                f"({', '.join(f.levels)}), so the analysis has {d.k} cells (groups)."
            )
        else:
            listed = "; ".join(f"{f.name}: {', '.join(f.levels)}" for f in fs)
            design_txt = (
                f"{_count_words(len(fs), 'between-subjects factor').capitalize()}, fully crossed "
                f"into {d.k} cells ({listed})."
            )
        blocks.append(Paragraph(_lead("Design", design_txt)))

        excl = data.exclusions
        if excl:
            reasons = "; ".join(f"{e.count} for {e.reason}" for e in excl)
            left = sum(e.count for e in excl)
            sample = (
                f"{self.data_source_words()} held {_count_noun(data.n_read, 'row')}; "
                f"{N.format_count(data.n)} were analysed and {N.format_count(left)} left out ({reasons}). "
                "No row was dropped silently; the row numbers are listed in the results file."
            )
        else:
            sample = (
                f"All {N.format_count(data.n_read)} rows of {self.data_source_words(lower=True)} were "
                "analysed; no row was left out."
            )
        blocks.append(self.summary_sample() if data.summary is not None else Paragraph(_lead("Sample", sample)))
        miss = self.missing_by_cell()
        if miss:
            blocks.append(Paragraph(runs_of("Missing outcome values by cell: " + miss + ".")))
        empty = [self.cell_name(c) for c, n in zip(d.cells, self.prep.counts) if n == 0]
        if empty:
            blocks.append(Paragraph(runs_of(
                f"Empty cells (no data): {', '.join(empty)}. Hypotheses and effects that need them "
                "cannot be estimated and are marked as such.")))

        blocks.append(Paragraph(_lead("Model",
            f"The outcome, {data.outcome}, was modelled by a linear model with one mean per cell "
            f"(the full model, including all interactions), fitted by ordinary least squares, with "
            f"{PARAM_WORDS[d.parameterization]}. The coding changes what "
            "each coefficient means, never the test of a hypothesis about means.")))
        why = SS_WHY[a.anova.ss_type]
        agree = " The design is balanced, so Types I, II and III coincide." if a.anova.balanced and self.multi else ""
        if not self.multi:
            agree = " With one factor, the three types coincide."
        blocks.append(Paragraph(runs_of(f"The ANOVA table uses {why}.{agree}")))

        planned = [h for h in a.hypotheses if h.family == "planned"]
        explor = [h for h in a.hypotheses if h.family == "exploratory"]
        if a.hypotheses:
            items = []
            for h in a.hypotheses:
                c = h.contrast
                kind = ("directional, one-sided t test" if c.alternative != "two-sided"
                        else "two-sided t test" if c.test == "t" else f"F test with {c.q} numerator df")
                items.append(runs_of(f"{h.contrast.name} ({h.family}; {kind}). Null hypothesis: {_unquote(c.null_text())}"))
            blocks.append(Paragraph(_lead("Hypotheses",
                f"The plan states {_count_words(len(planned), 'planned hypothesis', 'planned hypotheses')}"
                f" (the confirmatory family) and {_count_words(len(explor), 'exploratory one', 'exploratory ones')}:")))
            blocks.append(BulletList(tuple(items)))
        corr = a.hypotheses[0].correction if a.hypotheses else plan.analysis.correction
        blocks.append(Paragraph(_lead("Error rates",
            f"Every test used α = {N.format_bounded(self.alpha, 2)}. Directional hypotheses "
            "(written with > or <) were tested one-sided, in the stated direction; the others two-sided. "
            f"p values were adjusted with {CORRECTION_NAMES[corr]} within the planned family"
            + (", and separately within the exploratory family" if explor else "")
            + f". Confidence intervals are at {N.format_confidence_level(self.level)}"
            f" (one-sided bounds for one-sided tests); intervals for η²-type effect sizes are at "
            f"{N.format_confidence_level(1 - 2 * self.alpha)}, which matches a test at α = "
            f"{N.format_bounded(self.alpha, 2)} (Steiger, 2004).")))
        blocks.extend(self.assumption_methods())
        study = self.plan.study
        fields = [("Sample-size rationale", study.sample_size_rationale), ("Allocation and randomization", study.allocation),
                  ("Blinding", study.blinding), ("Stopping rule", study.stopping_rule), ("Pre-set exclusion rules", study.exclusion_rules)]
        given = [(k, v) for k, v in fields if v]
        if given:
            blocks.append(DefinitionList(tuple((runs_of(k), runs_of(v.strip())) for k, v in given)))
        own = dict(self.prov.software).get("anova-report")
        soft = ", ".join(f"{k} {v}" for k, v in self.prov.software if k != "anova-report")
        blocks.append(Paragraph(_lead("Software", f"anova-report{' ' + own if own else ''}, running on {soft}.")))
        return Section("methods", "Methods", tuple(blocks))

    def assumption_methods(self) -> list[Paragraph]:
        policy = self.plan.analysis.unequal_variances
        words = {
            "classical": "The classical (equal-variance) tests are the confirmatory ones; robust "
            "versions are shown beside them for comparison.",
            "robust-if-heterogeneous": "If the Brown–Forsythe test indicated unequal variances, the "
            "robust versions were to be the confirmatory tests. Such a two-stage choice distorts error "
            "rates somewhat (Zimmerman, 2004).",
            "always-robust": "The heteroscedasticity-robust versions are the confirmatory tests, "
            "whatever the variance check shows, which avoids the error-rate distortion of a two-stage "
            "choice (Zimmerman, 2004).",
        }[policy]
        where = (", each described under the first hypothesis where it is the confirmatory test"
                 if any(self.robust_confirmatory(h) for h in self.a.hypotheses) else "")
        words += (" The robust versions do not assume equal variances: Welch's t test for a one-row contrast, "
                  "Welch's ANOVA for a one-way effect, and otherwise a Wald F test with heteroscedasticity-"
                  f"consistent (HC3) standard errors{where}.")
        return [Paragraph(_lead("Assumptions",
            "Independence of observations follows from the design and cannot be checked "
            "from the data. Equality of variances across cells was checked with the Brown–Forsythe test "
            "(Levene's test centred at the median) and the mean-centred Levene test; normality of the "
            "residuals with the Shapiro–Wilk test and a normal Q–Q plot; outliers as externally "
            "studentized residuals beyond ±3. " + words))]

    def missing_by_cell(self) -> str:
        lv = self.prep.data.dropped_outcome_levels
        if lv.size == 0:
            return ""
        counts: dict[str, int] = {}
        for row in lv:
            if (row < 0).any():
                key = "rows with an unknown cell"
            else:
                levels = tuple(self.design.factors[j].levels[int(i)] for j, i in enumerate(row))
                key = "/".join(levels)
            counts[key] = counts.get(key, 0) + 1
        return "; ".join(f"{k}: {v}" for k, v in counts.items())

    def cells_section(self) -> Section:
        d, a = self.design, self.a
        names = [f.name for f in d.factors]
        cols = [Column(runs_of(n)) for n in names] + [
            Column(runs_of(N.symbol("n")), "right"), Column(runs_of(N.symbol("M")), "right"),
            Column(runs_of(N.symbol("SD")), "right"), Column(runs_of(N.symbol("SE")), "right"),
            Column(runs_of(f"{N.format_confidence_level(self.level)} ", N.symbol("CI")), "right"),
        ]
        rows = []
        for c, s in zip(d.cells, a.summaries):
            ci = _interval(s.ci)
            rows.append(tuple(runs_of(lv) for lv in c.levels) + (
                runs_of(str(s.n)), runs_of(_num(s.mean)), runs_of(_num(s.sd)), runs_of(_num(s.se)), runs_of(ci)))
        table = Table(
            "cells", runs_of(f"Cell summary of {self.prep.data.outcome}"), tuple(cols), tuple(rows),
            notes=(runs_of("CI: the cell's own ", N.symbol("SD"), f" and a t quantile on n − 1 df. Empty cells show —."),),
            header_columns=len(names),
        )
        blocks = [table]
        fig = self.means_figure()
        if fig:
            blocks.append(fig)
        return Section("cells", "The groups", tuple(blocks))

    def means_figure(self) -> Figure | None:
        d, a = self.design, self.a
        pivot = a.cells.pivot
        groups, means, lo, hi, points = [], [], [], [], []
        for c, s in zip(d.cells, a.summaries):
            groups.append(c.short)
            means.append(s.mean)
            lo.append(None if s.ci is None else s.ci[0])
            hi.append(None if s.ci is None else s.ci[1])
            cp = None if a.points is None else a.points[c.index]
            points.append(() if cp is None else tuple(v + pivot for v in cp.values))
        spec = FigureSpec("means", (
            ("groups", tuple(groups)), ("means", tuple(means)), ("ci_low", tuple(lo)), ("ci_high", tuple(hi)),
            ("points", tuple(points)), ("y_label", self.prep.data.outcome),
            ("ci_label", f"{N.format_confidence_level(self.level)} CI"),
        ))
        dots = self.points_phrase()
        alt = (f"Dot plot of {self.prep.data.outcome} for each of the {d.k} cells: {dots['alt']}, the cell mean as a "
               f"large marker with its {N.format_confidence_level(self.level)} confidence interval. Means: " + "; ".join(
                   f"{g} {_num(m)}" for g, m in zip(groups, means)) + ".")
        head = f"{dots['caption']}, cell means" if dots["caption"] else "Cell means"
        return Figure("fig-means", runs_of(
            f"{head} and {N.format_confidence_level(self.level)} confidence intervals "
            f"of {self.prep.data.outcome}.{dots['note']}"), alt, spec)

    def points_phrase(self) -> dict[str, str]:
        """How the figures' dots relate to the rows: every observation, or a quantile summary of
        the larger cells."""
        pts = self.a.points
        if pts is None:
            return {"alt": "no individual observations (the input holds cell summaries only)",
                    "caption": "", "note": " Individual observations are not available."}
        big = [p for p in pts if p.summarized]
        if not big:
            return {"alt": "every observation as a faint dot", "caption": "Observations (dots)", "note": ""}
        m = len(big[0].values)
        return {"alt": f"every observation as a faint dot in cells of up to {m} rows, and {m} evenly spaced "
                       "quantiles of the values in larger cells",
                "caption": "Observations (dots)",
                "note": f" In cells of more than {m} rows the dots are {m} evenly spaced quantiles of the cell's "
                        "values, not every observation."}

    def notation(self) -> Note:
        """The box that defines every symbol of the model and the hypotheses, placed before their first use.

        Symbols are set as everywhere else in the report: Latin letters standing for matrices and
        vectors in italics (through :func:`numbers.symbol`), Greek letters upright.
        """
        d, n = self.design, self.prep.data.n
        example = self.cell_name(d.cells[min(1, d.k - 1)])
        example_short = d.cells[min(1, d.k - 1)].short
        cell0 = d.cells[0]
        level_example = (f"mean({d.factors[0].name}={d.factors[0].levels[0]}) is the average of the cell means "
                         f"at that level of {d.factors[0].name}, and mean("
                         + ", ".join(f"{f.name}={lv}" for f, lv in zip(d.factors, cell0.levels))
                         + f"), with a level of every factor, is the one cell mean μ[{cell0.short}]" if self.multi
                         else f"mean({example}) is simply the cell mean μ[{example_short}]")
        items = [
            (runs_of("μ"), runs_of(
                f"A cell mean: the mean of {self.prep.data.outcome} in one cell (group) of the design, as the model "
                f"estimates it. μ[{example_short}] is the mean of the cell {example}; μ alone stands for all "
                f"{d.k} cell means, in the order of the cell summary table.")),
            (runs_of("mean(…)"), runs_of(
                f"The unweighted mean of the cells named in the brackets, each cell counted once whatever its "
                f"number of observations: {level_example}.")),
            (runs_of("μ̄"), runs_of(f"The average of all {d.k} cell means, each cell counted once.")),
            (runs_of("β"), runs_of(
                "The model's coefficients, β0, β1, …, one for each column of the design matrix. What each one "
                "means depends on the coding the plan chose; the tests of hypotheses about means do not.")),
            (runs_of(N.symbol("X")), runs_of(
                f"The design matrix: one row for each of the {N.format_count(n)} analysed observations, one column "
                "for each coefficient.")),
            (runs_of(N.symbol("D")), runs_of(
                "The design matrix of the cells: the distinct rows of ", N.symbol("X"), ", one for each cell, so that ",
                N.symbol("μ = D·β"), ".")),
            (runs_of(N.symbol("D⁻¹")), runs_of(
                "The inverse of ", N.symbol("D"), ", so that ", N.symbol("β = D⁻¹μ"), ": each row of ", N.symbol("D⁻¹"),
                " gives the combination of cell means that one coefficient estimates.")),
        ]
        if self.a.hypotheses:
            items += [
                (runs_of(N.symbol("C·μ = h")), runs_of(
                    "A hypothesis about the cell means, written as a matrix ", N.symbol("C"), " of weights (one column "
                    "for each cell) applied to the cell means. The null hypothesis is that this equation holds.")),
                (runs_of(N.symbol("h")), runs_of(
                    "The value that each row of ", N.symbol("C·μ"), " takes under the null hypothesis; 0 unless the "
                    "plan's statement sets another value.")),
                (runs_of("row"), runs_of(
                    "One line of ", N.symbol("C"), " (or of ", N.symbol("L"), "): one weighted combination of means "
                    "that the null hypothesis sets equal to its ", N.symbol("h"), ". A hypothesis of one row is usually tested "
                    "with a ", N.symbol("t"), " test; several rows are tested together with one ", N.symbol("F"),
                    " test.")),
                (runs_of(N.symbol("L = C·D")), runs_of(
                    "The same hypothesis written over the coefficients: ", N.symbol("L·β = h"), " states exactly what ",
                    N.symbol("C·μ = h"), " states.")),
                (runs_of("H0, H1"), runs_of("The null hypothesis and the alternative hypothesis.")),
            ]
        return Note("info", "Notation used from here on", (DefinitionList(tuple(items)),))

    def model_section(self) -> Section:
        d, a = self.design, self.a
        coefs = d.coefficients
        names = [f.name for f in d.factors]
        cols = [Column(runs_of("/".join(names) if self.multi else "cell"))]
        cols += [Column(runs_of(c.symbol), "center") for c in coefs]
        cols += [Column(runs_of("data rows"), "right")]
        rows, marks = [], []
        for c, n in zip(d.cells, self.prep.counts):
            if n == 0:
                continue
            vals = [int(v) for v in d.matrix[c.index]]
            rows.append((runs_of(c.short), *(runs_of(_fr(Fraction(v))) for v in vals), runs_of(N.format_count(n))))
            marks.append(("",) + tuple("pos" if v > 0 else "neg" if v < 0 else "zero" for v in vals) + ("",))
        matrix = Table(
            "design-matrix",
            runs_of(f"Design matrix ({CODING_NAMES[d.parameterization]} coding): its distinct rows, one per observed cell"),
            tuple(cols), tuple(rows),
            notes=(runs_of("Each row stands for the data rows of its cell (last column); ", N.symbol("X"), " has "
                           f"{_count_noun(self.prep.data.n, 'row')} and {_count_noun(len(coefs), 'column')}. Columns: "
                           + "; ".join(f"{c.symbol} = {c.label}" for c in coefs) + "."),),
            highlight=tuple(marks), compact=True,
        )
        check = d.check_indicator_rule(self.prep.counts)
        if check.holds:
            rule = Paragraph(runs_of(
                "Every column is a 0/1 indicator of one group and every row has exactly one 1, so each "
                "coefficient is simply the mean of the group its column marks."))
        else:
            rule = Paragraph(runs_of(
                "These columns are not plain group indicators (" + "; ".join(check.failures) +
                "), so a coefficient is not simply a group mean; its meaning is given below."))
        mrows = []
        for c, est, se, ok in zip(coefs, a.fit.coefficients, a.fit.coefficient_se, a.fit.estimable):
            mrows.append((runs_of(c.symbol), runs_of(c.label), runs_of(c.meaning_text(d)),
                          runs_of(c.meaning_words(d)),
                          runs_of(_num(est) if ok else "not estimable"), runs_of(_num(se) if ok else "—")))
        meanings = Table(
            "coefficients", runs_of("What each coefficient estimates, as a combination of cell means (", N.symbol("β = D⁻¹μ"), ")"),
            (Column(runs_of("β")), Column(runs_of("column")), Column(runs_of("in symbols")), Column(runs_of("in words")),
             Column(runs_of("estimate"), "right"), Column(runs_of(N.symbol("SE")), "right")),
            tuple(mrows),
            notes=((runs_of(f"μ̄ is the average of the {d.k} cell means, each cell counted once whatever its n."),)
                   if any(not ref.fixed for c in coefs for _, ref in c.meaning) else ()),
        )
        return Section("model", "The model", (self.notation(), matrix, rule, meanings))

    def marginal_section(self) -> Section | None:
        a = self.a
        if not self.multi:
            return None
        cols = (Column(runs_of("factor")), Column(runs_of("level")), Column(runs_of("unweighted mean"), "right"),
                Column(runs_of(N.symbol("SE")), "right"),
                Column(runs_of(f"{N.format_confidence_level(self.level)} ", N.symbol("CI")), "right"))
        rows = []
        for m in a.marginal_means:
            ci = _interval(m.ci)
            rows.append((runs_of(m.factor), runs_of(m.level), runs_of(_num(m.mean) if m.mean is not None else "not estimable"),
                         runs_of(_num(m.se)), runs_of(ci)))
        table = Table("marginal-means", runs_of("Unweighted marginal means (each cell counted once)"), cols, tuple(rows),
                      notes=(runs_of("SE and CI use the pooled residual variance of the full model."),), header_columns=2)
        blocks = [table]
        fig = self.interaction_figure()
        if fig:
            blocks.append(fig)
        return Section("marginal", "Means by factor", tuple(blocks))

    def interaction_figure(self) -> Figure | None:
        d, a = self.design, self.a
        if len(d.factors) < 2:
            return None
        fx, ft = d.factors[-1], d.factors[0]
        traces = []
        for lt in ft.levels:
            means, lo, hi = [], [], []
            for lx in fx.levels:
                idx = [c.index for c in d.cells if c.as_dict()[ft.name] == lt and c.as_dict()[fx.name] == lx]
                if len(d.factors) == 2:
                    s = a.summaries[idx[0]]
                    means.append(s.mean)
                    lo.append(None if s.ci_pooled is None else s.ci_pooled[0])
                    hi.append(None if s.ci_pooled is None else s.ci_pooled[1])
                else:
                    vals = [a.summaries[i].mean for i in idx]
                    means.append(None if any(v is None for v in vals) else sum(vals) / len(vals))
                    lo.append(None)
                    hi.append(None)
            traces.append((lt, tuple(means), tuple(lo), tuple(hi)))
        spec = FigureSpec("interaction", (("x_factor", fx.name), ("x_levels", tuple(fx.levels)), ("trace_factor", ft.name),
                                          ("traces", tuple(traces)), ("y_label", self.prep.data.outcome)))
        alt = (f"Line plot of the cell means of {self.prep.data.outcome} across the levels of {fx.name}, "
               f"one line per level of {ft.name}; parallel lines would mean no interaction.")
        note = "" if len(d.factors) == 2 else " (averaged over the other factors)"
        return Figure("fig-interaction", runs_of(
            f"Cell means{note} of {self.prep.data.outcome} by {fx.name} and {ft.name}, with "
            f"{N.format_confidence_level(self.level)} confidence intervals from the pooled residual variance."), alt, spec)

    def hypothesis_block(self, i: int, h) -> Section:
        c, t, d = h.contrast, h.test, self.design
        blocks = []
        blocks.append(Paragraph(runs_of("Statement in the plan: ", c.statement if c.kind == "means" else f'effect = "{c.statement}"'), "small"))
        blocks.append(Paragraph(runs_of("H0: ", _unquote(c.null_text())), "symbols"))
        blocks.append(Paragraph(runs_of("H1: ", _unquote(c.alternative_text())), "symbols"))
        if getattr(self.prep, "lock", None) is not None and c.name in self.prep.lock.added:
            blocks.append(Paragraph(runs_of("Added after the plan was locked: tested as exploratory."), "small"))
        blocks.append(Paragraph(runs_of(self.hypothesis_words(h))))
        confirm_note = self.confirmatory_note(h, i)
        for n in h.notes:
            if confirm_note and n == self.fitted_confirm_note(h):
                continue  # said in plain words just below
            blocks.append(Paragraph(runs_of("Note: " + n), "small"))
        if confirm_note:
            blocks.append(Paragraph(confirm_note))
        blocks.extend(contrast_tables(i, c, d))
        if self.robust_confirmatory(h):
            items = [(runs_of("Confirmatory test"), runs_of(self.confirm_stat(h), ", ", self.p_text(h))),
                     (runs_of("Classical test"), runs_of(self.test_stat(t), ", ", N.stat_p(t.p), " (for comparison)"))]
        else:
            items = [(runs_of("Test"), runs_of(self.test_stat(t), ", ", self.p_text(h)))]
        if t.test == "t":
            ci = self.confirm_ci_stat(h)
            which = ", Welch" if self.robust_confirmatory(h) and h.extras.robust.ci is not None else ""
            items.append((runs_of("Estimate"), runs_of(_num(t.estimate), ", ", ci,
                                                       f" (one-sided bound{which})" if t.ci_sides == 1 else
                                                       (f" ({which[2:]})" if which else ""))))
        es = self.effect_size_runs(h, every=True)
        if es:
            items.append((runs_of("Effect size"), es))
        elif h.extras is not None and h.extras.effect_size_note:
            items.append((runs_of("Effect size"), runs_of(h.extras.effect_size_note[0].upper() + h.extras.effect_size_note[1:] + ".")))
        size = self.family_size(h.family)
        items.append((runs_of("Family"), runs_of(f"{h.family}; {N.format_count(size)} "
                                                 f"{'hypothesis' if size == 1 else 'hypotheses'}, {CORRECTION_NAMES[h.correction]}")))
        blocks.append(DefinitionList(tuple(items)))
        blocks.append(Paragraph(self.reading_runs(h), "reading"))
        return Section(f"h{i}", c.name, tuple(blocks), level=3, number=str(i))

    @staticmethod
    def fitted_confirm_note(h) -> str:
        """The fitting layer's short note on a robust confirmatory test (kept in results.json)."""
        e = h.extras
        return f"The confirmatory test is the {e.robust.method}: {e.reason}." if e is not None and e.robust else ""

    def confirmatory_note(self, h, number: int):
        """Where a robust test becomes the confirmatory one: why, and (the first time) what that test is."""
        if not self.robust_confirmatory(h):
            return None
        method = h.extras.robust.method
        name = {"HC3 Wald F": "the HC3 Wald test", "Welch–Satterthwaite t": "the Welch–Satterthwaite test",
                "Welch's ANOVA": "Welch's ANOVA"}.get(method, method)
        policy = self.plan.analysis.unequal_variances
        why = (f"Because the plan sets {POLICY_KEY} = \"{policy}\"" if policy != "robust-if-heterogeneous" else
               f"Because the Brown–Forsythe test indicated unequal variances and the plan sets {POLICY_KEY} = \"{policy}\"")
        first = self._explained.setdefault(method, number)
        if first != number:
            return runs_of(_lead("Confirmatory test", f"{why}, the confirmatory test is {name} (explained under "
                                 f"hypothesis {first}); the classical test is shown for comparison."))
        what = {
            "HC3 Wald F": runs_of(
                ", a Wald ", N.symbol("F"), " test with heteroscedasticity-consistent standard errors of type HC3. It "
                "tests the same ", N.symbol("C·μ = h"), " as the classical ", N.symbol("F"), " test, but estimates the "
                "variance of each cell mean from that cell's own residuals (enlarged for the cell's leverage) instead "
                "of from one variance pooled over all cells, so it stays valid when the cells' variances differ "
                "(MacKinnon & White, 1985; Long & Ervin, 2000)."),
            "Welch–Satterthwaite t": runs_of(
                ", Welch's ", N.symbol("t"), " test for a contrast. It uses each cell's own variance instead of one "
                "variance pooled over all cells, with Satterthwaite's approximate degrees of freedom (Welch, 1947), so "
                "it stays valid when the cells' variances differ."),
            "Welch's ANOVA": runs_of(
                ", an ", N.symbol("F"), " test that weights each cell mean by its precision and so does not assume "
                "equal variances (Welch, 1951)."),
        }.get(method, runs_of("."))
        return runs_of(_lead("Confirmatory test", f"{why}, the confirmatory test is {name}"), what,
                       " The classical test is shown for comparison.")

    def family_size(self, family) -> int:
        return sum(1 for h in self.a.hypotheses if h.family == family)

    def hypothesis_words(self, h) -> str:
        c = h.contrast
        if c.kind == "effect":
            if len(c.factors) == 1:
                return (f"In words: the null hypothesis is that the unweighted mean of {self.prep.data.outcome} is the "
                        f"same at every level of {c.factors[0]}; the alternative is that at least two differ.")
            return (f"In words: the null hypothesis is that the effect of one factor is the same at every level of "
                    f"the other ({' × '.join(c.factors)} interaction absent).")
        if c.alternative == "greater":
            return f"In words: the alternative states that {self.describe_side(_unquote(c.statement), '>')}; the null is its complement."
        if c.alternative == "less":
            return f"In words: the alternative states that {self.describe_side(_unquote(c.statement), '<')}; the null is its complement."
        if c.q == 1:
            return "In words: the null hypothesis states an equality of means; the alternative is that it does not hold, in either direction."
        return f"In words: the null hypothesis states {c.q} equalities at once; the alternative is that at least one fails."

    def describe_side(self, statement: str, rel: str) -> str:
        left, right = statement.split(rel, 1)
        word = "larger" if rel == ">" else "smaller"
        return f"{left.strip()} is {word} than {right.strip()}"

    def effect_size_runs(self, h, every: bool = False):
        """The primary effect size; with ``every``, also Hedges' g beside a standardized contrast."""
        es = getattr(h, "effect_size", None)
        if es is None:
            return None
        more = [x for x in h.extras.effect_sizes if x.name == "hedges_g"] if every and h.extras else []
        parts = [self.effect_size_stat(es)]
        for x in more:
            parts += [N.text("; "), self.effect_size_stat(x)]
        return runs_of(*parts)

    def effect_size_stat(self, es) -> N.Stat:
        sym = {"standardized_contrast_d": "d", "hedges_g": "g", "partial_eta_squared": "η²p", "cohens_f": "f"}.get(es.name, es.name)
        bounded = es.name in ("partial_eta_squared", "eta_squared", "omega_squared", "partial_omega_squared")
        label = N.symbol(sym) if sym != "η²p" else N.text("partial η²")
        value = N.format_bounded(es.value, 2) if bounded and abs(es.value) <= 1 else N.format_number(es.value, 2)
        out = label + N.text(f" = {value}")
        if es.ci is not None:
            low, high = es.ci
            out = out + N.text(", ") + N.stat_ci(low if low is not None else float("-inf"),
                                                 high if high is not None else float("inf"),
                                                 es.ci_level, leading_zero=not bounded)
        return out

    def reading_runs(self, h):
        """The reading of a test with its p symbol in italics, as everywhere else in the report."""
        adj = CORRECTION_SHORT[h.correction] if h.correction != "none" else "unadjusted"
        marker = f"({adj} p)"
        pieces = self.reading(h).split(marker)
        out = [pieces[0]]
        for piece in pieces[1:]:
            out += [f"({adj} ", N.symbol("p"), ")", piece]
        return runs_of(*out)

    def reading(self, h) -> str:
        c, t = h.contrast, h.test
        p = self.decision_p(h)
        sig = p < self.alpha
        alpha = N.format_bounded(self.alpha, 2)
        adj = CORRECTION_SHORT[h.correction] if h.correction != "none" else "unadjusted"
        explor = " As an exploratory result it suggests what to test next rather than confirming anything." if h.family == "exploratory" else ""
        if c.kind == "effect" or t.test == "F":
            if sig:
                return (f"Reading: at α = {alpha} ({adj} p), the data are not consistent with the null hypothesis "
                        f"that {self.null_phrase(h)}. The test does not say which means differ or by how much; "
                        f"see the estimates and effect sizes.{explor}")
            return (f"Reading: at α = {alpha} ({adj} p), the data do not show clear evidence against the null "
                    f"hypothesis that {self.null_phrase(h)}. This is not evidence that the means are equal; the interval for "
                    f"the effect size shows which effects remain compatible with the data.{explor}")
        est = N.format_number(t.estimate, 2)
        if c.alternative == "two-sided":
            if sig:
                direction = "above" if t.estimate > (t.rhs or 0) else "below"
                return (f"Reading: the estimated contrast is {est}, {direction} its null value of "
                        f"{N.format_number(t.rhs or 0, 2)}; at α = {alpha} ({adj} p) the data are not consistent "
                        f"with the equality, and the confidence interval shows the range of differences compatible "
                        f"with the data.{explor}")
            return (f"Reading: the estimated contrast is {est}; at α = {alpha} ({adj} p) the data do not show a "
                    f"clear difference in either direction. This does not show the means are equal: the "
                    f"confidence interval still includes differences of either sign.{explor}")
        if sig:
            bound = self.confirm_ci(h)[0 if c.alternative == "greater" else 1]
            side = "lower" if c.alternative == "greater" else "upper"
            return (f"Reading: the estimate, {est}, lies in the stated direction, and the one-sided test rejects the "
                    f"null hypothesis H0: {_unquote(c.null_text())}, at α = {alpha} ({adj} p). The one-sided "
                    f"{N.format_confidence_level(self.level)} {side} bound, {N.format_number(bound, 2)}, marks the "
                    f"edge of the values compatible with the data; whether a difference of this size matters is a "
                    f"substantive judgement, not a statistical one.{explor}")
        return (f"Reading: at α = {alpha} ({adj} p), the data do not give clear support to the directional "
                f"hypothesis (estimate {est}). This is not evidence against an effect in that direction, "
                f"nor that the means are equal.{explor}")

    def null_phrase(self, h) -> str:
        c = h.contrast
        if c.kind == "effect":
            if len(c.factors) == 1:
                return f"all unweighted means of {c.factors[0]} are equal"
            return f"there is no {' × '.join(c.factors)} interaction"
        return _unquote(c.null_text())

    def hypotheses_section(self) -> Section:
        subs = tuple(self.hypothesis_block(i, h) for i, h in enumerate(self.a.hypotheses, start=1))
        intro = Paragraph(runs_of(
            "Each hypothesis below is shown as written in the plan, as the null and alternative it implies, "
            "as a contrast over the cell means and over the model's coefficients, and with its test."))
        if not subs:
            intro = Paragraph(runs_of("The plan states no hypothesis."))
        return Section("hypotheses", "Hypotheses tested", (intro,), subs)

    def anova_section(self) -> Section:
        tab = self.a.anova
        lvl2 = N.format_confidence_level(1 - 2 * self.alpha)
        cols = (Column(runs_of("source")), Column(runs_of(N.symbol("df")), "right"), Column(runs_of(N.symbol("SS")), "right"),
                Column(runs_of(N.symbol("MS")), "right"), Column(runs_of(N.symbol("F")), "right"),
                Column(runs_of(N.symbol("p")), "right"), Column(runs_of("partial η²"), "right"),
                Column(runs_of(f"{lvl2} ", N.symbol("CI")), "right"), Column(runs_of("partial ω²"), "right"))
        rows = []
        extras = self.inf.rows if self.inf else ()
        for i, r in enumerate(tab.rows):
            es = extras[i].effect_sizes if i < len(extras) else None
            pe = N.format_bounded(es.partial_eta_squared.value, 2) if es else "—"
            ci = es.partial_eta_squared.ci if es else None
            ci_txt = _interval(ci, bounded=True)
            po = N.format_number(es.partial_omega_squared.value, 2, leading_zero=False) if es else "—"
            rows.append((runs_of(r.source), runs_of(str(r.df)), runs_of(_num(r.ss)), runs_of(_num(r.ms)),
                         runs_of(_num(r.F)), runs_of(N.format_p_cell(r.p)), runs_of(pe), runs_of(ci_txt), runs_of(po)))
        rows.append((runs_of("residual"), runs_of(str(tab.df_error)), runs_of(_num(tab.ss_error)), runs_of(_num(tab.ms_error)),
                     runs_of(""), runs_of(""), runs_of(""), runs_of(""), runs_of("")))
        rows.append((runs_of("total"), runs_of(str(tab.df_total)), runs_of(_num(tab.ss_total)), *(runs_of("") for _ in range(6))))
        notes = [runs_of(f"Sums of squares: {tab.label}. ", " ".join(tab.notes))]
        notes.append(runs_of(N.symbol("R²"), f" = {N.format_bounded(tab.r_squared, 2)}; residual ", N.symbol("SD"),
                             f" = {_num(tab.residual_sd)}."))
        notes.append(runs_of(f"Partial η² intervals are {lvl2} intervals from the noncentral F (Steiger, 2004), "
                             "mapped by λ/(λ + df1 + df2 + 1), where λ is the noncentrality of the F distribution; a lower "
                             "limit of .00 means zero is compatible with the data."))
        for r in tab.rows:
            if r.note:
                notes.append(runs_of(f"{r.source}: {r.note}."))
        table = Table("anova", runs_of(f"Analysis of variance of {self.prep.data.outcome}"), cols, tuple(rows),
                      notes=tuple(notes))
        blocks = [table]
        power = self.sensitivity_table()
        if power:
            blocks.append(power)
        return Section("anova", "Analysis of variance", tuple(blocks))

    def sensitivity_table(self) -> Table | None:
        if not self.inf:
            return None
        rows = []
        for r, x in zip(self.a.anova.rows, self.inf.rows):
            if x.sensitivity is None:
                continue
            fs = x.sensitivity.detectable_f
            rows.append((runs_of(r.source), runs_of(str(r.df)), *(runs_of(_num(f)) for f in fs)))
        if not rows:
            return None
        powers = self.inf.rows[0].sensitivity.powers if self.inf.rows[0].sensitivity else (0.8, 0.9)
        cols = (Column(runs_of("effect")), Column(runs_of(N.symbol("df")), "right"),
                *(Column(runs_of(f"{N.format_confidence_level(pw)} power"), "right") for pw in powers))
        return Table("sensitivity", runs_of("Smallest detectable effects: the smallest Cohen's ", N.symbol("f"),
                                            f" each test could detect with this sample at α = {N.format_bounded(self.alpha, 2)}"),
                     cols, tuple(rows),
                     notes=(runs_of("Computed from the noncentral F distribution with noncentrality λ = f²·N, N the number of observations "
                                    "(Cohen, 1988). These describe the design, not the observed "
                                    "effects; they help read a non-significant result."),))

    def results_section(self) -> Section:
        paras = []
        planned = [h for h in self.a.hypotheses if h.family == "planned"]
        explor = [h for h in self.a.hypotheses if h.family == "exploratory"]
        if planned:
            paras.append(Paragraph(runs_of("Planned hypotheses (every one is reported, whatever its result):")))
            paras.extend(Paragraph(self.result_sentence(h)) for h in planned)
        if explor:
            paras.append(Paragraph(runs_of("Exploratory hypotheses (not part of the confirmatory family):")))
            paras.extend(Paragraph(self.result_sentence(h)) for h in explor)
        if not paras:
            paras.append(Paragraph(runs_of("The plan states no hypothesis; see the analysis of variance above.")))
        return Section("results", "Results", tuple(paras))

    def result_sentence(self, h):
        c, t = h.contrast, h.test
        sig = self.decision_p(h) < self.alpha
        lead = f"{c.name}: "
        if c.kind == "effect":
            claim = ("the unweighted means differed" if sig else "the data did not show clear differences among the unweighted means")
            if len(c.factors) > 1:
                claim = ("the data indicate an interaction" if sig else "the data did not show a clear interaction")
        elif t.test == "F":
            claim = "the equalities were rejected" if sig else "the data did not show clear departures from the equalities"
        elif c.alternative == "two-sided":
            claim = "the difference was statistically significant" if sig else "the difference was not statistically significant"
        else:
            claim = "the directional hypothesis was supported" if sig else "the directional hypothesis was not supported"
        parts = [N.text(f"{lead}{claim}, "), self.confirm_stat(h), N.text(", "), self.p_text(h)]
        if t.test == "t":
            parts += [N.text("; estimate "), N.text(_num(t.estimate)), N.text(", "), self.confirm_ci_stat(h)]
        es = self.effect_size_runs(h)
        if es:
            parts += [N.text("; "), es]
        return runs_of(*parts, ".")

    def cautions(self) -> Section:
        items = [
            runs_of("Statistical significance is not practical significance: judge the size of each estimate and "
                    "its interval against what matters in this field, not only the p value."),
            runs_of("A result that is not significant does not show that an effect is absent; the intervals show "
                    "which effects remain compatible with the data."),
            runs_of("The tests assume independent observations, residuals close to normal and, for the classical "
                    "tests, equal variances across cells; the checks above say how well these hold here."),
            runs_of("Exploratory hypotheses were not part of the confirmatory family; treat them as suggestions "
                    "for future studies."),
            runs_of("Where these results inform decisions about people (clinical, educational, personnel or legal), "
                    "have them reviewed by a qualified statistician and follow the review rules that apply locally."),
        ]
        return Section("cautions", "Reading these results with care",
                       (Note("caution", "Before drawing conclusions", (BulletList(tuple(items)),)),))

    def provenance(self) -> Section:
        p = self.prov
        items = [
            (runs_of("Plan file"), runs_of(_literal(p.plan_file) if p.plan_file else "(built in Python)")),
            (runs_of("Plan SHA-256"), runs_of(_literal(p.plan_sha256) if p.plan_sha256 else "—")),
            (runs_of("Data file"), runs_of("none: data given in Python") if p.data_format == "dataframe" else
             runs_of(_literal(p.data_file), f" ({p.data_format}"
                                            + (", read out-of-core by DuckDB)" if p.data_reader == "out-of-core" else ")"))),
            (runs_of("Data SHA-256"), runs_of(_literal(p.data_sha256) if p.data_sha256 else "—")),
            (runs_of("How the outcome was read"), runs_of(self.intake_words())),
            *self.provenance_more(),
            (runs_of("Software"), runs_of(", ".join(f"{k} {v}" for k, v in p.software))),
            (runs_of("Created"), runs_of(p.created)),
        ]
        return Section("provenance", "Where this report came from", (
            Paragraph(runs_of("Re-running the same plan on a data file with the same SHA-256 reproduces every "
                              "number in this report; anova-report verify, given results.json or the PDF report, "
                              "does that and compares every number.")),
            DefinitionList(tuple(items)),
        ))

    def provenance_more(self) -> list:
        """Size, rows, paths, platform, command line, seeds and the lock of the provenance block."""
        p = self.prov
        items = []
        if p.data_bytes is not None:
            items.append((runs_of("Data file size"), runs_of(_count_noun(p.data_bytes, "byte"))))
        if p.rows_read is not None:
            excluded = "; ".join(f"{_count_noun(n, 'row')} {reason}" for reason, n in p.rows_excluded)
            items.append((runs_of("Rows"), runs_of(
                f"{N.format_count(p.rows_read)} read, {N.format_count(p.rows_used)} used, "
                + (f"excluded: {excluded}" if excluded else "none excluded"))))
        where = "relative to the folder of results.json" if p.paths_relative_to == "results-folder" else "as given"
        paths = [("plan ", p.plan_path), ("data ", p.data_path)]
        paths = [(label, _literal(path)) for label, path in paths if path]
        if paths:
            items.append((runs_of("Input paths"), runs_of(*paths[0], *(("; ", *x) for x in paths[1:]), f" ({where})")))
        if p.lock_sha256:
            items.append((runs_of("Plan lock SHA-256"), runs_of(_literal(p.lock_sha256))))
        if p.results_sha256:
            items.append((runs_of("Results digest"), runs_of(
                _literal(p.results_sha256), " (results_sha256 of the results.json made with this report)")))
        items.append((runs_of("Command line"), runs_of(
            _literal(shlex.join(p.argv)) if p.argv is not None
            else "none: made from Python, not by the anova-report command")))
        if p.platform:
            items.append((runs_of("Platform"), runs_of(_literal(p.platform))))
        if p.randomness is not None:
            items.append((runs_of("Random seeds and permutations"), runs_of(self.randomness_words())))
        return items

    def randomness_words(self) -> str:
        r = self.prov.randomness
        used = " and ".join(r.seed_used_by) if r.seed_used_by else "nothing in this run"
        parts = [f"seed {r.seed} (used by: {used})"]
        if r.permutations:
            parts.append(f"up to {N.format_count(r.permutations)} permutations per permutation F test, stopping once "
                         f"{r.permutation_stop_after} permuted F reach the observed one, skipped above "
                         f"{_count_noun(r.permutation_max_rows, 'row')}")
        if r.permutations_run:
            parts.append("permutations drawn: " + ", ".join(f"{N.format_count(m)} for “{test}”"
                                                           for test, m in r.permutations_run))
        if r.shapiro_sample is not None:
            parts.append(f"Shapiro–Wilk on a sample of {N.format_count(r.shapiro_sample)} residuals")
        parts.append(f"figure jitter seed {r.figure_jitter_seed}")
        return "; ".join(parts) + "."

    def data_source_words(self, lower: bool = False) -> str:
        """'The data file NAME', or 'The data given in Python' when there is no file."""
        words = ("The data given in Python" if self.prov.data_format == "dataframe"
                 else f"The data file {self.prov.data_file}")
        return words[0].lower() + words[1:] if lower else words

    def intake_words(self) -> str:
        data = self.prep.data
        summary = getattr(data, "summary", None) is not None
        source = "from a table of cell summaries (each cell's count, mean and spread); " if summary else ""
        what, each = ("cell means", "mean") if summary else ("values of the outcome", "value")
        if data.exact_decimal:
            return (f"{source}from the text of the file, as exact decimals: one of the {what}, {data.pivot_text}, was "
                    f"subtracted from every {each} in exact decimal arithmetic, and only these differences were "
                    "converted to binary floating point, so no digits are lost when the values are large or close "
                    "together. Means and other locations are reported on the file's own scale.")
        where = "given in Python" if self.prov.data_format == "dataframe" else f"stored in the {self.prov.data_format} file"
        return (f"{source}as the binary floating-point numbers {where}, which carry "
                "about 15 to 17 significant digits.")

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
            subtitle=f"Analysis of variance report · {self.design_phrase()}",
            summary=self.summary(),
            sections=tuple(sections),
            created=self.prov.created,
        )

    def rounding_section(self) -> Section | None:
        return None

    def assumption_section(self) -> Section | None:
        inf = self.inf
        if inf is None:
            return None
        a = inf.assumptions
        blocks = []
        items = []
        for r in (a.brown_forsythe, a.levene):
            if r is None:
                continue
            name = "Brown–Forsythe (median-centred Levene)" if r.center == "median" else "Levene (mean-centred)"
            items.append((runs_of(name), runs_of(N.stat_f(r.statistic, r.df1, r.df2), ", ", N.stat_p(r.p))))
        sw = a.shapiro
        if sw.skipped and sw.reason.startswith("not available"):
            items.append((runs_of("Shapiro–Wilk on residuals"), runs_of(sw.reason)))
        elif sw.skipped:
            items.append((runs_of("Shapiro–Wilk on residuals"), runs_of(f"not computed ({sw.reason.replace('-', ' ')})")))
        else:
            sample = (f" (a random sample of {N.format_count(sw.n)} of the {N.format_count(sw.n_available)} residuals, "
                      f"seed {sw.seed}: the test is defined up to 5,000 values)" if sw.sampled else "")
            items.append((runs_of("Shapiro–Wilk on residuals"),
                          runs_of(N.symbol("W"), f" = {N.format_bounded(sw.statistic, 3)}, ", N.stat_p(sw.p),
                                  ", ", N.stat_count(sw.n, "N"), sample)))
        items.append((runs_of("Outliers (|studentized residual| > 3)"), runs_of(self.outlier_phrase(a))))
        blocks.append(DefinitionList(tuple(items)))
        if a.unavailable:
            verdict = f"Residual checks, variance checks and the outlier screen are {a.unavailable}."
        elif a.heterogeneous:
            verdict = ("The Brown–Forsythe test indicates unequal variances across cells; compare the classical and "
                       "robust results below.")
        else:
            verdict = ("The Brown–Forsythe test does not indicate unequal variances; with small cells such a test has "
                       "little power, so the robust results are shown beside the classical ones in any case.")
        blocks.append(Paragraph(runs_of(verdict)))
        if a.qq is not None:
            blocks.append(self.qq_figure())
        if self.a.points is not None:
            blocks.append(self.residual_figure())
        blocks.append(self.robust_table())
        other = self.distribution_free()
        if other:
            blocks.append(other)
        if inf.outlier_sensitivity is not None:
            blocks.append(self.outlier_table())
        for fam in self.posthoc_tables():
            blocks.append(fam)
        return Section("assumptions", "Checking the assumptions", tuple(blocks))

    def outlier_phrase(self, a) -> str:
        scan = a.outliers
        if scan is None:
            return a.unavailable or "not checked"
        if not scan.outliers:
            return "none"
        shown = scan.outliers[:OUTLIERS_SHOWN]
        listed = "; ".join(f"row {o.row} ({self.design.cells[o.cell].short}, studentized residual {_num(o.external)})"
                           for o in shown)
        if scan.total > len(shown):
            listed = (f"{N.format_count(scan.total)} rows; the {len(shown)} largest: " + listed +
                      f" (results.json lists up to {len(scan.outliers)})")
        return listed

    def qq_figure(self) -> Figure:
        qq = self.inf.assumptions.qq
        spec = FigureSpec("qq", (("theoretical", tuple(qq.theoretical)), ("sample", tuple(qq.sample))))
        note = ""
        if qq.summarized:
            note = (f" Of the {N.format_count(qq.n_residuals)} residuals, {N.format_count(len(qq.sample))} order "
                    "statistics at evenly spaced ranks are drawn, the smallest and largest included.")
        return Figure("fig-qq", runs_of("Normal Q–Q plot of the standardized residuals; points near the line mean "
                                        "the residuals are close to normal." + note),
                      f"Normal quantile plot of {len(qq.sample)} standardized residuals"
                      + (f" (quantiles of {qq.n_residuals})" if qq.summarized else "")
                      + " against theoretical normal quantiles, with a reference line.", spec)

    def residual_figure(self) -> Figure:
        a = self.a
        groups = tuple(c.short for c in self.design.cells)
        residuals = tuple(tuple(v - float(a.cells.offset_mean[i]) for v in p.values) if p.n else ()
                          for i, p in enumerate(a.points))
        spec = FigureSpec("residuals", (("groups", groups), ("residuals", residuals)))
        dots = self.points_phrase()
        return Figure("fig-residuals", runs_of("Residuals by cell; similar spread across cells supports the "
                                               "equal-variance assumption." + dots["note"]),
                      f"Strip plot of the residuals in each of the {len(groups)} cells around a line at zero.", spec)

    def robust_table(self) -> Table:
        short = {"Welch–Satterthwaite t": "Welch", "Welch's ANOVA": "Welch", "HC3 Wald F": "HC3"}
        cols = (Column(runs_of("hypothesis")), Column(runs_of("classical"), nowrap=True), Column(runs_of(N.symbol("p")), "right"),
                Column(runs_of("robust"), nowrap=True), Column(runs_of(N.symbol("p")), "right"),
                Column(runs_of("permutation ", N.symbol("p")), "right"), Column(runs_of("confirmatory")))
        rows = []
        for h in self.a.hypotheses:
            e = h.extras
            if e is None:
                continue
            if e.robust is None or not (e.robust.p == e.robust.p):
                robust, rp = runs_of("not available"), runs_of("—")
            else:
                stat = (N.stat_t(e.robust.statistic, e.robust.df[0]) if e.robust.test == "t"
                        else N.stat_f(e.robust.statistic, e.robust.df[0], e.robust.df[1]))
                robust, rp = runs_of(short.get(e.robust.method, e.robust.method), " ", stat), runs_of(N.format_p_cell(e.robust.p))
            perm = runs_of(N.format_p_cell(e.permutation.p)) if e.permutation else runs_of("—")
            rows.append((runs_of(h.contrast.name), runs_of(self.test_stat(h.test)), runs_of(N.format_p_cell(h.test.p)),
                         robust, rp, perm, runs_of(e.confirmatory)))
        note = [runs_of("Robust versions: Welch = Welch–Satterthwaite t for a one-row contrast, or Welch's ANOVA for a "
                        "one-way effect; HC3 = heteroscedasticity-consistent (HC3) Wald F. All p values unadjusted.")]
        for h in self.a.hypotheses:
            if h.extras and h.extras.robust and h.extras.robust.note:
                note.append(runs_of(f"{h.contrast.name}: robust test not available ({h.extras.robust.note})."))
        perms = [(h.contrast.name, h.extras.permutation) for h in self.a.hypotheses if h.extras and h.extras.permutation]
        if perms:
            perm = perms[0][1]
            used = "; ".join(f"{name}: {N.format_count(p.n_permutations)}" + (" (stopped early)" if p.stopped_early else "")
                             for name, p in perms)
            note.append(runs_of(f"Permutation p: up to {N.format_count(perm.max_permutations or perm.n_permutations)} "
                                f"permutations (seed {perm.seed}), p = (b + 1)/(m + 1), where m is the number of permutations "
                                f"and b the number whose F is at least the observed one (Phipson & Smyth, 2010); a run "
                                f"stops once {SEQUENTIAL_EXCEEDANCES} permuted F reach the observed one, with p = "
                                f"{SEQUENTIAL_EXCEEDANCES}/l after l permutations (Besag & Clifford, 1991). Permutations "
                                f"used: {used}."
                                + (" Factorial effects permute residuals of the reduced model (Freedman & Lane, 1983)."
                                   if self.multi else "")))
        elif self.inf.permutation_note and self.prep.data.summary is None:
            note.append(runs_of(f"Permutation p: {self.inf.permutation_note}."))
        return Table("robust", runs_of("Classical and robust tests side by side"), cols, tuple(rows), notes=tuple(note))

    def distribution_free(self) -> Paragraph | None:
        kw, welch = self.inf.kruskal, self.inf.welch_oneway
        parts = []
        if kw is None and self.inf.kruskal_note and self.prep.data.summary is None:
            parts += [f"Kruskal–Wallis test across the cells: {self.inf.kruskal_note}. "]
        if welch is not None:
            parts += ["Welch's ANOVA across the cells: ", N.stat_f(welch.statistic, welch.df1, welch.df2), ", ",
                      N.stat_p(welch.p), ". "]
        if kw is not None:
            parts += ["Kruskal–Wallis test across the cells (ranks; tie-corrected): ",
                      N.symbol("H"), f"({kw.df}) = {_num(kw.statistic)}, ", N.stat_p(kw.p), ". "]
        for what, why in self.inf.unavailable:
            parts += [f"{what}: not available, because {why}. "]
        return Paragraph(runs_of(*parts)) if parts else None

    def outlier_table(self) -> Table:
        s = self.inf.outlier_sensitivity
        shown = s.rows_removed[:OUTLIERS_SHOWN]
        removed = _rows_phrase(shown)
        if s.n_removed > len(shown):
            removed = (f"the {N.format_count(s.n_removed)} flagged rows (the first {len(shown)}: "
                       f"{', '.join(str(r) for r in shown)}, …)")
        by_name = {h.contrast.name: h for h in self.a.hypotheses}
        rows = []
        for name, t, note in s.tests:
            h = by_name[name]
            with_ = runs_of(self.test_stat(h.test), ", ", N.stat_p(h.test.p))
            without = runs_of(note) if t is None else runs_of(self.test_stat(t), ", ", N.stat_p(t.p))
            rows.append((runs_of(name), with_, without))
        flagged = "the flagged outlier" if s.n_removed == 1 else "the flagged outliers"
        return Table("outlier-sensitivity", runs_of(f"Influence of {flagged}: planned tests with all rows and without "
                                                    f"{'it' if s.n_removed == 1 else 'them'}"),
                     (Column(runs_of("hypothesis")), Column(runs_of("all rows"), nowrap=True),
                      Column(runs_of(f"without {removed}"), nowrap=True)),
                     tuple(rows), notes=(runs_of("Reported for comparison only; the confirmatory results use all rows. "
                                                 "The tests without the flagged rows are those a refit on the remaining "
                                                 "rows gives."),))

    def posthoc_tables(self) -> list[Table]:
        out = []
        names = {"all-pairs": "All pairs (Tukey–Kramer)", "versus-control": "Each versus the control (Dunnett)",
                 "any-contrast": "All pairs within the Scheffé family (any contrast)"}
        fams = [(k, on, res, labels) for k, on, res, labels in self.inf.posthoc]
        if self.inf.games_howell is not None:
            fams.append(("games-howell", "cells", self.inf.games_howell, tuple(c.short for c in self.design.cells)))
            names["games-howell"] = "All pairs without assuming equal variances (Games–Howell)"
        for i, (key, on, res, labels) in enumerate(fams):
            target = "cells" if on == "cells" else f"unweighted marginal means of {on}"
            rows = []
            for c in res.comparisons:
                rows.append((runs_of(f"{labels[c.first]} − {labels[c.second]}"), runs_of(_num(c.difference)),
                             runs_of(_num(c.se)), runs_of(_interval((c.ci_low, c.ci_high))),
                             runs_of(N.format_p_cell(c.p_adjusted))))
            cols = (Column(runs_of("difference")), Column(runs_of("estimate"), "right"), Column(runs_of(N.symbol("SE")), "right"),
                    Column(runs_of(f"{N.format_confidence_level(1 - res.alpha)} simultaneous ", N.symbol("CI")), "right"),
                    Column(runs_of("adjusted ", N.symbol("p")), "right"))
            notes = [runs_of("Follow-up comparisons are exploratory unless the plan lists them as planned hypotheses; "
                             "their p values are adjusted within this family.")]
            if key in POSTHOC_METHOD_NOTES:
                notes.append(runs_of(POSTHOC_METHOD_NOTES[key]))
            out.append(Table(f"posthoc-{i}", runs_of(f"{names[key]}, on the {target}"), cols, tuple(rows),
                             notes=tuple(notes)))
        return out


class _SummaryBuilder(_Builder):
    """The wording that only a table of cell summaries needs: how it was read, what it cannot give
    (said once, in the assumption checks), and how far rounding of its numbers could move the tests."""

    def spread_word(self, plural: bool = False) -> str:
        kind = self.prep.data.summary.spread
        word = {"sd": "SD", "variance": "variance", "se": "SE"}[kind]
        return word + ("s" if plural else "")

    def summary_sample(self) -> Paragraph:
        data, info = self.prep.data, self.prep.data.summary
        text = (f"The data file {self.prov.data_file} is a table of cell summaries: {N.format_count(data.n_read)} "
                f"rows, one per cell, giving n, the mean and the {SPREAD_WORDS[info.spread]} (columns "
                f"{info.n_column}, {info.mean_column} and {info.spread_column}) of {N.format_count(data.n)} "
                f"observations in all. {info.conversion[0].upper()}{info.conversion[1:]}.")
        if data.exclusions:
            text += " " + "; ".join(f"{e.count} row{'s' if e.count != 1 else ''} left out: {e.reason} ({e.detail})"
                                    for e in data.exclusions) + "."
        mr, sr = info.mean_rounding, info.spread_rounding
        unrounded = [w for w, r in (("means", mr), (self.spread_word(True), sr)) if r.source == "binary"]
        if unrounded:
            text += (f" The {_words_list(unrounded)} arrived as binary floating-point numbers and are taken as "
                     "unrounded; if they were rounded, state mean_decimals and spread_decimals in [data] so that the "
                     "report can bound how far the rounding moves F and p.")
        return Paragraph(_lead("Sample", text))

    def assumption_methods(self) -> list[Paragraph]:
        policy = self.plan.analysis.unequal_variances
        words = {
            "classical": "The classical (equal-variance) tests are the confirmatory ones; robust versions, which "
                         "need only the cell summaries, are shown beside them.",
            "robust-if-heterogeneous": "The plan makes the robust versions confirmatory if a variance test indicates "
                                       "unequal variances; no such test can be run on cell summaries, so the "
                                       "classical tests stay confirmatory.",
            "always-robust": "The heteroscedasticity-robust versions are the confirmatory tests (Zimmerman, 2004).",
        }[policy]
        return [Paragraph(_lead("Assumptions",
            "Independence of observations follows from the design and cannot be checked from the data. Normality "
            "and equal variances cannot be checked from cell summaries (see “Checking the assumptions”); the "
            "cell SDs are shown for comparison. " + words))]

    def assumption_section(self) -> Section | None:
        if self.inf is None:
            return None
        steps = "; ".join(f"{step} ({why})" for step, why in ROW_LEVEL_STEPS)
        text = (f"The input gives one row per cell (n, mean and {self.spread_word()}), not the observations, so the "
                f"steps that need the observations could not be computed: {steps}. Every other result needs only "
                f"each cell's n, mean and {self.spread_word()} and is the same as it would be from the rows: the "
                "ANOVA table, the hypothesis tests, Welch's and the HC3 tests, the Games–Howell, Tukey–Kramer, "
                "Dunnett and Scheffé families, effect sizes and power.")
        blocks = [Note("info", "What cell summaries cannot give", (Paragraph(runs_of(text)),)), self.robust_table()]
        other = self.distribution_free()
        if other:
            blocks.append(other)
        blocks.extend(self.posthoc_tables())
        return Section("assumptions", "Checking the assumptions", tuple(blocks))

    def rounding_section(self) -> Section | None:
        """How far rounding of the cell summaries could move each test (summary input only)."""
        b = self.a.rounding
        info = self.prep.data.summary
        if b is None:
            return None
        mr, sr = info.mean_rounding, info.spread_rounding
        rounded = [(w, r) for w, r in (("means", mr), (self.spread_word(True), sr)) if r.rounded]
        how = {r.source for _, r in rounded}
        said = [f"{w} {_places(r)}" + ("" if len(how) == 1 else f" ({_SOURCE_WORDS[r.source]})") for w, r in rounded]
        if len(how) == 1:
            said[-1] += f" ({_SOURCE_WORDS[how.pop()]})"
        units = [f"±{_num_exact(mr.half_unit)} for a mean" if mr.rounded else "",
                 f"±{_num_exact(sr.half_unit)} for a{'n' if self.spread_word()[0] in 'S' else ''} {self.spread_word()}"
                 if sr.rounded else ""]
        lead = (f"The summaries are rounded: {_words_list(said)}. Each stands for any value within "
                f"half a unit of its last place ({_words_list([u for u in units if u])}), so other data with the same "
                "rounded summaries could give other results. Recomputed at the ends of those intervals, the tests "
                "range as follows; every value any such data could give lies within these ranges.")
        entries = [(f"ANOVA: {x.name}", x) for x in b.anova] + [(x.name, x) for x in b.hypotheses]

        def fmt(v):
            return "no upper bound" if v == float("inf") else _num(v)

        same = all(fmt(x.low) == fmt(x.high) and N.format_p_cell(x.p_low) == N.format_p_cell(x.p_high)
                   for _, x in entries)
        if same:
            return Section("rounding", "Rounding of the summaries", (Paragraph(runs_of(
                lead.split(" Recomputed")[0] + " Recomputed at the ends of those intervals, no F, t or p changes at "
                "the precision shown.")),))
        rows = []
        for label, x in entries:
            sym = N.symbol(x.test)
            rows.append((runs_of(label), runs_of(sym, f" = {_num(x.statistic)}"),
                         runs_of(f"[{fmt(x.low)}, {fmt(x.high)}]" + ("" if x.exact else " †")),
                         runs_of(N.format_p_cell(x.p)),
                         runs_of(f"[{N.format_p_cell(x.p_low)}, {N.format_p_cell(x.p_high)}]")))
        cols = (Column(runs_of("test")), Column(runs_of("as given"), "right"), Column(runs_of("range"), "right"),
                Column(runs_of(N.symbol("p")), "right"), Column(runs_of(N.symbol("p"), " range"), "right"))
        notes = [runs_of("Within-cell sums of squares move with the spreads and hypothesis sums of squares with the "
                         "means, independently; t and the spreads' part of every F are monotone and take their ends at "
                         "interval ends, and each F's numerator is minimised by coordinate descent and maximised over "
                         "the corners of the means' intervals. p values are unadjusted.")]
        if not all(x.exact for _, x in entries):
            notes.append(runs_of("† With more than 14 cells in a test, the upper end is a guaranteed bound that may "
                                 "exceed the largest attainable value by a term of second order in the rounding unit."))
        return Section("rounding", "Rounding of the summaries", (
            Paragraph(runs_of(lead)),
            Table("rounding", runs_of("How far rounding of the summaries could move each test"), cols, tuple(rows),
                  notes=tuple(notes)),
        ))


_SOURCE_WORDS = {"text": "read off the file", "plan": "as the plan states", "decimal type": "from the column's type"}


def _places(r) -> str:
    if r.decimals > 0:
        return f"to {r.decimals} decimal{'s' if r.decimals != 1 else ''}"
    if r.decimals == 0:
        return "to whole numbers"
    return f"to multiples of {10 ** -r.decimals:,}"


def _num_exact(x: float) -> str:
    """A half unit such as 0.005, written as it is (no rounding to two decimals)."""
    return format(x, ".15g").replace("-", N.MINUS)


POSTHOC_METHOD_NOTES = {
    "versus-control": "Adjusted p values and the critical value come from Dunnett's (1955) distribution, "
                      "computed by deterministic numerical integration (adaptive Gauss–Kronrod quadrature over "
                      "the normal and chi variables), accurate to better than 1e-8.",
    "all-pairs": "Adjusted p values and the critical value come from the studentized range distribution, computed "
                 "by deterministic numerical integration (adaptive Gauss–Kronrod quadrature), accurate to better "
                 "than 1e-8.",
}
POSTHOC_METHOD_NOTES["games-howell"] = POSTHOC_METHOD_NOTES["all-pairs"]


def contrast_tables(i: int, c, d) -> tuple[Table, Table]:
    """Hypothesis ``i`` (a compiled contrast ``c``) over the cell means (C·μ = h) and over the
    coefficients of the design ``d`` (L = C·D): the report and the analysis-plan document print these."""

    def table(ident, caption, heads, weights):
        cols = (Column(runs_of("row")),) + tuple(Column(runs_of(hd), "center") for hd in heads) + (
            Column(runs_of(N.symbol("h")), "right"),)
        rows, marks = [], []
        for r, (row, rhs) in enumerate(zip(weights, c.rhs), start=1):
            rows.append((runs_of(str(r)), *(runs_of(_fr(w)) for w in row), runs_of(_fr(rhs))))
            marks.append(("",) + tuple("pos" if w > 0 else "neg" if w < 0 else "zero" for w in row) + ("",))
        return Table(ident, caption, cols, tuple(rows), highlight=tuple(marks), compact=True)

    return (
        table(f"h{i}-cells", runs_of(f"Hypothesis {i} as a contrast over the cell means (", N.symbol("C·μ = h"), ")"),
              [cell.short for cell in d.cells], c.weights),
        table(f"h{i}-betas", runs_of(f"Hypothesis {i} as the same contrast over the coefficients (", N.symbol("L = C·D"),
                                     f", {CODING_NAMES[d.parameterization]} coding)"),
              [co.symbol for co in d.coefficients], c.beta_weights),
    )


def lock_sections(check) -> tuple[Section, ...]:
    """The comparison of the run with its locked plan (none without a lock): a match, or every deviation."""
    if check is None:
        return ()
    where = runs_of(f"the plan locked at {check.created} (lock file ", _literal(check.path.name), ", SHA-256 ",
                    _literal(check.sha256), "; canonical plan SHA-256 ", _literal(check.canonical_sha256),
                    ", as printed in the analysis-plan document)")
    if check.matched:
        return (Section("lock", "Comparison with the locked plan", (Paragraph(runs_of(
            "The analysis matched ", where, ": no hypothesis, option, factor, level or exclusion rule changed since, "
            "and the data hold no level that the locked plan did not list.")),)),)
    n = len(check.deviations)
    blocks = [Paragraph(runs_of("The analysis departs from ", where, f" in {_count_noun(n, 'way')}:")),
              BulletList(tuple(runs_of(d.text) for d in check.deviations))]
    if check.added:
        blocks.append(Paragraph(runs_of(
            "Hypotheses added after the lock are reported as exploratory, whatever role the plan gives them, and their "
            "p values are adjusted within the exploratory family."), "small"))
    return (Section("lock", "Comparison with the locked plan", tuple(blocks)),)


def build_document(prep, analysis, provenance) -> Document:
    """The complete document model of one report."""
    builder = _SummaryBuilder if prep.data.summary is not None else _Builder
    return builder(prep, analysis, provenance).build()


__all__ = ["build_document", "plain"]
