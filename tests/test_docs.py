"""The user documentation in docs/ is run, so it cannot drift from the code.

* Every TOML block in docs/*.md is parsed and validated by the plan reader; a fragment (say, an
  ``[analysis]`` table alone) is validated inside a small plan built here, with the factors of the
  last ``[[factors]]`` block seen earlier in the same file. Every hypothesis in it is compiled
  against that design. A block marked ``<!-- refused -->`` must be refused, with the message of
  the ``text`` block that follows it; a ``contrast`` block after a hypothesis must match the
  compiled contrast matrix. Full plans whose data file is in demo_project/ are also read with
  their data.
* Every Python block is run.
* docs/plan-reference.md lists exactly the keys the plan reader accepts, with the defaults of
  reporter/intake/defaults.py; docs/results-json.md documents every field of the published JSON
  Schema, of real results.json files and of the writer in reporter/render/results_json.py.

The reference values here are the project's own code (the plan reader, the defaults module, the
schema): these tests check the documentation, not the statistics.
"""

from __future__ import annotations

import ast
import contextlib
import dataclasses
import json
import os
import re
import shutil
import tomllib
from fractions import Fraction
from pathlib import Path

import pytest

from reporter.errors import ReporterError
from reporter.intake import defaults as D
from reporter.intake import plan as P
from reporter.model.design import design_from_plan
from reporter.model.hypotheses import compile_hypotheses

ROOT = Path(__file__).resolve().parents[1]
DOCS = ROOT / "docs"
DEMO = ROOT / "demo_project"
DOC_FILES = sorted(DOCS.glob("*.md"))
DOC_NAMES = ("tutorial.md", "plan-reference.md", "hypotheses.md", "statistics.md", "results-json.md", "faq.md")

# ---------------------------------------------------------------------------------------------
# Reading the Markdown


@dataclasses.dataclass(frozen=True)
class Block:
    """One fenced code block: its info string, text, the line of its opening fence, and the marker
    comment (``<!-- ... -->``) on the line just above the fence, if any."""

    info: str
    text: str
    line: int
    marker: str | None


def fenced_blocks(path: Path) -> list[Block]:
    lines = path.read_text(encoding="utf-8").splitlines()
    out, i = [], 0
    while i < len(lines):
        m = re.match(r"^(`{3,})\s*([\w+-]*)\s*$", lines[i])
        if not m:
            i += 1
            continue
        fence, info, start = m.group(1), m.group(2), i
        j = i + 1
        while j < len(lines) and lines[j].strip() != fence:
            j += 1
        assert j < len(lines), f"{path.name}, line {start + 1}: a code block is never closed"
        above = lines[start - 1].strip() if start > 0 else ""
        marker = above[4:-3].strip() if above.startswith("<!--") and above.endswith("-->") else None
        out.append(Block(info, "\n".join(lines[start + 1 : j]), start + 1, marker))
        i = j + 1
    return out


def markdown_tables(path: Path) -> dict[str, list[list[str]]]:
    """Rows of the Markdown tables under each ``##``/``###`` heading (header and rule rows dropped)."""
    tables: dict[str, list[list[str]]] = {}
    heading, in_code, header_seen = "", False, False
    for line in path.read_text(encoding="utf-8").splitlines():
        if line.startswith("```"):
            in_code = not in_code
            continue
        if in_code:
            continue
        if line.startswith("#"):
            heading = line.lstrip("#").strip()
            continue
        if not line.startswith("|"):
            header_seen = False
            continue
        cells = [c.strip() for c in line.strip().strip("|").split("|")]
        if not header_seen:
            header_seen = True  # the header row
            continue
        if all(re.fullmatch(r":?-+:?", c) for c in cells):
            continue
        tables.setdefault(heading, []).append(cells)
    return tables


def test_docs_exist_and_readme_links_them():
    names = {p.name for p in DOC_FILES}
    expected = set(DOC_NAMES)
    assert expected <= names, f"missing: {sorted(expected - names)}"
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    section = readme.split("## Documentation", 1)
    assert len(section) == 2, "README.md has no '## Documentation' section"
    for name in sorted(expected):
        assert f"(docs/{name})" in section[1], f"README's Documentation section does not link docs/{name}"


def test_relative_links_between_docs_resolve():
    for path in [*DOC_FILES, ROOT / "README.md"]:
        text = path.read_text(encoding="utf-8")
        for target in re.findall(r"\]\(([^)#\s]+)(?:#[^)]*)?\)", text):
            if "://" in target:
                continue
            assert (path.parent / target).exists(), f"{path.name} links to {target}, which does not exist"


# ---------------------------------------------------------------------------------------------
# TOML blocks, hypotheses and contrasts

