"""The report of an ANOVA already fitted with statsmodels: :func:`from_statsmodels`.

A least-squares fit of categorical factors (an OLS results object made from a formula by
``statsmodels.formula.api.ols``) holds everything a plan needs: the outcome, the factors and their
levels (in the order the formula's design gives them), the contrast coding of each factor and the
rows it used. :func:`read_fit` recovers them and refuses, each with one message, what the report
cannot reproduce: weights, continuous covariates, terms that are not categorical factors, a model
without every interaction (the report always fits the full factorial model), a fit that is not
ordinary least squares or that keeps no formula. :func:`from_statsmodels` then fits the same rows
through this package and checks that the residual sum of squares agrees with the fit's.

Why the residual SS is the check: a model of categorical factors with every interaction spans the
cell-indicator space, whatever the coding, so its least-squares fit is the vector of cell means
and its residual SS is the within-cell SS (Searle, S. R. (1987), *Linear Models for Unbalanced
Data*, Wiley, sections 4.2 and 8.1). Two fits that used the same rows and the same cells agree on
it to rounding; a difference means the rows or the cells were read back wrongly.

Codings (Kutner, Nachtsheim, Neter & Li (2005), *Applied Linear Statistical Models*, 5th ed.,
sections 16.7, 16.11 and 19.8): a factor coded by indicator columns that leave out one reference
level is the report's ``reference-level`` coding with that level listed first; a factor coded by
columns that sum to zero over its levels, one level coded -1 throughout, is ``sum-to-zero`` with
that level listed last. A coding of one factor by one indicator per level (a model without an
intercept) is ``cell-means``. Other codings (orthogonal polynomials, Helmert, ...) have no
counterpart; the report then uses ``cell-means`` and says so. Tests of hypotheses and the ANOVA
table do not depend on the coding; only the meaning of the printed coefficients does.
"""

from __future__ import annotations

import ast
import itertools
import math
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Mapping

import numpy as np

from reporter.errors import FittedModelError, ReporterError

if TYPE_CHECKING:  # pragma: no cover
    from reporter.api import Report

# The residual SS of the refit must agree with the fit's to this relative difference.
SSR_RELATIVE_TOLERANCE = 1e-8

_HOW_TO_FIT = 'statsmodels.formula.api.ols("outcome ~ C(a) * C(b)", data=frame).fit()'


@dataclass(frozen=True)
class FitFactor:
    """A factor recovered from the fit: its name (the data column), the term that codes it in the
    formula, its levels in the report's order, and the coding its contrast matrices show."""

    name: str
    term: str
    levels: tuple[str, ...]
    coding: str  # "reference", "sum", "indicator" or "other"
    special: str | None  # the reference level ("reference") or the level coded -1 ("sum")
    description: str  # the coding in words, for the note
    moved: bool = False  # the special level was moved from the fit's order to the report's place


@dataclass(frozen=True)
class FitStructure:
    """What a fitted model says about the analysis: outcome, factors, rows and coding.

    ``frame`` holds exactly the rows the fit used: the outcome as fitted and each factor's level
    as text. ``coding`` is the plan's coding value that gives the fit's coefficient meanings
    ("cell-means" when none does, with a note in ``notes``).
    """

    formula: str
    outcome: str
    factors: tuple[FitFactor, ...]
    frame: Any  # pandas.DataFrame
    coding: str
    notes: tuple[str, ...]
    ssr: float
    nobs: int
    rows_dropped: int = 0
    empty_cells: int = 0

    @property
    def levels(self) -> dict[str, tuple[str, ...]]:
        return {f.name: f.levels for f in self.factors}


