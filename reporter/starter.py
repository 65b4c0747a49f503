"""``anova-report init DATA``: a commented starter plan written next to a data file.

The data file is read by the intake's rules (a regular file; UTF-8 text with a header, or
Parquet; :mod:`reporter.intake.data`, :mod:`reporter.intake.files`). A file under
``OUT_OF_CORE_BYTES`` is read whole. A larger one is read in two steps: its first
:data:`SAMPLE_ROWS` rows to guess the roles of the columns, then only the factor columns in
full, to list every level (one DuckDB query, :mod:`reporter.intake.duck`).

How the roles are guessed (the thresholds are common practice, no source):

* A **factor** is a column with 2 to :data:`FACTOR_MAX_LEVELS` distinct values and at least two
  rows per value on average. At most :data:`MAX_GUESSED_FACTORS` are taken, left to right, while
  the design stays within ``MAX_CELLS`` cells; the others are named on stderr.
* The **outcome** is the numeric column (every value a plain decimal number, missing values
  aside) with the most distinct values, preferring one with more than ``FACTOR_MAX_LEVELS``;
  a column of consecutive whole numbers, each once (a row number or an identifier), is skipped.

Levels are listed in their order of first appearance in the file; values that compare equal as
levels (``1`` and ``1.0``, text with surrounding spaces) are one level, written as first seen.
Values that the intake reads as missing (``[data] missing``) are not levels.
"""

from __future__ import annotations

import collections
import difflib
import math
import os
import re
import tempfile
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Iterable, Sequence

from reporter.errors import DataError, OptionError, ReporterError
from reporter.intake import defaults as D
from reporter.intake.canonical import _string as toml_string
from reporter.intake.files import describe_path
from reporter.intake.numtext import is_plain
from reporter.intake.plan import level_key

#: A column with this many distinct values or fewer (and at least 2) may be a factor.
FACTOR_MAX_LEVELS = 12
#: At most this many factors are guessed (a user may name more with --factor).
MAX_GUESSED_FACTORS = 3
#: Rows of a large file read to guess the roles of its columns.
SAMPLE_ROWS = 10_000

_MISSING = tuple(D.DATA_DEFAULTS["missing"])
_NA_WORDS = ("nan", "+nan", "-nan")


@dataclass(frozen=True)
class Column:
    """What the guess needs to know of one column."""

    name: str
    values: int  # non-missing values
    numeric: bool  # every non-missing value is a plain decimal number
    levels: tuple[str, ...]  # distinct values in order of first appearance (at most MAX_LEVELS + 1)
    distinct: int  # distinct values, counted up to MAX_LEVELS + 1 (more: "many")
    counter: bool  # consecutive whole numbers, each once: a row number or an identifier
    example: str = ""  # the first value that is not a number (for messages)

    @property
    def many(self) -> bool:
        return self.distinct > D.MAX_LEVELS


@dataclass(frozen=True)
class Starter:
    """The plan text, where it goes, and what was guessed (one line per guess, for stderr)."""

    path: Path
    text: str
    guesses: tuple[str, ...]
    read: str = ""  # how the data file was read, in words


def _text(v) -> str | None:
    """A cell as the level matcher reads it: trimmed text, None when missing."""
    from reporter.intake.data import _value_text

    t = _value_text(v)
    if t is None or t == "" or t in _MISSING or t.lower() in _NA_WORDS:
        return None
    return t


class _Profile:
    """Accumulates one column, value by value, in file order."""

    def __init__(self, name: str):
        self.name = name
        self.values = 0
        self.numeric = True
        self.example = ""
        self.levels: dict[object, str] = {}
        self.numbers: set[float] = set()
        self.whole = True

    def add(self, v, count: int = 1) -> None:
        t = _text(v)
        if t is None:
            return
        self.values += count
        k = level_key(t)
        if k not in self.levels and len(self.levels) <= D.MAX_LEVELS:
            self.levels[k] = t
        if self.numeric:
            if is_plain(t) and math.isfinite(float(t)):
                x = float(t)
                self.whole = self.whole and x.is_integer()
                self.numbers.add(x)
            else:
                self.numeric, self.example = False, t

    def column(self) -> Column:
        distinct = len(self.levels)
        counter = (self.numeric and self.whole and self.values > FACTOR_MAX_LEVELS
                   and len(self.numbers) == self.values
                   and max(self.numbers) - min(self.numbers) + 1 == self.values)
        return Column(self.name, self.values, self.numeric and self.values > 0, tuple(self.levels.values()),
                      distinct, counter, self.example)