BASE_FACTORS = [{"name": "group", "levels": ["a", "b"]}]


def _plan_dict(doc: dict, factors: list) -> dict:
    """The block itself when it is a whole plan, else the block inside a small plan."""
    if "title" in doc and "data" in doc:
        return doc
    plan = {"title": "docs example", "data": {"path": "data.csv", "outcome": "docs_outcome"}, "factors": factors}
    for key, value in doc.items():
        if key == "data" and "path" not in value:
            plan["data"] = {**plan["data"], **value}
        else:
            plan[key] = value
    return plan


def _compile(doc: dict, factors: list, where: str, tmp_path: Path):
    plan = P.plan_from_dict(_plan_dict(doc, factors), base_dir=tmp_path, source=where)
    design = design_from_plan(plan)
    return plan, design, compile_hypotheses(plan, design)


def _expected_contrast(block: Block, design) -> tuple[list[list[Fraction]], list[Fraction]]:
    lines = [ln.split() for ln in block.text.splitlines() if ln.strip()]
    header, rows = lines[0], lines[1:]
    assert header[0] == "cells" and header[-1] == "h", f"line {block.line}: a contrast block starts with 'cells ... h'"
    assert header[1:-1] == [c.short for c in design.cells], f"line {block.line}: the cells are {[c.short for c in design.cells]}"
    C = [[Fraction(x) for x in r[:-1]] for r in rows]
    h = [Fraction(r[-1]) for r in rows]
    return C, h


def _toml_cases():
    for path in DOC_FILES:
        blocks = fenced_blocks(path)
        for i, b in enumerate(blocks):
            if b.info == "toml":
                yield pytest.param(path, i, id=f"{path.name}:{b.line}")


@pytest.mark.parametrize("path, index", list(_toml_cases()))
def test_toml_block(path: Path, index: int, tmp_path: Path):
    blocks = fenced_blocks(path)
    block = blocks[index]
    where = f"{path.name}, line {block.line}"
    factors = BASE_FACTORS
    for earlier in blocks[:index]:  # the last [[factors]] seen before this block
        if earlier.info == "toml":
            factors = tomllib.loads(earlier.text).get("factors", factors)
    doc = tomllib.loads(block.text)
    follow = blocks[index + 1] if index + 1 < len(blocks) else None
    if block.marker == "refused":
        with pytest.raises(ReporterError) as err:
            _compile(doc, doc.get("factors", factors), where, tmp_path)
        if follow is not None and follow.info == "text":
            shown = " ".join(follow.text.split())
            assert shown in " ".join(str(err.value).split()), f"{where}: the message shown is not the one given"
        return
    assert block.marker is None, f"{where}: unknown marker <!-- {block.marker} -->"
    plan, design, contrasts = _compile(doc, doc.get("factors", factors), where, tmp_path)
    assert len(contrasts) == len(doc.get("hypotheses", []))
    if follow is not None and follow.info == "contrast":
        assert len(contrasts) == 1, f"{where}: a contrast block follows a block of one hypothesis"
        C, h = _expected_contrast(follow, design)
        assert [list(r) for r in contrasts[0].weights] == C, f"{where}: the contrast shown differs from the compiled one"
        assert list(contrasts[0].rhs) == h
    if "title" in doc and "data" in doc and (DEMO / doc["data"]["path"]).is_file():
        _run_with_demo_data(doc, block, path, tmp_path)


def _run_with_demo_data(doc: dict, block: Block, path: Path, tmp_path: Path):
    """A whole plan over a demo data file: read the data and compile with the cell counts."""
    from reporter.api import prepare

    folder = tmp_path / "demo"
    shutil.copytree(DEMO, folder)
    plan_file = folder / f"docs_{block.line}.toml"
    plan_file.write_text(block.text, encoding="utf-8")
    prep = prepare(plan_file)
    assert prep.data.n > 0


def test_every_contrast_block_follows_a_hypothesis():
    for path in DOC_FILES:
        blocks = fenced_blocks(path)
        for i, b in enumerate(blocks):
            if b.info == "contrast":
                assert i > 0 and blocks[i - 1].info == "toml", f"{path.name}, line {b.line}: no TOML block before it"


def test_statements_appear_only_in_toml_blocks():
    """A statement example outside a TOML block would not be checked: keep them in TOML blocks (an
    excerpt of a plan file that a command wrote is loaded by the shell test instead)."""
    for path in DOC_FILES:
        for b in fenced_blocks(path):
            if b.info != "toml" and not (b.marker or "").startswith("excerpt of"):  # an excerpt of a plan is loaded
                assert not re.search(r"^\s*(means|effect)\s*=", b.text, re.M), (
                    f"{path.name}, line {b.line}: a hypothesis outside a ```toml block")


