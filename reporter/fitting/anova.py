"""ANOVA tables with Type I, II and III sums of squares, computed from the cell statistics.

* **Type III** ("unweighted means"): the SS of the hypothesis that the effect's contrasts of
  unweighted cell means are zero, C_A = (difference matrix of A) ⊗ (averaging rows of the other
  factors) (Searle (1987), *Linear Models for Unbalanced Data*, sections 4.9 and 8.6). It does not
  depend on the coding. It equals what other software reports as Type III only under sum-to-zero
  coding: with treatment (reference) coding, dropping a main-effect column tests the simple
  effect at the reference level of the other factors instead.
* **Type I** ("sequential"): SS(term | terms before it) in the plan's factor order, terms ordered
  by degree (A, B, A×B, ...).
* **Type II** ("adjusted for other main effects"): SS(term | every term that does not contain
  it) (Langsrud (2003), "ANOVA for unbalanced data: Use Type II instead of Type III sums of
  squares", Statistics and Computing 13, 163-167).

Types I and II compare nested models fitted to the cell means by least squares with weights n_c;
the within-cell SS is common to every model, so the cell statistics suffice
(Searle 1987, section 4.2).

With covariates (the analysis of covariance; Searle 1987, section 9.2; Maxwell, Delaney & Kelley
(2018), *Designing Experiments and Analyzing Data*, 3rd ed., chapter 9) each covariate has a row:

* Type I enters the covariates first (in plan order), then the factor terms, each adjusted for
  everything before it;
* Type II adjusts each factor term for the covariates and the terms that do not contain it, and
  each covariate for every factor term and the other covariates;
* Type III tests the factor terms as contrasts of the adjusted cell means (their covariance is
  ``ModelFit.unscaled_cov``), and a covariate by the test that its slope (all its slopes, with
  per-cell slopes) is zero.

The nested models with covariates are fitted on compressed pseudo-rows
(:func:`reporter.fitting.ancova.covariate_rss`), never on the rows.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass
from fractions import Fraction

import numpy as np

from reporter.numerics.distributions import f_sf
from reporter.fitting.ancova import covariate_rss, covariate_wald, within_block
from reporter.fitting.linear import ModelFit, fit_contrast
from reporter.model.design import Design, build_design
from reporter.model.hypotheses import effect_weights

SS_LABELS = {
    "I": "sequential",
    "II": "adjusted for other main effects",
    "III": "unweighted means",
}


@dataclass(frozen=True)
class AnovaRow:
    """One effect of the table; F and p are None when the effect is not testable.

    With empty cells a Type III row tests the estimable part of its hypothesis: ``df`` is that
    part's rank, ``df_hypothesis`` the full hypothesis's, ``tested`` its contrast rows.
    """

    source: str
    factors: tuple[str, ...]
    df: int
    ss: float | None
    ms: float | None
    F: float | None
    p: float | None
    note: str | None = None
    # Type III with empty cells: the df of the whole hypothesis, and the rows of the part that
    # was tested (over cell means), when only part of it (or none) is estimable.
    df_hypothesis: int | None = None
    tested: tuple[tuple[Fraction, ...], ...] | None = None
    # The covariate's name on a covariate row (its slope, or its per-cell slopes); None on a factor term.
    covariate: str | None = None

    @property
    def testable(self) -> bool:
        return self.F is not None


@dataclass(frozen=True)
class AnovaTable:
    """The table of one SS type, with the residual and total lines and fit summaries."""

    ss_type: str
    rows: tuple[AnovaRow, ...]
    df_error: int
    ss_error: float
    ms_error: float
    df_total: int
    ss_total: float
    r_squared: float
    residual_sd: float
    balanced: bool
    types_agree: bool
    notes: tuple[str, ...]

    @property
    def label(self) -> str:
        return f"Type {self.ss_type} ({SS_LABELS[self.ss_type]})"


def _terms(design: Design) -> list[tuple[str, ...]]:
    names = [f.name for f in design.factors]
    out = []
    for size in range(1, len(names) + 1):
        out.extend(itertools.combinations(names, size))
    return out


def _source(term: tuple[str, ...]) -> str:
    return " × ".join(term)


def _weighted_rss(columns: np.ndarray, fit: ModelFit) -> tuple[float, int]:
    """RSS between cells (Σ n_c (ȳ_c − fitted_c)²) and the rank of a cell-level model."""
    cells = fit.cells
    o = cells.observed
    w = np.sqrt(cells.n[o].astype(float))
    y = cells.offset_mean[o] - cells.grand_offset_mean
    X = columns[o] * w[:, None]
    if X.shape[1] == 0:
        r = y * w
        return math.fsum((r * r).tolist()), 0
    Q, R = np.linalg.qr(X)
    diag = np.abs(np.diag(R))
    rank = int((diag > 1e-10 * max(diag.max(), 1.0)).sum())
    if rank < X.shape[1]:
        U, s, _ = np.linalg.svd(X, full_matrices=False)
        rank = int((s > 1e-10 * s.max()).sum())
        Q = U[:, :rank]
    yw = y * w
    r = yw - Q @ (Q.T @ yw)
    return math.fsum((r * r).tolist()), rank


def _model_columns(effects: Design, terms: list[tuple[str, ...]]) -> np.ndarray:
    wanted = set(terms) | {()}
    cols = [j for j, c in enumerate(effects.coefficients) if c.term in wanted]
    return effects.matrix[:, cols].astype(float)


def _nested_rows(design: Design, fit: ModelFit, ss_type: str) -> list[AnovaRow]:
    effects = build_design(design.factors, "effects")
    terms = _terms(design)
    if fit.has_covariates:
        return _nested_rows_covariates(effects, terms, fit, ss_type)
    rows = []
    for i, term in enumerate(terms):
        if ss_type == "I":
            base = terms[:i]
        else:
            base = [t for t in terms if t != term and not set(term) <= set(t)]
        rss0, rank0 = _weighted_rss(_model_columns(effects, base), fit)
        rss1, rank1 = _weighted_rss(_model_columns(effects, base + [term]), fit)
        df = rank1 - rank0
        if df == 0:
            rows.append(AnovaRow(_source(term), term, 0, None, None, None, None,
                                 "not testable: the empty cells leave this effect no degrees of freedom"))
            continue
        ss = max(rss0 - rss1, 0.0)
        rows.append(_row(term, df, ss, fit))
    return rows


def _nested_rows_covariates(effects: Design, terms, fit: ModelFit, ss_type: str) -> list[AnovaRow]:
    """Types I and II with covariates, as differences of residual SS of nested models."""
    cf = fit.covariate_fit
    cells = fit.cells
    names = cells.covariates.names
    every = list(range(len(names)))
    block = within_block(cells, cf.modes)

    def rss(term_list, chosen):
        return covariate_rss(cells, _model_columns(effects, term_list), chosen, block, cf.reference_offset)

    def compare(smaller, larger):
        rss0, rank0 = rss(*smaller)
        rss1, rank1 = rss(*larger)
        return rank1 - rank0, max(rss0 - rss1, 0.0)

    rows = []
    for j, name in enumerate(names):
        if ss_type == "I":
            df, ss = compare(([], every[:j]), ([], every[: j + 1]))
        else:
            df, ss = compare((terms, [i for i in every if i != j]), (terms, every))
        rows.append(_covariate_row(name, df, ss, fit))
    for i, term in enumerate(terms):
        base = terms[:i] if ss_type == "I" else [t for t in terms if t != term and not set(term) <= set(t)]
        df, ss = compare((base, every), (base + [term], every))
        if df == 0:
            rows.append(AnovaRow(_source(term), term, 0, None, None, None, None,
                                 "not testable: the empty cells leave this effect no degrees of freedom"))
            continue
        rows.append(_row(term, df, ss, fit))
    return rows


def _covariate_row(name: str, df: int, ss: float, fit: ModelFit) -> AnovaRow:
    if df == 0:
        return AnovaRow(name, (), 0, None, None, None, None,
                        "not testable: the covariate adds no degrees of freedom here", covariate=name)
    ms = ss / df
    F = ms / fit.mse
    return AnovaRow(name, (), df, ss, ms, F, float(f_sf(F, df, fit.df_error)), covariate=name)


def _covariate_rows_type3(fit: ModelFit) -> list[AnovaRow]:
    """Each covariate's slope test (all its slopes when they are per cell)."""
    rows = []
    for j, name in enumerate(fit.cells.covariates.names):
        ss, df = covariate_wald(fit.covariate_fit, j, fit.mse)
        rows.append(_covariate_row(name, df, ss, fit))
    return rows


