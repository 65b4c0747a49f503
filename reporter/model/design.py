"""Cells, the cell-level design matrix of the full model, and what each coefficient means.

Notation (Searle, S. R. (1987), *Linear Models for Unbalanced Data*, Wiley, ch. 4 and 8):
cells c = 1..k are every combination of factor levels, in row-major order (the first factor
varies slowest). With Z the N x k cell-indicator matrix and D the k x p cell-level design of a
parameterization of the full model (all interactions), the row-level design is X = Z·D and the
cell means are mu = D·beta. When every cell is observed, D is square and invertible, so
beta = D^-1·mu: row j of D^-1 is the meaning of coefficient j as a combination of cell means.

Codings (Kutner, Nachtsheim, Neter & Li (2005), *Applied Linear Statistical Models*, 5th ed.,
sections 16.7 and 19.8, "factor effects" model):

* ``cell-means``: D = I, one coefficient per cell.
* ``effects``: sum-to-zero coding, the last listed level coded -1 in every column of its factor.
* ``reference``: indicator coding with the first listed level as the reference.

Interaction columns are products of the factors' columns (Kronecker products at cell level).

Covariates (the analysis of covariance; Searle 1987, section 9.2; Maxwell, Delaney & Kelley
(2018), *Designing Experiments and Analyzing Data*, 3rd ed., Routledge, chapter 9) add columns
after the factor columns: x − x* for a covariate with one slope common to all cells, or
(x − x*)·[row in cell c] for each cell when the slopes are per cell (Milliken & Johnson (2002),
*Analysis of Messy Data*, vol. 3, chapters 2-3). Centring at the reference value x* keeps the
meaning of every factor coefficient: the same combination of cell means, now the adjusted cell
means (the cell means at x = x*). A hypothesis about means is C·μ = h over the adjusted means,
and over all coefficients it reads L = [C·D, 0] (no weight on a slope).
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass, replace
from fractions import Fraction
from typing import Sequence

import numpy as np

from reporter.errors import PlanError


@dataclass(frozen=True)
class Factor:
    """A factor and its levels in the plan's order."""

    name: str
    levels: tuple[str, ...]


@dataclass(frozen=True)
class Cell:
    """One combination of levels, one per factor."""

    index: int
    levels: tuple[str, ...]
    factors: tuple[str, ...]

    @property
    def label(self) -> str:
        if len(self.levels) == 1:
            return self.levels[0]
        return ", ".join(f"{f}={lv}" for f, lv in zip(self.factors, self.levels))

    @property
    def short(self) -> str:
        """Levels joined by '/', for narrow table headers (factor order as in the plan)."""
        return "/".join(self.levels)

    def as_dict(self) -> dict[str, str]:
        return dict(zip(self.factors, self.levels))


@dataclass(frozen=True)
class MeanRef:
    """An unweighted mean of cell means: the cells whose levels match ``fixed``.

    ``fixed`` empty is the average of all cell means; fixing every factor is one cell.
    """

    fixed: tuple[tuple[str, str], ...]

    def weights(self, design: "Design") -> tuple[Fraction, ...]:
        match = [all(c.as_dict()[f] == lv for f, lv in self.fixed) for c in design.cells]
        count = sum(match)
        return tuple(Fraction(1, count) if m else Fraction(0) for m in match)

    def text(self, design: "Design") -> str:
        if not self.fixed:
            return "μ̄"
        if len(design.factors) == 1:
            return f"mean({self.fixed[0][1]})"
        return "mean(" + ", ".join(f"{f}={lv}" for f, lv in self.fixed) + ")"


@dataclass(frozen=True)
class Coefficient:
    """One column of the design matrix: its symbol, its label and what it estimates."""

    index: int
    symbol: str
    label: str
    term: tuple[str, ...]
    meaning: tuple[tuple[Fraction, MeanRef], ...]
    weights: tuple[Fraction, ...]

    def meaning_text(self, design: "Design") -> str:
        """The coefficient as a combination of means, e.g. ``mean(peat) − μ̄``."""
        return _combination_text(self.meaning, design)

    def meaning_words(self, design: "Design") -> str:
        """A sentence in plain words."""
        k = len(design.cells)
        parts = []
        for coef, ref in self.meaning:
            if not ref.fixed:
                noun = f"the average of the {k} cell means"
            elif len(design.factors) == 1:
                noun = f"the mean of {ref.fixed[0][1]}"
            elif len(ref.fixed) == len(design.factors):
                noun = f"the mean of the cell ({_cell_words(ref)})"
            else:
                noun = f"the unweighted mean over {_cell_words(ref)}"
            parts.append((coef, noun))
        return _combination_words(parts)