def _python_cases():
    for path in DOC_FILES:
        for i, b in enumerate(fenced_blocks(path)):
            if b.info == "python":
                yield pytest.param(path, i, id=f"{path.name}:{b.line}")


@contextlib.contextmanager
def _cwd(folder: Path):
    old = Path.cwd()
    os.chdir(folder)
    try:
        yield
    finally:
        os.chdir(old)


@pytest.mark.parametrize("path, index", list(_python_cases()))
def test_python_block(path: Path, index: int, tmp_path: Path):
    """Python examples run from a folder holding a copy of the demo project."""
    block = fenced_blocks(path)[index]
    shutil.copytree(DEMO, tmp_path / "demo_project")
    with _cwd(tmp_path):
        exec(compile(block.text, f"{path.name}:{block.line}", "exec"), {"__name__": "__docs__"})


# ---------------------------------------------------------------------------------------------
# The plan reference against the plan reader and defaults.py

PLAN_REF = DOCS / "plan-reference.md"
MINIMAL = {"title": "t", "data": {"path": "d.csv", "outcome": "y"}, "factors": [{"name": "g", "levels": ["a", "b"]}]}
PROBE = "zq_not_a_key"


def _allowed(plan: dict, prefix: str) -> set[str]:
    """The keys the plan reader accepts at one place, read from its own 'Allowed keys' message."""
    with pytest.raises(ReporterError) as err:
        P.plan_from_dict(plan)
    m = re.search(rf"'{re.escape(prefix + PROBE)}' is not a known key\. Allowed keys: (.*)\.$", str(err.value))
    assert m, f"probing {prefix or 'the top level'} gave: {err.value}"
    return set(m.group(1).split(", "))


_FIRST_ITEM = {"covariates": {"name": "x"}}  # a valid first table of an array not in MINIMAL


def code_keys() -> dict[str, set[str]]:
    """Every table of the plan and the keys the reader accepts in it."""
    top = _allowed({**MINIMAL, PROBE: 1}, "")
    out = {"": top}
    for table in sorted(top):
        value = MINIMAL.get(table)
        if isinstance(value, list) or table in ("factors", "hypotheses", "covariates"):
            item = dict(value[0]) if value else dict(_FIRST_ITEM.get(table, {"name": "h", "means": "a > b"}))
            probe = {**MINIMAL, table: [{**item, PROBE: 1}]}
            out[table] = _allowed(probe, f"{table}[1].")
        elif value is None or isinstance(value, dict):
            probe = {**MINIMAL, table: {**(value or {}), PROBE: 1}}
            try:
                out[table] = _allowed(probe, f"{table}.")
            except AssertionError:
                continue  # not a table (title, summary)
    return out


def documented() -> dict[str, dict[str, list[str]]]:
    """The key rows of plan-reference.md by table: under "## Top level" and under each heading
    that names a table ("## `[data]`", "## `[[factors]]`", ...)."""
    out: dict[str, dict[str, list[str]]] = {}
    for heading, rows in markdown_tables(PLAN_REF).items():
        m = re.fullmatch(r"`\[\[?(\w+)\]\]?`", heading)
        if heading == "Top level" or m:
            out["" if heading == "Top level" else m.group(1)] = {r[0].strip("`"): r for r in rows}
    return out


def test_plan_reference_lists_exactly_the_keys_the_reader_accepts():
    code, docs = code_keys(), documented()
    assert set(code) == set(docs), (f"tables the plan reader accepts {sorted(code)}, tables documented in "
                                    f"docs/plan-reference.md {sorted(docs)}: give each table a '## `[name]`' section")
    for table, keys in code.items():
        shown = set(docs[table])
        assert keys == shown, (f"[{table or 'top level'}]: keys accepted but not documented in docs/plan-reference.md "
                               f"{sorted(keys - shown)} (add a row: key, type, default, meaning); documented but "
                               f"refused {sorted(shown - keys)}")


def _code_default(table: str, key: str):
    """The default of a key as the code states it: ``<TABLE>_DEFAULTS`` in defaults.py, else the
    plan's dataclasses."""
    sources = [getattr(D, f"{table.upper()}_DEFAULTS", {})] + ([D.SUMMARY_DEFAULTS] if table == "data" else [])
    for source in sources:
        if key in source:
            value = source[key]
            return list(value) if isinstance(value, tuple) else value
    spec = {"factors": P.FactorSpec, "hypotheses": P.HypothesisSpec, "study": P.StudySpec}.get(table)
    if spec is not None:
        field = spec.__dataclass_fields__.get(key)
        if field is not None and field.default is not dataclasses.MISSING:
            return list(field.default) if isinstance(field.default, tuple) else field.default
    return None


