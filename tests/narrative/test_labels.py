"""Labels a reader can follow: every symbol defined before it is used, captions that say what
each table is, nouns that agree with their counts, no abbreviation left unexplained.

The reports are built from the two demo plans and from small plans written here; the checks
read the document model and the Markdown and HTML renderings of it. The rules checked are
plain-language conventions of the report itself (common practice, no source), except where a
docstring names one.
"""

from __future__ import annotations

import re
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest

from reporter.api import build_report
from reporter.narrative.build import _Builder, _rows_phrase
from reporter.narrative.document import DefinitionList, Figure, Note, Paragraph, Section, Table, plain
from reporter.narrative.numbers import Run

DEMO = Path(__file__).resolve().parents[2] / "demo_project"
NOTATION_TITLE = "Notation used from here on"


class _Text(HTMLParser):
    """The visible text of an HTML page (script and style left out), in document order."""

    def __init__(self, html: str):
        super().__init__(convert_charrefs=True)
        self.parts: list[str] = []
        self._skip = 0
        self.feed(html)

    def handle_starttag(self, tag, attrs):
        self._skip += tag in ("style", "script")

    def handle_endtag(self, tag):
        self._skip -= tag in ("style", "script")

    def handle_data(self, data):
        if not self._skip:
            self.parts.append(data)

    def text(self) -> str:
        return re.sub(r"\s+", " ", "".join(self.parts))


def _report(plan: Path):
    report = build_report(plan)
    return report, report.document()


@pytest.fixture(scope="module")
def oneway():
    return _report(DEMO / "oneway.toml")


@pytest.fixture(scope="module")
def factorial():
    return _report(DEMO / "factorial.toml")


@pytest.fixture(scope="module")
def baseline():
    return _report(DEMO / "baseline.toml")


def _plan_copy(tmp_path: Path, plan: Path, **replace: str) -> Path:
    """The demo plan with its data path made absolute and some lines replaced."""
    text = plan.read_text(encoding="utf-8")
    data = re.search(r'^path = "([^"]+)"', text, re.M).group(1)
    text = text.replace(f'path = "{data}"', f'path = "{(plan.parent / data).as_posix()}"')
    for old, new in replace.items():
        assert old in text, old
        text = text.replace(old, new)
    out = tmp_path / plan.name
    out.write_text(text, encoding="utf-8")
    return out


def _blocks(document):
    """Every block in reading order, with the summary first."""
    yield from document.summary
    yield from document.walk()


def _block_text(block) -> str:
    if isinstance(block, Paragraph):
        return plain(block.runs)
    if isinstance(block, Table):
        cells = [plain(block.caption), *(plain(c.label) for c in block.columns)]
        cells += [plain(c) for row in block.rows for c in row] + [plain(n) for n in block.notes]
        return " ".join(cells)
    if isinstance(block, Figure):
        return plain(block.caption)
    if isinstance(block, DefinitionList):
        return " ".join(plain(t) + " " + plain(d) for t, d in block.items)
    if isinstance(block, Section):
        return block.title
    if isinstance(block, Note):
        return block.title
    return " ".join(plain(i) for i in getattr(block, "items", ()))


def _notation(document) -> Note:
    (note,) = [b for b in document.walk() if isinstance(b, Note) and b.title == NOTATION_TITLE]
    return note


# --- the notation box ------------------------------------------------------------------------

SYMBOLS = ("μ", "mean(…)", "μ̄", "β", "X", "D", "D⁻¹", "C·μ = h", "h", "row", "L = C·D", "H0, H1")


@pytest.mark.parametrize("which", ["oneway", "factorial"])
def test_notation_box_defines_every_symbol_of_the_model_and_hypotheses(which, request):
    """The box names each symbol the model and hypothesis sections use, each with a definition."""
    _, document = request.getfixturevalue(which)
    (terms,) = _notation(document).blocks
    assert isinstance(terms, DefinitionList)
    defined = [plain(t) for t, _ in terms.items]
    assert defined == list(SYMBOLS)
    for term, description in terms.items:
        assert len(plain(description)) > 30, plain(term)


@pytest.mark.parametrize("which", ["oneway", "factorial"])
def test_notation_box_comes_before_the_first_symbol(which, request):
    """In reading order the box precedes every block that uses β, D⁻¹, C·μ = h or L = C·D."""
    _, document = request.getfixturevalue(which)
    note = _notation(document)
    order = list(_blocks(document))
    where = next(i for i, b in enumerate(order) if b is note)
    for symbol in ("D⁻¹", "β", "C·μ = h", "L = C·D", "μ̄"):
        first = next(i for i, b in enumerate(order) if b is not note and symbol in _block_text(b))
        assert where < first, symbol


