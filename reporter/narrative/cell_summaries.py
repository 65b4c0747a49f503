"""The wording that only a table of cell summaries needs (``layout = "cell-summaries"``): how it was
read, what it cannot give, and how far rounding of its numbers could move the tests."""

from __future__ import annotations

from reporter.intake.summary import ROW_LEVEL_STEPS, SPREAD_WORDS
from reporter.narrative import numbers as N
from reporter.narrative.document import Column, Note, Paragraph, Section, Table, runs_of
from reporter.narrative.phrases import _lead, _num, _words_list


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


class CellSummarySections:
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