def _without(plan: dict, table: str, key: str) -> dict:
    plan = json.loads(json.dumps(plan))
    if table == "":
        plan.pop(key, None)
    elif table in ("factors", "hypotheses", "covariates"):
        plan.setdefault(table, [dict(_FIRST_ITEM.get(table, {"name": "h", "means": "a > b"}))])
        plan[table][0].pop(key, None)
    else:
        plan.setdefault(table, {}).pop(key, None)
    return plan


def test_plan_reference_defaults_match_the_code():
    for table, rows in documented().items():
        for key, row in rows.items():
            assert len(row) == 4, f"[{table}] {key}: a row has key, type, default and meaning"
            shown = row[2]
            where = f"plan-reference.md, [{table or 'top level'}] {key}"
            if shown == "required":
                with pytest.raises(ReporterError, match="is required|is missing"):
                    P.plan_from_dict(_without(MINIMAL, table, key))
                continue
            if shown == "not set":
                assert _code_default(table, key) is None, f"{where}: the code has default {_code_default(table, key)!r}"
            else:
                m = re.fullmatch(r"`(.*)`", shown)
                assert m, f"{where}: the default must be `a TOML value`, 'required' or 'not set' (got {shown})"
                value = tomllib.loads(f"v = {m.group(1)}")["v"]
                assert value == _code_default(table, key), f"{where}: documented {value!r}, code {_code_default(table, key)!r}"
            if table in ("", "analysis", "data", "study"):  # a key with a default may be left out
                P.plan_from_dict(_without(MINIMAL, table, key))


def test_plan_reference_limits_match_defaults_py():
    rows = {r[0]: r[1] for r in markdown_tables(PLAN_REF)["Limits"]}

    def shown(label):
        return rows[label].replace(",", "")

    assert shown("factors") == str(D.MAX_FACTORS)
    assert shown("levels of one factor") == str(D.MAX_LEVELS)
    assert shown("cells (product of the level counts)") == str(D.MAX_CELLS)
    assert shown("hypotheses") == str(D.MAX_HYPOTHESES)
    assert shown("covariates") == str(D.MAX_COVARIATES)
    assert shown("missing-value texts") == str(D.MAX_MISSING_TOKENS)
    assert shown("`title`") == f"{D.MAX_TITLE_CHARS} characters"
    assert shown("`[data] path`") == f"{D.MAX_PATH_CHARS} characters"
    assert shown("one outcome value in a text file") == f"{D.MAX_NUMBER_CHARS} characters"
    assert shown("a name (hypothesis, factor, level, column, outcome), a missing-value text") == f"{D.MAX_NAME_CHARS} characters"
    assert shown("`summary`, a hypothesis `description`, a `[study]` text") == f"{D.MAX_DESCRIPTION_CHARS} characters"
    assert D.MAX_SUMMARY_CHARS == D.MAX_DESCRIPTION_CHARS
    assert shown("a statement") == (f"{D.MAX_STATEMENT_CHARS} characters {D.MAX_STATEMENT_TOKENS} tokens "
                                    f"parentheses and signs nested {D.MAX_STATEMENT_NESTING} deep")
    assert shown("a number in a statement") == (f"0 or a magnitude from 1e-{D.STATEMENT_NUMBER_EXPONENT} to "
                                                f"1e{D.STATEMENT_NUMBER_EXPONENT} at most 40 digits")
    assert shown("nesting of arrays and inline tables in the plan") == f"{D.MAX_TOML_NESTING} levels"
    assert D.MAX_PLAN_BYTES == 1 << 20 and shown("plan file size") == "1 MiB"
    assert D.MAX_TEXT_DATA_BYTES == 1 << 30 and shown("text data file read in memory") == "1 GiB"


# ---------------------------------------------------------------------------------------------
# citations in statistics.md


def _plain(text: str) -> str:
    import unicodedata

    return "".join(c for c in unicodedata.normalize("NFKD", text) if not unicodedata.combining(c))


def test_every_reference_in_statistics_md_is_named_in_the_code():
    """statistics.md cites only what the code's docstrings cite, and cites each one in its text."""
    text = (DOCS / "statistics.md").read_text(encoding="utf-8")
    body, refs = text.split("## References", 1)
    source = _plain("\n".join(p.read_text(encoding="utf-8") for p in (ROOT / "reporter").rglob("*.py")))
    items = re.findall(r"^- (.+?) \((\d{4})\)", refs, re.M)
    assert len(items) > 40
    for authors, year in items:
        surname = _plain(re.split(r"[ ,&]", authors)[0])
        assert re.search(rf"{surname}.{{0,120}}?{year}", source, re.S), f"{surname} ({year}) is not cited in reporter/"
        assert re.search(rf"{surname}.{{0,60}}?{year}", _plain(body), re.S), f"{surname} ({year}) is listed but not cited"


