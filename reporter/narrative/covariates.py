"""The wording of the analysis of covariance: which covariates the model adjusts for and where the
adjusted means are taken (Methods), the covariate columns of the design and what each slope means,
the adjusted means beside the raw ones, the slopes with their tests, the homogeneity-of-slopes
check, and the caution that a covariate must not be affected by the factors.

Sources of the wording: Maxwell, Delaney & Kelley (2018), *Designing Experiments and Analyzing
Data*, 3rd ed., Routledge, chapter 9 (adjusted means, homogeneity of regression slopes, a covariate
measured before the treatment); Milliken & Johnson (2002), *Analysis of Messy Data*, vol. 3:
*Analysis of Covariance*, Chapman & Hall/CRC, chapters 2-3 (separate slopes: effects compared at a
stated covariate value). Nothing is computed here: every number comes from the fit.
"""

from __future__ import annotations

from reporter.narrative import numbers as N
from reporter.narrative.document import BulletList, Column, Figure, FigureSpec, Note, Paragraph, Table, runs_of
from reporter.narrative.phrases import _count_words, _interval, _lead, _num, _words_list


def _plan_number(x: float) -> str:
    """A value as the plan wrote it (no rounding): 50, 12.5, −3."""
    text = repr(float(x))
    if text.endswith(".0"):
        text = text[:-2]
    return text.replace("-", N.MINUS)


