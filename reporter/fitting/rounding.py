"""How far F, t and p can move when the cell summaries they come from were rounded.

A mean written with d decimals stands for any value in [m − u, m + u], u = 0.5·10^−d, and a
spread likewise (an SD cannot fall below 0). Each cell's centred sum of squares S_c is an
increasing function of its spread (S = (n − 1)·SD², (n − 1)·variance or (n − 1)·n·SE²), so the
within-cell SS, S_E = Σ S_c, ranges exactly over [Σ S_c(low end), Σ S_c(high end)]. The data
consistent with the summaries form a box: every mean and every spread anywhere in its interval,
independently.

Every test here has the form statistic = (a function of the means only) / (a function of S_E):

* a one-row hypothesis, t = e(μ) / sqrt(S_E/df_E · Σ c_c²/n_c), where e(μ) = c'μ − h is linear.
  Over the box, e ranges exactly over e₀ ± Σ|c_c|·u_c (each mean at the end of its interval
  given by the sign of its weight), and t is monotone in e and in S_E separately, so the ends
  of t (and of |t| for a two-sided p) are attained at box corners and are exact;
* an F test (several rows, an effect, a row of the ANOVA table),
  F = SS_H(μ)/q / (S_E/df_E) with SS_H(μ) = ‖Bμ + b‖², a convex quadratic in the means:
  Bμ + b = L⁻¹(Cμ − h) with L the Cholesky factor of C·diag(1/n)·C' for a contrast (and a Type III
  row), and B = U'·diag(√n) for a Type I or II row, where U is an orthonormal basis of what the
  larger of the two nested weighted models adds to the smaller one (Searle (1987), *Linear
  Models for Unbalanced Data*, sections 4.2 and 8.5). F is smallest with the smallest SS_H and
  the largest S_E, and largest with the largest SS_H and the smallest S_E.

The extremes of SS_H over the box of means:

* **minimum**: a convex quadratic over a box, minimised by cyclic coordinate descent (each step
  the exact minimiser along one mean, clipped to its interval; Wright (2015), "Coordinate descent
  algorithms", Mathematical Programming 151, 3-34). The reported end is f(δ) − gap, with the
  Frank–Wolfe gap Σ_c (g_c·δ_c + |g_c|·u_c) (g the gradient): for a convex function this is a
  guaranteed lower bound on the minimum (Jaggi (2013), ICML, section 2), equal to it when the
  descent has converged. It costs O(k·q) per sweep, at most 200 sweeps;
* **maximum**: a convex function over a box peaks at a corner. With at most 14 free means (2^14
  corners) every corner is evaluated, which gives the exact maximum. With more, the end is the
  guaranteed upper bound f₀ + 2·Σ|g_c|·u_c + R, R = min((Σ u_c‖b_c‖)², ‖B‖₂²·Σu_c²) (the
  spectral term only while B has at most 400 rows or columns), from
  f(δ) = f₀ + 2·g'δ + ‖Bδ‖² with g = B'(Bμ₀ + b); the corner at sign(g)·u attains at least
  f₀ + 2·Σ|g_c|·u_c, so the bound overstates the true maximum by at most R, which is of second
  order in the rounding units.

What the result guarantees: every value the statistic (and its p) can take for data whose
rounded summaries are the ones given lies within [low, high]. ``exact`` says whether both ends
are also attained (True), or an end is an outer bound (False: more than 14 free means, or a
descent that stopped before its gap closed). p is monotone in the statistic at fixed df, so its
interval comes from the statistic's ends.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass
from typing import Sequence

import numpy as np

from reporter.numerics.distributions import f_sf, t_cdf, t_sf
from reporter.fitting.linear import constant_part
from reporter.intake.cells import CellStats
from reporter.model.design import Design, build_design
from reporter.model.hypotheses import effect_weights

MAX_CORNER_MEANS = 14
MAX_SWEEPS = 200
MAX_SPECTRAL = 400


@dataclass(frozen=True)
class StatisticBounds:
    """The range of one test statistic and its p over the rounding intervals of the summaries."""

    name: str
    test: str  # "t" or "F"
    statistic: float
    low: float
    high: float  # math.inf when the summaries allow a within-cell SS of 0
    p: float
    p_low: float
    p_high: float
    exact: bool


@dataclass(frozen=True)
class RoundingBounds:
    """Bounds for the ANOVA table's rows and the planned hypotheses' classical tests."""

    mean_half_unit: float
    spread_half_unit: float
    ss_within: tuple[float, float]
    anova: tuple[StatisticBounds, ...]
    hypotheses: tuple[StatisticBounds, ...]


def spread_ss_interval(n: np.ndarray, spread: np.ndarray, kind: str, half_unit: float) -> tuple[np.ndarray, np.ndarray]:
    """Per cell, the centred SS at the low and high end of the spread's rounding interval
    (a spread cannot fall below 0; cells with n = 1 have S = 0)."""
    n = np.asarray(n, dtype=float)
    s = np.asarray(spread, dtype=float)
    lo = np.maximum(s - half_unit, 0.0)
    hi = s + half_unit

    def ss(x):
        if kind == "sd":
            return (n - 1) * x * x
        if kind == "variance":
            return (n - 1) * x
        return (n - 1) * n * x * x

    single = ~(n > 1) | ~np.isfinite(s)
    return np.where(single, 0.0, ss(lo)), np.where(single, 0.0, ss(hi))


def bound_rounding(
    design: Design,
    cells: CellStats,
    spread: np.ndarray,
    spread_kind: str,
    mean_half_unit: float,
    spread_half_unit: float,
    anova,
    contrasts: Sequence,
    tests: Sequence,
) -> RoundingBounds:
    """Bounds on every ANOVA row's F and p and every hypothesis' statistic and p (see module)."""
    o = cells.observed
    n = cells.n[o].astype(float)
    mu = cells.offset_mean[o]
    u = np.full(mu.shape, float(mean_half_unit))
    ss_lo, ss_hi = spread_ss_interval(cells.n[o], np.asarray(spread)[o], spread_kind, spread_half_unit)
    sse = (math.fsum(ss_lo.tolist()), math.fsum(ss_hi.tolist()))
    dfe = cells.df_within

    rows = []
    for r in anova.rows:
        if not r.testable:
            continue
        B, b = _anova_form(design, cells, anova.ss_type, r.factors)
        rows.append(_f_bounds(r.source, B, b, mu, u, r.df, dfe, sse, r.F, r.p))
    hyps = []
    for c, t in zip(contrasts, tests):
        C = c.C[:, o]
        if getattr(c, "is_equivalence", False):
            if c.from_sd is None:  # bounds in SDs move with the SD as well; those claims are not bounded
                hyps.append(_tost_bounds(c, t, C[0], cells, n, mu, u, dfe, sse))
            continue
        const = constant_part(c.weights, c.rhs, cells.pivot_exact)
        if t.test == "t":
            hyps.append(_t_bounds(c.name, C[0], float(const[0]), n, mu, u, dfe, sse, c.alternative, t))
        else:
            B, b = _contrast_form(C, const, n)
            hyps.append(_f_bounds(c.name, B, b, mu, u, t.q, dfe, sse, t.statistic, t.p))
    return RoundingBounds(float(mean_half_unit), float(spread_half_unit), sse, tuple(rows), tuple(hyps))


# ---------------------------------------------------------------------------------------------
# The quadratic forms SS_H(μ) = ‖Bμ + b‖²


def _contrast_form(C: np.ndarray, const: np.ndarray, n: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    V = (C / n) @ C.T
    L = np.linalg.cholesky(V)
    return np.linalg.solve(L, C), np.linalg.solve(L, const)


def _anova_form(design: Design, cells: CellStats, ss_type: str, term: tuple[str, ...]):
    o = cells.observed
    if ss_type == "III":
        w = effect_weights(design, term)
        C = np.array([[float(x) for x in row] for row in w])
        return _contrast_form(C[:, o], np.zeros(C.shape[0]), cells.n[o].astype(float))
    effects = build_design(design.factors, "effects")
    names = [f.name for f in design.factors]
    terms = [t for size in range(1, len(names) + 1) for t in itertools.combinations(names, size)]
    i = terms.index(tuple(term))
    base = terms[:i] if ss_type == "I" else [t for t in terms if t != term and not set(term) <= set(t)]
    sw = np.sqrt(cells.n[o].astype(float))

    def basis(ts):
        wanted = set(ts) | {()}
        cols = [j for j, c in enumerate(effects.coefficients) if c.term in wanted]
        X = effects.matrix[:, cols].astype(float)[o] * sw[:, None]
        U, s, _ = np.linalg.svd(X, full_matrices=False)
        return U[:, : int((s > 1e-10 * s.max()).sum())]

    Q0, Q1 = basis(base), basis(base + [tuple(term)])
    R = Q1 - Q0 @ (Q0.T @ Q1)
    U, s, _ = np.linalg.svd(R, full_matrices=False)
    U = U[:, : int((s > 1e-8).sum())]
    return U.T * sw[None, :], np.zeros(U.shape[1])


# ---------------------------------------------------------------------------------------------
# Extremes over the box |δ_c| ≤ u_c


def _minimum(B: np.ndarray, r0: np.ndarray, u: np.ndarray) -> tuple[float, bool]:
    """A guaranteed lower bound on min ‖r0 + Bδ‖² over the box, and whether it is attained."""
    delta = np.zeros(B.shape[1])
    r = r0.copy()
    norms = np.einsum("ij,ij->j", B, B)
    active = np.flatnonzero((norms > 0) & (u > 0))
    f = float(r @ r)
    scale = max(f, float(np.abs(B).sum(axis=0) @ u) ** 2, np.finfo(float).tiny)
    lower = f
    for _ in range(MAX_SWEEPS):
        for c in active.tolist():
            step = -(B[:, c] @ r) / norms[c]
            new = min(max(delta[c] + step, -u[c]), u[c])
            if new != delta[c]:
                r += B[:, c] * (new - delta[c])
                delta[c] = new
        f = float(r @ r)
        g = 2.0 * (B.T @ r)
        gap = max(float(g @ delta + np.abs(g) @ u), 0.0)
        lower = max(f - gap, 0.0)
        if gap <= 1e-12 * scale:
            return lower, True
    return lower, False


def _maximum(B: np.ndarray, r0: np.ndarray, u: np.ndarray) -> tuple[float, bool]:
    """max ‖r0 + Bδ‖² over the box: exact over the corners when few, else a guaranteed bound."""
    free = np.flatnonzero((np.abs(B).sum(axis=0) > 0) & (u > 0))
    if free.size == 0:
        return float(r0 @ r0), True
    Bf, uf = B[:, free], u[free]
    if free.size <= MAX_CORNER_MEANS:
        signs = np.array(list(itertools.product((-1.0, 1.0), repeat=free.size))).T  # m x 2^m
        R = r0[:, None] + Bf @ (signs * uf[:, None])
        return float(np.einsum("ij,ij->j", R, R).max()), True
    g = Bf.T @ r0
    col = np.sqrt(np.einsum("ij,ij->j", Bf, Bf))
    rest = float(col @ uf) ** 2
    if min(Bf.shape) <= MAX_SPECTRAL:  # the spectral norm costs an SVD: only while it is small
        rest = min(rest, float(np.linalg.norm(Bf, 2)) ** 2 * float(uf @ uf))
    return float(r0 @ r0) + 2.0 * float(np.abs(g) @ uf) + rest, False


def _f_bounds(name, B, b, mu, u, q, dfe, sse, F, p) -> StatisticBounds:
    r0 = B @ mu + b
    lo_ss, lo_exact = _minimum(B, r0, u)
    hi_ss, hi_exact = _maximum(B, r0, u)
    f_lo = lo_ss / q / (sse[1] / dfe)
    f_hi = hi_ss / q / (sse[0] / dfe) if sse[0] > 0 else math.inf
    p_hi = float(f_sf(f_lo, q, dfe))
    p_lo = float(f_sf(f_hi, q, dfe)) if math.isfinite(f_hi) else 0.0
    return StatisticBounds(name, "F", float(F), f_lo, f_hi, float(p), p_lo, p_hi, lo_exact and hi_exact)


def _tost_bounds(contrast, test, c, cells, n, mu, u, dfe, sse) -> StatisticBounds:
    """An equivalence claim: each one-sided t bounded as a one-sided test against its bound; the
    decision p (the larger one) lies between the larger of the low ends and the larger of the high
    ends. The statistic's range is that of the side deciding at the reported values."""
    ends = []
    for bound, side, alternative in ((contrast.bounds[0], test.lower, "greater"),
                                     (contrast.bounds[1], test.upper, "less")):
        const = float(constant_part(contrast.weights, (bound,), cells.pivot_exact)[0])
        ends.append(_t_bounds(contrast.name, c, const, n, mu, u, dfe, sse, alternative, side))
    low, high = ends
    deciding = low if test.lower.p >= test.upper.p else high
    return StatisticBounds(contrast.name, "t", float(test.statistic), deciding.low, deciding.high, float(test.p),
                           max(low.p_low, high.p_low), max(low.p_high, high.p_high), True)


