"""The adaptive Gauss–Kronrod rule and the studentized range built on it."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from reporter.inference.posthoc import studentized_range_isf, studentized_range_sf
from reporter.numerics.quadrature import GAUSS, KRONROD, NODES, integrate


def test_kronrod_and_gauss_rules_are_exact_to_their_degree():
    """K15 integrates polynomials of degree <= 22 exactly on [-1, 1], G7 of degree <= 13
    (Kronrod 1965; QUADPACK, Piessens et al. 1983): ∫ x^d = 2/(d+1) for even d, 0 for odd d."""
    for d in range(24):
        exact = 2.0 / (d + 1) if d % 2 == 0 else 0.0
        assert (KRONROD * NODES**d).sum() == pytest.approx(exact, abs=1e-14)
        if d <= 13:
            assert (GAUSS * NODES**d).sum() == pytest.approx(exact, abs=1e-14)


def test_adaptive_integral_meets_its_tolerance_on_a_kink_and_a_peak():
    """∫|x| over [-1, 2] = 5/2 and ∫ of the normal density over [-9, 9] = 1 - 2 Phi(-9) (scipy)."""
    values, errors = integrate(lambda x: np.stack([np.abs(x), stats.norm.pdf(x)], axis=1), [-1.0, 2.0], 1e-12)
    assert values[0] == pytest.approx(2.5, abs=1e-12)
    values, errors = integrate(lambda x: stats.norm.pdf(x)[:, None], np.linspace(-9, 9, 5), 1e-13)
    assert values[0] == pytest.approx(1 - 2 * stats.norm.sf(9), abs=1e-13)
    assert np.all(errors <= 1e-13)


@pytest.mark.parametrize("k, df", [(2, 5), (3, 10), (4, 27), (6, 87), (10, 3), (20, 30), (5, 5000)])
def test_studentized_range_matches_scipy(k, df):
    """Upper tail and 95% quantile equal scipy.stats.studentized_range (reference library) to
    1e-8 absolute (p) and 1e-7 (quantile)."""
    q = np.array([0.3, 1.0, 2.0, 3.0, 4.0, 5.5, 8.0])
    ours = studentized_range_sf(q, k, df)
    ref = np.array([stats.studentized_range.sf(x, k, df) for x in q])
    assert ours == pytest.approx(ref, abs=1e-8)
    assert studentized_range_isf(0.05, k, df) == pytest.approx(stats.studentized_range.ppf(0.95, k, df), abs=1e-7)


def test_studentized_range_two_means_is_the_t_test():
    """With k = 2, P(Q >= q) = 2 P(T >= q / sqrt 2) (scipy.stats.t; definition)."""
    for q in (0.5, 2.0, 4.0):
        assert studentized_range_sf(q, 2, 12)[0] == pytest.approx(2 * stats.t.sf(q / math.sqrt(2), 12), abs=1e-11)


def test_studentized_range_small_tail_keeps_relative_accuracy():
    """Far in the tail the p value keeps its digits: with k = 2, 2 P(T >= q/sqrt 2) (scipy.stats.t)."""
    p = studentized_range_sf(40.0, 2, 60)[0]
    assert p == pytest.approx(2 * stats.t.sf(40 / math.sqrt(2), 60), rel=1e-7)
