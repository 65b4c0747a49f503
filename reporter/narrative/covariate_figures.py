"""The outcome against each covariate with each cell's fitted line (the figure of raw beside
adjusted cell means lives in :mod:`reporter.narrative.covariates`).

A mixin of the report builder (:class:`reporter.narrative.build._Builder`), like the other
narrative rooms: each method returns a :class:`Figure` (spec, caption, alternative text) or
nothing when the plan has no covariates. Numbers come from the fit (``ModelFit.covariate_fit``:
slopes, reference values, adjusted means) and the analysis' cell summaries (adjusted means with
their intervals); the figure's points from :func:`reporter.inference.scatter.covariate_points`,
asked of the rows only when the figure is built.
"""

from __future__ import annotations

from reporter.inference.scatter import covariate_points
from reporter.narrative import numbers as N
from reporter.narrative.document import Figure, FigureSpec, runs_of
from reporter.narrative.phrases import _num, _words_list

POINTS_PER_CELL = 200
"""The most points the covariate figure draws per cell (DEVELOPERS.md: figures stay bounded)."""


class CovariateFigures:
    """Figures of the covariance analysis."""

    def _covariate_fit(self):
        fit = self.a.fit
        return getattr(fit, "covariate_fit", None) if getattr(fit, "has_covariates", False) else None

    def _reference_phrase(self, j: int) -> str:
        """"pretest = 20.04 (the mean of the rows used)" or "pretest = 15 (set in the plan)"."""
        specs = getattr(self.plan, "covariates", ())
        given = j < len(specs) and specs[j].adjust_to is not None
        source = "set in the plan" if given else "the mean of the rows used"
        return f"{self._covariate_names()[j]} = {_num(self._covariate_fit().reference[j])} ({source})"

    def _covariate_names(self) -> tuple[str, ...]:
        return tuple(self.a.cells.covariates.names)

    def _slopes_phrase(self, j: int) -> str:
        mode = self._covariate_fit().modes[j]
        if mode == "common":
            return "one common slope, so the lines are parallel"
        return "a separate slope in each cell"

    def covariate_figures(self) -> tuple[Figure, ...]:
        """One figure per covariate: the outcome against it in each cell, with the cell's fitted
        line over the cell's covariate range and the reference value marked."""
        cf = self._covariate_fit()
        rows = getattr(self.prep, "rows", None)
        if cf is None or rows is None:
            return ()
        d, a = self.design, self.a
        cov = a.cells.covariates
        names = tuple(cov.names)
        points = covariate_points(rows, d.k, cf.slope_matrix, cf.reference_offset, POINTS_PER_CELL)
        y0 = a.cells.pivot
        outcome = self.prep.data.outcome
        groups = tuple(c.short for c in d.cells)
        figures = []
        for j, name in enumerate(names):
            x0 = float(cov.pivot[j])
            xs, ys, lines = [], [], []
            for c, p in enumerate(points[j]):
                xs.append(tuple(v + x0 for v in p.x))
                ys.append(tuple(v + y0 for v in p.y))
                if p.n == 0:
                    lines.append(None)
                    continue
                b = float(cf.slope_matrix[c, j])
                at = float(cf.adjusted_offset_mean[c])
                r = float(cf.reference_offset[j])
                lines.append((p.low + x0, at + b * (p.low - r) + y0, p.high + x0, at + b * (p.high - r) + y0))
            spec = FigureSpec("covariate", (
                ("groups", groups), ("x", tuple(xs)), ("y", tuple(ys)), ("lines", tuple(lines)),
                ("x_label", name), ("y_label", outcome),
                ("legend_title", "cell" if self.multi else d.factors[0].name),
                ("reference", float(cf.reference[j])),
            ))
            others = [n for n in names if n != name]
            drawn = (f"{outcome} adjusted for {_words_list(others)} at {'its' if len(others) == 1 else 'their'} "
                     "reference values" if others else outcome)
            binned = [(groups[c], p.n) for c, p in enumerate(points[j]) if p.summarized]
            if binned:
                cells = _words_list([f"{g} ({N.format_count(n)} rows)" for g, n in binned])
                dots = (f" Cells of more than {POINTS_PER_CELL} rows are drawn as the means of {POINTS_PER_CELL} "
                        f"equal-width bins of {name} ({cells}): their points show the shape of the relation, "
                        "not the scatter of single observations.")
                alt_dots = (f"every observation in cells of up to {POINTS_PER_CELL} rows and bin means in larger "
                            "cells")
            else:
                dots, alt_dots = " Every observation is drawn.", "every observation"
            caption = (f"{drawn[:1].upper() + drawn[1:]} against {name} in each cell, with the cell's fitted line "
                       f"({self._slopes_phrase(j)}). The dashed line marks {self._reference_phrase(j)}, where the "
                       f"adjusted means are read.{dots}")
            alt = (f"Scatter plot of {drawn} against {name} for each of the {d.k} cells ({alt_dots}), each cell "
                   f"with its fitted straight line; " + "; ".join(
                       f"{g}: slope {_num(float(cf.slope_matrix[c, j]))}" for c, g in enumerate(groups)
                       if points[j][c].n) + ".")
            figures.append(Figure(f"fig-covariate-{j + 1}", runs_of(caption), alt, spec))
        return tuple(figures)