def _profile(header: Sequence[str], rows: Iterable[Sequence]) -> list[Column]:
    profiles = [_Profile(h) for h in header]
    for rec in rows:
        for p, v in zip(profiles, rec):
            p.add(v)
    return [p.column() for p in profiles]


# ---------------------------------------------------------------------------------------------
# Reading


class _Source:
    """A data file: its columns profiled (from a sample when large) and, on request, the full
    levels of some columns and the number of rows in each combination of their levels."""

    def __init__(self, path: Path):
        from reporter.intake.data import require_file

        if any(ch in path.name for ch in "*?"):
            raise DataError(f"{describe_path(path)}: init reads one data file; name the file, not a pattern.")
        self.path = require_file(path, "Give 'anova-report init' the path of a .csv, .tsv or .parquet data file.")
        self.suffix = path.suffix.lower()
        if self.suffix not in (".csv", ".tsv", ".txt", ".parquet"):
            raise DataError(
                f"{describe_path(path)}: is not a data file init can read (the name ends in "
                f"'{self.suffix or '(nothing)'}'). Give a .csv, .tsv or .parquet file."
            )
        self.delimiter = "\t" if self.suffix == ".tsv" else ","
        self.large = path.stat().st_size >= D.OUT_OF_CORE_BYTES
        self.rows: list[Sequence] | None = None  # all rows, when the file is read whole
        self.header, sample = self._read()
        if not self.header:
            raise DataError(f"{describe_path(path)}: has no columns.")
        sample = sample[:SAMPLE_ROWS]  # the roles are guessed from the first rows, whatever the file's size
        self.columns = _profile(self.header, sample)
        self.sample = sample  # the rows the roles are guessed from

    def _read(self) -> tuple[list[str], list[Sequence]]:
        if self.suffix == ".parquet":
            return self._parquet_head()
        if not self.large:
            from reporter.intake.data import _parse_text, _read_text_file, check_widths

            raw, _ = _read_text_file(self.path)
            header, rows, lines = _parse_text(raw, describe_path(self.path), self.delimiter)
            check_widths(describe_path(self.path), header, rows, lines)
            self.rows = rows
            return header, rows
        from reporter.intake.duck.files import _read_header

        header, _ = _read_header(self.path, self.delimiter)
        return header, self._duck(f"SELECT * FROM {self._scan(len(header))} LIMIT {SAMPLE_ROWS}")

    def _parquet_head(self):
        from reporter.intake.data import open_parquet

        pf, _ = open_parquet(self.path)
        header = list(pf.schema_arrow.names)
        if self.large:
            batch = next(pf.iter_batches(batch_size=SAMPLE_ROWS), None)
            cols = [batch.column(i).to_pylist() for i in range(batch.num_columns)] if batch is not None else []
        else:
            table = pf.read()
            cols = [table.column(i).to_pylist() for i in range(table.num_columns)]
            self.rows = list(zip(*cols)) if cols else []
            return header, self.rows
        return header, list(zip(*cols)) if cols else []

    def _parquet_types(self):
        from reporter.intake.duck.connection import _lit

        return [(r[0], r[1]) for r in self._duck(f"DESCRIBE SELECT * FROM read_parquet({_lit(self.path.as_posix())})")]

    def _scan(self, width: int) -> str:
        from reporter.intake.duck.connection import _lit

        spec = "{" + ", ".join(f"'c{i}': 'VARCHAR'" for i in range(width)) + "}"
        return (f"read_csv({_lit(self.path.as_posix())}, header = true, auto_detect = false, columns = {spec}, "
                f"delim = {_lit(self.delimiter)}, quote = '\"', escape = '\"', encoding = 'utf-8')")

    def _duck(self, *queries: str):
        """Run queries in a private DuckDB; the rows of the last one."""
        from reporter.intake.duck.connection import _close, _connect, _run

        folder = tempfile.mkdtemp(prefix="anova-report-")
        con = _connect(folder)
        try:
            for q in queries[:-1]:
                _run(con, q, describe_path(self.path))
            _run(con, queries[-1], describe_path(self.path))
            return con.fetchall()
        finally:
            _close(con, folder)
            import shutil

            shutil.rmtree(folder, ignore_errors=True)

    def full(self, names: Sequence[str]) -> tuple[list[Column], dict[tuple, int]]:
        """Every level of the columns ``names`` (in order of first appearance) and the number of
        rows in each combination of their values (by level key; rows with a missing value are
        not counted)."""
        idx = [self.header.index(n) for n in names]
        if self.rows is not None:
            # One pass over the rows counts each combination of raw values (in order of first
            # appearance); each distinct combination is then read as text once.
            raw = collections.Counter(tuple(rec[i] for i in idx) for rec in self.rows)
            grouped = {}
            profiles = [_Profile(n) for n in names]
            for rec, n in raw.items():
                for p, v in zip(profiles, rec):
                    p.add(v, n)
                key = tuple(_text(v) for v in rec)
                grouped[key] = grouped.get(key, 0) + n
            cols = [p.column() for p in profiles]
        else:
            grouped, cols = self._duck_columns(idx)
        counts: dict[tuple, int] = {}
        for key, n in grouped.items():
            texts = [_text(v) for v in key]
            if all(t is not None for t in texts):
                k = tuple(level_key(t) for t in texts)
                counts[k] = counts.get(k, 0) + n
        return cols, counts

    def _duck_columns(self, idx):
        """Levels and combinations from DuckDB in one GROUP BY over the needed columns, each
        combination with its first row: Parquet gives its row numbers; a text file's needed
        columns are first copied to a table, whose rowid keeps the file's order."""
        from reporter.intake.duck.connection import _ident, _lit
        from reporter.intake.duck.levels import _factor_text_sql

        keys = ", ".join(f"f{j}" for j in range(len(idx)))
        if self.suffix == ".parquet":
            types = dict(self._parquet_types())
            cols = ", ".join(f"{_factor_text_sql(_ident(self.header[i]), types.get(self.header[i]))} AS f{j}"
                             for j, i in enumerate(idx))
            queries = [f"SELECT {keys}, count(*), min(file_row_number) AS first FROM (SELECT {cols}, file_row_number "
                       f"FROM read_parquet({_lit(self.path.as_posix())}, file_row_number = true)) GROUP BY ALL ORDER BY first"]
        else:
            cols = ", ".join(f"c{i} AS f{j}" for j, i in enumerate(idx))
            queries = [f"CREATE TABLE t AS SELECT {cols} FROM {self._scan(len(self.header))}",
                       f"SELECT {keys}, count(*), min(rowid) AS first FROM t GROUP BY ALL ORDER BY first"]
        rows = self._duck(*queries)
        profiles = [_Profile(self.header[i]) for i in idx]
        grouped: dict[tuple, int] = {}
        for r in rows:  # combinations in order of first appearance: so are the levels
            key, n = tuple(r[: len(idx)]), int(r[len(idx)])
            for p, v in zip(profiles, key):
                p.add(v, n)
            grouped[key] = grouped.get(key, 0) + n
        return grouped, [p.column() for p in profiles]


