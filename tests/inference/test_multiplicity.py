"""Tests of reporter.inference.multiplicity against statsmodels.stats.multitest (reference library)."""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.stats.multitest as multitest

from reporter.errors import FitError, PlanError
from reporter.inference.multiplicity import adjust_p


# our method name -> statsmodels multipletests method name
METHODS = {
    "holm": "holm",
    "hochberg": "simes-hochberg",
    "benjamini-hochberg": "fdr_bh",
    "bonferroni": "bonferroni",
}


def _p_vectors():
    """Seeded p-vectors: uniform, small, and rounded to two decimals so that ties occur."""
    rng = np.random.default_rng(7)
    vectors = {
        "uniform-10": rng.uniform(size=10),
        "small-25": rng.uniform(0, 0.06, size=25),
        "ties-15": np.round(rng.uniform(0, 0.1, size=15), 2),
        "single": np.array([0.03]),
        "with-0-and-1": np.array([0.0, 1.0, 0.5, 0.01, 0.01]),
    }
    assert len(np.unique(vectors["ties-15"])) < 15
    return vectors


P_VECTORS = _p_vectors()


@pytest.mark.parametrize("method", list(METHODS), ids=list(METHODS))
@pytest.mark.parametrize("case", list(P_VECTORS), ids=list(P_VECTORS))
def test_adjusted_p_values_match_statsmodels(method, case):
    """Adjusted p equal statsmodels multipletests (Holm 1979; Hochberg 1988; BH 1995; Bonferroni)."""
    p = P_VECTORS[case]
    expected = multitest.multipletests(p, method=METHODS[method])[1]
    result = adjust_p(p, method)
    assert np.allclose(result.p_adjusted, expected, rtol=1e-12, atol=1e-15)
    assert result.family_size == p.size


@pytest.mark.parametrize("method", [*METHODS, "none"], ids=[*METHODS, "none"])
def test_adjusted_p_values_are_monotone_capped_and_not_below_raw(method):
    """Adjusted p keep the order of the raw p, lie in [raw p, 1]."""
    p = np.random.default_rng(11).uniform(0, 0.3, size=30)
    adjusted = np.array(adjust_p(p, method).p_adjusted)
    order = np.argsort(p)
    assert np.all(np.diff(adjusted[order]) >= 0)
    assert np.all(adjusted <= 1.0) and np.all(adjusted >= p)


def test_missing_p_values_stay_missing_and_leave_the_family():
    """None and NaN stay None and are not counted in m (Holm on the three present values)."""
    result = adjust_p([0.01, None, 0.04, float("nan"), 0.03], "holm")
    expected = multitest.multipletests([0.01, 0.04, 0.03], method="holm")[1]
    assert result.family_size == 3
    assert result.p_adjusted[1] is None and result.p_adjusted[3] is None
    assert np.allclose([result.p_adjusted[i] for i in (0, 2, 4)], expected, rtol=1e-12)


def test_holm_is_the_default():
    """adjust_p without a method uses Holm (1979)."""
    assert adjust_p([0.01, 0.02, 0.03]).method == "holm"


def test_unknown_method_names_the_supported_values():
    """An unknown method raises PlanError listing every supported value and a close match."""
    with pytest.raises(PlanError) as info:
        adjust_p([0.01, 0.2], "holmes")
    message = str(info.value)
    for name in ("holm", "hochberg", "bonferroni", "benjamini-hochberg", "none"):
        assert repr(name) in message
    assert "Did you mean 'holm'?" in message


@pytest.mark.parametrize("bad", [1.5, 2.0, -0.1])
def test_p_values_outside_the_unit_interval_are_refused(bad):
    """A p above 1 or below 0 is not a p value: an error, not an adjusted value."""
    with pytest.raises(FitError, match="between 0 and 1"):
        adjust_p([0.2, bad])