def _row(term, df, ss, fit, note=None, **extra) -> AnovaRow:
    ms = ss / df
    F = ms / fit.mse
    return AnovaRow(_source(term), term, df, ss, ms, F, float(f_sf(F, df, fit.df_error)), note, **extra)


def _rref(m: np.ndarray, tol: float) -> np.ndarray:
    """Reduced row echelon form of a float matrix (Gauss–Jordan with partial pivoting)."""
    m = m.copy()
    rank = 0
    for c in range(m.shape[1]):
        if rank == m.shape[0]:
            break
        p = rank + int(np.argmax(np.abs(m[rank:, c])))
        if abs(m[p, c]) <= tol:
            continue
        m[[rank, p]] = m[[p, rank]]
        m[rank] /= m[rank, c]
        others = np.arange(m.shape[0]) != rank
        m[others] -= np.outer(m[others, c], m[rank])
        m[others, c] = 0.0
        rank += 1
    return m[:rank]


def _rational(row: np.ndarray) -> tuple[Fraction, ...]:
    """The row as exact fractions: recovered rationals (denominators up to 10^6) when they match the
    floats to 1e-12, scaled to coprime integers with a positive leading entry; otherwise the floats
    with one entry corrected so that the exact sum is 0 (effect contrasts sum to zero)."""
    snapped = [Fraction(float(x)).limit_denominator(10**6) for x in row]
    if all(abs(float(f) - x) <= 1e-12 * max(1.0, float(np.max(np.abs(row)))) for f, x in zip(snapped, row)):
        lcm = 1
        for f in snapped:
            lcm = lcm * f.denominator // math.gcd(lcm, f.denominator)
        ints = [int(f * lcm) for f in snapped]
        g = 0
        for v in ints:
            g = math.gcd(g, v)
        g = g if next(v for v in ints if v != 0) > 0 else -g
        return tuple(Fraction(v, g) for v in ints)
    exact = [Fraction(float(x)) for x in row]
    j = int(np.argmax(np.abs(row)))
    exact[j] -= sum(exact, Fraction(0))
    return tuple(exact)