# ---------------------------------------------------------------------------------------------
# results.json against docs/results-json.md

RESULTS_DOC = DOCS / "results-json.md"


def _simulated_rows(rng, cells: dict[tuple[str, ...], tuple[int, float]], sd: float = 2.0) -> list[tuple]:
    """Seeded simulated rows: for each cell (levels) its n and true mean, normal errors."""
    rows = []
    for levels, (n, mean) in cells.items():
        for v in rng.normal(mean, sd, n):
            rows.append((*levels, f"{v:.2f}"))
    return rows


def _write_csv(path: Path, header: list[str], rows: list[tuple]) -> None:
    path.write_text(",".join(header) + "\n" + "".join(",".join(map(str, r)) + "\n" for r in rows), encoding="utf-8")


def _results_projects(folder: Path) -> list[Path]:
    """Plans whose results.json between them write every field that results_json.py can write."""
    import numpy as np

    rng = np.random.default_rng(20261202)
    plans = []
    # 1. the one-way demo with every follow-up family on the cells (Games–Howell, Dunnett, Welch ANOVA)
    demo = folder / "demo"
    shutil.copytree(DEMO, demo)
    text = (DEMO / "oneway.toml").read_text(encoding="utf-8").replace(
        "[analysis]",
        '[analysis]\npermutations = 300\nfollow_up = ["all-pairs-tukey", "versus-control-dunnett", '
        '"all-contrasts-scheffe"]\nfollow_up_control = "none"', 1)
    (demo / "oneway_all.toml").write_text(text, encoding="utf-8")
    plans.append(demo / "oneway_all.toml")
    # 2. the factorial demo (robust tests confirmatory, Tukey pairs of marginal means)
    text = (DEMO / "factorial.toml").read_text(encoding="utf-8").replace("[analysis]", "[analysis]\npermutations = 300", 1)
    (demo / "factorial_short.toml").write_text(text, encoding="utf-8")
    plans.append(demo / "factorial_short.toml")
    # 3. an empty cell, a one-row cell, an outlier, excluded rows, a non-contrast statement
    special = folder / "special"
    special.mkdir()
    rows = _simulated_rows(rng, {("a1", "b1"): (8, 10.0), ("a1", "b2"): (7, 12.0), ("a1", "b3"): (1, 11.0),
                                 ("a2", "b1"): (9, 13.0), ("a2", "b2"): (8, 15.0)})
    rows += [("a1", "b1", "40.00"), ("a2", "b2", "NA"), ("pilot", "b1", "11.50")]
    _write_csv(special / "data.csv", ["A", "B", "y"], rows)
    (special / "plan.toml").write_text(
        'title = "Special cases (simulated)"\n[data]\npath = "data.csv"\noutcome = "y"\n'
        '[[factors]]\nname = "A"\nlevels = ["a1", "a2"]\nexclude = ["pilot"]\n'
        '[[factors]]\nname = "B"\nlevels = ["b1", "b2", "b3"]\n'
        '[analysis]\ncoding = "sum-to-zero"\npermutations = 0\n'
        '[[hypotheses]]\nname = "above three"\nmeans = "mean(A=a1, B=b1) > 3"\n'
        '[[hypotheses]]\nname = "a differs at b1"\nmeans = "mean(A=a1, B=b1) = mean(A=a2, B=b1)"\n'
        '[[hypotheses]]\nname = "a equivalent at b2"\nmeans = "-0.5 sd < mean(A=a1, B=b2) - mean(A=a2, B=b2) < 0.5 sd"\n'
        '[[hypotheses]]\nname = "a not worse at b1"\nmeans = "mean(A=a1, B=b1) - mean(A=a2, B=b1) > -0.3 sd"\n',
        encoding="utf-8")
    plans.append(special / "plan.toml")
    # 4. rounded cell summaries
    summ = folder / "summary"
    summ.mkdir()
    _write_csv(summ / "cells.csv", ["g", "n", "mean", "sd"],
               [("a", 12, "10.1", "2.0"), ("b", 11, "11.4", "2.3"), ("c", 13, "12.0", "1.9")])
    (summ / "plan.toml").write_text(
        'title = "Cell summaries (simulated)"\n[data]\npath = "cells.csv"\noutcome = "y"\nlayout = "cell-summaries"\n'
        '[[factors]]\nname = "g"\nlevels = ["a", "b", "c"]\n'
        '[[hypotheses]]\nname = "c above a"\nmeans = "c > a"\n[[hypotheses]]\nname = "groups differ"\neffect = "g"\n'
        '[[hypotheses]]\nname = "b within 2 of a"\nmeans = "-2 < b - a < 2"\n',
        encoding="utf-8")
    plans.append(summ / "plan.toml")
    # 5. many rows: a sampled Shapiro–Wilk test, summarized Q–Q points, a skipped permutation F
    big = folder / "big"
    big.mkdir()
    _write_csv(big / "data.csv", ["g", "y"], _simulated_rows(rng, {("a",): (2600, 10.0), ("b",): (2600, 10.2)}))
    (big / "plan.toml").write_text(
        'title = "Many rows (simulated)"\n[data]\npath = "data.csv"\noutcome = "y"\n'
        '[[factors]]\nname = "g"\nlevels = ["a", "b"]\n[analysis]\npermutation_max_rows = 1000\n'
        '[[hypotheses]]\nname = "b above a"\nmeans = "b > a"\n', encoding="utf-8")
    plans.append(big / "plan.toml")
    # 6. covariates: one with a common slope at its mean, one with per-cell slopes at a stated value, factorial
    cov = folder / "covariates"
    cov.mkdir()
    rows = []
    for a, b, shift in (("a1", "b1", 0.0), ("a1", "b2", 1.0), ("a2", "b1", 2.0), ("a2", "b2", 2.5)):
        for _ in range(9):
            x1, x2 = rng.normal(50, 8), rng.normal(3, 1)
            rows.append((a, b, f"{x1:.1f}", f"{x2:.2f}", f"{5 + shift + 0.4 * x1 + x2 + rng.normal(0, 2):.2f}"))
    _write_csv(cov / "data.csv", ["A", "B", "pre", "age", "y"], rows)
    (cov / "plan.toml").write_text(
        'title = "Covariates (simulated)"\n[data]\npath = "data.csv"\noutcome = "y"\n'
        '[[factors]]\nname = "A"\nlevels = ["a1", "a2"]\n[[factors]]\nname = "B"\nlevels = ["b1", "b2"]\n'
        '[[covariates]]\nname = "pre"\ndescription = "score before allocation"\n'
        '[[covariates]]\nname = "age"\nadjust_to = 3\nslopes = "per-cell"\n'
        '[analysis]\npermutations = 200\n'
        '[[hypotheses]]\nname = "a2 above a1"\nmeans = "a2 > a1"\n[[hypotheses]]\nname = "A x B"\neffect = "A x B"\n',
        encoding="utf-8")
    plans.append(cov / "plan.toml")
    return plans


