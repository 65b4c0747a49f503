"""The Python interface: the same steps as the command, as functions returning frozen values."""

from __future__ import annotations

import difflib
import hashlib
import json
import os
import re
from dataclasses import dataclass, replace
from fractions import Fraction
from pathlib import Path
from typing import Any, Mapping, Sequence

import numpy as np

from reporter.errors import DataError, HypothesisError, PlanError, RenderError, ReporterError
from reporter.intake.cells import CellStats, describe_cells, describe_covariates
from reporter.intake.data import Dataset, check_covariates, data_from_frame, load_data
from reporter.intake.memory_rows import MemoryRows
from reporter.intake.plan import Plan, load_plan
from reporter.intake.summary import read_summary, summary_from_frame
from reporter.intake.rows import RowAccess
from reporter.model.design import Design, design_from_plan
from reporter.model.hypotheses import Contrast, compile_hypotheses


@dataclass(frozen=True)
class Prepared:
    """A plan matched to its data: design, cell counts, compiled hypotheses, the cell table
    (``cells``) and the row access of the row-level steps (``rows``; None for a summary table).

    ``cell`` gives each row's cell while the rows are held in memory (None otherwise).
    """

    plan: Plan
    data: Dataset
    design: Design
    cell: np.ndarray | None
    counts: tuple[int, ...]
    contrasts: tuple[Contrast, ...]
    cells: CellStats
    rows: RowAccess | None
    lock: Any = None  # reporter.trail.deviations.LockCheck when the run is checked against a locked plan

    @property
    def empty_cells(self) -> tuple[int, ...]:
        return tuple(i for i, n in enumerate(self.counts) if n == 0)


def prepare(plan: Plan | str | os.PathLike[str], data: Any = None, *, require_estimable: bool = True) -> Prepared:
    """Read (or take) the plan and the data, build the design and compile every hypothesis.

    ``data`` may be a pandas DataFrame; by default the plan's data file is read. With
    ``require_estimable=False`` a hypothesis that needs an empty cell is compiled all the same
    (``anova-report check`` reports it as a failed data check instead of stopping).
    """
    if not isinstance(plan, Plan):
        plan = load_plan(Path(plan))
    if plan.data.layout == "cell-summaries":
        dataset = read_summary(plan) if data is None else summary_from_frame(plan, data)
    else:
        dataset = load_data(plan) if data is None else data_from_frame(plan, data)
    n_rows = dataset.cells.n_total if dataset.cells is not None else dataset.n
    if n_rows == 0:
        raise DataError(
            f"{dataset.source}: no row is left to analyse ({dataset.n_read} read; "
            + "; ".join(f"{e.count} {e.reason}" for e in dataset.exclusions)
            + ")."
        )
    design = design_from_plan(plan)
    cell = None
    if dataset.cells is not None:
        cells, rows = dataset.cells, dataset.row_access
    else:
        cell = design.cell_index(dataset.levels)
        cell.setflags(write=False)
        pivot_exact = Fraction(dataset.pivot_text) if dataset.exact_decimal else Fraction(dataset.pivot)
        cells = describe_cells(dataset.y, cell, design.k, dataset.pivot, pivot_exact)
        cov = dataset.covariates
        x = None
        if cov is not None:
            x = cov.x
            stats = describe_covariates(dataset.y, x, cell, design.k, np.array(cov.pivot), cov.pivot_exact, cov.names)
            cells = replace(cells, covariates=stats)
        rows = MemoryRows(dataset.y, cell, design.k, dataset.rows, x=x)
    if cells.covariates is not None:
        check_covariates(plan, cells.covariates, cells.n, [c.label for c in design.cells], dataset.source)
    counts = tuple(int(c) for c in cells.n)
    contrasts = compile_hypotheses(plan, design, counts if require_estimable else None)
    from reporter.trail.deviations import apply_lock

    # Checked against the plan's lock (plan.lock.json beside the plan file) when there is one.
    return apply_lock(Prepared(plan, dataset, design, cell, counts, contrasts, cells, rows))


