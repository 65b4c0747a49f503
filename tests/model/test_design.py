"""Design matrices of the three parameterizations and the meaning of each coefficient."""

from __future__ import annotations

from fractions import Fraction as Fr

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from reporter.model.design import Factor, build_design

MEDIUM = Factor("medium", ("peat", "coir", "bark", "soil"))
A = Factor("A", ("a1", "a2"))
B = Factor("B", ("b1", "b2", "b3"))


def test_oneway_effects_meanings_by_hand():
    """Effects coding, 4 levels: beta0 = average of the 4 means, beta_j = mean(level j) - that average.

    Derivation: mu_j = b0 + b_j (j = 1..3) and mu_4 = b0 - b1 - b2 - b3; summing the four
    equations gives b0 = (mu_1 + ... + mu_4)/4, hence b_j = mu_j - b0 (Kutner et al. 2005, sec. 16.7).
    """
    d = build_design([MEDIUM], "effects")
    q = Fr(1, 4)
    assert d.coefficients[0].weights == (q, q, q, q)
    assert d.coefficients[1].weights == (1 - q, -q, -q, -q)
    assert d.coefficients[3].weights == (-q, -q, 1 - q, -q)
    assert d.coefficients[0].meaning_words(d) == "the average of the 4 cell means"
    assert d.coefficients[1].meaning_text(d) == "mean(peat) − μ̄"


def test_oneway_reference_meanings_by_hand():
    """Reference coding: beta0 = mean(peat), beta_j = mean(level j) - mean(peat) (mu_1 = b0, mu_j = b0 + b_j)."""
    d = build_design([MEDIUM], "reference")
    assert d.coefficients[0].weights == (1, 0, 0, 0)
    assert d.coefficients[2].weights == (-1, 0, 1, 0)
    assert d.coefficients[2].meaning_text(d) == "mean(bark) − mean(peat)"


def test_two_by_three_effects_meanings_by_hand():
    """2 x 3 effects coding: interaction beta = mu_11 - M(a1) - M(b1) + grand average.

    Derivation: with sum-to-zero constraints, mu_ij = mu + alpha_i + beta_j + (ab)_ij, where
    mu is the average of the 6 cell means, alpha_1 = M(a1) - mu, beta_1 = M(b1) - mu and
    (ab)_11 = mu_11 - M(a1) - M(b1) + mu (Kutner et al. 2005, eq. 19.27-19.30).
    Cells in order a1b1 a1b2 a1b3 a2b1 a2b2 a2b3.
    """
    d = build_design([A, B], "effects")
    by_label = {c.label: c.weights for c in d.coefficients}
    s = Fr(1, 6)
    assert by_label["A=a1"] == tuple(Fr(1, 3) - s if i < 3 else -s for i in range(6))
    assert by_label["B=b1"] == (Fr(1, 2) - s, -s, -s, Fr(1, 2) - s, -s, -s)
    inter = by_label["A=a1 × B=b1"]
    expected = [Fr(0)] * 6
    expected[0] += 1
    for i in range(3):
        expected[i] -= Fr(1, 3)
    for i in (0, 3):
        expected[i] -= Fr(1, 2)
    expected = [e + s for e in expected]
    assert inter == tuple(expected)


def test_two_by_three_reference_meanings_by_hand():
    """2 x 3 reference coding: interaction beta = mu_22 - mu_21 - mu_12 + mu_11 (a difference of differences)."""
    d = build_design([A, B], "reference")
    by_label = {c.label: c.weights for c in d.coefficients}
    assert by_label["intercept"] == (1, 0, 0, 0, 0, 0)
    assert by_label["A=a2"] == (-1, 0, 0, 1, 0, 0)
    assert by_label["A=a2 × B=b2"] == (1, -1, 0, -1, 1, 0)


def test_indicator_rule():
    """Only cell-means coding is a plain indicator coding; the others name the rule they break."""
    assert build_design([A, B], "cell-means").check_indicator_rule().holds
    eff = build_design([A, B], "effects").check_indicator_rule()
    assert not eff.holds and any("other than 0 and 1" in f for f in eff.failures)
    ref = build_design([A, B], "reference").check_indicator_rule()
    assert not ref.holds and any("exactly one 1" in f for f in ref.failures)


