"""The hypothesis language: parsing, printing, compiling and the errors people meet."""

from __future__ import annotations

from fractions import Fraction as Fr

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from reporter.errors import HypothesisError
from reporter.model.design import Factor, build_design
from reporter.model.hypotheses import (
    BinOp, Mean, Neg, Num, Statement, check_estimable, compile_effect, compile_statement, parse, unparse,
)

MEDIUM = Factor("medium", ("peat", "coir", "bark", "soil"))
DOSE = Factor("dose", ("low", "medium dose", "high"))
SEX = Factor("sex", ("f", "m"))
ONEWAY = build_design([MEDIUM], "cell-means")
TWOWAY = build_design([DOSE, SEX], "effects")


def row(c):
    return [float(w) for w in c.weights[0]]


def test_directional_statement():
    """'coir > bark' is a one-sided t with the null printed as ≤."""
    c = compile_statement(ONEWAY, "coir > bark")
    assert (c.test, c.alternative) == ("t", "greater")
    assert row(c) == [0, 1, -1, 0]
    assert c.null_text() == "coir ≤ bark" and c.alternative_text() == "coir > bark"
    c = compile_statement(ONEWAY, "coir < bark")
    assert c.alternative == "less" and c.null_text() == "coir ≥ bark"


def test_linear_combination_and_rhs():
    """Numbers are coefficients and constants: (peat + coir)/2 - 2*bark = 5."""
    c = compile_statement(ONEWAY, "(peat + coir)/2 - 2*bark = 5")
    assert c.weights == ((Fr(1, 2), Fr(1, 2), Fr(-2), Fr(0)),) and c.rhs == (Fr(5),)
    assert c.alternative_text() == "(peat + coir)/2 - 2*bark ≠ 5"


def test_chain_and_trailing_zero():
    """'a = b = c' gives two adjacent rows; '= 0' at the end adds the zero."""
    c = compile_statement(ONEWAY, "peat = coir = bark")
    assert c.test == "F" and c.q == 2
    c = compile_statement(ONEWAY, "peat = coir = 0")
    assert c.q == 2 and c.weights[1] == (0, 1, 0, 0)


def test_marginal_means_and_cells_in_two_factors():
    """A bare level is an unweighted marginal mean; mean(f=a, g=b) is one cell."""
    c = compile_statement(TWOWAY, "`medium dose` > low")
    assert row(c) == [-0.5, -0.5, 0.5, 0.5, 0, 0]  # cells: low/f low/m med/f med/m high/f high/m
    c = compile_statement(TWOWAY, "mean(dose=high, sex=f) > mean(dose=high)")
    assert row(c) == [0, 0, 0, 0, 0.5, -0.5]


def test_beta_weights_are_C_times_D():
    """The contrast over betas is L = C·D of the chosen parameterization."""
    c = compile_statement(TWOWAY, "mean(dose=high, sex=f) > low")
    np.testing.assert_allclose(c.L, c.C @ TWOWAY.matrix)


def test_effect_kronecker_three_factors():
    """'A x B' in a three-factor design: kron(diff A, diff B, averaging row of C)."""
    d = build_design([Factor("A", ("1", "2")), Factor("B", ("x", "y", "z")), Factor("C", ("u", "v"))], "cell-means")
    c = compile_effect(d, "A x B")
    dA = np.array([[1, -1]])
    dB = np.array([[1, -1, 0], [0, 1, -1]])
    avg = np.array([[0.5, 0.5]])
    np.testing.assert_allclose(c.C, np.kron(np.kron(dA, dB), avg))
    assert c.factors == ("A", "B") and c.test == "F"


def test_dependent_rows_reduced_with_note():
    """A row implied by the others is dropped, with a note."""
    c = compile_statement(ONEWAY, "peat = coir = bark = (peat + coir + bark)/3")
    assert c.q == 2 and len(c.notes) == 1 and "follows from the other rows" in c.notes[0]


# ---- bad statements ------------------------------------------------------------------------