def _cell_words(ref: MeanRef) -> str:
    return ", ".join(f"{f} = {lv}" for f, lv in ref.fixed)


def _fraction_text(x: Fraction) -> str:
    return str(x.numerator) if x.denominator == 1 else f"{x.numerator}/{x.denominator}"


def _combination_text(terms, design) -> str:
    out = []
    for i, (coef, ref) in enumerate(terms):
        name = ref.text(design)
        mag = abs(coef)
        body = name if mag == 1 else f"{_fraction_text(mag)}·{name}"
        if i == 0:
            out.append(("−" if coef < 0 else "") + body)
        else:
            out.append((" − " if coef < 0 else " + ") + body)
    return "".join(out) if out else "0"


def _combination_words(parts) -> str:
    out = []
    for i, (coef, noun) in enumerate(parts):
        mag = abs(coef)
        body = noun if mag == 1 else f"{_fraction_text(mag)} × {noun}"
        if i == 0:
            out.append(("minus " if coef < 0 else "") + body)
        else:
            out.append((" minus " if coef < 0 else " plus ") + body)
    return "".join(out)


@dataclass(frozen=True)
class CovariateColumn:
    """One covariate column of the design: the slope of ``covariate`` common to all cells
    (``cell`` None) or in one cell. ``reference`` is x*, the covariate value the adjusted means are
    taken at (None: the mean of the rows used, known once the data are read)."""

    index: int
    symbol: str
    covariate: str
    cell: int | None
    reference: float | None
    label: str

    def meaning_words(self, design: "Design") -> str:
        """What the slope estimates, in plain words."""
        where = ("within a cell (common to all cells)" if self.cell is None
                 else f"within the cell ({design.cells[self.cell].label})")
        return f"change in the mean outcome per unit of {self.covariate}, {where}"

    def meaning_text(self, design: "Design") -> str:
        """The slope as a symbol-like text, e.g. ``slope of pretest`` or ``slope of pretest in (a)``."""
        return f"slope of {self.covariate}" + ("" if self.cell is None else f" in ({design.cells[self.cell].label})")

    def reference_words(self) -> str:
        """Where the adjusted means are taken for this covariate."""
        at = "its mean over the rows used" if self.reference is None else f"{self.reference:g}"
        return f"{self.covariate} = {at}"


@dataclass(frozen=True)
class IndicatorCheck:
    """Whether the design columns are plain group indicators (each beta a group mean)."""

    holds: bool
    failures: tuple[str, ...]


