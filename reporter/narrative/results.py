"""The results: the analysis-of-variance table with effect sizes, the smallest detectable effects,
one sentence per hypothesis, and the cautions on reading them."""

from __future__ import annotations

from reporter.narrative import equivalence as E
from reporter.narrative import numbers as N
from reporter.narrative.document import BulletList, Column, Note, Paragraph, Section, Table, runs_of
from reporter.narrative.phrases import _interval, _num


class ResultsSections:
    """The ANOVA table, the results sentences and the cautions."""

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
        what = "covariance" if self.has_covariates else "variance"
        table = Table("anova", runs_of(f"Analysis of {what} of {self.prep.data.outcome}"), cols, tuple(rows),
                      notes=tuple(notes))
        blocks = [table]
        if self.has_covariates and self.a.fit.slopes:
            blocks.append(self.slopes_table())
        power = self.sensitivity_table()
        if power:
            blocks.append(power)
        eq_power = E.power_table(list(enumerate(self.a.hypotheses, start=1)), self.alpha)
        if eq_power:
            blocks.append(eq_power)
        return Section("anova", f"Analysis of {what}", tuple(blocks))

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
        numbered = list(enumerate(self.a.hypotheses, start=1))
        for block in (E.equivalence_table(numbered, self.alpha, self.prep.data.outcome),
                      E.equivalence_figure(numbered, self.alpha, self.prep.data.outcome)):
            if block is not None:
                paras.append(block)
        return Section("results", "Results", tuple(paras))

    def result_sentence(self, h):
        c, t = h.contrast, h.test
        sig = self.decision_p(h) < self.alpha
        lead = f"{c.name}: "
        if c.kind == "effect":
            means = f"unweighted {self.adjusted_word}means"
            claim = (f"the {means} differed" if sig else f"the data did not show clear differences among the {means}")
            if len(c.factors) > 1:
                claim = ("the data indicate an interaction" if sig else "the data did not show a clear interaction")
        elif c.is_equivalence:
            claim = E.result_claim(h, self.alpha)
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
                    "which effects remain compatible with the data. Only a stated equivalence claim, supported by its "
                    "two one-sided tests, shows that a difference is too small to matter."),
            runs_of("The tests assume independent observations, residuals close to normal and, for the classical "
                    "tests, equal variances across cells; the checks above say how well these hold here."),
            runs_of("Exploratory hypotheses were not part of the confirmatory family; treat them as suggestions "
                    "for future studies."),
            *((self.covariate_caution(),) if self.has_covariates else ()),
            runs_of("Where these results inform decisions about people (clinical, educational, personnel or legal), "
                    "have them reviewed by a qualified statistician and follow the review rules that apply locally."),
        ]
        return Section("cautions", "Reading these results with care",
                       (Note("caution", "Before drawing conclusions", (BulletList(tuple(items)),)),))