def test_symbols_are_set_alike_in_the_box_and_where_they_are_used(oneway):
    """A matrix letter is italic wherever it appears (box, captions, column heads); Greek stays upright."""
    _, document = oneway
    (terms,) = _notation(document).blocks
    runs = {plain(t): t for t, _ in terms.items}
    assert runs["C·μ = h"] == (Run("C", True), Run("·μ = ", False), Run("h", True))
    assert runs["β"] == (Run("β", False),)
    tables = [b for b in document.walk() if isinstance(b, Table)]
    contrast = next(t for t in tables if t.id == "h1-cells")
    assert runs["C·μ = h"] == tuple(r for r in contrast.caption if r.text.strip() and r.text in "C·μ = h")
    assert contrast.columns[-1].label == runs["h"]
    betas = next(t for t in tables if t.id == "h1-betas")
    assert Run("L", True) in betas.caption and Run("D", True) in betas.caption


@pytest.mark.parametrize("which", ["oneway", "factorial"])
def test_notation_box_precedes_d_inverse_in_markdown_and_html(which, request):
    """In the Markdown and the HTML the box's title comes before the first D⁻¹."""
    report, _ = request.getfixturevalue(which)
    md = report.render("md").decode("utf-8")
    assert md.index(NOTATION_TITLE) < md.index("*D*⁻¹")
    text = _Text(report.render("html").decode("utf-8")).text()
    assert NOTATION_TITLE in text and "D⁻¹" in text
    assert text.index(NOTATION_TITLE) < text.index("D⁻¹")


# --- captions, nouns and abbreviations -------------------------------------------------------


def _captions(document) -> list[str]:
    return [plain(b.caption) for b in document.walk() if isinstance(b, (Table, Figure))]


@pytest.mark.parametrize("which", ["oneway", "factorial", "baseline"])
def test_no_two_captions_are_equal(which, request):
    """Every table and figure has a caption of its own (the power and outlier tables included)."""
    _, document = request.getfixturevalue(which)
    captions = _captions(document)
    assert len(captions) == len(set(captions)), [c for c in captions if captions.count(c) > 1]
    assert not any(c.startswith("Sensitivity") for c in captions)


def test_power_and_outlier_tables_say_what_they_are(oneway):
    """The table of detectable effects and the outlier table name their content, not a shared label."""
    _, document = oneway
    caption = {b.id: plain(b.caption) for b in document.walk() if isinstance(b, Table)}
    assert caption["sensitivity"].startswith("Smallest detectable effects: ")
    assert caption["outlier-sensitivity"].startswith("Influence of the flagged outlier: ")


@pytest.mark.parametrize("rows, expected", [
    ((68,), "row 68"),
    ((68, 70), "rows 68 and 70"),
    ((3, 9, 12), "rows 3, 9, and 12"),
])
def test_rows_phrase_agrees_with_its_count(rows, expected):
    """One row is "row", more are "rows"; the numbers are listed in words' order."""
    assert _rows_phrase(rows) == expected


_ROWS = re.compile(r"\b(rows?) (\d+(?:(?:, | and |, and )\d+)*)")


def _check_row_nouns(text: str) -> int:
    seen = 0
    for noun, numbers in _ROWS.findall(text):
        count = len(re.findall(r"\d+", numbers))
        assert (noun == "row") == (count == 1), f"{noun} {numbers}"
        seen += 1
    return seen


def test_row_nouns_agree_in_the_demo_report(oneway):
    """The one-way demo flags one outlier: its column reads "without row 68", never "rows 68"."""
    report, document = oneway
    table = next(b for b in document.walk() if isinstance(b, Table) and b.id == "outlier-sensitivity")
    assert plain(table.columns[-1].label) == "without row 68"
    assert _check_row_nouns(report.render("md").decode("utf-8")) >= 2


def test_row_nouns_agree_with_two_outliers(project):
    """With two flagged outliers the column and the caption say "rows ... and ..."."""
    rng = np.random.default_rng(20261202)
    lines = ["score,group"]
    for g in ("a", "b", "c"):
        lines += [f"{v:.2f},{g}" for v in rng.normal(50.0, 2.0, 25)]
    lines += ["80.00,a", "20.00,b"]
    plan = project("""
        title = "Two outliers"
        [data]
        path = "scores.csv"
        outcome = "score"
        [[factors]]
        name = "group"
        levels = ["a", "b", "c"]
        [[hypotheses]]
        name = "groups differ"
        effect = "group"
        role = "planned"
    """, {"scores.csv": "\n".join(lines) + "\n"})
    report, document = _report(plan)
    table = next(b for b in document.walk() if isinstance(b, Table) and b.id == "outlier-sensitivity")
    assert plain(table.columns[-1].label) == "without rows 77 and 78"
    assert "the flagged outliers" in plain(table.caption)
    assert _check_row_nouns(report.render("md").decode("utf-8")) >= 2


