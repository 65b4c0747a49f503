"""Each hypothesis tested: its statement, null and alternative in symbols and in words, the
confirmatory test (classical or robust) with its estimate and effect size, and the reading of the result."""

from __future__ import annotations

from reporter.narrative import equivalence as E
from reporter.narrative import numbers as N
from reporter.narrative.document import DefinitionList, Paragraph, Section, runs_of
from reporter.narrative.matrices import contrast_tables
from reporter.narrative.phrases import CORRECTION_NAMES, CORRECTION_SHORT, POLICY_KEY, _lead, _num, _unquote


class HypothesisSections:
    """The section “Hypotheses tested”, one block per hypothesis."""

    def hypothesis_block(self, i: int, h) -> Section:
        c, t, d = h.contrast, h.test, self.design
        blocks = []
        blocks.append(Paragraph(runs_of("Statement in the plan: ", c.statement if c.kind == "means" else f'effect = "{c.statement}"'), "small"))
        blocks.append(Paragraph(runs_of("H0: ", _unquote(c.null_text())), "symbols"))
        blocks.append(Paragraph(runs_of("H1: ", _unquote(c.alternative_text())), "symbols"))
        if getattr(self.prep, "lock", None) is not None and c.name in self.prep.lock.added:
            blocks.append(Paragraph(runs_of("Added after the plan was locked: tested as exploratory."), "small"))
        blocks.append(Paragraph(runs_of(self.hypothesis_words(h))))
        margin = E.margin_words(h)
        if margin:
            blocks.append(Paragraph(runs_of(margin)))
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
        if c.is_equivalence:
            items += E.equivalence_items(h, self.alpha)
        elif t.test == "t":
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
        name = {"HC3 Wald F": "the HC3 Wald test", "HC3 t": "the HC3 t test", "Welch–Satterthwaite t": "the Welch–Satterthwaite test",
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
            "HC3 t": runs_of(
                ", a ", N.symbol("t"), " test of the contrast with a heteroscedasticity-consistent standard error of type "
                "HC3: the variance of the estimate comes from each row's own residual (enlarged for its leverage) "
                "instead of from one variance pooled over all cells, so it stays valid when the cells' variances "
                "differ (MacKinnon & White, 1985; Long & Ervin, 2000)."),
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
        if c.is_equivalence:
            return E.words(h, self.prep.data.outcome)
        if c.kind == "effect":
            if len(c.factors) == 1:
                return (f"In words: the null hypothesis is that the unweighted {self.adjusted_word}mean of "
                        f"{self.prep.data.outcome} is the "
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
        if c.is_equivalence:
            return E.decision_reading(h, self.alpha, adj, h.family == "exploratory")
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
                return f"all unweighted {self.adjusted_word}means of {c.factors[0]} are equal"
            return f"there is no {' × '.join(c.factors)} interaction"
        return _unquote(c.null_text())

    def hypotheses_section(self) -> Section:
        subs = tuple(self.hypothesis_block(i, h) for i, h in enumerate(self.a.hypotheses, start=1))
        intro = Paragraph(runs_of(
            "Each hypothesis below is shown as written in the plan, as the null and alternative it implies, "
            "as a contrast over the cell means and over the model's coefficients, and with its test."
            + (f" Every mean in them is an adjusted mean: the cell mean at {self.references_phrase(why=False)}."
               if self.has_covariates else "")))
        if not subs:
            intro = Paragraph(runs_of("The plan states no hypothesis."))
        return Section("hypotheses", "Hypotheses tested", (intro,), subs)