# ---------------------------------------------------------------------------------------------
# Guessing


def _named(source: _Source, name: str, option: str) -> Column:
    for c in source.columns:
        if c.name == name:
            return c
    hint = difflib.get_close_matches(name, source.header, n=1, cutoff=0.6)
    fix = f" Did you mean '{hint[0]}'?" if hint else ""
    shown = ", ".join(f"'{h}'" for h in source.header[:20]) + (" …" if len(source.header) > 20 else "")
    raise OptionError(f"{option} {name}: {describe_path(source.path)} has no such column. Its columns are {shown}.{fix}")


def _is_factor(c: Column) -> bool:
    return 2 <= c.distinct <= FACTOR_MAX_LEVELS and c.values >= 2 * c.distinct


def _every_cell_seen(source: _Source, cols: Sequence[Column]) -> bool:
    """Whether every combination of the columns' levels has a row (among the rows read so far)."""
    idx = [source.header.index(c.name) for c in cols]
    seen = set()
    for rec in source.sample:
        texts = [_text(rec[i]) for i in idx]
        if all(t is not None for t in texts):
            seen.add(tuple(level_key(t) for t in texts))
    return len(seen) == math.prod(c.distinct for c in cols)


def guess_roles(source: _Source, outcome: str | None, factors: Sequence[str]) -> tuple[Column, list[Column], list[str]]:
    """The outcome column, the factor columns and, for stderr, why each was chosen."""
    why: list[str] = []
    shown = describe_path(source.path)
    if outcome is not None:
        out = _named(source, outcome, "--outcome")
        if not out.numeric:
            raise DataError(
                f"{shown}: column '{out.name}' (--outcome) is not numeric: it holds "
                f"{toml_string(out.example) if out.example else 'no value'}. Name a column of numbers with --outcome."
            )
        why.append(f"outcome '{out.name}' (named with --outcome)")
    chosen = [_named(source, f, "--factor") for f in dict.fromkeys(factors)]
    if outcome is None:
        taken = {c.name for c in chosen}
        numeric = [c for c in source.columns if c.numeric and not c.counter and c.name not in taken and c.distinct >= 3]
        if not numeric:
            raise DataError(
                f"{shown}: no column can be the outcome: none holds only numbers with at least 3 distinct "
                "values (a column of consecutive whole numbers, each once, is taken for a row number). "
                "Name the outcome with --outcome COLUMN, or check that the file's numbers are plain decimals."
            )
        many = [c for c in numeric if c.distinct > FACTOR_MAX_LEVELS]
        pool = many or numeric
        out = max(pool, key=lambda c: c.distinct)  # max keeps the leftmost of equals
        count = "more than 256" if out.many else str(out.distinct)
        sampled = f" in the first {SAMPLE_ROWS} rows" if source.rows is None else ""
        why.append(f"outcome '{out.name}' (guessed): numeric with {count} distinct values{sampled}, the most of any numeric column"
                   + ("" if many else f" (no numeric column has more than {FACTOR_MAX_LEVELS})"))
    for c in chosen:
        if c.name == out.name:
            raise OptionError(f"--factor {c.name}: is also the outcome; a factor needs its own column.")
    if not factors:
        candidates = [c for c in source.columns if c.name != out.name and _is_factor(c)]
        cells = 1
        crossed: list[str] = []
        for c in candidates:
            if len(chosen) < MAX_GUESSED_FACTORS and cells * c.distinct <= D.MAX_CELLS:
                if _every_cell_seen(source, [*chosen, c]):
                    chosen.append(c)
                    cells *= c.distinct
                else:
                    crossed.append(c.name)
        if crossed:
            why.append("not used as factors, because crossed with the others some combinations of levels have "
                       "no rows: " + ", ".join(f"'{n}'" for n in crossed))
        left = [c.name for c in candidates if c not in chosen and c.name not in crossed]
        if left:
            why.append("also possible factors, not used: " + ", ".join(f"'{n}'" for n in left)
                       + " (name every factor with --factor to choose)")
        if not chosen:
            raise DataError(
                f"{shown}: no column can be a factor: none besides the outcome '{out.name}' has 2 to "
                f"{FACTOR_MAX_LEVELS} distinct values with at least two rows each on average. Name the "
                "factor columns with --factor COLUMN."
            )
    if len(chosen) > D.MAX_FACTORS:
        raise OptionError(f"--factor: {len(chosen)} factors named; a plan has at most {D.MAX_FACTORS}.")
    return out, chosen, why