@dataclass(frozen=True)
class Design:
    """The cell-level design of the full model under one parameterization."""

    factors: tuple[Factor, ...]
    parameterization: str
    cells: tuple[Cell, ...]
    matrix: np.ndarray  # k x p, integer valued
    coefficients: tuple[Coefficient, ...]
    # Covariate columns after the factor columns (empty without covariates); ``matrix`` and
    # ``coefficients`` stay the factor part D, over the (adjusted) cell means.
    covariates: tuple[CovariateColumn, ...] = ()

    @property
    def shape(self) -> tuple[int, ...]:
        return tuple(len(f.levels) for f in self.factors)

    @property
    def k(self) -> int:
        return len(self.cells)

    def factor(self, name: str) -> Factor:
        for f in self.factors:
            if f.name == name:
                return f
        raise KeyError(name)

    def cell_index(self, level_codes: np.ndarray) -> np.ndarray:
        """Cell index of each row from its per-factor level indices (N x n_factors)."""
        codes = np.asarray(level_codes)
        if codes.ndim == 1:
            codes = codes[:, None]
        return np.ravel_multi_index(tuple(codes.T), self.shape)

    @property
    def n_coefficients(self) -> int:
        """Factor coefficients plus covariate slopes."""
        return len(self.coefficients) + len(self.covariates)

    def over_all_coefficients(self, L: np.ndarray) -> np.ndarray:
        """L = C·D extended by zeros over the slopes: [C·D, 0] (a hypothesis about adjusted means
        puts no weight on a slope)."""
        L = np.atleast_2d(np.asarray(L, dtype=float))
        return np.hstack([L, np.zeros((L.shape[0], len(self.covariates)))])

    def inverse(self) -> np.ndarray:
        """D^-1 as floats (rows: meaning of each coefficient over cell means)."""
        return np.array([[float(w) for w in c.weights] for c in self.coefficients])

    def estimable(self, counts: Sequence[int]) -> tuple[bool, ...]:
        """Which coefficients are estimable when some cells are empty.

        Coefficient j is estimable iff the unit vector e_j lies in the row space of the rows of
        D that belong to observed cells (Searle 1987, section 5.4).
        """
        observed = np.asarray(counts) > 0
        rows = self.matrix[observed].astype(float)
        return tuple(bool(v) for v in in_row_space(rows, np.eye(self.matrix.shape[1])))

    def check_indicator_rule(self, counts: Sequence[int] | None = None) -> IndicatorCheck:
        """The rules under which each beta is the mean of the group its column marks.

        Each column holds only 0/1, each column has at least one 1 among the observed cells, and
        each row has exactly one 1. Under these rules X'X is diagonal with the group sizes, so
        the least-squares beta of a column is the (n-weighted) mean of the rows it marks.
        """
        m = self.matrix
        observed = np.ones(self.k, bool) if counts is None else np.asarray(counts) > 0
        mo = m[observed]
        fails = []
        names = [c.symbol for c in self.coefficients]

        def some(items: list[str]) -> str:
            shown = ", ".join(items[:3])
            return shown + (f" and {len(items) - 3} more" if len(items) > 3 else "")

        bad = [names[j] for j in range(m.shape[1]) if not np.isin(m[:, j], (0, 1)).all()]
        if bad:
            fails.append("columns hold values other than 0 and 1: " + some(bad))
        empty = [names[j] for j in range(m.shape[1]) if not (mo[:, j] == 1).any()]
        if empty:
            fails.append("columns with no 1 in an observed cell: " + some(empty))
        rows = [f"({self.cells[i].label})" for i in np.flatnonzero(observed) if (m[i] == 1).sum() != 1]
        if rows:
            fails.append("cells whose row does not have exactly one 1: " + some(rows))
        return IndicatorCheck(holds=not fails, failures=tuple(fails))


def in_row_space(rows: np.ndarray, vectors: np.ndarray, tol: float = 1e-9) -> np.ndarray:
    """For each vector (row of ``vectors``), whether it lies in the row space of ``rows``."""
    vectors = np.atleast_2d(np.asarray(vectors, float))
    if rows.size == 0:
        return np.all(np.abs(vectors) < tol, axis=1)
    # Projection onto the row space via the pseudo-inverse.
    pinv = np.linalg.pinv(rows)
    proj = vectors @ pinv @ rows
    scale = np.maximum(1.0, np.abs(vectors).max(axis=1))
    return np.abs(proj - vectors).max(axis=1) <= tol * scale


def _terms(n_factors: int) -> list[tuple[int, ...]]:
    out: list[tuple[int, ...]] = [()]
    for size in range(1, n_factors + 1):
        out.extend(itertools.combinations(range(n_factors), size))
    return out


def _coding(kind: str, levels: int) -> np.ndarray:
    if kind == "effects":
        m = np.zeros((levels, levels - 1), dtype=np.int64)
        m[: levels - 1] = np.eye(levels - 1, dtype=np.int64)
        m[levels - 1] = -1
        return m
    if kind == "reference":
        m = np.zeros((levels, levels - 1), dtype=np.int64)
        m[1:] = np.eye(levels - 1, dtype=np.int64)
        return m
    raise ValueError(kind)


