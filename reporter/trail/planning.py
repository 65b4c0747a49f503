"""A-priori power: the equal cell size each planned test needs at the plan's smallest effect.

The ``[planning]`` table names the smallest effect of interest (:class:`~reporter.intake.plan.PlanningSpec`).

* F tests (an ``effect`` hypothesis, or a statement of several rows): Cohen's f with noncentrality
  ``lambda = f**2 * N`` and df = (q, N - k) for q rows and k cells (Cohen 1988, Statistical Power
  Analysis for the Behavioral Sciences, 2nd ed., ch. 8), solved by
  :func:`reporter.inference.power.solve_cell_size`.
* t tests (a statement of one row c'mu = h): d is the departure c'mu - h divided by the within-cell
  SD sigma, the contrast's value as the statement writes it. With n observations in each of the k
  cells the estimate has SE sigma*sqrt(sum(c_i**2)/n), so the t statistic is noncentral t with
  df = k(n - 1) and noncentrality ``delta = d * sqrt(n / sum(c_i**2))`` (Cohen 1988, ch. 2, for
  two groups, where sum(c_i**2) = 2; the general contrast as in Maxwell, Delaney & Kelley 2018,
  Designing Experiments and Analyzing Data, 3rd ed., ch. 4). Power is P(T' > t_crit) for a
  directional test at level alpha and P(|T'| > t_crit) with t_crit at alpha/2 for a two-sided one.

* equivalence claims (``LOW < c'mu < HIGH``): the exact power of the two one-sided tests at a true
  difference of 0 (:func:`reporter.inference.power.tost_power`, Phillips 1990, Journal of
  Pharmacokinetics and Biopharmaceutics 18, 137-144), with the bounds in residual SDs as written
  (``0.3 sd``) or, for bounds in the outcome's units, divided by ``assumed_sd``.

Each n is the smallest whole cell size whose power reaches the target; power rises with n, so
the search doubles n until the target is reached and then bisects.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from reporter.inference.effectsizes import noncentral_t_cdf
from reporter.inference.power import smallest_cell_size, solve_cell_size, tost_cell_size, tost_power
from reporter.numerics.distributions import t_isf

__all__ = ["PowerRow", "a_priori_power", "contrast_power", "contrast_cell_size"]

#: The largest cell size searched; a smaller effect needs more than any study could gather.
MAX_CELL_SIZE = 10**9


@dataclass(frozen=True)
class PowerRow:
    """The cell size one hypothesis needs for each of ``powers`` (None where it cannot be said,
    with ``reason``). ``effect_kind`` is "f" (F test) or "d" (t test); ``achieved`` is the power
    at each ``n_per_cell``."""

    name: str
    test: str
    sides: int
    df1: int
    effect_kind: str
    effect: float | None
    powers: tuple[float, ...]
    n_per_cell: tuple[int | None, ...]
    achieved: tuple[float | None, ...]
    reason: str = ""
    # An equivalence claim (test "TOST", effect_kind "bounds"): LOW and HIGH in residual SDs and the
    # true difference the power is computed at.
    bounds: tuple[float, float] | None = None
    true_difference: float | None = None


def contrast_power(d: float, sum_sq: float, n: int, k: int, alpha: float, sides: int) -> float:
    """Power of the t test of one contrast (weights with sum of squares ``sum_sq``) at standardized
    departure ``d``, with ``n`` observations in each of ``k`` cells."""
    df = k * (n - 1)
    delta = d * math.sqrt(n / sum_sq)
    if sides == 1:
        crit = float(t_isf(alpha, df))
        return 1.0 - noncentral_t_cdf(crit, df, delta)
    crit = float(t_isf(alpha / 2, df))
    return 1.0 - noncentral_t_cdf(crit, df, delta) + noncentral_t_cdf(-crit, df, delta)


def contrast_cell_size(d: float, sum_sq: float, k: int, alpha: float, power: float, sides: int) -> int | None:
    """The smallest equal cell size n >= 2 giving the contrast's t test ``power``; None beyond
    :data:`MAX_CELL_SIZE`."""

    def enough(n: int) -> bool:
        return contrast_power(d, sum_sq, n, k, alpha, sides) >= power

    return smallest_cell_size(enough, MAX_CELL_SIZE)


def a_priori_power(plan, design, contrasts) -> tuple[PowerRow, ...]:
    """One :class:`PowerRow` per planned hypothesis; empty without a ``[planning]`` table."""
    spec = plan.planning
    if spec is None:
        return ()
    alpha, k = plan.analysis.alpha, design.k
    out = []
    for c in contrasts:
        if c.role != "planned":
            continue
        sides = 1 if c.alternative not in ("two-sided", "equivalence") else 2
        if c.is_equivalence:
            out.append(_equivalence_row(c, spec, k, alpha))
            continue
        if c.test == "F" or c.q > 1:
            f = spec.smallest_effect_f
            if f is None:
                out.append(_missing(c, "f", spec.powers, sides, "the plan gives no smallest_effect_f"))
                continue
            sizes = [solve_cell_size(f, c.q, k, alpha, p) for p in spec.powers]
            out.append(PowerRow(c.name, "F", sides, c.q, "f", f, spec.powers,
                                tuple(s.n_per_cell for s in sizes), tuple(s.achieved_power for s in sizes)))
            continue
        d = spec.contrast_d
        if d is None:
            out.append(_missing(c, "d", spec.powers, sides,
                                "the plan gives no smallest_effect_d (or smallest_difference with assumed_sd)"))
            continue
        sum_sq = float(sum(w * w for w in c.weights[0]))
        ns = tuple(contrast_cell_size(d, sum_sq, k, alpha, p, sides) for p in spec.powers)
        achieved = tuple(None if n is None else contrast_power(d, sum_sq, n, k, alpha, sides) for n in ns)
        reason = "" if None not in ns else f"more than {MAX_CELL_SIZE:,} per cell"
        out.append(PowerRow(c.name, "t", sides, 1, "d", d, spec.powers, ns, achieved, reason))
    return tuple(out)


def _equivalence_row(c, spec, k: int, alpha: float) -> PowerRow:
    """The cell sizes the two one-sided tests of an equivalence claim need, at a true difference of 0."""
    if c.unit == "sd":
        low, high = float(c.bounds[0]), float(c.bounds[1])
    elif spec.assumed_sd:
        low, high = float(c.bounds[0]) / spec.assumed_sd, float(c.bounds[1]) / spec.assumed_sd
    else:
        return PowerRow(c.name, "TOST", 2, 1, "bounds", None, spec.powers, tuple(None for _ in spec.powers),
                        tuple(None for _ in spec.powers),
                        "the bounds are in the outcome's units and the plan gives no assumed_sd", None, 0.0)
    sum_sq = float(sum(w * w for w in c.weights[0]))
    ns = tuple(tost_cell_size(low, high, sum_sq, k, alpha, p) for p in spec.powers)
    achieved = tuple(None if n is None else tost_power(low, high, math.sqrt(sum_sq / n), k * (n - 1), alpha)
                     for n in ns)
    reason = ""
    if None in ns:
        reason = (f"more than {MAX_CELL_SIZE:,} per cell" if low < 0 < high else
                  "a true difference of 0 lies outside the bounds, so the power never exceeds alpha")
    return PowerRow(c.name, "TOST", 2, 1, "bounds", None, spec.powers, ns, achieved, reason, (low, high), 0.0)


def _missing(c, kind: str, powers, sides: int, reason: str) -> PowerRow:
    return PowerRow(c.name, "F" if kind == "f" else "t", sides, c.q, kind, None, powers,
                    tuple(None for _ in powers), tuple(None for _ in powers), reason)