# ---------------------------------------------------------------------------------------------
# Writing


def _in_statement(name: str) -> str | None:
    """A factor or level name as a hypothesis statement writes it (backticks where needed), or
    None when it cannot be written there (it holds a backtick)."""
    from reporter.model.hypotheses import _PLAIN_NAME

    if _PLAIN_NAME.match(name) and name != "mean":
        return name
    if "`" in name or name != name.strip():
        return None
    return f"`{name}`"


def _effect_text(names: Sequence[str]) -> str:
    return " x ".join(_in_statement(n) or n for n in names)


def starter_plan(data: str | os.PathLike, outcome: str | None = None, factors: Sequence[str] = ()) -> Starter:
    """The starter plan for a data file (nothing is written)."""
    source = _Source(Path(data))
    out, chosen, why = guess_roles(source, outcome, factors)
    for c in [out, *chosen]:
        if source.header.count(c.name) > 1:
            raise DataError(
                f"{describe_path(source.path)}: the header names the column '{c.name}' {source.header.count(c.name)} "
                "times; each column needs its own name. Rename or remove the duplicate."
            )
    cols, counts = source.full([c.name for c in chosen])
    for c in cols:
        if c.many:
            raise DataError(
                f"{describe_path(source.path)}: column '{c.name}' has more than {D.MAX_LEVELS} distinct values; "
                f"a factor has at most {D.MAX_LEVELS} levels. Name other factor columns with --factor."
            )
        if c.distinct < 2:
            raise DataError(
                f"{describe_path(source.path)}: column '{c.name}' holds {c.distinct} distinct value(s); a factor needs "
                "at least 2 levels. Name another factor column with --factor."
            )
    columns: dict[str, str] = {}  # factor name -> data column, where the column's name cannot be one
    for i, c in enumerate(cols):
        if _in_statement(c.name) is None or re.search(r"\s[x×]\s", c.name):
            cols[i] = replace(c, name=f"factor{i + 1}")
            columns[cols[i].name] = c.name
    how = "named with --factor" if factors else "guessed"
    why[1:1] = [f"factor '{columns.get(c.name, c.name)}' ({how}): {c.distinct} distinct values in {c.values} rows"
                + (f"; named {c.name} in the plan, as the column's name cannot be written in a statement"
                   if c.name in columns else "") for c in cols]
    cells = math.prod(c.distinct for c in cols)
    if cells > D.MAX_CELLS:
        raise OptionError(f"--factor: the factors give {cells} cells; a plan has at most {D.MAX_CELLS}. Name fewer factors.")
    empty = cells - sum(1 for k in counts if len(k) == len(cols))
    if empty:
        why.append(f"{empty} of the {cells} combinations of the factors' levels have no rows; 'check' names the "
                   "hypotheses that need them")
    text = "\n".join(_plan_lines(source, out, cols, why, columns)) + "\n"
    target = plan_path(source.path)
    plan = _validate(text, target, source)
    text = text.replace(_ANALYSIS_MARK, "\n".join(_analysis_lines(plan)), 1)
    if source.rows is not None:
        read = f"read {describe_path(source.path)} whole"
    else:
        read = (f"read the first {SAMPLE_ROWS} rows of {describe_path(source.path)} to guess the roles, "
                "then the factor columns in full")
    return Starter(target, text, tuple(why), read)


