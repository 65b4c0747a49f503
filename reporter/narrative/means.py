"""The descriptive sections: the cell summary table and figure (“The groups”) and the unweighted
marginal means with the interaction figure (“Means by factor”)."""

from __future__ import annotations

from reporter.narrative import numbers as N
from reporter.narrative.document import Column, Figure, FigureSpec, Section, Table, runs_of
from reporter.narrative.phrases import _interval, _num


class MeansSections:
    """The groups and the means by factor."""

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
        if self.has_covariates:
            blocks.append(self.adjusted_means_table())
        fig = self.means_figure()
        if fig:
            blocks.append(fig)
        if self.has_covariates:
            blocks.append(self.adjusted_means_figure())
            blocks += self.covariate_figures()
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
        if self.has_covariates:
            table = Table("marginal-means", runs_of("Adjusted unweighted marginal means (each adjusted cell mean counted "
                                                    f"once, at {self.references_phrase(why=False)})"),
                          cols, tuple(rows), notes=(runs_of(
                              "SE and CI use the residual variance of the covariance model and the covariances of the "
                              "adjusted cell means, which share the estimated slopes."),), header_columns=2)
        else:
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
        adjusted = self.has_covariates
        traces = []
        for lt in ft.levels:
            means, lo, hi = [], [], []
            for lx in fx.levels:
                idx = [c.index for c in d.cells if c.as_dict()[ft.name] == lt and c.as_dict()[fx.name] == lx]
                if len(d.factors) == 2:
                    s = a.summaries[idx[0]]
                    mean, ci = (s.adjusted_mean, s.adjusted_ci) if adjusted else (s.mean, s.ci_pooled)
                    means.append(mean)
                    lo.append(None if ci is None else ci[0])
                    hi.append(None if ci is None else ci[1])
                else:
                    vals = [a.summaries[i].adjusted_mean if adjusted else a.summaries[i].mean for i in idx]
                    means.append(None if any(v is None for v in vals) else sum(vals) / len(vals))
                    lo.append(None)
                    hi.append(None)
            traces.append((lt, tuple(means), tuple(lo), tuple(hi)))
        spec = FigureSpec("interaction", (("x_factor", fx.name), ("x_levels", tuple(fx.levels)), ("trace_factor", ft.name),
                                          ("traces", tuple(traces)), ("y_label", self.prep.data.outcome)))
        which = "adjusted cell means" if adjusted else "cell means"
        alt = (f"Line plot of the {which} of {self.prep.data.outcome} across the levels of {fx.name}, "
               f"one line per level of {ft.name}; parallel lines would mean no interaction.")
        note = "" if len(d.factors) == 2 else " (averaged over the other factors)"
        at = f" at {self.references_phrase(why=False)}" if adjusted else ""
        return Figure("fig-interaction", runs_of(
            f"{which[0].upper() + which[1:]}{note} of {self.prep.data.outcome}{at} by {fx.name} and {ft.name}, with "
            f"{N.format_confidence_level(self.level)} confidence intervals from the pooled residual variance."), alt, spec)