def from_statsmodels(
    fit: Any,
    hypotheses: Mapping[str, str | Mapping[str, Any]] | None = None,
    **analysis_options: Any,
) -> "Report":
    """The report of an ANOVA fitted with ``statsmodels.formula.api.ols``.

    ``hypotheses`` maps a name to a statement, as in :func:`reporter.analyze` (an effect is
    ``{"effect": "dose x sex"}``); without it, the report tests each effect of the full factorial
    model. Factors are named by their data columns (``C(dose, Sum)`` is the factor ``dose``) and
    levels by their values as text (``C(mg)`` with values 5 and 10 has levels ``5`` and ``10``). ``analysis_options`` are the keywords of :func:`reporter.analyze` beyond the data, the
    outcome and the factors: the plan's ``[analysis]`` options, ``title``, ``summary``, ``study``.
    ``coding`` defaults to the coding of the fit (see the module notes). The plan's summary
    names the formula, the rows used and any note on the coding, after the summary given.

    Returns the same :class:`reporter.api.Report` as :func:`reporter.report`; raises
    :class:`~reporter.errors.FittedModelError` for a fit the report cannot reproduce.
    """
    from reporter.api import analyze

    structure = read_fit(fit)
    taken = [k for k in ("data", "outcome", "factors") if k in analysis_options]
    if taken:
        raise FittedModelError(
            f"from_statsmodels: {', '.join(taken)} {'is' if len(taken) == 1 else 'are'} read from "
            f"the fit (outcome {structure.outcome!r}, factors "
            f"{', '.join(repr(f.name) for f in structure.factors)}); leave "
            f"{'it' if len(taken) == 1 else 'them'} out, or call reporter.analyze on a data frame."
        )
    options = dict(analysis_options)
    options.setdefault("coding", structure.coding)
    given = options.pop("summary", None)
    options["summary"] = " ".join(t for t in (given, fit_summary(structure)) if t)
    if hypotheses is None:
        hypotheses = default_hypotheses(structure)
    try:
        report = analyze(
            structure.frame,
            outcome=structure.outcome,
            factors=structure.levels,
            hypotheses=hypotheses,
            **options,
        )
    except ReporterError as exc:  # the message names the function the user called
        raise type(exc)(str(exc).replace("analyze(): ", "from_statsmodels(): ", 1)) from None
    check_residual_ss(structure, residual_ss(report))
    return report


def fit_summary(structure: FitStructure) -> str:
    """Where the analysis comes from, in words: the formula, the rows used, the notes."""
    dropped = (f", leaving out {structure.rows_dropped} with a missing value"
               if structure.rows_dropped else "")
    formula = structure.formula if len(structure.formula) <= 300 else structure.formula[:299] + "…"
    words = [f"The model was fitted by ordinary least squares from the formula "
             f"{formula} on {structure.nobs} rows{dropped}; this report refits it."]
    words.extend(structure.notes)
    return " ".join(words)


def default_hypotheses(structure: FitStructure) -> dict[str, dict[str, str]]:
    """One omnibus test per effect of the full factorial model, main effects first; none when
    a cell is empty (an effect over unweighted means then needs a mean that has no data)."""
    if structure.empty_cells:
        return {}
    names = [f.name for f in structure.factors]
    out: dict[str, dict[str, str]] = {}
    for size in range(1, len(names) + 1):
        for combo in itertools.combinations(names, size):
            out[" x ".join(combo)] = {"effect": " x ".join(_quoted(n) for n in combo)}
    return out


def _quoted(name: str) -> str:
    return name if name.isidentifier() else f"`{name}`"


def residual_ss(report: Any) -> float:
    """The residual SS of the report's full model (the ANOVA table's residual row)."""
    return float(report.analysis.anova.ss_error)


def check_residual_ss(structure: FitStructure, ours: float) -> None:
    """Refuse when this package's residual SS of the recovered rows and cells differs from the
    fit's by more than :data:`SSR_RELATIVE_TOLERANCE` (relative)."""
    theirs = structure.ssr
    scale = max(abs(theirs), abs(ours))
    if abs(ours - theirs) > SSR_RELATIVE_TOLERANCE * scale:
        raise FittedModelError(
            f"from_statsmodels: the fit's residual sum of squares is {theirs!r} but the report's "
            f"refit of the same {structure.nobs} rows and cells gives {ours!r} (relative "
            f"difference {abs(ours - theirs) / scale:.3g}, more than {SSR_RELATIVE_TOLERANCE:g}). "
            "The rows or levels read back from the fit do not reproduce it; check that the data "
            "frame the fit was made from has not been changed since, and refit it."
        )