def test_benjamini_hochberg_is_spelled_out(tmp_path):
    """Where a p is adjusted by Benjamini–Hochberg the report says so in full, never "BH"."""
    plan = _plan_copy(tmp_path, DEMO / "oneway.toml", **{'correction = "holm"': 'correction = "benjamini-hochberg"'})
    report, _ = _report(plan)
    md = report.render("md").decode("utf-8")
    html = _Text(report.render("html").decode("utf-8")).text()
    for text in (md, html):
        assert not re.search(r"\bBH\b", text)
        assert "Benjamini–Hochberg-adjusted" in text
        assert "false-discovery-rate" in text


@pytest.mark.parametrize("k, total, expected", [
    (3, 3, "All three planned hypotheses were"),
    (2, 2, "Both planned hypotheses were"),
    (1, 3, "One of the three planned hypotheses was"),
    (0, 4, "None of the four planned hypotheses was"),
    (1, 1, "The one planned hypothesis was"),
])
def test_summary_counts_are_words(k, total, expected):
    """The summary's verdict opens a sentence, so its counts are words (APA 7, section 6.33; the section number is from memory)."""
    assert _Builder.supported_phrase(k, total) == expected


# --- the robust confirmatory test, and the outcome's intake -----------------------------------


def test_hc3_is_explained_where_it_becomes_confirmatory(factorial):
    """The first hypothesis whose confirmatory test is the HC3 Wald test explains it; later ones point back."""
    _, document = factorial
    hyps = next(s for s in document.sections if s.id == "hypotheses").subsections
    first = " ".join(_block_text(b) for b in hyps[0].blocks)
    assert "HC3 Wald test, F(1, 87)" in first
    explained = first.index("heteroscedasticity-consistent")
    assert explained < first.index("HC3 Wald test, F(1, 87)")
    assert 'unequal_variances = "always-robust"' in first
    second = " ".join(_block_text(b) for b in hyps[1].blocks)
    assert "explained under hypothesis 1" in second
    for h in hyps:
        text = " ".join(_block_text(b) for b in h.blocks)
        assert text.count("the confirmatory test is") == 1, h.title
        assert "The confirmatory test is the HC3 Wald F:" not in text


@pytest.mark.parametrize("which", ["oneway", "factorial"])
def test_outcome_intake_is_told_in_plain_words_in_the_provenance(which, request):
    """How the outcome was read appears once, in "Where this report came from", without jargon."""
    report, document = request.getfixturevalue(which)
    prov = next(s for s in document.sections if s.id == "provenance")
    (items,) = [b for b in prov.blocks if isinstance(b, DefinitionList)]
    told = dict((plain(t), plain(d)) for t, d in items.items)["How the outcome was read"]
    assert "exact decimal" in told and "own scale" in told
    md = report.render("md").decode("utf-8")
    assert "pivot" not in md and md.count("How the outcome was read") == 1


# --- other labels a reader has to follow -----------------------------------------------------


def _notes(document):
    return [plain(n) for b in document.walk() if isinstance(b, Table) for n in b.notes]


@pytest.mark.parametrize("which", ["oneway", "factorial"])
def test_formula_letters_in_table_notes_are_defined(which, request):
    """A note that uses λ says what λ is; the permutation p's b and m are defined beside it."""
    _, document = request.getfixturevalue(which)
    notes = _notes(document)
    with_lambda = [n for n in notes if "λ" in n]
    assert with_lambda
    for note in with_lambda:
        assert "noncentrality" in note, note
    perm = [n for n in notes if "(b + 1)/(m + 1)" in n]
    assert perm and all("m is the number of permutations" in n and "b the number" in n for n in perm)


def test_methods_name_the_software_once_and_the_robust_tests(factorial):
    """The software line names anova-report once, with its version; the methods say what the
    robust versions are before any result uses them."""
    _, document = factorial
    methods = next(s for s in document.sections if s.id == "methods")
    text = " ".join(_block_text(b) for b in methods.blocks)
    software = re.search(r"Software\. (.*)", text).group(1)
    assert software.count("anova-report") == 1 and re.match(r"anova-report \d", software)
    assert "heteroscedasticity-consistent (HC3)" in text and "Welch's ANOVA" in text
    assert "Null hypothesis: " in text and "null hypothesis the" not in text


@pytest.mark.parametrize("which", ["oneway", "factorial"])
def test_p_is_italic_in_the_readings(which, request):
    """The p named in each plain-language reading is set like every other p (APA 7: Latin
    statistical symbols in italics)."""
    _, document = request.getfixturevalue(which)
    readings = [b for b in document.walk() if isinstance(b, Paragraph) and b.style == "reading"]
    assert readings
    for para in readings:
        assert Run("p", True) in para.runs, plain(para.runs)
        assert " p)" not in "".join(r.text for r in para.runs if not r.italic)