def estimable_part(C, empty) -> tuple[tuple[Fraction, ...], ...]:
    """A basis of the rows of C's row space that put no weight on the ``empty`` cells.

    A contrast a'C is estimable from the observed cells exactly when (a'C)_e = 0 for every empty
    cell e, i.e. a lies in the left null space of C_E (C_E: the columns of the empty cells). The
    number of rows returned is the rank of that part, the degrees of freedom of the testable part.
    (In the cell-means model a linear function of the cell means is estimable exactly when it
    gives no weight to an empty cell; Searle 1987, *Linear Models for Unbalanced Data*, on data
    with some cells empty.) The null space comes from an SVD; the rows are put in reduced echelon
    form and recovered as exact rationals (coprime integers), so the hypothesis stated and tested
    is exact and its weights sum to zero exactly.
    """
    if not empty:
        return tuple(tuple(Fraction(x) for x in row) for row in C)
    Cf = np.array([[float(x) for x in row] for row in C])
    scale = float(np.max(np.abs(Cf)))
    tol = 1e-10 * scale * max(Cf.shape)
    u, sv, _ = np.linalg.svd(Cf[:, list(empty)], full_matrices=True)
    A = u[:, int(np.sum(sv > tol)):]
    if A.shape[1] == 0:
        return ()
    part = _rref(A.T @ Cf, tol)
    part[np.abs(part) <= tol] = 0.0
    part[:, list(empty)] = 0.0
    return tuple(_rational(r) for r in part)


def _describe_row(row, design: Design) -> str:
    terms = []
    for w, cell in zip(row, design.cells):
        if w == 0:
            continue
        size = abs(w)
        coef = "" if size == 1 else f"{size}·"
        sign = "−" if w < 0 else "+"
        terms.append((sign, f"{coef}μ({cell.short})"))
    text = ("−" if terms[0][0] == "−" else "") + terms[0][1]
    for sign, t in terms[1:]:
        text += f" {sign} {t}"
    return text + " = 0"


