"""The report's opening: the summary under the title and the Methods section (design, sample, model,
hypotheses, error rates, how assumptions were checked, study details, software)."""

from __future__ import annotations

from reporter.narrative import equivalence as E
from reporter.narrative import numbers as N
from reporter.narrative.document import BulletList, DefinitionList, Paragraph, Section, runs_of
from reporter.narrative.phrases import (
    CORRECTION_NAMES, PARAM_WORDS, SS_WHY, _NUMBER_WORDS, _count_noun, _count_words, _lead, _unquote, _words_list,
)


class SummaryMethods:
    """The summary and the Methods section."""

    def summary(self) -> tuple[Paragraph, ...]:
        a, plan = self.a, self.plan
        planned = [h for h in a.hypotheses if h.family == "planned"]
        supported = [h for h in planned if self.decision_p(h) < self.alpha]
        text = (plan.summary.strip() + " ") if plan.summary else ""
        text += (f"This report analyses {N.format_count(self.prep.data.n)} observations of "
                 f"{self.prep.data.outcome} in {self.design_phrase()}"
                 + (f", adjusted for {_words_list([s.name for s in self.covariate_specs])}. " if self.has_covariates
                    else ". "))
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
        if self.has_covariates:
            agree = self.covariate_types_words()
        blocks.append(Paragraph(runs_of(f"The ANOVA table uses {why}.{agree}")))
        blocks.extend(self.covariate_methods())

        planned = [h for h in a.hypotheses if h.family == "planned"]
        explor = [h for h in a.hypotheses if h.family == "exploratory"]
        if a.hypotheses:
            items = []
            for h in a.hypotheses:
                c = h.contrast
                kind = E.test_kind(c)
                items.append(runs_of(f"{h.contrast.name} ({h.family}; {kind}). Null hypothesis: {_unquote(c.null_text())}"))
            blocks.append(Paragraph(_lead("Hypotheses",
                f"The plan states {_count_words(len(planned), 'planned hypothesis', 'planned hypotheses')}"
                f" (the confirmatory family) and {_count_words(len(explor), 'exploratory one', 'exploratory ones')}:")))
            blocks.append(BulletList(tuple(items)))
        corr = a.hypotheses[0].correction if a.hypotheses else plan.analysis.correction
        blocks.append(Paragraph(_lead("Error rates",
            f"Every test used α = {N.format_bounded(self.alpha, 2)}. Directional hypotheses "
            "(written with > or <) were tested one-sided, in the stated direction; the others two-sided. "
            + ("Equivalence claims (LOW < contrast < HIGH) were tested by two one-sided tests, each at α, with the "
               f"{N.format_confidence_level(1 - 2 * self.alpha)} interval (1 − 2α) and the larger one-sided p as the "
               "claim's p (Schuirmann, 1987). " if any(h.contrast.is_equivalence for h in a.hypotheses) else "")
            + 
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
        if self.has_covariates:
            words += (" The robust versions do not assume equal variances: a t test for a one-row contrast and a Wald F "
                      f"test otherwise, both with heteroscedasticity-consistent (HC3) standard errors{where}. Welch's "
                      "tests are not defined for adjusted means. With covariates every check runs on the residuals "
                      "of the covariance analysis, and the homogeneity of the slopes across cells is tested as the "
                      "cell × covariate interaction.")
        else:
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
    def data_source_words(self, lower: bool = False) -> str:
        """'The data file NAME', or 'The data given in Python' when there is no file."""
        words = ("The data given in Python" if self.prov.data_format == "dataframe"
                 else f"The data file {self.prov.data_file}")
        return words[0].lower() + words[1:] if lower else words