@dataclass(frozen=True)
class Report:
    """A fitted plan: the prepared inputs, the analysis, and ways to render it.

    Each output is rendered on request (nothing is cached): :meth:`to_html`, :meth:`to_pdf`,
    :meth:`to_markdown`, :meth:`to_json`, :meth:`render`, :meth:`write`; in a notebook the
    report shows itself as HTML. :meth:`plan_toml` gives the plan as a plan file.
    """

    prepared: Prepared
    analysis: Any

    @property
    def plan(self) -> Plan:
        return self.prepared.plan

    def document(self) -> Any:
        """The document model of the report (built on demand; nothing is cached)."""
        from reporter.narrative.build import build_document
        from reporter.run import sealed_results

        provenance, _ = sealed_results(self.prepared, self.analysis)  # the provenance render() prints
        return build_document(self.prepared, self.analysis, provenance)

    def render(self, fmt: str) -> bytes:
        """The bytes of one format: "html", "json", "md" or "pdf"."""
        from reporter.run import render_outputs

        return render_outputs(self.prepared, self.analysis, (fmt,))[fmt]

    def write(self, out: str | os.PathLike[str], formats: Sequence[str] = ("html", "json")) -> list[Path]:
        """Write the report files into the folder ``out``, as ``anova-report run`` does."""
        from reporter.run import write_files

        return write_files(self.prepared, self.analysis, out, tuple(formats))

    def to_html(self, path: str | os.PathLike[str]) -> Path:
        """Write the HTML report (one self-contained file) to ``path``; return the path."""
        return self._write_one(path, "html", "to_html")

    def to_pdf(self, path: str | os.PathLike[str]) -> Path:
        """Write the PDF report (the plan and results.json are embedded in it) to ``path``."""
        return self._write_one(path, "pdf", "to_pdf")

    def to_markdown(self) -> str:
        """The report as Markdown text."""
        return self.render("md").decode("utf-8")

    def to_json(self) -> dict[str, Any]:
        """The content of results.json, as a dict (the file's JSON, read back)."""
        return json.loads(self.render("json"))

    def plan_toml(self, data_path: str | None = None) -> str:
        """The plan as a plan file: every key by its plan name, every default written out.

        ``anova-report run`` on this file, next to the same data, gives the same results.
        ``data_path`` replaces the ``[data] path`` written (by default the plan's own: for a plan
        read from a file, relative to that file; for :func:`analyze`, "data.csv"). Without
        ``data_path``, the text of a plan from :func:`analyze` is the text its hash was taken of.
        """
        from reporter.intake.canonical import mapping_toml, plan_mapping

        doc = plan_mapping(self.plan)
        if data_path is not None:
            if not isinstance(data_path, str) or not data_path.strip():
                raise PlanError(f"plan_toml(data_path=...) must be the path of the data file as text, such as "
                                f"\"data.csv\" (got {data_path!r}).")
            doc["data"]["path"] = data_path
        return mapping_toml(doc)

    def _repr_html_(self) -> str:
        return self.render("html").decode("utf-8")

    def _write_one(self, path: str | os.PathLike[str], fmt: str, method: str) -> Path:
        """Render one format, then write it to ``path`` all or nothing (an input file is never replaced)."""
        from reporter.intake.files import describe_path
        from reporter.run import _input_files, commit

        if not isinstance(path, (str, os.PathLike)) or not str(os.fspath(path)).strip() or "\0" in str(os.fspath(path)):
            raise RenderError(f"{method}(path): give the path of the file to write, such as \"report.{fmt}\" "
                              f"(got {path!r}).")
        target = Path(os.fspath(path))
        try:
            os.lstat(target)
        except FileNotFoundError:
            pass
        except OSError as exc:  # a name too long, a file where a folder should be, ...
            raise RenderError(f"{method}({describe_path(target)!r}): cannot be written there ({exc.strerror or exc}); "
                              f"give another path, such as \"report.{fmt}\".") from None
        if target.is_dir():
            raise RenderError(f"{method}({str(target)!r}): is a folder; give a file name, such as "
                              f"{str(target / ('report.' + fmt))!r}.")
        if target.exists() and any(os.path.samestat(os.stat(target), s) for s in _input_files(self.prepared)):
            raise RenderError(f"{method}({str(target)!r}): is an input file of this report; choose another name.")
        blob = self.render(fmt)
        folder = target.absolute().parent
        try:
            commit(folder, {folder / target.name: blob})
        except ReporterError as exc:
            raise RenderError(f"{method}({str(target)!r}): {exc}") from None
        return target


def build_report(plan: Plan | str | os.PathLike[str], data: Any = None) -> Report:
    """Prepare and fit a plan."""
    from reporter.run import analyse

    prep = prepare(plan, data)
    return Report(prep, analyse(prep))


# ---------------------------------------------------------------------------------------------
# A plan given as keyword arguments

#: The source named in messages about a plan given to :func:`analyze`.
ANALYZE_SOURCE = "analyze() arguments"
#: The ``[data] path`` of a plan given to :func:`analyze` (its rows come from the data frame).
ANALYZE_DATA_PATH = "data.csv"

_OWN_KEYWORDS = ("outcome", "factors", "covariates", "hypotheses", "title", "summary", "study")
_FACTOR_KEYS = ("levels", "exclude", "column")
_HYPOTHESIS_KEYS = ("means", "effect", "role", "description")
_COVARIATE_KEYS = ("name", "adjust_to", "slopes", "description")


def analyze(
    data: Any,
    *,
    outcome: str,
    factors: Mapping[str, Sequence[Any] | Mapping[str, Any] | None] | Sequence[str],
    hypotheses: Mapping[str, str | Mapping[str, Any]] | None = None,
    covariates: str | Sequence[str | Mapping[str, Any]] | None = None,
    title: str | None = None,
    summary: str | None = None,
    study: Mapping[str, str] | None = None,
    **analysis_options: Any,
) -> Report:
    """Fit a plan given as keyword arguments to ``data`` (a pandas DataFrame, or a mapping of
    column name to a sequence of values) and return the same :class:`Report` as
    :func:`reporter.report`.

    ``outcome``
        The column holding the outcome.
    ``factors``
        A mapping of factor name (its column) to its levels in report order, or to ``None``:
        the levels in the order they first appear in the column (missing values left out). A
        value may also be a mapping of the keys of a plan's ``[[factors]]`` table: ``levels``
        (a list, or ``None`` as above), ``exclude`` and ``column``. A list of names means
        ``None`` for each.
    ``hypotheses``
        A mapping of hypothesis name to a statement about means (text, as a plan's ``means``
        key), or to an effect (the omnibus test of a main effect or an interaction) written as
        the text ``"effect: dose x sex"``. For a ``role`` ("planned", the default, or
        "exploratory") or a ``description``, give a mapping of the keys of a plan's
        ``[[hypotheses]]`` table instead::

            hypotheses={
                "doses differ": "effect: dose",
                "dose works alike in both sexes": {"effect": "dose x sex", "role": "exploratory"},
                "high beats low": "high > low",
            }
    ``covariates``
        Numeric columns whose linear effect the model removes (analysis of covariance): a column
        name, a list of names, or a list of mappings of the keys of a plan's ``[[covariates]]``
        table (``name``, ``adjust_to``, ``slopes``, ``description``), e.g.
        ``covariates=[{"name": "pretest", "slopes": "per-cell"}]``.
    ``title``, ``summary``, ``study``
        The plan's title (by default "<outcome> by <factors>"), summary and ``[study]`` texts.
    ``**analysis_options``
        The keys of a plan's ``[analysis]`` table by their plan names (``alpha``, ``coding``,
        ``sums_of_squares``, ``correction``, ``follow_up``, ``follow_up_compares``,
        ``follow_up_control``, ``unequal_variances``, ``permutations``, ``seed``,
        ``permutation_max_rows``), with the defaults and checks of a plan file.

    The plan is a real :class:`~reporter.intake.plan.Plan`: its ``[data] path`` is "data.csv"
    (the rows come from ``data``), it has no source file, and its hash (``plan_sha256`` in
    results.json) is the SHA-256 of the UTF-8 text :meth:`Report.plan_toml` returns. That text,
    saved beside the data written as data.csv, gives the same results through
    ``anova-report run``. ``data`` is read, never modified.

    Bad arguments raise one :class:`~reporter.errors.ReporterError` whose message names the
    argument, the rule, the value and the fix.
    """
    from reporter.intake.canonical import plan_toml
    from reporter.intake.plan import plan_from_dict
    from reporter.run import analyse

    _check_keywords(analysis_options)
    if not hasattr(data, "columns") and not isinstance(data, Mapping):
        raise DataError(f"analyze(data): must be a pandas DataFrame or a mapping of column name to values "
                        f"(got {type(data).__name__}).")
    columns = [str(c) for c in data.columns] if hasattr(data, "columns") else [str(c) for c in data]
    if not isinstance(outcome, str) or not outcome.strip():
        raise PlanError(f"analyze(): 'outcome' must be the name of the outcome column as text (got {outcome!r}).")
    factor_tables = _factor_tables(data, columns, factors)
    hypothesis_tables = _hypothesis_tables(hypotheses)
    if title is None:
        title = f"{outcome} by {' and '.join(f['name'] for f in factor_tables)}"
    doc: dict[str, Any] = {"title": title}
    if summary is not None:
        doc["summary"] = summary
    doc["data"] = {"path": ANALYZE_DATA_PATH, "outcome": outcome}
    doc["factors"] = factor_tables
    covariate_tables = _covariate_tables(covariates)
    if covariate_tables:
        doc["covariates"] = covariate_tables
    doc["analysis"] = {k: _plain_arg(v) for k, v in analysis_options.items()}
    doc["hypotheses"] = hypothesis_tables
    if study is not None:
        if not isinstance(study, Mapping):
            raise PlanError(f"analyze(): 'study' must be a mapping of [study] key to text (got {type(study).__name__}).")
        doc["study"] = dict(study)
    _check_text(doc)
    try:
        plan = plan_from_dict(doc, base_dir=".", source=ANALYZE_SOURCE)
    except PlanError as exc:
        raise PlanError(_analyze_message(str(exc), factor_tables, hypothesis_tables, covariate_tables)) from None
    text = plan_toml(plan).encode("utf-8")
    plan = replace(plan, sha256=hashlib.sha256(text).hexdigest(), source_bytes=text)
    try:
        prep = prepare(plan, data)
    except HypothesisError as exc:
        raise HypothesisError(_hypothesis_message(str(exc))) from None
    except DataError as exc:
        raise DataError(str(exc).replace(  # the plan file's way to exclude levels, said as the argument
            "with exclude = [...] in that [[factors]] table",
            "with factors={name: {\"levels\": [...], \"exclude\": [...]}}")) from None
    return Report(prep, analyse(prep))