class CovariateSections:
    """Everything the report says only when the plan has ``[[covariates]]``."""

    # -- what the plan and the fit say --------------------------------------------------------
    @property
    def covariate_specs(self) -> tuple:
        return tuple(getattr(self.plan, "covariates", ()) or ())

    @property
    def has_covariates(self) -> bool:
        return bool(self.covariate_specs) and bool(getattr(self.a.fit, "has_covariates", False))

    @property
    def adjusted_word(self) -> str:
        """"adjusted " before "means" with covariates, nothing without."""
        return "adjusted " if self.has_covariates else ""

    def reference_value(self, j: int) -> str:
        """Covariate j's reference value x* as printed: the plan's number as written, or the mean."""
        spec = self.covariate_specs[j]
        if spec.adjust_to is not None:
            return _plan_number(spec.adjust_to)
        return _num(self.a.fit.covariate_reference[j])

    def reference_phrase(self, j: int, why: bool = True) -> str:
        """"pretest = 49.87 (the mean of the analysed rows)" or "pretest = 50 (the plan's value)"."""
        spec = self.covariate_specs[j]
        said = f"{spec.name} = {self.reference_value(j)}"
        if not why:
            return said
        return said + (" (the value the plan states)" if spec.adjust_to is not None
                       else " (its mean over the analysed rows)")

    def references_phrase(self, why: bool = True) -> str:
        return _words_list([self.reference_phrase(j, why) for j in range(len(self.covariate_specs))])

    def per_cell_phrase(self) -> str:
        """The reference values of the covariates with per-cell slopes: where effects are evaluated."""
        return _words_list([self.reference_phrase(j, why=False) for j, s in enumerate(self.covariate_specs)
                            if s.slopes == "per-cell"])

    def per_cell_names(self) -> list[str]:
        return [s.name for s in self.covariate_specs if s.slopes == "per-cell"]

    # -- Methods -------------------------------------------------------------------------------
    def covariate_methods(self) -> list[Paragraph]:
        specs = self.covariate_specs
        if not self.has_covariates:
            return []
        outcome = self.prep.data.outcome
        named = [s.name + (f" ({s.description.strip()})" if s.description else "") for s in specs]
        who = (f"one covariate, {named[0]}" if len(specs) == 1
               else f"{_count_words(len(specs), 'covariate')}, {_words_list(named)}")
        common = [s.name for s in specs if s.slopes == "common"]
        separate = self.per_cell_names()
        slopes = []
        if common:
            slopes.append(f"one slope common to all cells for {_words_list(common)}")
        if separate:
            slopes.append(f"a separate slope in each cell for {_words_list(separate)}")
        text = (f"An analysis of covariance: the model adjusts {outcome} for {who}. Besides one mean per cell it has "
                f"{' and '.join(slopes)}. Each covariate enters as its value minus a reference value, so the model's "
                f"cell means are adjusted means: the mean of {outcome} each cell would have at "
                f"{self.references_phrase()}. Every hypothesis about means, every effect and every cell coefficient "
                "below refers to these adjusted means, not to the raw cell means. In Type I sums of squares the "
                "covariates enter first, in the order the plan lists them, then the factor terms.")
        blocks = [Paragraph(_lead("Covariates", text))]
        if separate:
            blocks.append(Paragraph(runs_of(
                "With a separate slope in each cell, the difference between two cells depends on the covariate's "
                f"value, so every effect and every hypothesis is evaluated at {self.per_cell_phrase()}; "
                "at another value the differences would be other ones.")))
        one = len(specs) == 1
        assume = (f"that the relation between {'the covariate' if one else 'each covariate'} and the outcome is linear "
                  "within each cell"
                  + (", with the same slope in every cell (checked below by the homogeneity-of-slopes test)"
                     if common else ""))
        blocks.append(Paragraph(runs_of(
            f"The adjustment assumes that {'the covariate is' if one else 'the covariates are'} not "
            "affected by the factors (for example, measured before allocation to the groups), and "
            f"{assume}.")))
        return blocks

    def covariate_types_words(self) -> str:
        """The sentence after the choice of sums of squares, with covariates."""
        if self.a.anova.types_agree:
            return " Here Types I, II and III agree."
        return " With covariates the three types generally differ, even in a balanced design."

    # -- the model -----------------------------------------------------------------------------
    def covariate_index(self, name: str) -> int:
        return [s.name for s in self.covariate_specs].index(name)

    def covariate_entry(self, col, cell: int) -> str:
        """A covariate column's entry in a cell's row of the design matrix: "pretest − 49.87", or 0
        outside the cell of a per-cell slope."""
        if col.cell is not None and col.cell != cell:
            return "0"
        return f"{col.covariate} {N.MINUS} {self.reference_value(self.covariate_index(col.covariate))}"

    def covariate_column_words(self, col) -> str:
        where = "" if col.cell is None else f" in the rows of {self.design.cells[col.cell].short}, 0 elsewhere"
        return f"{col.symbol} = {col.covariate} {N.MINUS} {self.reference_value(self.covariate_index(col.covariate))}{where}"

    def covariate_matrix_notes(self, cov_cols) -> tuple:
        if not cov_cols:
            return ()
        return (runs_of("A covariate column holds each row's own value of the covariate minus its reference value, so "
                        "it varies within a cell; its entry shows that expression. Because the covariates are centred "
                        "at their reference values, the cell coefficients describe adjusted means."),)

    def slope_meaning_rows(self, cov_cols) -> list:
        if not cov_cols:
            return []
        d = self.design
        slopes = {(s.covariate, s.cell): s for s in self.a.fit.slopes}
        out = []
        for col in cov_cols:
            s = slopes.get((col.covariate, col.cell))
            out.append((runs_of(col.symbol), runs_of(col.label), runs_of(col.meaning_text(d)),
                        runs_of(col.meaning_words(d).replace("the mean outcome", f"the mean of {self.prep.data.outcome}")),
                        runs_of(_num(s.estimate) if s else "not estimable"), runs_of(_num(s.se) if s else "—")))
        return out

    @staticmethod
    def adjusted_words(words: str) -> str:
        """A coefficient's meaning in words, said of adjusted means."""
        return (words.replace("the mean of", "the adjusted mean of").replace("cell means", "adjusted cell means")
                .replace("the unweighted mean over", "the unweighted adjusted mean over"))

    def covariate_notation(self) -> list:
        """Definitions the notation box adds with covariates, placed after the cell mean μ."""
        return [
            (runs_of(N.symbol("x*")), runs_of(
                "The reference value of a covariate ", N.symbol("x"), ": ", self.references_phrase(), ". With "
                "covariates each μ is an adjusted cell mean, the cell's mean of ", self.prep.data.outcome, " at ",
                N.symbol("x = x*"), ".")),
            (runs_of(N.symbol("x − x*")), runs_of(
                "A covariate's value minus its reference value: the covariate columns of ", N.symbol("X"),
                " hold it, row by row.")),
        ]

    def adjusted_means_figure(self) -> Figure:
        d, a = self.design, self.a
        level = N.format_confidence_level(self.level)
        groups = tuple(c.short for c in d.cells)
        ss = a.summaries
        spec = FigureSpec("adjusted-means", (
            ("groups", groups),
            ("means", tuple(s.mean for s in ss)),
            ("ci_low", tuple(None if s.ci is None else s.ci[0] for s in ss)),
            ("ci_high", tuple(None if s.ci is None else s.ci[1] for s in ss)),
            ("adjusted", tuple(s.adjusted_mean for s in ss)),
            ("adjusted_low", tuple(None if s.adjusted_ci is None else s.adjusted_ci[0] for s in ss)),
            ("adjusted_high", tuple(None if s.adjusted_ci is None else s.adjusted_ci[1] for s in ss)),
            ("y_label", self.prep.data.outcome), ("ci_label", f"{level} CI"),
        ))
        alt = (f"For each of the {d.k} cells, the raw mean of {self.prep.data.outcome} (open circle) beside its adjusted "
               f"mean at {self.references_phrase(why=False)} (diamond), each with its {level} confidence interval. "
               "Adjusted means: " + "; ".join(f"{g} {_num(s.adjusted_mean)}" for g, s in zip(groups, ss)) + ".")
        return Figure("fig-adjusted-means", runs_of(
            f"Raw and adjusted cell means of {self.prep.data.outcome} with {level} confidence intervals; the adjusted "
            f"means are taken at {self.references_phrase(why=False)}. The raw interval uses the cell's own SD, the "
            "adjusted one the model's residual variance."), alt, spec)

    # -- the groups ----------------------------------------------------------------------------
    def adjusted_means_table(self) -> Table:
        d = self.design
        names = [f.name for f in d.factors]
        level = N.format_confidence_level(self.level)
        cols = [Column(runs_of(n)) for n in names] + [
            Column(runs_of(N.symbol("n")), "right"), Column(runs_of("raw ", N.symbol("M")), "right"),
            Column(runs_of("adjusted ", N.symbol("M")), "right"), Column(runs_of(N.symbol("SE")), "right"),
            Column(runs_of(f"{level} ", N.symbol("CI")), "right"),
        ]
        rows = []
        for c, s in zip(d.cells, self.a.summaries):
            rows.append(tuple(runs_of(lv) for lv in c.levels) + (
                runs_of(str(s.n)), runs_of(_num(s.mean)), runs_of(_num(s.adjusted_mean)),
                runs_of(_num(s.adjusted_se)), runs_of(_interval(s.adjusted_ci))))
        notes = [runs_of("Adjusted mean: the cell's mean of ", self.prep.data.outcome,
                         f" at {self.references_phrase(why=False)}, from the model; raw ", N.symbol("M"),
                         ": the mean of the cell's rows as observed. ", N.symbol("SE"), " and ", N.symbol("CI"),
                         f" of the adjusted mean use the model's residual variance on {self.a.fit.df_error} df, and "
                         "include the uncertainty of the estimated slopes. Empty cells show —.")]
        return Table("adjusted-means",
                     runs_of(f"Adjusted cell means of {self.prep.data.outcome} at {self.references_phrase(why=False)}"),
                     tuple(cols), tuple(rows), notes=tuple(notes), header_columns=len(names))

    # -- results -------------------------------------------------------------------------------
    def slopes_table(self) -> Table:
        fit, d = self.a.fit, self.design
        per_cell = any(s.cell is not None for s in fit.slopes)
        cols = [Column(runs_of("covariate"))]
        if per_cell:
            cols.append(Column(runs_of("cell")))
        cols += [Column(runs_of("slope"), "right"), Column(runs_of(N.symbol("SE")), "right"),
                 Column(runs_of(N.symbol("t")), "right"), Column(runs_of(N.symbol("df")), "right"),
                 Column(runs_of(N.symbol("p")), "right")]
        rows = []
        for s in fit.slopes:
            row = [runs_of(s.covariate)]
            if per_cell:
                row.append(runs_of("all cells" if s.cell is None else d.cells[s.cell].short))
            row += [runs_of(_num(s.estimate)), runs_of(_num(s.se)), runs_of(_num(s.t)), runs_of(str(s.df)),
                    runs_of(N.format_p_cell(s.p))]
            rows.append(tuple(row))
        fixed = ", the other covariates held fixed" if len(self.covariate_specs) > 1 else ""
        notes = [runs_of("Slope: the change in the mean of ", self.prep.data.outcome, " per unit of the covariate "
                         f"within a cell{' (its own cell for a per-cell slope)' if per_cell else ''}{fixed}; ", N.symbol("t"), " tests that it is zero "
                         f"(two-sided, unadjusted, on the model's {fit.df_error} error df).")]
        return Table("slopes", runs_of(f"Covariate slopes of {self.prep.data.outcome}"), tuple(cols), tuple(rows),
                     notes=tuple(notes), header_columns=2 if per_cell else 1)

    def slopes_check_items(self, a) -> list:
        """The homogeneity-of-slopes test among the assumption checks (with covariates)."""
        if not self.has_covariates:
            return []
        check = getattr(a, "slopes", None)
        label = runs_of(f"Homogeneity of slopes (cell × {_words_list(list(check.covariates)) if check else 'covariate'})")
        if check is None:
            return [(label, runs_of("not computed"))]
        return [(label, runs_of(N.stat_f(check.F, check.df1, check.df2), ", ", N.stat_p(check.p)))]

    def slopes_check_blocks(self, a) -> list:
        """What the assumption checks ran on with covariates, and the slopes check's verdict."""
        if not self.has_covariates:
            return []
        blocks = [Paragraph(runs_of(n), "small") for n in a.notes]
        note = getattr(a, "slopes_note", None)
        check = getattr(a, "slopes", None)
        if note:
            blocks.append(Note("caution", "The slopes differ between cells", (Paragraph(runs_of(note)),)))
        elif check is not None:
            mode = self.a.fit.covariate_slopes_mode
            blocks.append(Paragraph(runs_of(
                "The homogeneity-of-slopes test (the cell × covariate interaction) does not indicate that the slopes "
                "differ between cells" + ("; a common slope describes the cells adequately as far as this test can "
                                         "tell, though it has little power with small cells." if mode == "common" else
                                         "; the plan fits separate slopes all the same, so the effects hold at "
                                         f"{self.per_cell_phrase()}."))))
        return blocks

    def not_computed_note(self) -> Note | None:
        """The tests that covariates rule out, each with the reason the inference layer gives."""
        items = tuple(getattr(self.inf, "not_applicable", ()) or ()) if self.has_covariates else ()
        if not items:
            return None
        return Note("info", "Not computed with covariates", (BulletList(tuple(
            runs_of(f"{what} — {why}.") for what, why in items)),))

    def covariate_caution(self):
        names = _words_list([s.name for s in self.covariate_specs])
        return runs_of(f"The adjustment for {names} is sound only if the factors cannot have changed "
                       f"{'it' if len(self.covariate_specs) == 1 else 'them'}, as when a covariate is measured before "
                       "allocation to the groups; a covariate measured afterwards may carry part of the effect, and "
                       "adjusting for it then removes that part. The adjusted means describe cells at a common "
                       "covariate value, which may lie outside the values some cells actually have.")