def build_design(factors: Sequence[Factor], parameterization: str = "cell-means") -> Design:
    """The full-model design of ``factors`` under ``parameterization``, with beta meanings."""
    factors = tuple(factors)
    if parameterization not in ("cell-means", "effects", "reference"):
        raise PlanError(
            f"'parameterization' must be one of \"cell-means\", \"effects\", "
            f"\"reference\" (got \"{parameterization}\")."
        )
    names = tuple(f.name for f in factors)
    cells = tuple(
        Cell(index=i, levels=combo, factors=names)
        for i, combo in enumerate(itertools.product(*(f.levels for f in factors)))
    )
    k = len(cells)
    if parameterization == "cell-means":
        matrix = np.eye(k, dtype=np.int64)
        coefs = []
        for c in cells:
            ref = MeanRef(tuple(zip(names, c.levels)))
            coefs.append(_coefficient(c.index, f"μ[{c.label}]", (), ((Fraction(1), ref),), cells, names))
        design = Design(factors, parameterization, cells, matrix, tuple(coefs))
        return _verified(design)

    blocks, coefs = [], []
    for term in _terms(len(factors)):
        block = np.ones((1, 1), dtype=np.int64)
        for j, f in enumerate(factors):
            part = _coding(parameterization, len(f.levels)) if j in term else np.ones((len(f.levels), 1), np.int64)
            block = np.kron(block, part)
        blocks.append(block)
        # Coded levels of each factor in the term, in the order np.kron lays out columns.
        coded = [
            (f.levels[: len(f.levels) - 1] if parameterization == "effects" else f.levels[1:])
            for j, f in enumerate(factors)
            if j in term
        ]
        for combo in itertools.product(*coded) if term else [()]:
            fixed = tuple((names[j], lv) for j, lv in zip(term, combo))
            label = " × ".join(f"{f}={lv}" for f, lv in fixed) if fixed else "intercept"
            meaning = _meaning(parameterization, factors, term, fixed)
            coefs.append(_coefficient(len(coefs), "", tuple(names[j] for j in term), meaning, cells, names, label))
    matrix = np.hstack(blocks)
    return _verified(Design(factors, parameterization, cells, matrix, tuple(coefs)))


def _coefficient(index, label_hint, term, meaning, cells, names, label=None) -> Coefficient:
    k = len(cells)
    weights = [Fraction(0)] * k
    for coef, ref in meaning:
        match = [all(dict(zip(names, c.levels))[f] == lv for f, lv in ref.fixed) for c in cells]
        cnt = sum(match)
        for i, m in enumerate(match):
            if m:
                weights[i] += coef * Fraction(1, cnt)
    return Coefficient(
        index=index,
        symbol=f"β{index}",
        label=label if label is not None else label_hint,
        term=term,
        meaning=tuple(meaning),
        weights=tuple(weights),
    )


def _meaning(parameterization, factors, term, fixed) -> tuple[tuple[Fraction, MeanRef], ...]:
    """Inclusion-exclusion form of a coefficient (derived in DEVELOPERS.md, 'beta meanings').

    Effects coding: beta_{S,l} = sum over T subset of S of (-1)^{|S|-|T|} M(T = l_T), where
    M(T = l_T) is the unweighted mean of the cells with those levels and M(empty) the average of
    all cell means (Kutner et al. 2005, eq. 19.27-19.30 for two factors).
    Reference coding: the same alternating sum over cells with the other factors at their
    reference (first) level (Kutner et al. 2005, section 16.11 / 19.8).
    """
    out: list[tuple[Fraction, MeanRef]] = []
    s = len(fixed)
    for size in range(s, -1, -1):
        for subset in itertools.combinations(range(s), size):
            sign = Fraction((-1) ** (s - size))
            chosen = {fixed[i][0]: fixed[i][1] for i in subset}
            if parameterization == "effects":
                ref = MeanRef(tuple((f.name, chosen[f.name]) for f in factors if f.name in chosen))
            else:
                ref = MeanRef(tuple((f.name, chosen.get(f.name, f.levels[0])) for f in factors))
            out.append((sign, ref))
    return tuple(out)


def _verified(design: Design) -> Design:
    """Check the stated meanings against the numerical inverse of D (they must agree)."""
    inv = np.linalg.inv(design.matrix.astype(float))
    stated = design.inverse()
    if not np.allclose(inv, stated, atol=1e-10):
        raise AssertionError("internal error: coefficient meanings disagree with D^-1")
    return design


def with_covariates(design: Design, specs) -> Design:
    """The design with covariate columns for ``specs`` (each with ``name``, ``adjust_to`` and
    ``slopes``, "common" or "per-cell"), in plan order after the factor columns."""
    cols: list[CovariateColumn] = []
    start = len(design.coefficients)
    for spec in specs:
        ref = getattr(spec, "adjust_to", None)
        cells = [None] if getattr(spec, "slopes", "common") == "common" else list(range(design.k))
        for c in cells:
            i = start + len(cols)
            label = spec.name if c is None else f"{spec.name} in ({design.cells[c].label})"
            cols.append(CovariateColumn(i, f"β{i}", spec.name, c, None if ref is None else float(ref), label))
    return replace(design, covariates=tuple(cols))


def design_from_plan(plan) -> Design:
    """The design of a validated plan (with its covariates' columns, if any)."""
    factors = tuple(Factor(f.name, f.levels) for f in plan.factors)
    design = build_design(factors, plan.analysis.parameterization)
    specs = getattr(plan, "covariates", ())
    return with_covariates(design, specs) if specs else design
