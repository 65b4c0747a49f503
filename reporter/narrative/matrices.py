"""The design and contrast matrices: the notation box, the design matrix with the meaning of each
coefficient (“The model”), and each hypothesis as C·μ = h and L = C·D."""

from __future__ import annotations

from fractions import Fraction

from reporter.narrative import numbers as N
from reporter.narrative.document import Column, DefinitionList, Note, Paragraph, Section, Table, plain, runs_of
from reporter.narrative.phrases import CODING_NAMES, _count_noun, _fr, _num


class MatrixSections:
    """The notation box and the model section."""

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
                N.symbol("μ = D·β"), ".",
                (" With covariates, ", N.symbol("D"), " holds only the factor columns of ", N.symbol("X"),
                 ", and μ are the adjusted cell means.") if self.has_covariates else ())),
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
                (runs_of(N.symbol("L = [C·D, 0]" if self.has_covariates else "L = C·D")), runs_of(
                    "The same hypothesis written over the coefficients: ", N.symbol("L·β = h"), " states exactly what ",
                    N.symbol("C·μ = h"), " states.",
                    " The zeros stand for the slopes: a hypothesis about adjusted means puts no weight on them."
                    if self.has_covariates else "")),
                (runs_of("H0, H1"), runs_of("The null hypothesis and the alternative hypothesis.")),
            ]
        if self.has_covariates:
            items[1:1] = self.covariate_notation()
        return Note("info", "Notation used from here on", (DefinitionList(tuple(items)),))

    def model_section(self) -> Section:
        d, a = self.design, self.a
        coefs = d.coefficients
        names = [f.name for f in d.factors]
        cols = [Column(runs_of("/".join(names) if self.multi else "cell"))]
        cov_cols = d.covariates if self.has_covariates else ()
        cols += [Column(runs_of(c.symbol), "center") for c in coefs]
        cols += [Column(runs_of(c.symbol), "center") for c in cov_cols]
        cols += [Column(runs_of("data rows"), "right")]
        rows, marks = [], []
        for c, n in zip(d.cells, self.prep.counts):
            if n == 0:
                continue
            vals = [int(v) for v in d.matrix[c.index]]
            xs = [self.covariate_entry(col, c.index) for col in cov_cols]
            rows.append((runs_of(c.short), *(runs_of(_fr(Fraction(v))) for v in vals), *(runs_of(x) for x in xs),
                         runs_of(N.format_count(n))))
            marks.append(("",) + tuple("pos" if v > 0 else "neg" if v < 0 else "zero" for v in vals)
                         + tuple("zero" if x == "0" else "" for x in xs) + ("",))
        matrix = Table(
            "design-matrix",
            runs_of(f"Design matrix ({CODING_NAMES[d.parameterization]} coding): its distinct rows, one per observed cell"),
            tuple(cols), tuple(rows),
            notes=(runs_of("Each row stands for the data rows of its cell (last column); ", N.symbol("X"), " has "
                           f"{_count_noun(self.prep.data.n, 'row')} and {_count_noun(len(coefs) + len(cov_cols), 'column')}. "
                           "Columns: " + "; ".join([f"{c.symbol} = {c.label}" for c in coefs]
                                                   + [self.covariate_column_words(col) for col in cov_cols]) + "."),
                   *self.covariate_matrix_notes(cov_cols)),
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
        if self.has_covariates:
            rule = Paragraph(runs_of(plain(rule.runs).replace("simply the mean of", "simply the adjusted mean of")
                                     .replace("Every column is", "Every factor column is")
                                     .replace("has exactly one 1,", "has exactly one 1 among them,")
                                     .replace("simply a group mean", "simply a group's adjusted mean")))
        mrows = []
        for c, est, se, ok in zip(coefs, a.fit.coefficients, a.fit.coefficient_se, a.fit.estimable):
            mrows.append((runs_of(c.symbol), runs_of(c.label), runs_of(c.meaning_text(d)),
                          runs_of(self.adjusted_words(c.meaning_words(d)) if cov_cols else c.meaning_words(d)),
                          runs_of(_num(est) if ok else "not estimable"), runs_of(_num(se) if ok else "—")))
        mrows += self.slope_meaning_rows(cov_cols)
        meanings = Table(
            "coefficients", runs_of("What each coefficient estimates, as a combination of cell means (", N.symbol("β = D⁻¹μ"), ")"),
            (Column(runs_of("β")), Column(runs_of("column")), Column(runs_of("in symbols")), Column(runs_of("in words")),
             Column(runs_of("estimate"), "right"), Column(runs_of(N.symbol("SE")), "right")),
            tuple(mrows),
            notes=((runs_of(f"μ̄ is the average of the {d.k} cell means, each cell counted once whatever its n."),)
                   if any(not ref.fixed for c in coefs for _, ref in c.meaning) else ())
                  + ((runs_of("With covariates, μ are the adjusted cell means; a slope coefficient is not a "
                              "combination of cell means, and its meaning is given in words."),) if cov_cols else ()),
        )
        return Section("model", "The model", (self.notation(), matrix, rule, meanings))


def contrast_tables(i: int, c, d) -> tuple[Table, Table]:
    """Hypothesis ``i`` (a compiled contrast ``c``) over the cell means (C·μ = h) and over the
    coefficients of the design ``d`` (L = C·D; with covariates L = [C·D, 0], a zero for each slope):
    the report and the analysis-plan document print these."""
    slopes = tuple(getattr(d, "covariates", ()))

    # constants as written: in residual SDs when the plan wrote them so (0.3 sd); an equivalence
    # claim shows its bounds instead of h
    sd = c.from_sd is not None or c.unit == "sd"
    written_rhs = c.from_sd.rhs if c.from_sd is not None else c.rhs
    unit = " sd" if sd else ""
    if c.is_equivalence:
        lo, hi = c.from_sd.bounds if c.from_sd is not None else c.bounds
        right = [f"({_fr(lo)}{unit}, {_fr(hi)}{unit})"]
        right_head = runs_of("bounds")
    else:
        right = [_fr(x) + unit for x in written_rhs]
        right_head = runs_of(N.symbol("h"))

    def table(ident, caption, heads, weights):
        cols = (Column(runs_of("row")),) + tuple(Column(runs_of(hd), "center") for hd in heads) + (
            Column(right_head, "right"),)
        rows, marks = [], []
        for r, (row, rhs) in enumerate(zip(weights, right), start=1):
            rows.append((runs_of(str(r)), *(runs_of(_fr(w)) for w in row), runs_of(rhs)))
            marks.append(("",) + tuple("pos" if w > 0 else "neg" if w < 0 else "zero" for w in row) + ("",))
        return Table(ident, caption, cols, tuple(rows), highlight=tuple(marks), compact=True)

    return (
        table(f"h{i}-cells", runs_of(f"Hypothesis {i} as a contrast over the cell means (", N.symbol("C·μ = h"), ")"),
              [cell.short for cell in d.cells], c.weights),
        table(f"h{i}-betas", runs_of(f"Hypothesis {i} as the same contrast over the coefficients (",
                                     N.symbol("L = [C·D, 0]" if slopes else "L = C·D"),
                                     f", {CODING_NAMES[d.parameterization]} coding)"),
              [co.symbol for co in d.coefficients] + [s.symbol for s in slopes],
              [tuple(row) + (Fraction(0),) * len(slopes) for row in c.beta_weights] if slopes else c.beta_weights),
    )
