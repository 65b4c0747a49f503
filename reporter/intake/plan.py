"""The plan file: a TOML document that states the design, the data and the hypotheses.

:func:`load_plan` reads a plan with :mod:`tomllib`, checks every key against the rules below and
returns a frozen :class:`Plan`. A message names the key path (``hypotheses[2].means``, counted from
1 as a person counts the ``[[hypotheses]]`` tables), the line where it sits, the rule it broke, the
value received and what to write instead. Unknown keys are errors with a "did you mean" hint.
Defaults live in :mod:`reporter.intake.defaults`.
"""

from __future__ import annotations

import difflib
import hashlib
import itertools
import math
import re
import tomllib
from dataclasses import dataclass, field
from fractions import Fraction
from pathlib import Path
from typing import Any, Mapping

from reporter.errors import PlanError
from reporter.intake import defaults as D
from reporter.intake.files import describe_path, read_limited
from reporter.intake.numtext import is_plain


@dataclass(frozen=True)
class DataSpec:
    """Where the data are and how to read them."""

    path: Path
    outcome: str
    delimiter: str | None = None
    decimal: str = "."
    missing: tuple[str, ...] = tuple(D.DATA_DEFAULTS["missing"])  # type: ignore[arg-type]
    layout: str = "rows"
    summary: "SummarySpec | None" = None  # set when layout = "cell-summaries"
    reader: str = "automatic"


@dataclass(frozen=True)
class SummarySpec:
    """How a table of cell summaries (one row per cell) names its columns and its spread.

    ``mean_decimals``/``spread_decimals`` state how the values were rounded, when the plan says so.
    """

    n_column: str = "n"
    mean_column: str = "mean"
    spread: str = "sd"
    spread_column: str = "sd"
    mean_decimals: int | None = None
    spread_decimals: int | None = None


@dataclass(frozen=True)
class FactorSpec:
    """A between-subjects factor: its column and its levels in report order."""

    name: str
    levels: tuple[str, ...]
    exclude: tuple[str, ...] = ()
    column: str | None = None

    @property
    def data_column(self) -> str:
        return self.column or self.name


@dataclass(frozen=True)
class CovariateSpec:
    """One ``[[covariates]]`` table: a numeric column whose linear effect the model removes.

    ``adjust_to`` is the covariate value at which adjusted means are evaluated (None: the mean
    of the rows used); ``adjust_to_exact`` is that number as the plan wrote it (the shortest
    decimal of the float64 TOML gives, or the whole number), for the exact pivot arithmetic.
    ``slopes`` is "common" (one slope for all cells) or "per-cell".
    """

    name: str
    adjust_to: float | None = None
    adjust_to_exact: Fraction | None = None
    slopes: str = "common"
    description: str | None = None
    index: int = 0  # 1-based position in the plan

    @property
    def key_path(self) -> str:
        return f"covariates[{self.index}]"


@dataclass(frozen=True)
class HypothesisSpec:
    """One ``[[hypotheses]]`` table: a statement about means, or a named effect."""

    name: str
    means: str | None
    effect: str | None
    role: str = "planned"
    description: str | None = None
    index: int = 0  # 1-based position in the plan
    line: int | None = None  # line of the statement (means or effect) in the plan file

    @property
    def key_path(self) -> str:
        return f"hypotheses[{self.index}]"


@dataclass(frozen=True)
class AnalysisSpec:
    """The ``[analysis]`` table with every default filled in.

    Attributes hold the code's internal names; the plan's keys and values are mapped in
    :mod:`reporter.intake.defaults`: ``coding`` → ``parameterization`` ("sum-to-zero" →
    "effects", "reference-level" → "reference"), ``sums_of_squares`` → ``ss_type`` ("type-III" →
    "III"), ``follow_up`` → ``posthoc`` ("all-pairs-tukey" → "all-pairs", "versus-control-dunnett"
    → "versus-control", "all-contrasts-scheffe" → "any-contrast"), ``follow_up_compares`` →
    ``posthoc_on``, ``follow_up_control`` → ``control``.
    """

    alpha: float = 0.05
    parameterization: str = "cell-means"
    ss_type: str = "III"
    correction: str = "holm"
    posthoc: tuple[str, ...] = ()
    posthoc_on: str = "cells"
    control: str | None = None
    unequal_variances: str = "classical"
    permutations: int = 10_000
    seed: int = 20261202
    permutation_max_rows: int = 50_000

    @property
    def confidence(self) -> float:
        return 1.0 - self.alpha


@dataclass(frozen=True)
class StudySpec:
    """Optional methods details that the report quotes in its methods section."""

    sample_size_rationale: str | None = None
    allocation: str | None = None
    blinding: str | None = None
    stopping_rule: str | None = None
    exclusion_rules: str | None = None


@dataclass(frozen=True)
class PlanningSpec:
    """The ``[planning]`` table: the smallest effect of interest for the a-priori power table.

    ``smallest_effect_f`` (Cohen's f) serves the F tests; a one-row contrast (t test) uses
    ``smallest_effect_d``, or ``smallest_difference`` in the outcome's units divided by
    ``assumed_sd``. ``powers`` are the powers the table solves for.
    """

    smallest_effect_f: float | None = None
    smallest_effect_d: float | None = None
    smallest_difference: float | None = None
    assumed_sd: float | None = None
    powers: tuple[float, ...] = tuple(D.PLANNING_DEFAULTS["powers"])  # type: ignore[arg-type]

    @property
    def contrast_d(self) -> float | None:
        """The standardized size of the smallest contrast of interest, however the plan gave it."""
        if self.smallest_effect_d is not None:
            return self.smallest_effect_d
        if self.smallest_difference is not None and self.assumed_sd:
            return self.smallest_difference / self.assumed_sd
        return None