# ---------------------------------------------------------------------------------------------
# Reading the fit


def read_fit(fit: Any) -> FitStructure:
    """Recover outcome, factors, levels, coding and rows from an OLS fit made from a formula,
    or refuse it with one :class:`FittedModelError` that says what to do instead."""
    results, model = _ols_results(fit)
    spec = _formula_design(model)
    outcome = _column_name(str(model.endog_names))
    factors_in_order, intercept = _categorical_terms(spec, model)
    names = [_factor_name(f.code) for f in factors_in_order]
    _check_names(names, factors_in_order, outcome)
    _check_full_factorial(spec, factors_in_order, intercept, outcome)
    frame_all = _data_frame(model)
    missing = np.asarray(getattr(model.data, "missing_row_idx", None) or [], dtype=np.int64)
    keep = np.ones(len(frame_all), dtype=bool)
    keep[missing] = False
    nobs = int(model.nobs)
    if int(keep.sum()) != nobs:
        raise FittedModelError(
            f"from_statsmodels: the fit used {nobs} rows but its data frame has {int(keep.sum())} "
            "rows without missing values; the rows it used cannot be told apart. Refit with "
            f"{_HOW_TO_FIT} on a frame without the unused rows."
        )
    codings = [_factor_coding(spec, f) for f in factors_in_order]
    codes = []
    factors = []
    level_notes: list[str] = []
    for fac, name, (kind, special, words) in zip(factors_in_order, names, codings):
        categories = tuple(spec.factor_infos[fac].categories)
        code = _level_codes(fac, spec, frame_all)[keep]
        if (code < 0).any():
            raise FittedModelError(
                f"from_statsmodels: {int((code < 0).sum())} of the rows the fit used hold a value of "
                f"{fac.code} that is not among its levels; the fit's data frame was changed after "
                "the fit. Refit it on the frame as it is now."
            )
        texts = _level_texts(name, categories)
        present = np.bincount(code, minlength=len(categories)) > 0
        order = [i for i in _report_order(len(categories), kind, special) if present[i]]
        position = np.full(len(categories), -1, dtype=np.int64)
        position[order] = np.arange(len(order))
        codes.append(position[code])
        unused = [texts[i] for i in range(len(categories)) if not present[i]]
        if unused:
            level_notes.append(
                f"{name}: the level{'s' if len(unused) > 1 else ''} {', '.join(unused)} of the fit's "
                "design ha" + ("ve" if len(unused) > 1 else "s") + " no rows and is left out."
            )
        factors.append(
            FitFactor(
                name=name,
                term=fac.code,
                levels=tuple(texts[i] for i in order),
                coding=kind,
                special=None if special is None else texts[special],
                description=words,
                moved=order != sorted(order),
            )
        )
    for f in factors:
        if len(f.levels) < 2:
            raise FittedModelError(
                f"from_statsmodels: factor {f.name!r} ({f.term}) has a single level, "
                f"{f.levels[0]!r}, in the rows the fit used; a factor needs at least two levels to "
                "be compared. Drop it from the formula and refit."
            )
    y = np.asarray(model.endog, dtype=np.float64)
    sizes = [len(f.levels) for f in factors]
    counts = np.bincount(np.ravel_multi_index(tuple(codes), tuple(sizes)), minlength=math.prod(sizes))
    _check_design_rows(np.asarray(model.exog), codes, sizes)
    coding, notes = _plan_coding(factors, intercept, spec)
    notes.extend(level_notes)
    empty = int((counts == 0).sum())
    if empty:
        notes.append(
            f"{empty} of the {counts.size} cells have no rows, so no effect is tested as a hypothesis "
            "unless one is given; the ANOVA table tests what the observed cells can estimate."
        )
    cov_type = str(getattr(results, "cov_type", "nonrobust"))
    if cov_type != "nonrobust":
        notes.append(
            f"The fit's standard errors are of type {cov_type}; the report's classical tests use the "
            "pooled within-cell variance, and unequal_variances=\"always-robust\" makes its "
            "heteroscedasticity-consistent (HC3) and Welch-type tests the confirmatory ones."
        )
    frame = _used_rows(outcome, y, factors, codes)
    return FitStructure(
        formula=str(model.formula),
        outcome=outcome,
        factors=tuple(factors),
        frame=frame,
        coding=coding,
        notes=tuple(notes),
        ssr=float(results.ssr),
        nobs=nobs,
        rows_dropped=int(missing.size),
        empty_cells=empty,
    )