@pytest.fixture(scope="module")
def real_results(tmp_path_factory) -> list[dict]:
    import reporter

    folder = tmp_path_factory.mktemp("results")
    out = []
    for plan in _results_projects(folder):
        out.append(json.loads(reporter.report(plan).render("json")))
    return out


def _slug(heading: str) -> str:
    return re.sub(r"[^\w\- ]", "", heading.lower()).strip().replace(" ", "-")


def documented_fields() -> tuple[set[str], set[str]]:
    """Every path documented in results-json.md (shared objects expanded where they are used),
    and the paths documented as maps (object: key → value), whose keys are data, not fields."""
    tables = markdown_tables(RESULTS_DOC)
    objects = {_slug(h): [r[0].strip("`") for r in rows] for h, rows in tables.items() if h.endswith("object")}
    paths, maps = set(), set()
    for heading, rows in tables.items():
        if heading.endswith("object"):
            continue
        for row in rows:
            assert len(row) == 3, f"results-json.md, '{row[0]}': a row has field, type and meaning"
            path, kind = row[0].strip("`"), row[1]
            paths.add(path)
            if "→" in kind:
                maps.add(path)
            for anchor in re.findall(r"\(#([\w-]+-object)\)", kind):
                assert anchor in objects, f"results-json.md links #{anchor}, which is no object table"
                paths.update(f"{path}{'[]' if kind.startswith('list') else ''}.{f}" for f in objects[anchor])
    return paths, maps


def _schema_paths(node, prefix: str, out: set[str]) -> None:
    if not isinstance(node, dict):
        return
    for key in ("anyOf", "oneOf", "allOf"):
        for sub in node.get(key, []):
            _schema_paths(sub, prefix, out)
    for key, sub in node.get("properties", {}).items():
        path = f"{prefix}.{key}" if prefix else key
        out.add(path)
        _schema_paths(sub, path, out)
    if isinstance(node.get("items"), dict):
        _schema_paths(node["items"], prefix + "[]", out)


def _json_paths(value, prefix: str, out: set[str]) -> None:
    if isinstance(value, dict):
        for key, sub in value.items():
            path = f"{prefix}.{key}" if prefix else key
            out.add(path)
            _json_paths(sub, path, out)
    elif isinstance(value, list):
        for sub in value:
            _json_paths(sub, prefix + "[]", out)