@pytest.mark.parametrize(
    "statement, message, caret_at",
    [
        ("coir > > bark", "expected a mean, a number or '(' but found '>'", 7),
        ("coir > sand", "'sand' is not a level of any factor", 7),
        ("coir > cior", "Did you mean 'coir'?", 7),
        ("coir > coir", "compares a mean with itself", 7),
        ("coir > bark > soil", "split the chain", 5),
        ("coir > bark = soil", "mixes > or < with =", 5),
        ("coir * bark > 1", "multiplies two means", 5),
        ("coir / bark > 1", "divides by a mean", 5),
        ("2 > 1", "has no mean in it", 0),
        ("coir >= bark", "'>=' is not a relation here", 5),
        ("coir > (bark", "expected ')' but found the end", 12),
        ("coir $ bark", "unexpected character '$'", 5),
        ("mean(medum=peat) > coir", "'medum' is not a factor", 0),
        ("medium > coir", "'medium' is a factor, not a level", 0),
        ("coir = coir + 1", "differ only by a number", 7),
    ],
    ids=["double-rel", "unknown-level", "hint", "self", "chain", "mixed", "product", "quotient", "no-mean",
         "ge", "unclosed", "bad-char", "unknown-factor", "factor-as-level", "constant-difference"],
)
def test_bad_statements_have_a_caret(statement, message, caret_at):
    """Each error names the problem and puts a caret under the offending token."""
    with pytest.raises(HypothesisError) as err:
        compile_statement(ONEWAY, statement, context="hypotheses[1].means")
    text = str(err.value)
    assert message in text and text.startswith("hypotheses[1].means: ")
    lines = text.splitlines()
    assert lines[-2] == "    " + statement
    assert lines[-1].index("^") - 4 == caret_at


def test_ambiguous_bare_level():
    """A level shared by two factors must be written out; the message shows both forms."""
    d = build_design([Factor("A", ("x", "y")), Factor("B", ("x", "z"))], "cell-means")
    with pytest.raises(HypothesisError, match=r"write mean\(A=x\) or mean\(B=x\)"):
        compile_statement(d, "x > y")


def test_empty_cell_is_not_estimable():
    """A contrast that needs an empty cell is refused and names the cell."""
    c = compile_statement(TWOWAY, "mean(dose=high, sex=m) > mean(dose=low, sex=m)")
    with pytest.raises(HypothesisError, match=r"empty cell \(dose=high, sex=m\)"):
        check_estimable(c, TWOWAY, [3, 3, 3, 3, 3, 0], "hypotheses[1].means")
    ok = compile_statement(TWOWAY, "mean(dose=high, sex=f) > mean(dose=low, sex=f)")
    check_estimable(ok, TWOWAY, [3, 3, 3, 3, 3, 0])


def test_level_with_markup_is_a_quoted_name():
    """A level named <script> is just a name in backticks."""
    d = build_design([Factor("g", ("<script>", "b"))], "cell-means")
    assert row(compile_statement(d, "`<script>` > b")) == [1, -1]


# ---- properties ---------------------------------------------------------------------------

LEVELS = ["peat", "coir", "bark", "soil"]

leaf = st.one_of(
    st.sampled_from(LEVELS).map(lambda s: Mean(((None, s),))),
    st.sampled_from(LEVELS).map(lambda s: Mean((("medium", s),))),
    st.fractions(min_value=-20, max_value=20, max_denominator=8).map(lambda f: Num(abs(f))),
    st.decimals(min_value=0, max_value=5, places=2).map(lambda d: Num(Fr(d), unit="sd")),
)


def _combine(children):
    return st.one_of(
        st.tuples(st.sampled_from("+-"), children, children).map(lambda t: BinOp(t[0], t[1], t[2])),
        st.tuples(children, st.integers(1, 9)).map(lambda t: BinOp("*", Num(Fr(t[1])), t[0])),
        st.tuples(children, st.integers(1, 9)).map(lambda t: BinOp("/", t[0], Num(Fr(t[1])))),
        children.map(Neg),
    )