@dataclass(frozen=True)
class Plan:
    """A validated plan. ``source`` is the plan file (None for a plan built in Python)."""

    title: str
    data: DataSpec
    factors: tuple[FactorSpec, ...]
    hypotheses: tuple[HypothesisSpec, ...]
    analysis: AnalysisSpec = field(default_factory=AnalysisSpec)
    study: StudySpec = field(default_factory=StudySpec)
    summary: str | None = None
    planning: PlanningSpec | None = None  # the optional [planning] table
    covariates: tuple[CovariateSpec, ...] = ()  # the [[covariates]] tables, in plan order
    source: Path | None = None
    sha256: str | None = None
    source_bytes: bytes | None = field(default=None, repr=False, compare=False)

    def factor(self, name: str) -> FactorSpec:
        for f in self.factors:
            if f.name == name:
                return f
        raise KeyError(name)


# ---------------------------------------------------------------------------------------------
# Reading and validation

_TOP_KEYS = ("title", "summary", "data", "factors", "covariates", "analysis", "hypotheses", "study", "planning")
_DATA_KEYS = ("path", "outcome", "delimiter", "decimal", "missing", "layout", "reader", *D.SUMMARY_DEFAULTS)
_FACTOR_KEYS = ("name", "levels", "exclude", "column")
_HYP_KEYS = ("name", "means", "effect", "role", "description")
_COVARIATE_KEYS = ("name", *D.COVARIATES_DEFAULTS)
_STUDY_KEYS = tuple(StudySpec.__dataclass_fields__)


class _Locator:
    """Finds the line of a key path in the plan text, for messages (best effort)."""

    _header = re.compile(r"^\s*(\[\[?)\s*([A-Za-z_][\w-]*)\s*\]\]?")

    def __init__(self, text: str | None):
        self.lines = text.splitlines() if text else []

    def line_of(self, table: str | None, index: int | None, key: str | None) -> int | None:
        if not self.lines:
            return None
        start, seen = 0, 0
        if table is not None:
            start = None
            for i, line in enumerate(self.lines):
                m = self._header.match(line)
                if m and m.group(2) == table:
                    seen += 1
                    if index is None or seen == index:
                        start = i
                        break
            if start is None:
                return None
            if key is None:
                return start + 1
            start += 1
        for i in range(start, len(self.lines)):
            line = self.lines[i]
            if self._header.match(line):
                break
            if key is not None and re.match(rf"^\s*{re.escape(key)}\s*=", line):
                return i + 1
        return None


class _Checker:
    def __init__(self, source: str, text: str | None):
        self.source = source
        self.loc = _Locator(text)

    def fail(self, path: str, rule: str, *, table=None, index=None, key=None) -> PlanError:
        line = self.loc.line_of(table, index, key)
        where = f"{self.source}, line {line}" if line else self.source
        if len(path) > 80:  # a key of any length may arrive; the message stays readable
            path = f"{path[:60]}…"
        return PlanError(f"{where}: '{path}' {rule}")

    def unknown_keys(self, mapping: Mapping, allowed: tuple[str, ...], prefix: str, **loc) -> None:
        for key in mapping:
            if key not in allowed:
                hint = difflib.get_close_matches(key, allowed, n=1, cutoff=0.6)
                if D.RENAMED_KEYS.get(key) in allowed:
                    hint = [D.RENAMED_KEYS[key]]
                fix = f" Did you mean '{hint[0]}'?" if hint else f" Allowed keys: {', '.join(allowed)}."
                path = f"{prefix}{key}"
                raise self.fail(path, f"is not a known key.{fix}", key=key, **loc)

    def text(self, mapping, key, path, *, required=True, limit=D.MAX_NAME_CHARS, **loc) -> str | None:
        if key not in mapping:
            if required:
                where = path.rsplit(".", 1)[0] if "." in path else "the top level"
                raise self.fail(path, f"is required: add {key} = \"...\" to {where}.", **loc)
            return None
        value = mapping[key]
        if not isinstance(value, str):
            raise self.fail(path, f"must be text in quotes (got {_show(value)}).", key=key, **loc)
        if not value.strip():
            raise self.fail(path, "must not be empty.", key=key, **loc)
        self.length(value, limit, path, key=key, **loc)
        return value

    def length(self, value: str, limit: int, path: str, **loc) -> None:
        if len(value) > limit:
            raise self.fail(
                path,
                f"is {len(value)} characters long; the limit is {limit} (got {_show(value)}). Shorten it.",
                **loc,
            )

    def raw(self, key: str, value: Any, **loc) -> str:
        """The value as written in the plan file (for numbers), else as :func:`_show` prints it."""
        line = self.loc.line_of(loc.get("table"), loc.get("index"), key)
        if line is not None and not isinstance(value, (str, list, dict)):
            m = re.match(rf"^\s*{re.escape(key)}\s*=\s*([^#]*?)\s*(?:#.*)?$", self.loc.lines[line - 1])
            if m and m.group(1) and len(m.group(1)) <= 60:
                return m.group(1)
        return _show(value)

    def choice(self, mapping, key, path, choices, default, **loc):
        value = mapping.get(key, default)
        if value not in choices:
            allowed = ", ".join(f'"{c}"' for c in choices)
            hint = (
                difflib.get_close_matches(str(value), choices, n=1, cutoff=0.5)
                if isinstance(value, str)
                else []
            )
            if isinstance(value, str) and D.RENAMED_VALUES.get(value) in choices:
                hint = [D.RENAMED_VALUES[value]]
            fix = f" Did you mean \"{hint[0]}\"?" if hint else ""
            raise self.fail(path, f"must be one of {allowed} (got {_show(value)}).{fix}", key=key, **loc)
        return value