def _check_keywords(options: Mapping[str, Any]) -> None:
    """Every extra keyword is an ``[analysis]`` key; an unknown one gets a "did you mean"."""
    from reporter.intake import defaults as D

    allowed = tuple(D.ANALYSIS_DEFAULTS)
    for key in options:
        if key in allowed:
            continue
        hint = [D.RENAMED_KEYS[key]] if key in D.RENAMED_KEYS else difflib.get_close_matches(
            key, (*allowed, *_OWN_KEYWORDS, "data"), n=1, cutoff=0.6)
        fix = f" Did you mean '{hint[0]}'?" if hint else (
            f" The keywords are data, {', '.join(_OWN_KEYWORDS)} and the [analysis] keys {', '.join(allowed)}.")
        raise PlanError(f"analyze(): '{key}' is not a known keyword.{fix}")


def _plain_arg(value: Any) -> Any:
    """numpy scalars as Python numbers, tuples and arrays as lists (the types a plan file gives)."""
    if isinstance(value, np.generic):
        return value.item()
    if hasattr(value, "tolist") and not isinstance(value, (str, bytes)):  # numpy arrays, pandas Series/Index
        value = value.tolist()
    if isinstance(value, (list, tuple)):
        return [_plain_arg(v) for v in value]
    return value


def _factor_tables(data: Any, columns: list[str], factors: Any) -> list[dict[str, Any]]:
    if isinstance(factors, str) or not isinstance(factors, (Mapping, list, tuple)):
        raise PlanError(f"analyze(): 'factors' must map each factor name to its levels (or None), e.g. "
                        f"factors={{\"dose\": [\"low\", \"high\"]}} (got {type(factors).__name__}).")
    items = list(factors.items()) if isinstance(factors, Mapping) else [(name, None) for name in factors]
    if not items:
        raise PlanError("analyze(): 'factors' is empty; name at least one factor, e.g. factors={\"dose\": None}.")
    out = []
    for name, spec in items:
        if not isinstance(name, str) or not name.strip():
            raise PlanError(f"analyze(): 'factors' names a factor {name!r}; factor names must be text.")
        table: dict[str, Any] = {"name": name}
        if isinstance(spec, Mapping):
            _check_keys(spec, _FACTOR_KEYS, f"factors[{name!r}]")
            table.update({k: _plain_arg(v) for k, v in spec.items() if v is not None})
            levels = spec.get("levels")
        elif spec is None or isinstance(spec, (list, tuple)) or hasattr(spec, "tolist"):
            levels = spec
        else:
            raise PlanError(f"analyze(): factors[{name!r}] must be a list of levels, or None for the levels in order "
                            f"of first appearance (got {type(spec).__name__} {spec!r}).")
        if levels is None:
            column = table.get("column", name)
            table["levels"] = _levels_in_order(data, columns, column if isinstance(column, str) else name, name)
        else:
            table["levels"] = _plain_arg(list(levels.tolist() if hasattr(levels, "tolist") else levels))
        out.append(table)
    return out


def _levels_in_order(data: Any, columns: list[str], column: str, factor: str) -> list[str]:
    """The distinct values of a column in order of first appearance (missing values left out),
    compared as the data reader compares levels."""
    from reporter.intake import defaults as D
    from reporter.intake.data import _as_texts, _value_text
    from reporter.intake.plan import level_key

    if column not in columns:
        hint = difflib.get_close_matches(column, columns, n=1, cutoff=0.6)
        fix = f" Did you mean '{hint[0]}'?" if hint else f" The columns are {', '.join(columns[:20])}."
        raise DataError(f"analyze(): factors[{factor!r}] reads the column '{column}', which the data do not have.{fix}")
    values = data[column]
    values = values.to_numpy() if hasattr(values, "to_numpy") else np.asarray(values)
    uniq, inv = _as_texts(values)
    _, first = np.unique(inv, return_index=True)  # O(N log N)
    order = np.argsort(first, kind="stable")
    missing = set(D.DATA_DEFAULTS["missing"])  # type: ignore[call-overload]
    seen, levels = set(), []
    for u in order.tolist():
        t = _value_text(uniq[u])
        if t is None or t == "" or t in missing:
            continue
        k = level_key(t)
        if k not in seen:
            seen.add(k)
            levels.append(t)
    if len(levels) < 2:
        got = "the data have no rows" if len(values) == 0 else (
            f"its only value is {levels[0]!r}" if levels else "every value is missing")
        raise DataError(f"analyze(): factors[{factor!r}] reads the column '{column}', which must hold at least 2 "
                        f"distinct values to be a factor ({got}). Give data with rows in at least 2 levels, or "
                        "list the levels, e.g. factors={\"dose\": [\"low\", \"high\"]}.")
    return levels


def _hypothesis_tables(hypotheses: Any) -> list[dict[str, Any]]:
    if hypotheses is None:
        return []
    if not isinstance(hypotheses, Mapping):
        raise PlanError(f"analyze(): 'hypotheses' must map each hypothesis name to a statement, e.g. "
                        f"hypotheses={{\"high beats low\": \"high > low\"}} (got {type(hypotheses).__name__}).")
    out = []
    for name, spec in hypotheses.items():
        if not isinstance(name, str):
            raise PlanError(f"analyze(): 'hypotheses' names a hypothesis {name!r}; hypothesis names must be text.")
        if isinstance(spec, str):
            m = re.match(r"\s*(effect|means)\s*:(.*)", spec, re.S)  # ':' is no token of a statement
            out.append({"name": name, m.group(1): m.group(2).strip()} if m else {"name": name, "means": spec})
        elif isinstance(spec, Mapping):
            _check_keys(spec, _HYPOTHESIS_KEYS, f"hypotheses[{name!r}]")
            out.append({"name": name, **{k: v for k, v in spec.items() if v is not None}})
        else:
            raise PlanError(f"analyze(): hypotheses[{name!r}] must be a statement such as \"high > low\", or "
                            f"\"effect: dose\" for an effect (got {type(spec).__name__}).")
    return out


