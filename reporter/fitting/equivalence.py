"""Equivalence claims: two one-sided tests (TOST) of ``LOW < c'mu < HIGH``.

Schuirmann (1987), "A comparison of the two one-sided tests procedure and the power approach for
assessing the equivalence of average bioavailability", Journal of Pharmacokinetics and
Biopharmaceutics 15, 657-680: the claim is supported at level alpha when both one-sided nulls
are rejected at alpha,

    H0(low):  c'mu <= LOW   against  c'mu > LOW,    t_low  = (c'ybar - LOW) / SE,   p_low  = P(T >= t_low)
    H0(high): c'mu >= HIGH  against  c'mu < HIGH,   t_high = (c'ybar - HIGH) / SE,  p_high = P(T <= t_high)

and the p of the claim is max(p_low, p_high). Equivalently, the 1 - 2*alpha interval for c'mu lies
strictly inside (LOW, HIGH) (Schuirmann 1987, section 3; Westlake 1976, Biometrics 32, 741-744).

Each one-sided test is the ordinary t test of the contrast with h = LOW or h = HIGH, computed by
:func:`reporter.fitting.linear.fit_contrast` (one path for every mean and variance: the fit's
cell means, their variances and the error df; the pivot part of c'ybar - h is exact), and the
interval is that function's two-sided interval at level 1 - 2*alpha.

The decision words: "equivalent" when the 1 - 2*alpha interval lies strictly inside the bounds
(both one-sided p < alpha); "not equivalent" when it lies strictly outside them (entirely below
LOW or entirely above HIGH: the one-sided test in the other direction rejects at alpha);
"inconclusive" otherwise, including an interval that touches a bound. A non-significant test of
difference is never read as equivalence.
"""

from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction
from typing import Sequence

from reporter.errors import FitError
from reporter.fitting.linear import ContrastTest, ModelFit, fit_contrast

__all__ = ["EQUIVALENT", "NOT_EQUIVALENT", "INCONCLUSIVE", "EquivalenceTest", "OneSided", "decide",
           "test_contrast", "tost"]

EQUIVALENT = "equivalent"
NOT_EQUIVALENT = "not equivalent"
INCONCLUSIVE = "inconclusive"


@dataclass(frozen=True)
class OneSided:
    """One of the two one-sided tests: the bound it tests against, t = (estimate − bound)/SE and its
    one-sided p in the direction of the claim."""

    bound: float
    statistic: float
    p: float


@dataclass(frozen=True)
class EquivalenceTest(ContrastTest):
    """The two one-sided tests of an equivalence claim, as a :class:`ContrastTest` whose ``p`` is
    the larger one-sided p (the decision p), ``statistic`` the t of that side, ``ci`` the
    1 − 2α interval (``ci_level`` = 1 − 2α) and ``estimate``/``se``/``df`` those of c'μ."""

    lower: OneSided | None = None
    upper: OneSided | None = None
    bounds: tuple[float, float] | None = None
    decision: str = INCONCLUSIVE


def decide(ci: tuple[float, float], bounds: tuple[float, float]) -> str:
    """The decision word from the 1 − 2α interval and the bounds (strict comparisons: an interval
    touching a bound is inconclusive, as a one-sided p equal to α does not reject)."""
    (lo, hi), (low, high) = ci, bounds
    if low < lo and hi < high:
        return EQUIVALENT
    if hi < low or lo > high:
        return NOT_EQUIVALENT
    return INCONCLUSIVE


def tost(fit: ModelFit, weights: Sequence[Sequence[Fraction]], bounds: tuple[Fraction, Fraction],
         alpha: float = 0.05) -> EquivalenceTest:
    """Two one-sided t tests of ``LOW < c'μ < HIGH`` on the fitted model (one row of weights)."""
    if len(weights) != 1:
        raise FitError("internal: an equivalence claim has one row of weights")
    if not 0.0 < alpha < 0.5:
        raise FitError(f"an equivalence test needs alpha below 0.5 (its interval has level 1 - 2·alpha); got {alpha}")
    low, high = bounds
    lower = fit_contrast(fit, weights, (Fraction(low),), "greater", alpha)
    upper = fit_contrast(fit, weights, (Fraction(high),), "less", alpha)
    middle = fit_contrast(fit, weights, (Fraction(0),), "two-sided", 2 * alpha)
    ci = (float(middle.ci[0]), float(middle.ci[1]))
    fb = (float(low), float(high))
    deciding = lower if lower.p >= upper.p else upper
    return EquivalenceTest(
        test="t",
        alternative="equivalence",
        df=middle.df,
        statistic=deciding.statistic,
        p=max(lower.p, upper.p),
        ss=middle.ss,
        q=1,
        row_estimates=middle.row_estimates,
        estimate=middle.estimate,
        se=middle.se,
        ci=ci,
        ci_sides=2,
        ci_level=1.0 - 2 * alpha,
        rhs=0.0,
        lower=OneSided(fb[0], lower.statistic, lower.p),
        upper=OneSided(fb[1], upper.statistic, upper.p),
        bounds=fb,
        decision=decide(ci, fb),
    )


def test_contrast(fit: ModelFit, contrast, alpha: float = 0.05) -> ContrastTest:
    """The test a compiled hypothesis asks for: TOST for an equivalence claim, otherwise the t or F
    test of C·μ = h. Constants in sd units must be converted first
    (:func:`reporter.model.hypotheses.in_outcome_units`)."""
    if contrast.unit != "raw":
        raise FitError("internal: a hypothesis with constants in sd units reached the test unconverted")
    if contrast.is_equivalence:
        return tost(fit, contrast.weights, contrast.bounds, alpha)
    return fit_contrast(fit, contrast.weights, contrast.rhs, contrast.alternative, alpha, contrast.test)
