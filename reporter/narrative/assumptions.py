"""Assumptions and robustness: the variance, normality and outlier checks with their figures, the
classical and robust tests side by side, distribution-free tests, the outlier sensitivity table and
the follow-up families."""

from __future__ import annotations

from reporter.inference.permutation import SEQUENTIAL_EXCEEDANCES
from reporter.narrative import numbers as N
from reporter.narrative.document import Column, DefinitionList, Figure, FigureSpec, Paragraph, Section, Table, runs_of
from reporter.narrative.phrases import _interval, _num, _rows_phrase


# Outlier rows listed in the report (results.json lists up to the scan's limit).
OUTLIERS_SHOWN = 20
# Below this many rows in the smallest cell the report warns that the variance tests have little
# power (common practice, no source).
SMALL_CELL = 30


POSTHOC_METHOD_NOTES = {
    "versus-control": "Adjusted p values and the critical value come from Dunnett's (1955) distribution, "
                      "computed by deterministic numerical integration (adaptive Gauss–Kronrod quadrature over "
                      "the normal and chi variables), accurate to better than 1e-8.",
    "all-pairs": "Adjusted p values and the critical value come from the studentized range distribution, computed "
                 "by deterministic numerical integration (adaptive Gauss–Kronrod quadrature), accurate to better "
                 "than 1e-8.",
}
POSTHOC_METHOD_NOTES["games-howell"] = POSTHOC_METHOD_NOTES["all-pairs"]


class AssumptionSections:
    """The section “Checking the assumptions”."""

    def smallest_cell(self) -> int:
        """Rows in the smallest observed cell."""
        n = self.a.cells.n
        return int(n[n > 0].min()) if (n > 0).any() else 0

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
        items += self.slopes_check_items(a)
        blocks.append(DefinitionList(tuple(items)))
        blocks += self.slopes_check_blocks(a)
        if a.unavailable:
            verdict = f"Residual checks, variance checks and the outlier screen are {a.unavailable}."
        elif a.heterogeneous:
            verdict = ("The Brown–Forsythe test indicates unequal variances across cells; compare the classical and "
                       "robust results below.")
        elif self.smallest_cell() < SMALL_CELL:
            verdict = ("The Brown–Forsythe test does not indicate unequal variances; with small cells such a test has "
                       "little power, so the robust results are shown beside the classical ones in any case.")
        else:
            verdict = ("The Brown–Forsythe test does not indicate unequal variances; the robust results are shown "
                       "beside the classical ones in any case.")
        blocks.append(Paragraph(runs_of(verdict)))
        if a.qq is not None:
            blocks.append(self.qq_figure())
        if self.a.points is not None and not self.has_covariates:  # the points are outcomes, not ANCOVA residuals
            blocks.append(self.residual_figure())
        blocks.append(self.robust_table())
        other = self.distribution_free()
        if other:
            blocks.append(other)
        ruled_out = self.not_computed_note()
        if ruled_out:
            blocks.append(ruled_out)
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
        short = {"Welch–Satterthwaite t": "Welch", "Welch's ANOVA": "Welch", "HC3 Wald F": "HC3", "HC3 t": "HC3"}
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
        if self.has_covariates:
            note = [runs_of("Robust versions: HC3 = heteroscedasticity-consistent (HC3) t for a one-row contrast or Wald "
                            "F otherwise, on the adjusted means. All p values unadjusted.")]
        else:
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
        if kw is None and self.inf.kruskal_note and self.prep.data.summary is None and not self.has_covariates:
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