def _ols_results(fit: Any):
    """The results object and its model, when ``fit`` is an OLS fit; refuse anything else."""
    module = type(fit).__module__ or ""
    if not module.startswith("statsmodels"):
        raise FittedModelError(
            f"from_statsmodels takes the result of a statsmodels least-squares fit (got a "
            f"{type(fit).__name__}). Fit the model first, e.g. {_HOW_TO_FIT}, and pass what .fit() "
            "returns; for a data frame without a fit, use reporter.analyze."
        )
    from statsmodels.base.model import Model
    from statsmodels.regression.linear_model import GLS, OLS, WLS, RegressionResults

    if isinstance(fit, Model):
        raise FittedModelError(
            f"from_statsmodels takes a fitted model, not the model itself (got a {type(fit).__name__} "
            "model that has not been fitted). Pass what .fit() returns, e.g. "
            f"{_HOW_TO_FIT}."
        )
    results = getattr(fit, "_results", fit)
    model = getattr(results, "model", None)
    kind = type(model).__name__ if model is not None else type(results).__name__
    if isinstance(model, (WLS, GLS)) and not isinstance(model, OLS):
        raise FittedModelError(
            f"from_statsmodels: the fit is a {kind} fit, with weights or an error covariance; the "
            "report's tests give every row the same weight and assume independent errors, so they "
            "would not be the tests of this fit. Refit with statsmodels.formula.api.ols and no "
            "weights; for unequal variances across cells, pass unequal_variances=\"always-robust\" "
            "(Welch-type tests) instead."
        )
    if not isinstance(model, OLS):
        raise FittedModelError(
            f"from_statsmodels takes an ordinary least-squares fit (statsmodels OLS); this is a "
            f"{kind} fit, whose estimates and tests are not those of an ANOVA. Refit with "
            f"{_HOW_TO_FIT}."
        )
    if not isinstance(results, RegressionResults):
        raise FittedModelError(
            f"from_statsmodels: the fit is a {type(results).__name__}, a penalized or otherwise "
            "modified least-squares fit, not the ordinary one the report reproduces. Pass what "
            f".fit() returns, e.g. {_HOW_TO_FIT}."
        )
    weights = np.asarray(getattr(model, "weights", 1.0), dtype=np.float64)
    if weights.size and not np.all(weights == 1.0):
        raise FittedModelError(
            "from_statsmodels: the fit carries weights that are not all 1; the report's tests give "
            "every row the same weight. Refit with statsmodels.formula.api.ols and no weights."
        )
    return results, model


def _formula_design(model):
    """The formula's design description (patsy's DesignInfo), or a refusal."""
    spec = getattr(model.data, "model_spec", None) or getattr(model.data, "design_info", None)
    formula = getattr(model, "formula", None)
    if spec is None or formula is None:
        raise FittedModelError(
            "from_statsmodels: the fit was made from arrays, not from a formula, so the factors and "
            "their levels cannot be read back from it. Fit with a formula naming each factor, e.g. "
            f"{_HOW_TO_FIT}."
        )
    if not hasattr(spec, "factor_infos") or not hasattr(spec, "term_codings"):
        raise FittedModelError(
            f"from_statsmodels reads the design that the patsy formula engine builds; this fit's "
            f"design is a {type(spec).__module__}.{type(spec).__name__}. Refit after setting "
            "statsmodels.formula.options.formula_engine = \"patsy\"."
        )
    if getattr(model.data, "frame", None) is None:
        raise FittedModelError(
            "from_statsmodels: the fit keeps no data frame, so the rows it used cannot be read back. "
            f"Fit from a pandas DataFrame, e.g. {_HOW_TO_FIT}."
        )
    return spec


