"""Property-based fuzzing of the plan loader, the statement parser and the outcome reader.

Whatever text or TOML values arrive, only the project's own errors (:class:`ReporterError` and
its subclasses) may escape: never a RecursionError, a KeyError, a TypeError, an OverflowError or
a hang. Example counts are set explicitly (2,950 in all) and the runs are derandomized so that CI
sees the same inputs every time.
"""

from __future__ import annotations

import copy
import datetime as dt
import string

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from reporter.errors import ReporterError
from reporter.intake.plan import load_plan, plan_from_dict
from reporter.model.design import Factor, build_design
from reporter.model.hypotheses import compile_effect, compile_statement, parse, unparse

FUZZ = settings(
    deadline=None,
    derandomize=True,
    database=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture],
)

BASE = {
    "title": "Fuzzed plan",
    "summary": "A plan whose fields are replaced one at a time.",
    "data": {"path": "d.csv", "outcome": "y", "missing": ["", "NA"]},
    "factors": [
        {"name": "dose", "levels": ["low", "mid", "high"]},
        {"name": "site", "levels": ["north", "south"], "exclude": ["east"]},
    ],
    "analysis": {"alpha": 0.05, "correction": "holm", "permutations": 100, "seed": 1},
    "hypotheses": [
        {"name": "h1", "means": "high > low", "role": "planned"},
        {"name": "h2", "effect": "dose x site", "description": "interaction"},
    ],
    "study": {"allocation": "random"},
}

# Every place in the plan a value can sit: (path of keys and indices).
FIELDS = [
    ("title",), ("summary",), ("data",), ("data", "path"), ("data", "outcome"), ("data", "missing"),
    ("data", "delimiter"), ("data", "decimal"), ("factors",), ("factors", 0), ("factors", 0, "name"),
    ("factors", 0, "levels"), ("factors", 0, "levels", 1), ("factors", 1, "exclude"), ("factors", 1, "column"),
    ("analysis",), ("analysis", "alpha"), ("analysis", "correction"), ("analysis", "permutations"),
    ("analysis", "seed"), ("analysis", "unequal_variances"), ("hypotheses",), ("hypotheses", 0),
    ("hypotheses", 0, "name"), ("hypotheses", 0, "means"), ("hypotheses", 1, "effect"), ("hypotheses", 0, "role"),
    ("hypotheses", 1, "description"), ("study",), ("study", "allocation"), ("unknown_key",),
]
# Keys of [analysis] that name options (read from the defaults, so renamed keys are fuzzed too).
from reporter.intake.defaults import ANALYSIS_DEFAULTS  # noqa: E402

FIELDS += [("analysis", key) for key in ANALYSIS_DEFAULTS]

toml_scalars = st.one_of(
    st.text(max_size=40),
    st.sampled_from(["", " ", "NA", "low", "high", "cells", "dose", "dose x site", "a:b", "IV", "III", "1e400",
                     "low > high", "`x`", "all-pairs", "holm", "effects", "type-III", "sum-to-zero"]),
    st.integers(min_value=-(2**63), max_value=2**63 - 1),
    st.floats(allow_nan=True, allow_infinity=True),
    st.booleans(),
    st.datetimes(min_value=dt.datetime(1, 1, 1), max_value=dt.datetime(9999, 12, 31)),
    st.dates(),
    st.times(),
)
toml_values = st.recursive(
    toml_scalars,
    lambda inner: st.one_of(
        st.lists(inner, max_size=5),
        st.dictionaries(st.text(string.ascii_letters + "_", min_size=1, max_size=10), inner, max_size=4),
    ),
    max_leaves=12,
)


def _set(doc, path, value):
    target = doc
    for key in path[:-1]:
        target = target[key]
    target[path[-1]] = value


@settings(FUZZ, max_examples=900)
@given(field=st.sampled_from(FIELDS), value=toml_values)
def test_plan_loader_with_any_toml_value_in_any_field(field, value):
    """Any TOML value in any field: a valid plan, or a ReporterError."""
    doc = copy.deepcopy(BASE)
    _set(doc, field, value)
    try:
        plan_from_dict(doc, base_dir="/nonexistent", source="fuzz.toml")
    except ReporterError:
        pass