def _writer_keys() -> set[str]:
    """Every key that reporter/render/results_json.py writes: dict-literal keys, keys assigned by
    subscript, and keyword arguments of ``.update``."""
    tree = ast.parse((ROOT / "reporter" / "render" / "results_json.py").read_text(encoding="utf-8"))
    keys: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Dict):
            keys.update(k.value for k in node.keys if isinstance(k, ast.Constant) and isinstance(k.value, str))
        elif isinstance(node, ast.Assign):
            for t in node.targets:
                if isinstance(t, ast.Subscript) and isinstance(t.slice, ast.Constant) and isinstance(t.slice.value, str):
                    keys.add(t.slice.value)
        elif isinstance(node, ast.Call) and isinstance(node.func, ast.Attribute) and node.func.attr == "update":
            keys.update(k.arg for k in node.keywords if k.arg)
    return keys


def _covered(path: str, paths: set[str], maps: set[str]) -> bool:
    return path in paths or any(path.startswith(m + ".") for m in maps)


def test_results_json_schema_fields_are_documented():
    from reporter.render.results_json import load_schema

    paths, maps = documented_fields()
    wanted: set[str] = set()
    _schema_paths(load_schema(), "", wanted)
    missing = sorted(p for p in wanted if not _covered(p, paths, maps))
    assert not missing, f"fields of the schema not documented in docs/results-json.md: {missing}"


def test_results_json_real_fields_are_documented(real_results):
    paths, maps = documented_fields()
    wanted: set[str] = set()
    for doc in real_results:
        _json_paths(doc, "", wanted)
    missing = sorted(p for p in wanted if not _covered(p, paths, maps))
    assert not missing, f"fields of real results.json files not documented in docs/results-json.md: {missing}"


def test_results_json_writer_keys_are_documented_and_documented_fields_exist(real_results):
    from reporter.render.results_json import load_schema

    paths, maps = documented_fields()
    last = {p.rsplit(".", 1)[-1].removesuffix("[]") for p in paths}
    missing = sorted(_writer_keys() - last)
    assert not missing, f"keys written by results_json.py but not documented in docs/results-json.md: {missing}"
    known: set[str] = set()
    _schema_paths(load_schema(), "", known)
    for doc in real_results:
        _json_paths(doc, "", known)
    names = _writer_keys() | {p.rsplit(".", 1)[-1] for p in known}
    stale = sorted(p for p in paths if p.rsplit(".", 1)[-1].removesuffix("[]") not in names)
    assert not stale, f"docs/results-json.md documents fields that nothing writes: {stale}"


# ---------------------------------------------------------------------------------------------
# Statements written inline in the prose

_STATEMENT_SPAN = re.compile(r"^[\w\s`().,*/+\-−]*[<>=][\w\s`().,*/+\-−<>=]*$")


def _inline_statements(path: Path):
    """Inline code spans of the prose that read as statements (a relation, statement characters only)."""
    in_code = False
    for number, line in enumerate(path.read_text(encoding="utf-8").splitlines(), start=1):
        if line.startswith("```"):
            in_code = not in_code
            continue
        if in_code:
            continue
        for _, span in re.findall(r"(`+)(.+?)(?<!`)\1(?!`)", line):
            span = span.strip()
            if len(span) > 2 and span[0] == span[-1] == '"':  # a plan value, such as "coir > bark"
                span = span[1:-1]
            outside = re.sub(r"\([^()]*\)", "", re.sub(r"\([^()]*\)", "", span))
            if "..." in span or not re.search(r"[<>=]", outside):  # a pattern of the syntax, or no statement
                continue
            if re.search(r"[A-Za-z]", span) and _STATEMENT_SPAN.match(span) and not re.search(r"\w+ = \"", span):
                yield number, span


def test_inline_statements_parse_and_compile():
    """Every statement written inline parses; those naming the design of their page (the last
    [[factors]] block above them) also compile. Generic examples use single-letter levels."""
    from reporter.errors import HypothesisError
    from reporter.model.design import Factor, build_design
    from reporter.model.hypotheses import compile_statement, parse

    for path in DOC_FILES:
        blocks = fenced_blocks(path)
        for number, span in _inline_statements(path):
            where = f"{path.name}, line {number}: {span}"
            try:
                parse(span)
            except HypothesisError as exc:
                if "is not a relation" in str(exc):  # the page shows a refused relation on purpose
                    continue
                raise AssertionError(f"{where}: {exc}") from None
            factors = None
            for b in blocks:
                if b.info == "toml" and b.line < number and b.marker is None:
                    factors = tomllib.loads(b.text).get("factors", factors)
            if factors is None:
                continue
            design = build_design([Factor(f["name"], tuple(map(str, f["levels"]))) for f in factors])
            try:
                compile_statement(design, span)
            except HypothesisError as exc:
                generic = re.fullmatch(r"[^']*'([a-zA-Z])' is not a level of any factor.*", str(exc).splitlines()[0])
                refused = re.search(r"chains more than one|mixes > or <|compares a mean with itself", str(exc))
                assert generic or refused, f"{where}: {exc}"