def _categorical_terms(spec, model):
    """The factors in order of first appearance, and whether the formula has an intercept.
    Refuses continuous covariates and terms that are not categorical factors."""
    covariates: list[str] = []
    transformed: list[str] = []
    for fac, info in spec.factor_infos.items():
        if info.type != "categorical":
            (covariates if _is_column(fac.code, model) else transformed).append(fac.code)
    if covariates:
        shown = ", ".join(covariates)
        terms = ", ".join(f"C({c})" for c in covariates)
        raise FittedModelError(
            f"from_statsmodels: the formula {model.formula!r} uses {shown} as a continuous covariate "
            f"(numbers entering the model as a slope). The report analyses factors only (between-"
            f"subjects ANOVA, no covariance adjustment). If the values are levels of a factor, write "
            f"{terms} in the formula and refit; otherwise the report cannot reproduce this model."
        )
    if transformed:
        shown = ", ".join(transformed)
        raise FittedModelError(
            f"from_statsmodels: the formula {model.formula!r} has a term that is not a categorical "
            f"factor: {shown}. The report analyses factors only; a transformed or numeric term "
            "enters the model as a slope. Drop it, or turn it into a factor with C(...), and refit."
        )
    intercept = False
    order: list[Any] = []
    for term in spec.terms:
        if not term.factors:
            intercept = True
        for fac in term.factors:
            if fac not in order:
                order.append(fac)
    if not order:
        raise FittedModelError(
            f"from_statsmodels: the formula {model.formula!r} has no factor; an ANOVA needs at least "
            f"one, e.g. {_HOW_TO_FIT}."
        )
    return order, intercept


def _is_column(code: str, model) -> bool:
    """Is a formula factor a plain data column (``x`` or ``Q("x")``) rather than an expression?"""
    frame = model.data.frame
    name = _plain_name(code)
    return name is not None and name in (frame.columns if hasattr(frame, "columns") else frame)


def _data_frame(model):
    """The data the formula was evaluated on, as a DataFrame (a mapping of columns is converted)."""
    import pandas as pd

    frame = model.data.frame
    if isinstance(frame, pd.DataFrame):
        return frame
    try:
        return pd.DataFrame(dict(frame))
    except (TypeError, ValueError) as exc:
        raise FittedModelError(
            f"from_statsmodels: the fit's data ({type(frame).__name__}) cannot be read as a table "
            f"({exc}). Fit from a pandas DataFrame, e.g. {_HOW_TO_FIT}."
        ) from None


def _plain_name(code: str) -> str | None:
    try:
        node = ast.parse(code.strip(), mode="eval").body
    except SyntaxError:
        return None
    if isinstance(node, ast.Name):
        return node.id
    if (isinstance(node, ast.Call) and isinstance(node.func, ast.Name) and node.func.id == "Q"
            and len(node.args) == 1 and isinstance(node.args[0], ast.Constant)
            and isinstance(node.args[0].value, str)):
        return node.args[0].value
    return None


def _column_name(code: str) -> str:
    """The name a formula expression stands for: the column of ``x``, ``Q("x")`` or ``C(x, ...)``;
    the expression itself otherwise."""
    plain = _plain_name(code)
    return plain if plain is not None else code.strip()


def _factor_name(code: str) -> str:
    try:
        node = ast.parse(code.strip(), mode="eval").body
    except SyntaxError:
        return code.strip()
    if isinstance(node, ast.Call) and isinstance(node.func, ast.Name) and node.func.id == "C" and node.args:
        inner = ast.get_source_segment(code.strip(), node.args[0]) or ast.unparse(node.args[0])
        return _column_name(inner)
    return _column_name(code)


def _check_names(names: list[str], factors, outcome: str) -> None:
    seen: dict[str, str] = {}
    for name, fac in zip(names, factors):
        if name in seen:
            raise FittedModelError(
                f"from_statsmodels: the column {name!r} enters the formula as two factors, "
                f"{seen[name]} and {fac.code}; a design has each factor once. Keep one and refit."
            )
        seen[name] = fac.code
        if name.strip().lower() == "mean" or " x " in name or "×" in name:
            raise FittedModelError(
                f"from_statsmodels: the factor {name!r} ({fac.code}) has a name that hypotheses "
                "reserve (\"mean\", or \" x \" between names). Rename the column in the data and refit."
            )
        if name == outcome:
            raise FittedModelError(
                f"from_statsmodels: {fac.code} makes the outcome {outcome!r} a factor as well. "
                "Refit with a factor other than the outcome."
            )