def _validate(text: str, target: Path, source: _Source):
    """The plan text passes the plan checks and its hypotheses compile (no data read)."""
    import tomllib

    from reporter.intake.plan import plan_from_dict
    from reporter.model.design import design_from_plan
    from reporter.model.hypotheses import compile_hypotheses

    try:
        plan = plan_from_dict(tomllib.loads(text), base_dir=target.parent, source=str(target), text=text)
        compile_hypotheses(plan, design_from_plan(plan))
        return plan
    except ReporterError as exc:
        raise DataError(f"{describe_path(source.path)}: no valid plan can be written for these columns: {exc}") from None


def _plan_lines(source: _Source, out: Column, cols: list[Column], why: list[str],
                columns: dict[str, str]) -> list[str]:
    data_name = source.path.name
    try:
        data_name.encode("utf-8")
    except UnicodeEncodeError as exc:
        raise DataError(
            f"{describe_path(source.path)}: the file's name holds bytes that are not UTF-8 (position {exc.start}), "
            "so a plan cannot name it. Rename the file with UTF-8 characters only.") from None
    names = [c.name for c in cols]
    title = f"{out.name} by {' and '.join(names)}"[: D.MAX_TITLE_CHARS]
    L = [
        f"# Starter plan for {data_name}, written by 'anova-report init'.",
        "# Every choice below is a guess from the data: read it, change what does not fit the study,",
        "# and keep only the hypotheses that were planned before the data were seen.",
        f"# Check it with: anova-report check {source.path.stem}.toml",
        "#",
        f"# Guesses (thresholds: common practice, no source; a factor has 2 to {FACTOR_MAX_LEVELS} distinct values):",
        *[f"#   {w}" for w in why],
    ]
    L += [
        "",
        f"title = {toml_string(title)}",
        "",
        "[data]",
        f"path = {toml_string(data_name)}   # relative to this plan file",
        f"outcome = {toml_string(out.name)}",
    ]
    for c in cols:
        L += [
            "",
            "[[factors]]",
            f"name = {toml_string(c.name)}",
            *([f"column = {toml_string(columns[c.name])}"] if c.name in columns else []),
            "# levels in order of first appearance in the data; reorder them as the report should list them",
            f"levels = [{', '.join(toml_string(lv) for lv in c.levels)}]",
        ]
    L += [
        "",
        _ANALYSIS_MARK,
        "",
        "# Omnibus F tests, one per main effect and interaction (unweighted marginal means).",
    ]
    for r in range(1, len(cols) + 1):
        for combo in _combinations(names, r):
            label = combo[0] if r == 1 else " x ".join(combo)
            kind = "main effect" if r == 1 else "interaction"
            L += ["", "[[hypotheses]]", f"name = {toml_string(f'{kind} of {label}'[: D.MAX_NAME_CHARS])}",
                  f"effect = {toml_string(_effect_text(combo))}"]
    L += _directional_examples(cols)
    # A comment ends at a line break and TOML refuses control characters in it: names from the
    # data (file, columns, levels) are shown there with those characters written as \\uXXXX.
    return [_comment(line) if line.startswith("#") else line for line in L]