def test_plan_reference_defaults_match_a_plan_written_back_out():
    """reporter.intake.canonical.plan_mapping fills in every default of a parsed plan: each key it
    writes that the plan did not give has the documented default."""
    from reporter.intake.canonical import plan_mapping

    docs = documented()
    summary = {**MINIMAL, "data": {**MINIMAL["data"], "layout": "cell-summaries"}}
    covariates = {**MINIMAL, "covariates": [{"name": "x"}]}
    for given in ({**MINIMAL, "hypotheses": [{"name": "h", "means": "a > b"}]}, summary, covariates):
        mapping = plan_mapping(P.plan_from_dict(given))
        for table, content in mapping.items():
            if not isinstance(content, (dict, list)):
                assert table in docs[""], f"plan_mapping writes '{table}', which plan-reference.md does not list"
                continue
            if not content:
                continue
            item = content[0] if isinstance(content, list) else content
            stated = given.get(table, [{}])[0] if isinstance(content, list) else given.get(table, {})
            for key, value in item.items():
                assert key in docs[table], f"plan_mapping writes [{table}] {key}, which plan-reference.md does not list"
                if key in stated:
                    continue
                shown = docs[table][key][2]
                if shown == "not set":  # a value derived from other keys (spread_column from spread)
                    continue
                documented_value = tomllib.loads(f"v = {shown.strip('`')}")["v"]
                assert documented_value == value, f"[{table}] {key}: documented {documented_value!r}, plan {value!r}"


# ---------------------------------------------------------------------------------------------
# Shell commands and their outputs

import subprocess  # noqa: E402
import sys  # noqa: E402


def _shell_session(path: Path, folder: Path) -> dict[str, str]:
    """Run every ``sh`` block of a page in order, from a folder holding a copy of demo_project/,
    with this environment's ``anova-report`` and ``python3`` first on PATH; return each command's
    output (stdout and stderr together)."""
    shutil.copytree(DEMO, folder / "demo_project")
    env = {**os.environ, "PATH": f"{Path(sys.executable).parent}{os.pathsep}{os.environ.get('PATH', '')}"}
    outputs: dict[str, str] = {}
    for block in fenced_blocks(path):
        if block.info != "sh" or (block.marker or "").startswith("not run"):
            continue
        for command in block.text.splitlines():
            if not command.strip():
                continue
            done = subprocess.run(["bash", "-c", command], cwd=folder, env=env, capture_output=True, text=True,
                                  timeout=600)
            assert done.returncode == 0, f"{path.name}: '{command}' exited {done.returncode}: {done.stderr}"
            outputs[command] = done.stdout + done.stderr
    return outputs


def _shown_lines_in_order(shown: str, actual: str, where: str) -> None:
    """Every line shown (a line '...' skips) appears in the actual text, in the same order."""
    lines = actual.splitlines()
    at = 0
    for want in shown.splitlines():
        if want.strip() == "...":
            continue
        while at < len(lines) and lines[at].rstrip() != want.rstrip():
            at += 1
        assert at < len(lines), f"{where}: the line {want!r} is not in the output (or not in this order)"
        at += 1


def _pages_with_shell():
    return [p for p in DOC_FILES if any(b.info == "sh" for b in fenced_blocks(p))]


@pytest.mark.parametrize("path", _pages_with_shell(), ids=lambda p: p.name)
def test_shell_commands_run_and_outputs_match(path: Path, tmp_path: Path):
    outputs = _shell_session(path, tmp_path)
    for block in fenced_blocks(path):
        if block.marker is None or block.info == "sh":
            continue
        where = f"{path.name}, line {block.line}"
        kind, _, target = block.marker.partition(":")
        target = target.strip()
        if kind == "output of":
            assert target in outputs, f"{where}: the command '{target}' is not run on the page"
            _shown_lines_in_order(block.text, outputs[target], where)
        elif kind == "excerpt of":
            _shown_lines_in_order(block.text, (tmp_path / target).read_text(encoding="utf-8"), where)
            if target.endswith(".toml"):  # a plan written by a command: it loads and compiles with its data
                from reporter.api import prepare

                assert prepare(tmp_path / target).contrasts
        else:
            assert kind in ("refused",), f"{where}: unknown marker <!-- {block.marker} -->"