def _term_text(combo, names_of) -> str:
    return ":".join(names_of[f] for f in combo)


def _check_full_factorial(spec, factors, intercept: bool, outcome: str) -> None:
    """The report fits every interaction of its factors (the cell-means model). Refuse a fit that
    leaves a term out, naming the terms the report would add and the formula to refit with."""
    present = {frozenset(t.factors) for t in spec.terms if t.factors}
    full = [frozenset(c) for size in range(1, len(factors) + 1)
            for c in itertools.combinations(factors, size)]
    if set(full) == present:
        return
    if not intercept and present == {frozenset(factors)}:
        return  # a:b - 1 alone: one indicator per cell, the cell-means model itself
    codes = {f: f.code for f in factors}
    missing = [c for c in full if c not in present]
    added = ", ".join(":".join(codes[f] for f in factors if f in c) for c in missing)
    plural = "terms" if len(missing) > 1 else "term"
    rhs = " * ".join(codes[f] for f in factors)
    raise FittedModelError(
        f"from_statsmodels: the fit leaves out the {plural} {added}. The report always fits the full "
        f"factorial model (every interaction of its factors: one mean per cell), so it would add "
        f"{added} and test a different model than this fit. Refit with the full model, "
        f"{outcome} ~ {rhs}, and pass that fit."
    )


def _factor_coding(spec, fac) -> tuple[str, int | None, str]:
    """How the fit codes a factor, read off its contrast matrices in every term: ("reference",
    index of the reference level), ("sum", index of the level coded -1), ("indicator", None) for
    one column per level, or ("other", None)."""
    n = len(spec.factor_infos[fac].categories)
    kinds = set()
    words = set()
    for term in spec.terms:
        for sub in spec.term_codings[term]:
            cm = sub.contrast_matrices.get(fac)
            if cm is not None:
                kind = _classify(np.asarray(cm.matrix, dtype=np.float64), n)
                kinds.add(kind)
                words.add(_describe(kind, cm))
    if len(kinds) == 1:
        kind, special = next(iter(kinds))
        return kind, special, next(iter(words)) if len(words) == 1 else "several codings"
    return "other", None, " and ".join(sorted(words))


def _classify(m: np.ndarray, n: int) -> tuple[str, int | None]:
    eye = np.eye(n)
    if m.shape == (n, n) and np.array_equal(m, eye):
        return "indicator", None
    if m.shape != (n, n - 1):
        return "other", None
    for r in range(n):
        treat = np.delete(eye, r, axis=1)
        if np.array_equal(m, treat):
            return "reference", r
        treat[r] = -1.0
        if np.array_equal(m, treat):
            return "sum", r
    return "other", None


def _describe(kind: tuple[str, int | None], cm) -> str:
    labels = ", ".join(str(c) for c in getattr(cm, "column_suffixes", ()))
    name = {"reference": "indicator columns against a reference level",
            "sum": "sum-to-zero columns",
            "indicator": "one indicator column per level"}.get(kind[0], "contrast columns")
    return f"{name} ({labels})" if labels else name


def _report_order(n: int, kind: str, special: int | None) -> list[int]:
    """The report's order of a factor's levels (indices into the fit's order): the fit's order,
    with the reference level first under reference coding and the level coded -1 last under
    sum-to-zero coding, where the report's codings put them."""
    order = list(range(n))
    if kind == "reference" and special is not None:
        order.remove(special)
        order.insert(0, special)
    if kind == "sum" and special is not None:
        order.remove(special)
        order.append(special)
    return order