def _comment(line: str) -> str:
    from reporter.render.visible import show_controls

    return show_controls(line).encode("utf-8", "backslashreplace").decode("utf-8")


_ANALYSIS_MARK = "# [analysis]: every key at its default"


def _analysis_lines(plan) -> list[str]:
    """The [analysis] table with every key at its default, commented out (from the plan the
    starter text gives, so the defaults are those of reporter.intake.defaults)."""
    from reporter.intake.canonical import _value, plan_mapping

    table = plan_mapping(plan)["analysis"]
    return ["# [analysis] keeps its defaults; to change one, uncomment the table and that key.",
            "# [analysis]", *[f"# {k} = {_value(v)}" for k, v in table.items()]]


def _combinations(names: Sequence[str], r: int) -> list[tuple[str, ...]]:
    from itertools import combinations

    return list(combinations(names, r))


def _directional_examples(cols: list[Column]) -> list[str]:
    """Commented directional statements in the plan's language, with the real level names."""
    L = ["", "# Directional hypotheses: uncomment one, put the levels in the order that was predicted,",
         "# and give it a name. '>' states the predicted direction (a one-sided test)."]
    one = len(cols) == 1

    def mean(pairs: Sequence[tuple[Column, str]]) -> str | None:
        parts = []
        for c, lv in pairs:
            f, v = _in_statement(c.name), _in_statement(lv)
            if f is None or v is None:
                return None
            parts.append(v if one else f"{f}={v}")
        return parts[0] if one else f"mean({', '.join(parts)})"

    examples: list[tuple[str, str | None, str]] = []
    for c in cols:
        a, b = c.levels[1], c.levels[0]
        examples.append((f"{a} above {b}", mean([(c, a)]) and f"{mean([(c, a)])} > {mean([(c, b)])}",
                         "one level's mean above another's" + ("" if one else " (marginal means)")))
        if c.distinct >= 3:
            rest = [mean([(c, lv)]) for lv in c.levels[1:]]
            if all(rest) and mean([(c, b)]):
                avg = f"({' + '.join(rest)})/{len(rest)}"
                examples.append((f"the other levels of {c.name} above {b}", f"{avg} > {mean([(c, b)])}",
                                 "the average of several levels above one"))
    if len(cols) >= 2:
        f1, f2 = cols[0], cols[1]
        lhs, rhs = mean([(f1, f1.levels[1]), (f2, f2.levels[0])]), mean([(f1, f1.levels[0]), (f2, f2.levels[0])])
        if lhs and rhs:
            examples.append((f"{f1.levels[1]} above {f1.levels[0]} at {f2.name} {f2.levels[0]}",
                             f"{lhs} > {rhs}", "a simple effect: one cell above another"))
    for name, statement, what in examples:
        if statement is None:
            L += ["", f"# ({name}: a level or factor name with a backtick cannot be written in a statement.)"]
            continue
        L += ["", f"# {what}", "# [[hypotheses]]", f"# name = {toml_string(name[: D.MAX_NAME_CHARS])}",
              f"# means = {toml_string(statement)}", '# role = "planned"']
    return L