def _show(value: Any) -> str:
    if isinstance(value, str):
        if len(value) > 60:
            return f'"{value[:40]}…" ({len(value)} characters)'
        return f'"{value}"'
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, dict):
        return "a table"
    if isinstance(value, list):
        return "a list"
    text = repr(value)
    return text if len(text) <= 60 else f"{text[:40]}… ({len(text)} characters)"


def level_text(value: Any) -> str:
    """The text form of a level written in the plan (numbers as a person writes them)."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        return repr(value) if not value.is_integer() else repr(value)
    return str(value).strip()


def load_plan(path: str | Path) -> Plan:
    """Read and validate the plan file at ``path``; data paths resolve relative to it.

    The plan must be a regular file of at most :data:`~reporter.intake.defaults.MAX_PLAN_BYTES`
    bytes; the exact bytes read are hashed and kept on the plan (``source_bytes``).
    """
    path = Path(path)
    raw = read_limited(
        path, "the plan file", PlanError, "Give the path of a plan file (.toml).", D.MAX_PLAN_BYTES, "a plan file"
    )
    shown = describe_path(path)
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        raise PlanError(
            f"{shown}, line {line}: is not UTF-8 text (byte {exc.start} is 0x{raw[exc.start]:02x}). "
            "Save the plan as UTF-8."
        ) from None
    _check_nesting(text, shown)
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise PlanError(f"{shown}: is not valid TOML: {exc}.") from None
    except RecursionError:  # a nesting the scan above did not see; never let it escape
        raise PlanError(
            f"{shown}: nests arrays or tables too deeply to read (the limit is {D.MAX_TOML_NESTING} levels)."
        ) from None
    plan = plan_from_dict(doc, base_dir=path.parent, source=shown, text=text)
    try:
        resolved = path.resolve()
    except (OSError, RuntimeError):
        resolved = path.absolute()
    return _replace_source(plan, resolved, hashlib.sha256(raw).hexdigest(), raw)


def _check_nesting(text: str, source: str) -> None:
    """Refuse TOML whose arrays and inline tables nest deeper than the limit.

    A cheap scan of ``[``/``{`` depth outside strings and comments, so that the recursive TOML
    reader never meets a nesting that would exhaust the stack.
    """
    limit = D.MAX_TOML_NESTING
    depth, line, i, n = 0, 1, 0, len(text)
    while i < n:
        ch = text[i]
        if ch == "\n":
            line += 1
        elif ch == "#":
            j = text.find("\n", i)
            i = n if j < 0 else j
            continue
        elif ch in "\"'":
            triple = text.startswith(ch * 3, i)
            quote = ch * 3 if triple else ch
            j = i + len(quote)
            while j < n:
                if ch == '"' and text[j] == "\\":
                    j += 2
                    continue
                if text.startswith(quote, j):
                    break
                if text[j] == "\n" and not triple:
                    break
                j += 1
            line += text.count("\n", i, j)
            i = j + len(quote) if text.startswith(quote, j) else j
            continue
        elif ch in "[{":
            depth += 1
            if depth > limit:
                raise PlanError(
                    f"{source}, line {line}: arrays or tables are nested more than {limit} levels deep; "
                    "a plan needs at most 3. Check the brackets."
                )
        elif ch in "]}":
            depth = max(depth - 1, 0)
        i += 1


def _replace_source(plan: Plan, source: Path, sha: str, raw: bytes) -> Plan:
    from dataclasses import replace

    return replace(plan, source=source, sha256=sha, source_bytes=raw)


def plan_from_dict(
    doc: Mapping[str, Any],
    base_dir: str | Path = ".",
    source: str = "plan",
    text: str | None = None,
) -> Plan:
    """Validate a plan given as a mapping (the parsed TOML); see :func:`load_plan`."""
    ck = _Checker(source, text)
    ck.unknown_keys(doc, _TOP_KEYS, "")
    title = ck.text(doc, "title", "title", limit=D.MAX_TITLE_CHARS)
    summary = ck.text(doc, "summary", "summary", required=False, limit=D.MAX_SUMMARY_CHARS)

    data = _read_data(doc, ck, Path(base_dir))
    factors = _read_factors(doc, ck, data)
    covariates = _read_covariates(doc, ck, data, factors)
    analysis = _read_analysis(doc, ck, factors)
    hypotheses = _read_hypotheses(doc, ck)
    study = _read_study(doc, ck)
    planning = _read_planning(doc, ck, analysis)
    return Plan(
        title=title,
        summary=summary,
        data=data,
        factors=factors,
        hypotheses=hypotheses,
        analysis=analysis,
        study=study,
        planning=planning,
        covariates=covariates,
    )


def _table(doc, key, ck, *, required) -> Mapping[str, Any]:
    if key not in doc:
        if required:
            raise ck.fail(key, f"is required: add a [{key}] table.")
        return {}
    value = doc[key]
    if not isinstance(value, dict):
        raise ck.fail(key, f"must be a table, written [{key}] (got {_show(value)}).", key=key)
    return value


def _read_data(doc, ck: _Checker, base_dir: Path) -> DataSpec:
    t = _table(doc, "data", ck, required=True)
    loc = {"table": "data"}
    ck.unknown_keys(t, _DATA_KEYS, "data.", **loc)
    rel = ck.text(t, "path", "data.path", limit=D.MAX_PATH_CHARS, **loc)
    if "\0" in rel:
        raise ck.fail("data.path", "holds a NUL character, which no file name can contain.", key="path", **loc)
    outcome = ck.text(t, "outcome", "data.outcome", **loc).strip()
    path = Path(rel)
    if not path.is_absolute():
        path = base_dir / path
    if path.suffix.lower() not in D.DATA_SUFFIXES:
        raise ck.fail(
            "data.path",
            f"must end in .csv, .tsv or .parquet (got \"{rel}\").",
            key="path",
            **loc,
        )
    delimiter = t.get("delimiter", D.DATA_DEFAULTS["delimiter"])
    if delimiter is not None and (not isinstance(delimiter, str) or len(delimiter) != 1):
        raise ck.fail(
            "data.delimiter",
            f'must be one character such as ";" or "\\t" (got {_show(delimiter)}).',
            key="delimiter",
            **loc,
        )
    decimal = ck.choice(t, "decimal", "data.decimal", (".", ","), ".", **loc)
    if decimal == "," and (delimiter in (None, ",")) and path.suffix.lower() == ".csv":
        raise ck.fail(
            "data.decimal",
            'is "," but the field separator is also ",". Add delimiter = ";" to [data].',
            key="decimal",
            **loc,
        )
    missing = t.get("missing", D.DATA_DEFAULTS["missing"])
    if not isinstance(missing, (list, tuple)) or not all(isinstance(m, str) for m in missing):
        raise ck.fail(
            "data.missing",
            f'must be a list of texts such as ["", "NA"] (got {_show(missing)}).',
            key="missing",
            **loc,
        )
    if len(missing) > D.MAX_MISSING_TOKENS:
        raise ck.fail("data.missing", f"lists {len(missing)} texts; the limit is {D.MAX_MISSING_TOKENS}.", key="missing", **loc)
    for j, m in enumerate(missing, start=1):
        ck.length(m, D.MAX_NAME_CHARS, f"data.missing[{j}]", key="missing", **loc)
    layout = ck.choice(t, "layout", "data.layout", D.LAYOUTS, D.DATA_DEFAULTS["layout"], **loc)
    reader = ck.choice(t, "reader", "data.reader", D.READERS, D.DATA_DEFAULTS["reader"], **loc)
    if layout == "cell-summaries" and reader == "out-of-core":
        raise ck.fail("data.reader", 'is "out-of-core", but a table of cell summaries (one row per cell) is small and '
                      "always read in memory; remove the key.", key="reader", **loc)
    return DataSpec(
        path=path,
        outcome=outcome,
        delimiter=delimiter,
        decimal=decimal,
        missing=tuple(m.strip() for m in missing),
        layout=layout,
        summary=_read_summary_keys(t, ck, layout),
        reader=reader,
    )


def _read_summary_keys(t, ck: _Checker, layout: str) -> SummarySpec | None:
    """The [data] keys of a cell-summary table (refused in a table of rows, where they mean nothing)."""
    loc = {"table": "data"}
    given = [k for k in D.SUMMARY_DEFAULTS if k in t]
    if layout != "cell-summaries":
        if given:
            raise ck.fail(f"data.{given[0]}", 'is only read from a table of cell summaries: add layout = '
                          '"cell-summaries" to [data], or remove the key.', key=given[0], **loc)
        return None
    d = D.SUMMARY_DEFAULTS
    spread = ck.choice(t, "spread", "data.spread", D.SPREADS, d["spread"], **loc)
    names = {}
    for key in ("n_column", "mean_column", "spread_column"):
        default = spread if key == "spread_column" and d[key] is None else d[key]
        names[key] = (ck.text(t, key, f"data.{key}", required=False, **loc) or default).strip()
    seen: dict[str, str] = {}
    for key, col in names.items():
        if col in seen:
            raise ck.fail(f"data.{key}", f'names the column "{col}", which data.{seen[col]} names too; '
                          "n, mean and spread need three different columns.", key=key, **loc)
        seen[col] = key
    places = {}
    for key in ("mean_decimals", "spread_decimals"):
        v = t.get(key, d[key])
        if v is not None and (isinstance(v, bool) or not isinstance(v, int) or not 0 <= v <= D.MAX_DECIMALS):
            raise ck.fail(f"data.{key}", f"must be a whole number of decimals from 0 to {D.MAX_DECIMALS}, "
                          f"such as 2 for values like 4.37 (got {_show(v)}).", key=key, **loc)
        places[key] = v
    return SummarySpec(spread=spread, **names, **places)


def _read_factors(doc, ck: _Checker, data: DataSpec) -> tuple[FactorSpec, ...]:
    if "factors" not in doc:
        raise ck.fail("factors", "is required: add at least one [[factors]] table with name and levels.")
    raw = doc["factors"]
    if not isinstance(raw, list) or not all(isinstance(f, dict) for f in raw):
        raise ck.fail("factors", "must be written as [[factors]] tables, one per factor.", key="factors")
    if not raw:
        raise ck.fail("factors", "must hold at least one factor.")
    if len(raw) > D.MAX_FACTORS:
        raise ck.fail("factors", f"lists {len(raw)} factors; the limit is {D.MAX_FACTORS}.", table="factors",
                      index=D.MAX_FACTORS + 1)
    out: list[FactorSpec] = []
    names: set[str] = set()
    for i, f in enumerate(raw, start=1):
        loc = {"table": "factors", "index": i}
        p = f"factors[{i}]."
        ck.unknown_keys(f, _FACTOR_KEYS, p, **loc)
        name = ck.text(f, "name", p + "name", **loc).strip()
        if name in names:
            raise ck.fail(p + "name", f'repeats the factor name "{name}"; each factor needs its own name.', key="name", **loc)
        if name == data.outcome:
            raise ck.fail(p + "name", f'is "{name}", which is also the outcome column.', key="name", **loc)
        if name.lower() == "mean" or " x " in name:
            raise ck.fail(p + "name", f'"{name}" is reserved in hypotheses; choose another name.', key="name", **loc)
        names.add(name)
        if "levels" not in f:
            raise ck.fail(p + "levels", 'is required: list the levels in report order, e.g. levels = ["a", "b"].', **loc)
        levels = f["levels"]
        if not isinstance(levels, list):
            raise ck.fail(p + "levels", f"must be a list (got {_show(levels)}).", key="levels", **loc)
        if len(levels) > D.MAX_LEVELS:
            raise ck.fail(p + "levels", f"lists {len(levels)} levels; the limit is {D.MAX_LEVELS}.", key="levels", **loc)
        texts = []
        for j, lv in enumerate(levels, start=1):
            if not isinstance(lv, (str, int, float)) or isinstance(lv, bool):
                raise ck.fail(f"{p}levels[{j}]", f"must be text or a number (got {_show(lv)}).", key="levels", **loc)
            if isinstance(lv, float) and not math.isfinite(lv):
                raise ck.fail(f"{p}levels[{j}]", f"must be a finite number (got {lv!r}).", key="levels", **loc)
            t = level_text(lv)
            if not t:
                raise ck.fail(f"{p}levels[{j}]", "must not be empty.", key="levels", **loc)
            ck.length(t, D.MAX_NAME_CHARS, f"{p}levels[{j}]", key="levels", **loc)
            texts.append(t)
        if len(texts) < 2:
            raise ck.fail(p + "levels", f"must list at least 2 levels (got {len(texts)}).", key="levels", **loc)
        seen: dict[str, int] = {}
        for j, t in enumerate(texts, start=1):
            k = _level_key(t)
            if k in seen:
                raise ck.fail(
                    p + "levels",
                    f'lists the level "{t}" twice (positions {seen[k]} and {j}); each level once.',
                    key="levels",
                    **loc,
                )
            seen[k] = j
        exclude = f.get("exclude", [])
        if (not isinstance(exclude, list) or len(exclude) > D.MAX_LEVELS
                or not all(isinstance(e, (str, int, float)) and not isinstance(e, bool) for e in exclude)):
            raise ck.fail(p + "exclude", f"must be a list of at most {D.MAX_LEVELS} levels to leave out (got {_show(exclude)}).", key="exclude", **loc)
        ex = tuple(level_text(e) for e in exclude)
        for j, e in enumerate(ex, start=1):
            ck.length(e, D.MAX_NAME_CHARS, f"{p}exclude[{j}]", key="exclude", **loc)
        for e in ex:
            if _level_key(e) in seen:
                raise ck.fail(p + "exclude", f'names "{e}", which is also in levels; a level is either analysed or excluded.', key="exclude", **loc)
        column = f.get("column")
        if column is not None and (not isinstance(column, str) or not column.strip()):
            raise ck.fail(p + "column", f"must be the name of a data column (got {_show(column)}).", key="column", **loc)
        fcol = column.strip() if column else name
        if data.summary is not None and fcol in (data.summary.n_column, data.summary.mean_column, data.summary.spread_column):
            raise ck.fail(p + ("column" if column else "name"), f'reads the column "{fcol}", which [data] names as the '
                          "n, mean or spread column; a factor needs its own column.", key="column" if column else "name", **loc)
        if column is not None:
            ck.length(column, D.MAX_NAME_CHARS, p + "column", key="column", **loc)
        out.append(FactorSpec(name=name, levels=tuple(texts), exclude=ex, column=column.strip() if column else None))
    cells = math.prod(len(f.levels) for f in out)
    if cells > D.MAX_CELLS:
        counts = " × ".join(str(len(f.levels)) for f in out)
        raise ck.fail(
            "factors",
            f"define {counts} = {cells} cells; the limit is {D.MAX_CELLS}. A between-subjects design "
            "this large cannot be estimated from real data: drop factors or levels.",
            table="factors", index=1,
        )
    return tuple(out)


def _read_covariates(doc, ck: _Checker, data: DataSpec, factors) -> tuple[CovariateSpec, ...]:
    """The ``[[covariates]]`` tables (see :data:`~reporter.intake.defaults.COVARIATES_DEFAULTS`)."""
    if "covariates" not in doc:
        return ()
    raw = doc["covariates"]
    if not isinstance(raw, list) or not all(isinstance(c, dict) for c in raw):
        raise ck.fail("covariates", f'must be written as [[covariates]] tables, one per covariate, each with '
                      f'name = "..." (got {_show(raw)}).', key="covariates")
    if raw and data.layout == "cell-summaries":
        raise ck.fail("covariates", 'cannot be used with [data] layout = "cell-summaries": a table of cell summaries '
                      "gives each cell's n, mean and spread of the outcome, but not the within-cell covariances of "
                      "the covariates with the outcome that the adjustment needs. Give the data as rows "
                      '(layout = "rows"), or remove the [[covariates]] tables.', table="covariates", index=1)
    if len(raw) > D.MAX_COVARIATES:
        raise ck.fail("covariates", f"lists {len(raw)} covariates; the limit is {D.MAX_COVARIATES}. Keep the few "
                      "measured before the treatment that predict the outcome best.",
                      table="covariates", index=D.MAX_COVARIATES + 1)
    taken: dict[str, str] = {data.outcome: "the outcome column"}
    for f in factors:
        taken.setdefault(f.data_column, f"the column of factor '{f.name}'")
        taken.setdefault(f.name, f"the name of factor '{f.name}'")
    out: list[CovariateSpec] = []
    seen: dict[str, int] = {}
    for i, c in enumerate(raw, start=1):
        loc = {"table": "covariates", "index": i}
        p = f"covariates[{i}]."
        ck.unknown_keys(c, _COVARIATE_KEYS, p, **loc)
        name = ck.text(c, "name", p + "name", **loc).strip()
        if name in seen:
            raise ck.fail(p + "name", f'repeats the covariate "{name}" of covariates[{seen[name]}]; list each '
                          "covariate once.", key="name", **loc)
        if name in taken:
            raise ck.fail(p + "name", f'is "{name}", which is {taken[name]}; a covariate needs a numeric column of '
                          "its own. Name another column.", key="name", **loc)
        seen[name] = i
        adjust_to, exact = _adjust_to(c, ck, p + "adjust_to", loc)
        slopes = ck.choice(c, "slopes", p + "slopes", D.COVARIATE_SLOPES, D.COVARIATES_DEFAULTS["slopes"], **loc)
        desc = ck.text(c, "description", p + "description", required=False, limit=D.MAX_DESCRIPTION_CHARS, **loc)
        out.append(CovariateSpec(name=name, adjust_to=adjust_to, adjust_to_exact=exact, slopes=slopes,
                                 description=desc, index=i))
    return tuple(out)


def _adjust_to(c, ck: _Checker, path: str, loc: dict) -> tuple[float | None, Fraction | None]:
    """``adjust_to``: "mean" (None) or a finite number, with its exact value (a whole number as
    it is; a float64 as its shortest decimal, the number the plan wrote)."""
    value = c.get("adjust_to", D.COVARIATES_DEFAULTS["adjust_to"])
    if value == "mean":
        return None, None
    if isinstance(value, int) and not isinstance(value, bool):
        return float(value), Fraction(value)
    if isinstance(value, float) and math.isfinite(value):
        return value, Fraction(repr(value))
    hint = ""
    if isinstance(value, str):
        t = value.strip()
        if is_plain(t) and math.isfinite(float(t)):
            hint = f" Write the number without quotes: adjust_to = {t}."
        elif difflib.get_close_matches(t.lower(), ["mean", "average", "avg"], n=1, cutoff=0.6) or t.lower() == "mean":
            hint = ' Did you mean "mean"?'
    raise ck.fail(path, f'must be "mean" (the mean of the rows used) or a finite number in the covariate\'s units, '
                  f"such as 50 (got {ck.raw('adjust_to', value, **loc)}).{hint}", key="adjust_to", **loc)


def _level_key(text: str):
    """Levels compare as text after trimming, or as numbers when the text is a plain decimal
    number (``1``, ``1.0`` and ``1e0`` are one level; ``1_000`` or full-width digits are text)."""
    t = text.strip()
    if not is_plain(t):
        return ("text", t)
    x = float(t)
    if math.isfinite(x):
        return ("number", x)
    return ("text", t)


level_key = _level_key


def _plain_exp(x: float) -> str:
    return f"{x:g}".replace("e-0", "e-")


def _read_analysis(doc, ck: _Checker, factors) -> AnalysisSpec:
    t = _table(doc, "analysis", ck, required=False)
    loc = {"table": "analysis"}
    ck.unknown_keys(t, tuple(D.ANALYSIS_DEFAULTS), "analysis.", **loc)
    a = dict(D.ANALYSIS_DEFAULTS)
    alpha = t.get("alpha", a["alpha"])
    if isinstance(alpha, bool) or not isinstance(alpha, (int, float)) or not (D.MIN_ALPHA <= alpha < 0.5):
        raise ck.fail(
            "analysis.alpha",
            f"must be a number between {_plain_exp(D.MIN_ALPHA)} and 0.5 (0.5 excluded), such as 0.05 "
            f"(got {ck.raw('alpha', alpha, **loc)}).",
            key="alpha", **loc)
    coding = ck.choice(t, "coding", "analysis.coding", tuple(D.CODINGS), a["coding"], **loc)
    ss = _sums_of_squares(t, ck, loc)
    corr = ck.choice(t, "correction", "analysis.correction", D.CORRECTIONS, a["correction"], **loc)
    follow_up = t.get("follow_up", [])
    if isinstance(follow_up, str):
        follow_up = [follow_up]
    if not isinstance(follow_up, list):
        raise ck.fail("analysis.follow_up", f"must be a list such as [\"all-pairs-tukey\"] (got {_show(follow_up)}).",
                      key="follow_up", **loc)
    first_at: dict[str, int] = {}
    for j, fam in enumerate(follow_up, start=1):
        ck.choice({"follow_up": fam}, "follow_up", f"analysis.follow_up[{j}]", tuple(D.FOLLOW_UPS), None, **loc)
        if fam in first_at:
            raise ck.fail(
                f"analysis.follow_up[{j}]",
                f'repeats "{fam}" (first at position {first_at[fam]}); list each family once.',
                key="follow_up", **loc,
            )
        first_at[fam] = j
    names = [f.name for f in factors]
    on = t.get("follow_up_compares", "cells")
    if on != "cells" and on not in names:
        choices = ["cells", *names]
        ck.choice({"follow_up_compares": on}, "follow_up_compares", "analysis.follow_up_compares", tuple(choices), None, **loc)
    control = t.get("follow_up_control")
    if control is not None:
        if not isinstance(control, (str, int, float)) or isinstance(control, bool):
            raise ck.fail("analysis.follow_up_control", f"must be a level name (got {_show(control)}).",
                          key="follow_up_control", **loc)
        control = level_text(control)
        ck.length(control, D.MAX_NAME_CHARS * D.MAX_FACTORS, "analysis.follow_up_control", key="follow_up_control", **loc)
    if control is not None and factors:
        if on == "cells":
            groups = ["/".join(combo) for combo in itertools.product(*(f.levels for f in factors))]
        else:
            groups = list(next(f for f in factors if f.name == on).levels)
        if _level_key(control) not in {_level_key(g) for g in groups}:
            hint = difflib.get_close_matches(control, groups, n=1, cutoff=0.5)
            fix = f" Did you mean \"{hint[0]}\"?" if hint else ""
            shown = ", ".join(f'"{g}"' for g in groups[:12])
            raise ck.fail("analysis.follow_up_control",
                          f"must be one of the compared groups ({shown}) (got {_show(control)}).{fix}",
                          key="follow_up_control", **loc)
    if "versus-control-dunnett" in follow_up and control is None:
        raise ck.fail("analysis.follow_up_control",
                      'is required by follow_up "versus-control-dunnett": name the control group, '
                      'e.g. follow_up_control = "placebo".', key="follow_up", **loc)
    uv = ck.choice(t, "unequal_variances", "analysis.unequal_variances", D.UNEQUAL_VARIANCES, a["unequal_variances"], **loc)
    perms = t.get("permutations", a["permutations"])
    if isinstance(perms, bool) or not isinstance(perms, int) or not (0 <= perms <= 10_000_000):
        raise ck.fail("analysis.permutations", f"must be a whole number from 0 (no permutation test) to 10000000 (got {ck.raw('permutations', perms, **loc)}).", key="permutations", **loc)
    seed = t.get("seed", a["seed"])
    if isinstance(seed, bool) or not isinstance(seed, int) or not (0 <= seed < 2**63):
        raise ck.fail("analysis.seed", f"must be a whole number from 0 to 2^63 − 1 (got {ck.raw('seed', seed, **loc)}).", key="seed", **loc)
    max_rows = t.get("permutation_max_rows", a["permutation_max_rows"])
    if isinstance(max_rows, bool) or not isinstance(max_rows, int) or max_rows < 0:
        raise ck.fail("analysis.permutation_max_rows", f"must be a whole number ≥ 0 of rows, above which the permutation F is skipped (got {ck.raw('permutation_max_rows', max_rows, **loc)}).", key="permutation_max_rows", **loc)
    return AnalysisSpec(
        alpha=float(alpha),
        parameterization=D.CODINGS[coding],
        ss_type=D.SUMS_OF_SQUARES[ss],
        correction=corr,
        posthoc=tuple(D.FOLLOW_UPS[f] for f in follow_up),
        posthoc_on=on,
        control=control,
        unequal_variances=uv,
        permutations=perms,
        seed=seed,
        permutation_max_rows=max_rows,
    )


_ROMAN = re.compile(r"(?i)(?:type[\s_-]*)?([ivx]+|[0-9]+)")


def _sums_of_squares(t, ck: _Checker, loc: dict) -> str:
    """The plan's type of sums of squares ("type-I", "type-II", "type-III"). A value naming a type
    the tool does not compute (IV, 4) gets no look-alike suggestion: Type IV is not Type I."""
    key, path = "sums_of_squares", "analysis.sums_of_squares"
    value = t.get(key, D.ANALYSIS_DEFAULTS[key])
    if isinstance(value, str) and value in D.SUMS_OF_SQUARES:
        return value
    allowed = ", ".join(f'"{c}"' for c in D.SUMS_OF_SQUARES)
    m = _ROMAN.fullmatch(value.strip()) if isinstance(value, str) else None
    roman = {"1": "I", "2": "II", "3": "III"}.get(m.group(1), m.group(1).upper()) if m else None
    if isinstance(value, int) and not isinstance(value, bool):
        roman = {1: "I", 2: "II", 3: "III"}.get(value)
        fix = f' Write it as text: "type-{roman}".' if roman else f" Type {value} sums of squares are not computed here."
    elif roman in ("I", "II", "III"):
        fix = f' Did you mean "type-{roman}"?'
    elif roman is not None:
        fix = f" Type {roman} sums of squares are not computed here."
    else:
        fix = ""
    raise ck.fail(path, f"must be one of {allowed} (got {ck.raw(key, value, **loc)}).{fix}", key=key, **loc)


def _read_hypotheses(doc, ck: _Checker) -> tuple[HypothesisSpec, ...]:
    raw = doc.get("hypotheses", [])
    if not isinstance(raw, list) or not all(isinstance(h, dict) for h in raw):
        raise ck.fail("hypotheses", "must be written as [[hypotheses]] tables.", key="hypotheses")
    if len(raw) > D.MAX_HYPOTHESES:
        raise ck.fail("hypotheses", f"lists {len(raw)} hypotheses; the limit is {D.MAX_HYPOTHESES}.",
                      table="hypotheses", index=D.MAX_HYPOTHESES + 1)
    out: list[HypothesisSpec] = []
    names: dict[str, int] = {}
    for i, h in enumerate(raw, start=1):
        loc = {"table": "hypotheses", "index": i}
        p = f"hypotheses[{i}]."
        ck.unknown_keys(h, _HYP_KEYS, p, **loc)
        name = ck.text(h, "name", p + "name", **loc).strip()
        if name in names:
            raise ck.fail(p + "name", f'repeats the name "{name}" of hypotheses[{names[name]}]; give each hypothesis its own name.', key="name", **loc)
        names[name] = i
        means = ck.text(h, "means", p + "means", required=False, limit=D.MAX_STATEMENT_CHARS, **loc)
        effect = ck.text(h, "effect", p + "effect", required=False, limit=D.MAX_STATEMENT_CHARS, **loc)
        if effect is not None:
            _check_effect_spelling(ck, effect, p + "effect", loc)
        if means is not None and effect is not None:
            raise ck.fail(p + "effect", "cannot stand beside 'means' in one hypothesis: keep one, or split them into two [[hypotheses]].", key="effect", **loc)
        if means is None and effect is None:
            raise ck.fail(p + "means", 'is missing: give means = "a > b" (a statement about means) or effect = "factor".', **loc)
        role = ck.choice(h, "role", p + "role", D.ROLES, "planned", **loc)
        desc = ck.text(h, "description", p + "description", required=False, limit=D.MAX_DESCRIPTION_CHARS, **loc)
        line = ck.loc.line_of("hypotheses", i, "means" if means is not None else "effect")
        out.append(HypothesisSpec(name=name, means=means, effect=effect, role=role, description=desc, index=i, line=line))
    return tuple(out)


def _check_effect_spelling(ck: _Checker, effect: str, path: str, loc: dict) -> None:
    """Refuse the operators of model-formula languages in an effect: the plan writes A x B."""
    outside = re.sub(r"`[^`]*`", lambda m: " " * len(m.group()), effect)  # names in backticks may hold anything
    for op in (":", "*"):
        if op in outside:
            names = [effect[m.start():m.end()].strip() for m in re.finditer(r"[^:*]+", outside)]
            fix = " x ".join(n for n in names if n) or "A x B"
            meaning = "in a plan, factors of an interaction are joined by x"
            if op == "*":
                meaning += " ('*' in model formulas also adds every main effect, which an effect here does not)"
            raise ck.fail(
                path,
                f"uses '{op}' (got {_show(effect)}); {meaning}. Write effect = \"{fix}\" (or with ×), "
                "and test each main effect in its own [[hypotheses]].",
                key="effect", **loc,
            )


def _read_study(doc, ck: _Checker) -> StudySpec:
    t = _table(doc, "study", ck, required=False)
    loc = {"table": "study"}
    ck.unknown_keys(t, _STUDY_KEYS, "study.", **loc)
    values = {k: ck.text(t, k, f"study.{k}", required=False, limit=D.MAX_DESCRIPTION_CHARS, **loc) for k in _STUDY_KEYS}
    return StudySpec(**values)


def _read_planning(doc, ck: _Checker, analysis: AnalysisSpec) -> PlanningSpec | None:
    """The optional ``[planning]`` table (see :data:`~reporter.intake.defaults.PLANNING_DEFAULTS`)."""
    if "planning" not in doc:
        return None
    t = _table(doc, "planning", ck, required=False)
    loc = {"table": "planning"}
    ck.unknown_keys(t, tuple(D.PLANNING_DEFAULTS), "planning.", **loc)
    sizes = {}
    examples = {"smallest_effect_f": "0.25", "smallest_effect_d": "0.5", "smallest_difference": "3.5",
                "assumed_sd": "5"}
    for key, example in examples.items():
        v = t.get(key)
        if v is None:
            sizes[key] = None
            continue
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v) or not 0 < v <= 1e100:
            raise ck.fail(f"planning.{key}", f"must be a positive number such as {example} "
                          f"(got {ck.raw(key, v, **loc)}).", key=key, **loc)
        sizes[key] = float(v)
    if sizes["smallest_effect_d"] is not None and sizes["smallest_difference"] is not None:
        raise ck.fail("planning.smallest_difference", "cannot stand beside 'smallest_effect_d': give the smallest "
                      "contrast of interest once, either standardized (d) or in the outcome's units with assumed_sd.",
                      key="smallest_difference", **loc)
    if sizes["smallest_difference"] is not None and sizes["assumed_sd"] is None:
        raise ck.fail("planning.assumed_sd", "is required with 'smallest_difference': add the within-cell SD you "
                      "expect, e.g. assumed_sd = 5, so the difference can be put on the scale of the tests.",
                      key="smallest_difference", **loc)
    if sizes["assumed_sd"] is not None and sizes["smallest_difference"] is None:
        raise ck.fail("planning.assumed_sd", "is only used with 'smallest_difference' (the smallest contrast in the "
                      "outcome's units): add that key, or remove assumed_sd.", key="assumed_sd", **loc)
    if all(sizes[k] is None for k in ("smallest_effect_f", "smallest_effect_d", "smallest_difference")):
        raise ck.fail("planning", "names no smallest effect of interest: add smallest_effect_f (Cohen's f, for F "
                      "tests), smallest_effect_d (for one-row contrasts) or smallest_difference with assumed_sd.",
                      table="planning")
    powers = t.get("powers", list(D.PLANNING_DEFAULTS["powers"]))
    if (not isinstance(powers, list) or not powers or len(powers) > D.MAX_PLANNING_POWERS
            or not all(isinstance(p, (int, float)) and not isinstance(p, bool) for p in powers)):
        raise ck.fail("planning.powers", f"must be a list of 1 to {D.MAX_PLANNING_POWERS} powers such as [0.8, 0.9] "
                      f"(got {_show(powers)}).", key="powers", **loc)
    for j, p in enumerate(powers, start=1):
        if not (analysis.alpha < p < 1):
            raise ck.fail(f"planning.powers[{j}]", f"must lie between alpha ({analysis.alpha:g}) and 1, such as 0.8 "
                          f"(got {_show(p)}).", key="powers", **loc)
    if len(set(powers)) != len(powers):
        raise ck.fail("planning.powers", f"lists a power twice (got {_show(powers)}); list each once.",
                      key="powers", **loc)
    return PlanningSpec(powers=tuple(float(p) for p in powers), **sizes)