def _type3_rows(design: Design, fit: ModelFit) -> list[AnovaRow]:
    rows = _covariate_rows_type3(fit) if fit.has_covariates else []
    empty = [int(c) for c in np.flatnonzero(~fit.cells.observed)]
    for term in _terms(design):
        C = effect_weights(design, term)
        needed = [e for e in empty if any(r[e] != 0 for r in C)]
        if not needed:
            res = fit_contrast(fit, C, [0] * len(C), test="F")
            rows.append(_row(term, len(C), res.ss, fit))
            continue
        cells_text = ", ".join(f"({design.cells[e].label})" for e in needed[:4]) + (" …" if len(needed) > 4 else "")
        part = estimable_part(C, needed)
        if not part:
            rows.append(AnovaRow(_source(term), term, 0, None, None, None, None,
                                 f"not testable as unweighted means: every contrast of this effect needs the empty "
                                 f"cell(s) {cells_text}, so none of its {len(C)} df can be tested",
                                 df_hypothesis=len(C), tested=()))
            continue
        res = fit_contrast(fit, part, [0] * len(part), test="F")
        shown = "; ".join(_describe_row(r, design) for r in part[:3]) + (" …" if len(part) > 3 else "")
        note = (f"partly testable: the empty cell(s) {cells_text} leave {len(part)} of the effect's {len(C)} df "
                f"estimable, and only that part was tested ({shown}); the remaining {len(C) - len(part)} df "
                f"{'needs' if len(C) - len(part) == 1 else 'need'} the empty cell(s) and could not be tested")
        rows.append(_row(term, len(part), res.ss, fit, note, df_hypothesis=len(C), tested=part))
    return rows


def fit_anova(design: Design, fit: ModelFit, ss_type: str = "III") -> AnovaTable:
    """The ANOVA table of the given SS type, and whether the three types agree here."""
    tables = {t: (_type3_rows(design, fit) if t == "III" else _nested_rows(design, fit, t)) for t in ("I", "II", "III")}
    rows = tables[ss_type]
    n = fit.cells.n
    balanced = bool(np.all(n == n[0]) and n[0] > 0)
    agree = _agree(tables)
    notes = []
    if fit.has_covariates:
        notes.append("With covariates, the factor rows are about the adjusted means; Type I enters the covariates "
                     "first, then the factor terms.")
        if not agree:
            notes.append(f"Types I, II and III differ here; the table uses Type {ss_type} ({SS_LABELS[ss_type]}).")
        if fit.slopes_note:
            notes.append(fit.slopes_note)
    elif len(design.factors) == 1:
        notes.append("With one factor, Types I, II and III are the same test.")
    elif balanced:
        notes.append("The design is balanced (equal n in every cell), so Types I, II and III agree.")
    elif agree:
        notes.append("Types I, II and III agree for these data.")
    else:
        notes.append(
            "The design is unbalanced, so Types I, II and III differ; the table uses Type "
            f"{ss_type} ({SS_LABELS[ss_type]})."
        )
    if not agree and ss_type != "III":
        notes.append(
            "Hypotheses written as effect = \"...\" always test unweighted means (Type III), "
            "so their F can differ from this table's row for the same effect."
        )
    if any(not r.testable for r in rows):
        notes.append("Some effects are not testable because cells are empty; see the row notes.")
    if any(r.testable and r.df_hypothesis is not None for r in rows):
        notes.append("Some effects are tested only in the part the observed cells can estimate, with fewer df; "
                     "see the row notes.")
    return AnovaTable(
        ss_type=ss_type,
        rows=tuple(rows),
        df_error=fit.df_error,
        ss_error=fit.ss_error,
        ms_error=fit.mse,
        df_total=fit.cells.n_total - 1,
        ss_total=fit.ss_total,
        r_squared=fit.r_squared,
        residual_sd=fit.residual_sd,
        balanced=balanced,
        types_agree=agree,
        notes=tuple(notes),
    )


def _agree(tables) -> bool:
    base = tables["III"]
    for other in (tables["I"], tables["II"]):
        for a, b in zip(base, other):
            if a.ss is None or b.ss is None:
                if (a.ss is None) != (b.ss is None):
                    return False
                continue
            if a.df != b.df or not math.isclose(a.ss, b.ss, rel_tol=1e-9, abs_tol=1e-12 * (1 + abs(a.ss))):
                return False
    return True