exprs = st.recursive(leaf, _combine, max_leaves=8)


def _forms(stmt):
    from reporter.model.hypotheses import _Evaluator

    ev = _Evaluator(ONEWAY, unparse(stmt), "")
    return [ev.eval(s) for s in stmt.sides]


@given(st.lists(exprs, min_size=2, max_size=4), st.sampled_from(["=", ">", "<"]))
@settings(max_examples=200, deadline=None)
def test_parse_print_roundtrip(sides, rel):
    """Printing a parsed statement and parsing it again gives an equivalent statement."""
    rels = (rel,) * (len(sides) - 1) if rel == "=" else (rel,)
    sides = sides if rel == "=" else sides[:2]
    stmt = Statement(tuple(sides), rels, "")
    text = unparse(stmt)
    again = parse(text)
    assert again.relations == stmt.relations
    assert _forms(again) == _forms(stmt)
    assert unparse(parse(unparse(again))) == unparse(again)


def _rowspace(C):
    C = np.asarray(C, float)
    u, s, vt = np.linalg.svd(C)
    return vt[: int((s > 1e-10).sum())]


def _same_space(C1, C2):
    P1, P2 = _rowspace(C1), _rowspace(C2)
    return P1.shape == P2.shape and np.allclose(P1.T @ P1, P2.T @ P2, atol=1e-10)


@given(st.permutations(LEVELS))
@settings(max_examples=30, deadline=None)
def test_equivalent_chains_share_a_row_space(order):
    """Any order of an equality chain, and the pairwise form, compile to one row space."""
    base = compile_statement(ONEWAY, "peat = coir = bark = soil")
    perm = compile_statement(ONEWAY, " = ".join(order))
    assert _same_space(base.C, perm.C)
    pairwise = [compile_statement(ONEWAY, f"{order[0]} = {x}").C[0] for x in order[1:]]
    assert _same_space(base.C, pairwise)


def test_three_mean_chains():
    """'a = b = c' against 'a = c = b' and against the pairwise form."""
    abc = compile_statement(ONEWAY, "peat = coir = bark").C
    acb = compile_statement(ONEWAY, "peat = bark = coir").C
    pair = np.vstack([compile_statement(ONEWAY, "peat = coir").C, compile_statement(ONEWAY, "peat = bark").C])
    assert _same_space(abc, acb) and _same_space(abc, pair)
    assert not _same_space(abc, compile_statement(ONEWAY, "peat = coir = soil").C)


@st.composite
def design_and_statement(draw):
    n_factors = draw(st.integers(1, 3))
    factors = [Factor(f"F{i}", tuple(f"L{i}{j}" for j in range(draw(st.integers(2, 3))))) for i in range(n_factors)]
    param = draw(st.sampled_from(["cell-means", "effects", "reference"]))
    levels = [lv for f in factors for lv in f.levels]
    a, b = draw(st.lists(st.sampled_from(levels), min_size=2, max_size=2, unique=True))
    w = draw(st.integers(1, 4))
    return build_design(factors, param), f"{w}*{a} - {b} > 0"


@given(design_and_statement(), st.integers(0, 2**31 - 1))
@settings(max_examples=60, deadline=None)
def test_contrast_over_betas_matches_contrast_over_means(case, seed):
    """L·beta (beta by lstsq on the row-level X) equals C·(cell means) under every coding."""
    design, text = case
    c = compile_statement(design, text)
    rng = np.random.default_rng(seed)
    n = rng.integers(1, 4, size=design.k)
    cell = np.repeat(np.arange(design.k), n)
    y = rng.normal(size=cell.size) + rng.normal(size=design.k)[cell] * 5
    beta = np.linalg.lstsq(design.matrix[cell].astype(float), y, rcond=None)[0]
    means = np.bincount(cell, weights=y) / n
    np.testing.assert_allclose(c.L @ beta, c.C @ means, atol=1e-9)