def _plan_coding(factors: list[FitFactor], intercept: bool, spec) -> tuple[str, list[str]]:
    kinds = {f.coding for f in factors}
    notes: list[str] = []
    if intercept and kinds == {"reference"}:
        coding = "reference-level"
    elif intercept and kinds == {"sum"}:
        coding = "sum-to-zero"
    elif not intercept and kinds == {"indicator"} and (
        len(factors) == 1 or all(len(t.factors) in (0, len(factors)) for t in spec.terms)
    ):
        coding = "cell-means"
    else:
        coding = "cell-means"
        used = "; ".join(f"{f.name}: {f.description}" for f in factors)
        why = "" if intercept else " in a model without an intercept"
        notes.append(
            f"The fit codes its factors{why} as {used}; the report has no coding with the same "
            "coefficient meanings, so its coefficients are the cell means (coding \"cell-means\"). "
            "The ANOVA table and every test of a hypothesis do not depend on the coding."
        )
    for f in factors:
        if f.moved and coding == "reference-level":
            notes.append(f"{f.name}: the fit's reference level, {f.special}, is listed first.")
        if f.moved and coding == "sum-to-zero":
            notes.append(f"{f.name}: the level the fit codes -1, {f.special}, is listed last.")
    return coding, notes


def _level_codes(fac, spec, frame) -> np.ndarray:
    """Each row's level of a factor, as an index into the fit's level order (-1 for missing),
    by evaluating the factor as the fit did (patsy's factor protocol: ``eval(state, data)``)."""
    import pandas as pd

    info = spec.factor_infos[fac]
    values = fac.eval(info.state, frame)
    if hasattr(values, "contrast") and hasattr(values, "levels") and hasattr(values, "data"):
        values = values.data  # C(x, ...) wraps its values with the coding
    categories = list(info.categories)
    codes = pd.Categorical(np.asarray(values, dtype=object) if not hasattr(values, "cat") else values,
                           categories=categories).codes
    return np.asarray(codes, dtype=np.int64)


def _level_texts(name: str, categories) -> list[str]:
    """Levels as the text the report prints; two levels that would print alike are refused."""
    from reporter.intake.plan import level_key, level_text

    texts = []
    seen: dict[Any, str] = {}
    for c in categories:
        if isinstance(c, (bool, np.bool_)):
            t = str(bool(c))
        elif isinstance(c, (int, float, np.integer, np.floating)) and not isinstance(c, bool):
            v = c.item() if hasattr(c, "item") else c
            t = level_text(v) if (not isinstance(v, float) or math.isfinite(v)) else str(v)
        else:
            t = str(c).strip()
        key = level_key(t)
        if key in seen:
            raise FittedModelError(
                f"from_statsmodels: factor {name!r} has two levels that read alike, {seen[key]!r} "
                f"and {c!r} (levels are compared as text, or as numbers when they are numbers). "
                "Recode one of them in the data and refit."
            )
        if not t:
            raise FittedModelError(
                f"from_statsmodels: factor {name!r} has an empty level {c!r}; give it a name in the "
                "data and refit."
            )
        seen[key] = c
        texts.append(t)
    return texts


def _check_design_rows(exog: np.ndarray, codes: list[np.ndarray], sizes: list[int]) -> None:
    """Every row of one cell has the same row of the fit's design matrix (exactly: a design of
    categorical factors is made of copies of its contrast matrices' rows). A difference means the
    rows were matched to the wrong cells."""
    cell = np.ravel_multi_index(tuple(codes), tuple(sizes)) if codes else np.zeros(exog.shape[0], dtype=np.int64)
    _, first = np.unique(cell, return_index=True)
    first_of = np.full(int(np.prod(sizes)), -1, dtype=np.int64)
    first_of[cell[first]] = first
    if not np.array_equal(exog, exog[first_of[cell]]):
        raise FittedModelError(
            "from_statsmodels: the levels read back from the fit's data frame do not match its "
            "design matrix row for row; the frame was changed after the fit. Refit it on the frame "
            "as it is now."
        )


def _used_rows(outcome: str, y: np.ndarray, factors: list[FitFactor], codes: list[np.ndarray]):
    import pandas as pd

    columns: dict[str, Any] = {}
    for f, c in zip(factors, codes):
        columns[f.name] = np.asarray(f.levels, dtype=object)[c]
    columns[outcome] = y
    return pd.DataFrame(columns)