@settings(FUZZ, max_examples=300)
@given(doc=st.dictionaries(st.text(max_size=12), toml_values, max_size=6))
def test_plan_loader_with_any_document(doc):
    """Any mapping of TOML values as a whole plan."""
    try:
        plan_from_dict(doc, base_dir="/nonexistent", source="fuzz.toml")
    except ReporterError:
        pass


TOML_PIECES = st.sampled_from(
    ["[", "]", "{", "}", "[[hypotheses]]", "[data]", "[[factors]]", "[analysis]", "=", '"', "'", '"""', "'''",
     "\n", "#", ",", "title", "path", "levels", "name", "means", "1e400", "0x10", "inf", "nan", "1_000",
     "\\", "\\u0000", "\x00", "é", "\ufeff", "2026-12-02", "true"]
)


@settings(FUZZ, max_examples=500)
@given(text=st.one_of(st.text(max_size=300), st.lists(TOML_PIECES, max_size=60).map("".join)))
def test_plan_loader_with_any_text(tmp_path, text):
    """Any text as a plan file, read through load_plan from disk (one file, overwritten)."""
    path = tmp_path / "plan.toml"
    path.write_text(text, encoding="utf-8", errors="surrogatepass") if _encodable(text) else path.write_bytes(
        text.encode("utf-8", "replace"))
    try:
        load_plan(path)
    except ReporterError:
        pass


def _encodable(text: str) -> bool:
    try:
        text.encode("utf-8")
    except UnicodeEncodeError:
        return False
    return True


DESIGN = build_design(
    [Factor("dose", ("low", "mid", "high-dose")), Factor("site", ("north", "south"))], "cell-means"
)
STATEMENT_PIECES = st.sampled_from(
    ["low", "mid", "`high-dose`", "high-dose", "north", "south", "dose", "site", "mean", "(", ")", ",", "=",
     ">", "<", "+", "-", "*", "/", "2", "0.5", "1e400", "1e-400", "0", "1e999999999", "１", "1_0", "`", " ",
     "mean(dose=low)", "mean(dose=low, site=north)", "−", "≥", "==", "9" * 50]
)


@settings(FUZZ, max_examples=700)
@given(text=st.one_of(st.text(max_size=200), st.lists(STATEMENT_PIECES, max_size=80).map(" ".join),
                      st.lists(STATEMENT_PIECES, max_size=80).map("".join)))
def test_statement_parser_with_any_text(text):
    """Any text as a statement: parsed, printed back and compiled, or a ReporterError."""
    try:
        stmt = parse(text, "fuzz")
    except ReporterError:
        return
    parse(unparse(stmt))  # what is printed parses again
    try:
        c = compile_statement(DESIGN, text, "h", context="fuzz")
    except ReporterError:
        return
    assert np.isfinite(c.C).all() and np.isfinite(c.L).all()
    c.null_text(), c.alternative_text()


@settings(FUZZ, max_examples=250)
@given(text=st.one_of(st.text(max_size=60), st.lists(STATEMENT_PIECES | st.sampled_from(["x", "×", ":"]),
                                                     max_size=8).map(" ".join)))
def test_effect_parser_with_any_text(text):
    """Any text as an effect."""
    try:
        compile_effect(DESIGN, text, "e", context="fuzz")
    except ReporterError:
        pass


@settings(FUZZ, max_examples=300)
@given(values=st.lists(st.one_of(st.text(max_size=30), st.sampled_from(
    ["1e308", "-1e308", "1e400", "1e-400", "inf", "NaN", "NA", "1_000", "１２", "0x10", "1e999999999", "٣",
     "12.5", "-3", "1e-3", ".5", "5.", "+7", "1e200", "-1e200", "1e-80"])), min_size=2, max_size=12))
def test_outcome_reader_with_any_text(values):
    """Any texts in the outcome column: read into finite offsets, or a DataError."""
    from reporter.intake.data import _read_outcome
    from reporter.intake.plan import DataSpec, FactorSpec, Plan

    plan = Plan(title="t", data=DataSpec(path="d.csv", outcome="y"),  # type: ignore[arg-type]
                factors=(FactorSpec("f", ("a", "b")),), hypotheses=())
    keep = np.ones(len(values), dtype=bool)
    try:
        y, status, pivot, _, _ = _read_outcome(np.asarray(values, dtype=object), plan, keep, "d.csv")
    except ReporterError:
        return
    ok = status == 0
    assert np.isfinite(y[ok]).all() and np.isfinite(pivot)