def test_empty_cell_estimability():
    """With an empty cell, reference-coded betas that do not involve it stay estimable."""
    d = build_design([A, B], "reference")
    counts = [5, 5, 5, 5, 5, 0]  # a2b3 empty
    est = dict(zip((c.label for c in d.coefficients), d.estimable(counts)))
    assert est["intercept"] and est["A=a2"] and est["B=b2"] and est["A=a2 × B=b2"]
    assert not est["A=a2 × B=b3"]
    assert all(build_design([A, B], "cell-means").estimable(counts)[:5])
    assert not build_design([A, B], "cell-means").estimable(counts)[5]


@st.composite
def designs(draw):
    n_factors = draw(st.integers(1, 3))
    factors = [Factor(f"F{i}", tuple(f"l{j}" for j in range(draw(st.integers(2, 3))))) for i in range(n_factors)]
    param = draw(st.sampled_from(["cell-means", "effects", "reference"]))
    return factors, param


@given(designs(), st.integers(0, 2**31 - 1))
@settings(max_examples=60, deadline=None)
def test_betas_from_rows_equal_meanings(spec, seed):
    """Betas fitted by lstsq on the row-level X = Z·D equal D^-1 applied to the cell means."""
    factors, param = spec
    d = build_design(factors, param)
    rng = np.random.default_rng(seed)
    n = rng.integers(1, 5, size=d.k)
    cell = np.repeat(np.arange(d.k), n)
    y = rng.normal(size=cell.size) * 3 + cell
    X = d.matrix[cell].astype(float)
    beta = np.linalg.lstsq(X, y, rcond=None)[0]
    means = np.bincount(cell, weights=y) / n
    np.testing.assert_allclose(d.inverse() @ means, beta, atol=1e-9)


@pytest.mark.parametrize("param", ["cell-means", "effects", "reference"])
def test_design_is_square_and_full_rank(param):
    """The full model has one coefficient per cell under every parameterization."""
    d = build_design([A, B, Factor("C", ("c1", "c2"))], param)
    assert d.matrix.shape == (12, 12) and np.linalg.matrix_rank(d.matrix) == 12


def test_design_from_plan_lists_covariate_slopes(tmp_path):
    """A plan's [[covariates]] become slope columns after the factor columns: one per covariate
    with common slopes, one per cell with per-cell slopes, each with its meaning in words and its
    reference value (definition of the analysis-of-covariance model, Searle 1987, section 9.2);
    the factor part D and its closed-form meanings are unchanged."""
    from reporter.intake.plan import load_plan
    from reporter.model.design import design_from_plan

    (tmp_path / "d.csv").write_text("g,y,pre,age\na,1,2,3\nb,2,3,4\n")
    (tmp_path / "plan.toml").write_text(
        'title = "t"\n[data]\npath = "d.csv"\noutcome = "y"\n[[factors]]\nname = "g"\nlevels = ["a", "b"]\n'
        '[[covariates]]\nname = "pre"\n[[covariates]]\nname = "age"\nadjust_to = 40\nslopes = "per-cell"\n'
        '[[hypotheses]]\nname = "h"\nmeans = "a = b"\n')
    plan = load_plan(tmp_path / "plan.toml")
    design = design_from_plan(plan)
    plain = build_design(design.factors, design.parameterization)
    assert np.array_equal(design.matrix, plain.matrix) and design.coefficients == plain.coefficients
    cols = design.covariates
    assert [(c.symbol, c.covariate, c.cell, c.reference) for c in cols] == [
        ("β2", "pre", None, None), ("β3", "age", 0, 40.0), ("β4", "age", 1, 40.0)]
    assert cols[0].meaning_words(design).endswith("within a cell (common to all cells)")
    assert cols[2].meaning_words(design) == "change in the mean outcome per unit of age, within the cell (b)"
    assert cols[0].reference_words() == "pre = its mean over the rows used" and cols[1].reference_words() == "age = 40"
    assert design.n_coefficients == 5