def _t_bounds(name, c, const, n, mu, u, dfe, sse, alternative, test) -> StatisticBounds:
    e0 = math.fsum([*(c * mu).tolist(), const])
    width = float(np.abs(c) @ u)
    e_lo, e_hi = e0 - width, e0 + width
    v = math.fsum((c * c / n).tolist())
    s_lo, s_hi = math.sqrt(sse[0] / dfe * v), math.sqrt(sse[1] / dfe * v)

    def ratio(e, s_small, s_large):
        if e > 0:
            return e / s_small if s_small > 0 else math.inf
        return e / s_large

    t_hi = ratio(e_hi, s_lo, s_hi)
    t_lo = -ratio(-e_lo, s_lo, s_hi)
    if alternative == "greater":
        p_lo, p_hi = float(t_sf(t_hi, dfe)), float(t_sf(t_lo, dfe))
    elif alternative == "less":
        p_lo, p_hi = float(t_cdf(t_lo, dfe)), float(t_cdf(t_hi, dfe))
    else:
        a_hi = max(abs(t_lo), abs(t_hi))
        a_lo = 0.0 if t_lo <= 0 <= t_hi else min(abs(t_lo), abs(t_hi))
        p_lo, p_hi = float(2 * t_sf(a_hi, dfe)), float(2 * t_sf(a_lo, dfe))
    return StatisticBounds(name, "t", float(test.statistic), t_lo, t_hi, float(test.p), p_lo, p_hi, True)