def plan_path(data: str | os.PathLike) -> Path:
    """Where the starter plan of a data file goes: beside it, its name with ``.toml``."""
    path = Path(data)
    if not path.name:  # ".", "/": a folder, which has no name to put a plan beside; the reader refuses it
        from reporter.intake.data import require_file

        require_file(path, "Give 'anova-report init' the path of a .csv, .tsv or .parquet data file.")
    return path.with_name(path.stem + ".toml")


def refuse_existing(target: Path, force: bool) -> None:
    """Refuse a plan name that is taken (unless ``force``) or that is a folder."""
    if os.path.isdir(target):
        raise OptionError(f"{describe_path(target)}: is a folder; move it away to write the plan there.")
    if os.path.lexists(target) and not force:
        raise OptionError(
            f"{describe_path(target)}: a plan of that name exists already; it was left as it is. "
            "Give --force to replace it, or move it away first."
        )


def write_starter(starter: Starter, *, force: bool = False) -> Path:
    """Write the plan; an existing file is kept unless ``force`` (then replaced in one rename)."""
    target = starter.path
    refuse_existing(target, force)
    blob = starter.text.encode("utf-8")
    tmp = ""
    try:
        fd, tmp = tempfile.mkstemp(prefix=".anova-report-", suffix=".toml", dir=target.parent)
        with os.fdopen(fd, "wb") as fh:
            fh.write(blob)
        os.chmod(tmp, 0o666 & ~_umask())
        if force:
            os.replace(tmp, target)
        else:
            _link(tmp, target)
    except FileExistsError:
        _remove(tmp)
        raise OptionError(f"{describe_path(target)}: a plan of that name appeared meanwhile; it was left as it is.") from None
    except OSError as exc:
        _remove(tmp)
        raise OptionError(f"{describe_path(target)}: cannot be written ({exc.strerror or exc}).") from None
    except BaseException:
        _remove(tmp)
        raise
    return target


def _link(tmp: str, target: Path) -> None:
    """Give the written file its name unless the name is taken (then FileExistsError)."""
    try:
        os.link(tmp, target)
    except FileExistsError:
        raise
    except OSError:  # a file system without hard links: create the name exclusively
        fd = os.open(target, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666)
        with os.fdopen(fd, "wb") as fh, open(tmp, "rb") as src:
            fh.write(src.read())
    os.unlink(tmp)


def _remove(path: str) -> None:
    if not path:
        return
    try:
        os.unlink(path)
    except OSError:
        pass


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask

