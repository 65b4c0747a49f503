"""The Markdown report: headings, prose, pipe tables, notes as quotes, escaped text.

The syntax rules checked are those of the CommonMark spec 0.31.2 (ATX headings 4.2, block
quotes 5.1, lists 5.2/5.3, backslash escapes 2.4, entity references 2.5, emphasis 6.2) and
of the GitHub Flavored Markdown spec (tables extension, section 4.10, where "|" inside a cell
is written "\\|").
"""

from __future__ import annotations

import re

import pytest

from reporter.render.markdown import render_markdown
from reporter.render.templating import markdown_escape

UNESCAPED_PIPE = re.compile(r"(?<!\\)\|")


@pytest.fixture
def md(document) -> str:
    return render_markdown(document).decode("utf-8")


def _tables(md: str) -> list[list[str]]:
    groups, current = [], []
    for line in md.split("\n"):
        if line.startswith("|"):
            current.append(line)
        elif current:
            groups.append(current)
            current = []
    return groups


def test_headings_follow_the_section_tree(md, document):
    """The title is '#', sections '##', subsections '###', in reading order."""
    headings = [line for line in md.split("\n") if line.startswith("#")]
    assert headings == [
        f"# {document.title}",
        "## Summary",
        "## Methods",
        "### Design and coefficients",
        "## Results",
    ]


def test_prose_and_italics(md, summary_text, methods_text):
    """Paragraphs keep their words; italic runs become *...*; '<' is escaped."""
    assert summary_text in md
    assert methods_text + " (*MSE*); one-sided *t* tests" in md
    assert "*F*(3, 12) = 43.10, *p* \\< .001." in md


def test_pipe_tables_are_well_formed(md):
    """Every table has a header, an alignment row and rows with the same number of cells."""
    tables = _tables(md)
    assert len(tables) == 3
    for lines in tables:
        widths = {len(UNESCAPED_PIPE.findall(line)) for line in lines}
        assert len(widths) == 1, lines
        assert re.fullmatch(r"\|( :?-{3,}:? \|)+", lines[1]), lines[1]
    means = tables[1]
    assert means[0] == "| Medium | *n* | *M* | *SD* |"
    assert means[1] == "| :--- | ---: | ---: | ---: |"
    assert means[2] == "| peat | 4 | 12.55 | 0.71 |"
    assert "| coir vs bark | 0 | 1 | \u22121 | 0 |" in tables[0]


def test_captions_and_table_notes(md):
    """Tables and figures are numbered in reading order; notes follow their table."""
    assert "**Table 1.** Design matrix *X* (reference coding) and one contrast" in md
    assert "**Table 2.** Height (mm) by growing medium" in md
    assert "*Note.* Standard deviations use *n* \u2212 1." in md


def test_figure_becomes_its_caption(md):
    """A figure is its caption and a pointer to the HTML and PDF, never an image."""
    assert ("**Figure 1.** Cell means with 95% confidence intervals; dots are single "
            "seedlings.\n\n(figure in the HTML and PDF report)\n") in md
    assert "<svg" not in md and "![" not in md


def test_notes_are_block_quotes(md):
    """Notes are block quotes headed by their kind and title; blank lines stay inside."""
    assert ("> **Caution: Small cells**\n>\n"
            "> The coir cell holds only *n* = 3 seedlings; its interval is wide.\n") in md
    assert "> **Note: Simulated data**\n" in md


def test_lists_and_definitions(md):
    """Bullet lists use '-', definition lists '*' (so the two never merge into one list)."""
    assert "- Outcome: height\\_mm (millimetres)\n" in md
    assert "* **Data file:** heights.csv (16 rows, none excluded)\n" in md


def test_hostile_and_markdown_text_is_escaped(md, hostile_level, markdown_level):
    """Markup and Markdown syntax in a level name come out as written, not interpreted."""
    assert hostile_level not in md
    assert "\\<img src=x onerror=alert(1)\\>" in md
    assert markdown_level not in md
    assert "| a\\|b \\*c\\* \\_d\\_ \\`e\\` | 4 | \u22121.00 | 0.10 |" in md


def test_plain_tidy_utf8(document):
    """UTF-8 text, no trailing spaces, no runs of blank lines, one final newline."""
    data = render_markdown(document)
    text = data.decode("utf-8")
    assert text.endswith("\n") and not text.endswith("\n\n")
    assert "\n\n\n" not in text
    assert all(line == line.rstrip() for line in text.split("\n"))
    assert "\u2212" in text


def test_render_is_deterministic(build_document):
    """Two renders of equal documents give byte-identical Markdown."""
    assert render_markdown(build_document()) == render_markdown(build_document())


@pytest.mark.parametrize(
    ("raw", "escaped"),
    [
        ("- not a list", "\\- not a list"),
        ("+ not a list", "\\+ not a list"),
        ("12. not a list", "12\\. not a list"),
        ("3) not a list", "3\\) not a list"),
        (" - mid-line dash", " - mid-line dash"),
        ("2.5 is a number", "2.5 is a number"),
        ("# not a heading", "\\# not a heading"),
        ("&amp; &#35; & plain", "\\&amp; &\\#35; & plain"),
        ("[link](x)", "\\[link\\](x)"),
        ("~~strike~~", "\\~\\~strike\\~\\~"),
        ("back\\slash", "back\\\\slash"),
        ("two\nlines", "two lines"),
        ("p < .05 > q", "p \\< .05 \\> q"),
    ],
    ids=["dash", "plus", "ordered-dot", "ordered-paren", "mid-line", "decimal", "hash",
         "entity", "link", "strike", "backslash", "newline", "angles"],
)
def test_markdown_escape(raw, escaped):
    """Text that would start Markdown syntax is backslash-escaped (CommonMark 2.4)."""
    assert markdown_escape(raw) == escaped