def _covariate_tables(covariates: Any) -> list[dict[str, Any]]:
    """``covariates=``: a name, a list of names, or a list of mappings of [[covariates]] keys."""
    if covariates is None:
        return []
    items = [covariates] if isinstance(covariates, (str, Mapping)) else covariates
    if not isinstance(items, (list, tuple)):
        raise PlanError(f"analyze(): 'covariates' must be a column name, a list of names or a list of mappings such "
                        f"as [{{\"name\": \"pretest\"}}] (got {type(covariates).__name__}).")
    out = []
    for j, item in enumerate(items):
        if isinstance(item, str):
            out.append({"name": item})
        elif isinstance(item, Mapping):
            _check_keys(item, _COVARIATE_KEYS, f"covariates[{j}]")
            if "name" not in item:
                raise PlanError(f"analyze(): covariates[{j}] has no 'name'; give the covariate's column, e.g. "
                                "{\"name\": \"pretest\"}.")
            out.append({k: _plain_arg(v) for k, v in item.items() if v is not None})
        else:
            raise PlanError(f"analyze(): covariates[{j}] must be a column name or a mapping with 'name' "
                            f"(got {type(item).__name__} {item!r}).")
    return out


def _check_keys(spec: Mapping[Any, Any], allowed: tuple[str, ...], where: str) -> None:
    for key in spec:
        if key not in allowed:
            hint = difflib.get_close_matches(str(key), allowed, n=1, cutoff=0.6)
            fix = f" Did you mean '{hint[0]}'?" if hint else f" The keys are {', '.join(allowed)}."
            raise PlanError(f"analyze(): {where} has the key {key!r}, which is not known.{fix}")


def _check_text(value: Any, where: str = "") -> None:
    """Text that a plan file could not hold (a lone surrogate) is refused here, by argument."""
    if isinstance(value, str):
        bad = re.search("[\ud800-\udfff]", value)
        if bad:
            raise PlanError(f"analyze(): {where or 'an argument'} holds the lone surrogate U+{ord(bad.group()):04X} "
                            "(not a character of Unicode text); decode the text properly first.")
    elif isinstance(value, Mapping):
        for k, v in value.items():
            _check_text(k, where)
            _check_text(v, where or repr(k))
    elif isinstance(value, list):
        for v in value:
            _check_text(v, where)


_PLAN_PATH = re.compile(r"^" + re.escape(ANALYZE_SOURCE) + r"(?:, line \d+)?: '([^']*)' ", re.S)


def _analyze_message(message: str, factors: list[dict[str, Any]], hypotheses: list[dict[str, Any]],
                     covariates: list[dict[str, Any]] = ()) -> str:
    """A plan-file message about the arguments, with the key path said as the argument."""
    m = _PLAN_PATH.match(message)
    if not m:
        return message.replace(ANALYZE_SOURCE, "analyze()", 1)
    path, rest = m.group(1), message[m.end():]

    def table(kind: str, i: str, tables: list[dict[str, Any]]) -> str:
        k = int(i) - 1
        return f"{kind}[{tables[k]['name']!r}]" if 0 <= k < len(tables) else kind

    if path.startswith("analysis."):
        shown = path[len("analysis."):]
    elif path.startswith("data."):
        shown = path[len("data."):]
    elif (f := re.fullmatch(r"factors\[(\d+)\](?:\.(\w+))?(?:\[(\d+)\])?", path)):
        shown = table("factors", f.group(1), factors)
        if f.group(2) in ("exclude", "column"):
            shown += f"[{f.group(2)!r}]"
        if f.group(3):
            shown += f"[{int(f.group(3)) - 1}]"
    elif (h := re.fullmatch(r"hypotheses\[(\d+)\](?:\.(\w+))?", path)):
        shown = table("hypotheses", h.group(1), hypotheses)
        if h.group(2) in ("role", "description", "effect"):
            shown += f"[{h.group(2)!r}]"
    elif (c := re.fullmatch(r"covariates\[(\d+)\](?:\.(\w+))?", path)):
        k = int(c.group(1)) - 1
        shown = f"covariates[{k}]" if 0 <= k < len(covariates) else "covariates"
        if c.group(2) and c.group(2) != "name":
            shown += f"[{c.group(2)!r}]"
    elif path.startswith("study."):
        shown = f"study[{path[len('study.'):]!r}]"
    else:
        shown = path
    return f"analyze(): {shown if '[' in shown else repr(shown)} {rest}"


def _hypothesis_message(message: str) -> str:
    return re.sub(r'^hypotheses\[\d+\]\.(?:means|effect) \("(.*?)"\):', lambda m: f"analyze(): hypotheses[{m.group(1)!r}]:",
                  message, count=1, flags=re.S)
