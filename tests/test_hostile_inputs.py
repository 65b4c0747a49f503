"""A catalogue of hostile inputs: each gets exit code 2 and one clear message, nothing else.

Every case runs the command (``anova-report run``) in this process and checks the contract for bad
input: exit code 2; a first stderr line starting with "anova-report: error:" that names the file
and the key or line (a statement error may echo the statement with a caret below it); no
traceback; no output folder created; every input file unchanged. The cases are grouped by class:
unbounded inputs, numbers at the edges of float64, messages that must not mislead, plan-language
spellings, and the rest. The limits they meet are named in :mod:`reporter.intake.defaults`.
"""

from __future__ import annotations

import hashlib
import os
import socket
import stat
import textwrap
from pathlib import Path

import pytest

from reporter.cli import main
from reporter.intake import defaults as D

PLAN = """
title = "Seedling height under four growing media"
[data]
path = "heights.csv"
outcome = "height_mm"
[[factors]]
name = "medium"
levels = ["peat", "coir", "bark", "soil"]
[[hypotheses]]
name = "coir beats bark"
means = "coir > bark"
"""

DATA = "height_mm,medium\n" + "".join(
    f"{v},{m}\n"
    for m, vals in {
        "peat": [12.1, 13.4, 11.8, 12.9],
        "coir": [14.2, 15.1, 13.8],
        "bark": [10.2, 11.0, 9.7, 10.8, 10.1],
        "soil": [9.1, 8.7, 9.9, 9.4],
    }.items()
    for v in vals
)

TWO_WAY_PLAN = """
title = "Two factors"
[data]
path = "two.csv"
outcome = "y"
[[factors]]
name = "dose"
levels = ["low-dose", "high"]
[[factors]]
name = "site"
levels = ["north", "south"]
[[hypotheses]]
name = "interaction"
effect = "dose x site"
"""

TWO_WAY_DATA = "y,dose,site\n" + "".join(
    f"{10 + i % 3 + 0.1 * j},{d},{s}\n"
    for j, (d, s) in enumerate([(d, s) for d in ("low-dose", "high") for s in ("north", "south")])
    for i in range(3)
)


def _snapshot(folder: Path) -> dict[str, object]:
    """Every entry under ``folder``: regular files by content hash, others by kind."""
    out: dict[str, object] = {}
    for root, dirs, files in os.walk(folder):
        for name in dirs + files:
            p = Path(root) / name
            st = os.lstat(p)
            if stat.S_ISREG(st.st_mode):
                out[str(p)] = hashlib.sha256(p.read_bytes()).hexdigest()
            else:
                out[str(p)] = stat.S_IFMT(st.st_mode)
    return out


def refused(capsys, folder: Path, plan_arg: str | Path, *must: str) -> str:
    """Run the command on ``plan_arg`` and check the contract for bad input; return stderr."""
    out = folder / "report-out"
    before = _snapshot(folder)
    rc = main(["run", str(plan_arg), "--out", str(out), "--format", "json,md"])
    captured = capsys.readouterr()
    err = captured.err
    assert rc == 2, (rc, err)
    lines = err.rstrip("\n").split("\n")
    assert lines[0].startswith("anova-report: error: "), err
    assert all(line.startswith("    ") for line in lines[1:]), err  # only a statement echo with its caret
    assert len(lines[0]) < 2_000, "a message must stay readable"
    assert "Traceback" not in err and "RecursionError" not in err
    for text in must:
        assert text in lines[0], (text, lines[0])
    assert not out.exists(), "no output folder may be created"
    assert _snapshot(folder) == before, "inputs must be unchanged"
    return lines[0]


def write(folder: Path, plan: str = PLAN, data: str | bytes | None = DATA, data_name: str = "heights.csv",
          plan_name: str = "plan.toml") -> Path:
    if data is not None:
        target = folder / data_name
        if isinstance(data, bytes):
            target.write_bytes(data)
        else:
            target.write_text(data, encoding="utf-8")
    path = folder / plan_name
    path.write_text(textwrap.dedent(plan).lstrip(), encoding="utf-8")
    return path


def with_means(statement: str) -> str:
    return PLAN.replace('means = "coir > bark"', f"means = '''{statement}'''")


def with_analysis(lines: str) -> str:
    return PLAN + "[analysis]\n" + lines + "\n"


def with_value(value: str, line: int = 2) -> str:
    """The data with the outcome on ``line`` (the header is line 1) replaced by ``value``."""
    rows = DATA.splitlines()
    rows[line - 1] = f"{value},{rows[line - 1].split(',')[1]}"
    return "\n".join(rows) + "\n"


# ---------------------------------------------------------------------------------------------
# Unbounded inputs: regular files only, read with limits, bounded parsing


def test_plan_that_is_a_fifo(capsys, tmp_path):
    fifo = tmp_path / "plan.toml"
    os.mkfifo(fifo)
    refused(capsys, tmp_path, fifo, "plan.toml", "named pipe", "regular file")


def test_plan_that_is_a_character_device(capsys, tmp_path):
    refused(capsys, tmp_path, "/dev/zero", "/dev/zero", "character device")


def test_plan_that_is_a_folder(capsys, tmp_path):
    (tmp_path / "plans.toml").mkdir()
    refused(capsys, tmp_path, tmp_path / "plans.toml", "plans.toml", "folder")


def test_plan_that_is_a_broken_symlink(capsys, tmp_path):
    (tmp_path / "plan.toml").symlink_to(tmp_path / "gone.toml")
    refused(capsys, tmp_path, tmp_path / "plan.toml", "plan.toml", "symbolic link")


def test_plan_that_is_a_socket(capsys, tmp_path):
    path = tmp_path / "s.toml"
    sock = socket.socket(socket.AF_UNIX, socket.SOCK_STREAM)
    try:
        sock.bind(str(path))
        refused(capsys, tmp_path, path, "s.toml", "regular file")
    finally:
        sock.close()


def test_plan_larger_than_the_limit(capsys, tmp_path):
    path = write(tmp_path, 'title = "' + "x" * (D.MAX_PLAN_BYTES + 10) + '"\n')
    refused(capsys, tmp_path, path, "plan.toml", "larger than 1 MiB")


@pytest.mark.parametrize("kind", ["fifo", "device", "folder", "broken-link", "missing"])
def test_data_path_that_is_not_a_regular_file(capsys, tmp_path, kind):
    target = tmp_path / "heights.csv"
    if kind == "fifo":
        os.mkfifo(target)
    elif kind == "device":
        target.symlink_to("/dev/zero")
    elif kind == "folder":
        target.mkdir()
    elif kind == "broken-link":
        target.symlink_to(tmp_path / "gone.csv")
    path = write(tmp_path, data=None)
    expected = {"fifo": "named pipe", "device": "character device", "folder": "folder",
                "broken-link": "symbolic link", "missing": "does not exist"}[kind]
    refused(capsys, tmp_path, path, "heights.csv", expected)


@pytest.mark.parametrize(
    "statement",
    [
        " + ".join(["coir"] * 14_000) + " > bark",  # beyond the statement length
        "(" * 5_000 + "coir" + ")" * 5_000 + " > bark",
        "-" * 50_000 + "coir > bark",
        "(" * 200 + "coir" + ")" * 200 + " > bark",  # within the length, beyond the nesting
        "-" * 400 + "coir > bark",
        " + ".join(["coir"] * 1_200) + " > bark",  # within the length, beyond the token count
    ],
    ids=["14000-terms", "5000-parens", "50000-minus", "200-parens", "400-minus", "1200-terms"],
)
def test_statements_that_would_exhaust_the_stack(capsys, tmp_path, statement):
    path = write(tmp_path, with_means(statement))
    refused(capsys, tmp_path, path, "plan.toml", "hypotheses[1].means", "line")


@pytest.mark.parametrize("opener, closer", [("[", "]"), ("{x=", "}")], ids=["arrays", "inline-tables"])
def test_toml_nested_100000_deep(capsys, tmp_path, opener, closer):
    path = write(tmp_path, PLAN + "deep = " + opener * 100_000 + closer * 100_000 + "\n")
    refused(capsys, tmp_path, path, "plan.toml", "line 11", "nested more than")


def test_toml_nesting_inside_strings_is_not_counted(tmp_path):
    """Brackets inside strings and comments are text, not nesting: such a plan still runs."""
    plan = PLAN.replace('title = "Seedling height under four growing media"',
                        'title = "[[[[[[[[[[[[[[[[[[[[[[[[[ {{{{{{{{{{{{{{{{{{{{{{{"  # [[[[[[[[[[[[[[[[[[[[[[[[[')
    path = write(tmp_path, plan)
    assert main(["check", str(path)]) == 0


@pytest.mark.parametrize("factors, levels", [(30, 2), (D.MAX_FACTORS + 1, 2), (3, 7)], ids=["30x2", "7x2", "7x7x7"])
def test_impossible_number_of_cells(capsys, tmp_path, factors, levels):
    tables = "".join(
        f'[[factors]]\nname = "f{i}"\nlevels = [{", ".join(repr(f"l{j}") for j in range(levels))}]\n'
        for i in range(factors)
    )
    plan = PLAN.split("[[factors]]")[0] + tables
    path = write(tmp_path, plan)
    refused(capsys, tmp_path, path, "plan.toml", "'factors'", "the limit is")


@pytest.mark.parametrize(
    "old, new, key",
    [
        ('title = "Seedling height under four growing media"', 'title = "' + "t" * 100_000 + '"', "'title'"),
        ('name = "coir beats bark"', 'name = "' + "n" * 100_000 + '"', "'hypotheses[1].name'"),
        ('levels = ["peat", "coir", "bark", "soil"]', 'levels = ["peat", "coir", "bark", "' + "s" * 5_000 + '"]',
         "'factors[1].levels[4]'"),
        ("[data]", 'summary = "' + "u" * 200_000 + '"\n[data]', "'summary'"),
    ],
    ids=["title", "hypothesis-name", "level", "summary"],
)
def test_plan_texts_beyond_their_length(capsys, tmp_path, old, new, key):
    path = write(tmp_path, PLAN.replace(old, new, 1))
    refused(capsys, tmp_path, path, "plan.toml", key, "characters long; the limit is")


def test_too_many_hypotheses(capsys, tmp_path):
    extra = "".join(f'[[hypotheses]]\nname = "h{i}"\nmeans = "coir > bark"\n' for i in range(D.MAX_HYPOTHESES + 1))
    path = write(tmp_path, PLAN + extra)
    refused(capsys, tmp_path, path, "plan.toml", "'hypotheses'", "the limit is")


# ---------------------------------------------------------------------------------------------
# Numbers at the edges of float64


@pytest.mark.parametrize(
    "statement, shown",
    [
        ("1e400*coir > bark", "1e400"),
        ("9" * 4_000 + "*coir > bark", "characters"),
        ("1e-400*coir > bark", "1e-400"),
        ("coir > bark + 1e999999999", "1e999999999"),
        ("1e101*coir > bark", "1e101"),
    ],
    ids=["1e400", "4000-digits", "1e-400", "1e999999999", "1e101"],
)
def test_statement_numbers_beyond_range(capsys, tmp_path, statement, shown):
    path = write(tmp_path, with_means(statement))
    line = refused(capsys, tmp_path, path, "plan.toml", "line 10", "hypotheses[1].means", "out of range")
    assert shown in line


@pytest.mark.parametrize(
    "statement, why",
    [("１２*coir > bark", "outside ASCII"), ("1_000*coir > bark", "backticks"), ("0x10*coir > bark", "backticks")],
    ids=["full-width", "underscore", "hex"],
)
def test_statement_numbers_not_plain(capsys, tmp_path, statement, why):
    path = write(tmp_path, with_means(statement))
    refused(capsys, tmp_path, path, "plan.toml", "hypotheses[1].means", why)


@pytest.mark.parametrize(
    "value, line, why",
    [
        ("1e400", 3, "larger in magnitude than float64"),
        ("1e309", 5, "larger in magnitude than float64"),
        ("-1e309", 2, "larger in magnitude than float64"),
        ("1e-400", 7, "smaller in magnitude than the smallest normal float64"),
        ("1e-309", 2, "smaller in magnitude than the smallest normal float64"),
        ("9" * 100_000, 4, "the limit for one value is"),
        ("1e999999999", 2, "exponent of more than"),
        ("1_000", 6, "uses '_'"),
        ("１２.５", 9, "outside ASCII"),
        ("٣", 9, "outside ASCII"),
        ("0x10", 3, "base 16"),
        ("inf", 8, "infinite"),
        ("-Infinity", 2, "infinite"),
    ],
    ids=["1e400", "1e309", "-1e309", "1e-400", "1e-309", "100000-digits", "1e999999999", "underscore",
         "full-width", "arabic-indic", "hex", "inf", "-Infinity"],
)
def test_outcome_values_float64_cannot_hold(capsys, tmp_path, value, line, why):
    path = write(tmp_path, data=with_value(value, line))
    refused(capsys, tmp_path, path, "heights.csv", f"line {line}", "'height_mm'", why)


def test_outcome_that_overflows_after_the_pivot(capsys, tmp_path):
    data = with_value("-1e308", 2)
    data = data.replace("13.4,peat", "1e308,peat")
    path = write(tmp_path, data=data)
    refused(capsys, tmp_path, path, "heights.csv", "line 3", "differs from the first value")


def test_outcome_whose_squares_overflow(capsys, tmp_path):
    data = with_value("-1e200", 2).replace("13.4,peat", "1e200,peat")
    path = write(tmp_path, data=data)
    refused(capsys, tmp_path, path, "heights.csv", "line 2", "line 3", "sums of squares overflow")


def _scaled(scale: str) -> str:
    rows = DATA.splitlines()
    return rows[0] + "\n" + "".join(
        f"{1 + (i % 3) * 1e-6}{scale},{r.split(',')[1]}\n" for i, r in enumerate(rows[1:])
    )


def test_outcome_far_from_one_with_a_spread_float64_can_square_is_analysed(tmp_path):
    """Values near 1e60 (spread 2e54) and near 1e-60: every sum stays within float64, so the
    whole fit runs and writes its report."""
    for scale in ("e60", "e-60"):
        folder = tmp_path / scale
        folder.mkdir()
        path = write(folder, data=_scaled(scale))
        assert main(["run", str(path), "--out", str(folder / "out"), "--format", "json"]) == 0


def test_outcome_whose_squares_underflow(capsys, tmp_path):
    path = write(tmp_path, data=_scaled("e-75"))
    refused(capsys, tmp_path, path, "heights.csv", "line 2", "underflow")


# ---------------------------------------------------------------------------------------------
# Messages that mislead


@pytest.mark.parametrize(
    "setting, shown",
    [("alpha = 1e-300", "1e-300"), ("alpha = 5E-1", "5E-1"), ("alpha = 0", "0"), ("permutations = -1", "-1"),
     ("permutations = 1_000_000_000", "1_000_000_000"), ("seed = -3", "-3")],
    ids=["alpha-tiny", "alpha-half", "alpha-zero", "perm-negative", "perm-huge", "seed"],
)
def test_numeric_option_messages_show_the_value_as_given(capsys, tmp_path, setting, shown):
    path = write(tmp_path, with_analysis(setting))
    key = setting.split(" =")[0]
    line = refused(capsys, tmp_path, path, "plan.toml", "line 12", f"'analysis.{key}'")
    assert f"(got {shown})" in line


def test_duplicated_column_header_is_named(capsys, tmp_path):
    data = DATA.replace("height_mm,medium", "height_mm,medium,height_mm").replace(",peat\n", ",peat,1\n")
    data = "\n".join(r + ",1" if r.count(",") == 1 else r for r in data.splitlines()) + "\n"
    path = write(tmp_path, data=data)
    refused(capsys, tmp_path, path, "heights.csv", "'height_mm'", "2 times", "columns 1, 3")


def test_duplicated_factor_column_is_named(capsys, tmp_path):
    data = "\n".join(r + "," + r.split(",")[1] for r in DATA.splitlines()) + "\n"
    path = write(tmp_path, data=data)
    refused(capsys, tmp_path, path, "heights.csv", "'medium'", "columns 2, 3")


# ---------------------------------------------------------------------------------------------
# Levels that collide with missing-value tokens


@pytest.mark.parametrize("token", ["NA", "N/A", "nan", "."])
def test_a_listed_level_wins_over_a_missing_token(tmp_path, token):
    from reporter.api import prepare

    data = DATA.replace(",peat", f",{token}")
    plan = PLAN.replace('"peat"', f'"{token}"')
    prep = prepare(write(tmp_path, plan, data))
    assert prep.counts == (4, 3, 5, 4)
    assert not prep.data.exclusions


def test_an_excluded_level_wins_over_a_missing_token(tmp_path):
    from reporter.api import prepare

    data = DATA + "99,NA\n"
    plan = PLAN.replace('levels = ["peat", "coir", "bark", "soil"]',
                        'levels = ["peat", "coir", "bark", "soil"]\nexclude = ["NA"]')
    prep = prepare(write(tmp_path, plan, data))
    assert [e.reason for e in prep.data.exclusions] == ["level of 'medium' excluded by the plan"]


def test_an_unlisted_missing_token_is_still_missing(tmp_path):
    from reporter.api import prepare

    prep = prepare(write(tmp_path, PLAN, DATA + "11.0,NA\n"))
    assert [e.reason for e in prep.data.exclusions] == ["missing value of factor 'medium'"]


# ---------------------------------------------------------------------------------------------
# Plan language


@pytest.mark.parametrize("effect", ["dose:site", "dose*site", "dose : site", "`dose` * `site`"])
def test_formula_operators_in_an_effect_are_refused_with_a_hint(capsys, tmp_path, effect):
    path = write(tmp_path, TWO_WAY_PLAN.replace('"dose x site"', f'"{effect}"'), TWO_WAY_DATA, "two.csv")
    line = refused(capsys, tmp_path, path, "plan.toml", "line 13", "'hypotheses[1].effect'")
    assert "dose` x `site" in line or "dose x site" in line


@pytest.mark.parametrize("effect", ["dose x site", "dose × site", "`dose` x `site`"])
def test_the_plan_spelling_of_an_effect_runs(tmp_path, effect):
    path = write(tmp_path, TWO_WAY_PLAN.replace('"dose x site"', f'"{effect}"'), TWO_WAY_DATA, "two.csv")
    assert main(["check", str(path)]) == 0


def test_unknown_level_from_a_hyphenated_name_mentions_backticks(capsys, tmp_path):
    plan = TWO_WAY_PLAN.replace('effect = "dose x site"', 'means = "low-dose > high"')
    path = write(tmp_path, plan, TWO_WAY_DATA, "two.csv")
    line = refused(capsys, tmp_path, path, "plan.toml", "line 13", "'low'", "backticks")
    assert "`low-dose`" in line


def test_hyphenated_level_inside_mean_mentions_backticks(capsys, tmp_path):
    plan = TWO_WAY_PLAN.replace('effect = "dose x site"', 'means = "mean(dose=low-dose) > mean(dose=high)"')
    path = write(tmp_path, plan, TWO_WAY_DATA, "two.csv")
    refused(capsys, tmp_path, path, "plan.toml", "hypotheses[1].means", "backticks")


@pytest.mark.parametrize("value", ['"IV"', '"4"', '"type-IV"', "4"])
def test_a_sums_of_squares_type_that_does_not_exist_gets_no_look_alike(capsys, tmp_path, value):
    path = write(tmp_path, with_analysis(f"{_SS_KEY} = {value}"))
    line = refused(capsys, tmp_path, path, "plan.toml", "line 12", _SS_KEY)
    assert "Did you mean" not in line


_SS_KEY = "sums_of_squares"


# ---------------------------------------------------------------------------------------------
# The rest


@pytest.mark.parametrize("statement", ["coir = bark = coir", "coir = bark = peat = bark", "coir = (coir + bark)/2 = bark = coir"])
def test_a_chain_that_repeats_a_side_is_refused(capsys, tmp_path, statement):
    path = write(tmp_path, with_means(statement))
    refused(capsys, tmp_path, path, "plan.toml", "hypotheses[1].means", "repeats side")


def test_a_reduced_chain_keeps_a_correct_alternative(tmp_path):
    """a = b = (a + b)/2 reduces to one row; H1 says the equalities do not all hold."""
    from reporter.api import prepare

    prep = prepare(write(tmp_path, with_means("coir = bark = (coir + bark)/2")))
    c = prep.contrasts[0]
    assert c.q == 1 and c.alternative_text() == "not all of the equalities in H0 hold"


def test_a_duplicated_follow_up_entry_is_refused(capsys, tmp_path):
    path = write(tmp_path, with_analysis(f'{_FOLLOW_UP} = ["{_ALL_PAIRS}", "{_ALL_PAIRS}"]'))
    refused(capsys, tmp_path, path, "plan.toml", "line 12", f"analysis.{_FOLLOW_UP}[2]", "repeats")


_FOLLOW_UP = "follow_up"
_ALL_PAIRS = "all-pairs-tukey"


@pytest.mark.parametrize("column", ["height_mm", "medium"])
@pytest.mark.parametrize("kind", ["list", "struct"])
def test_parquet_nested_columns_are_refused(capsys, tmp_path, column, kind):
    import pyarrow as pa
    import pyarrow.parquet as pq

    rows = [r.split(",") for r in DATA.splitlines()[1:]]
    cols = {"height_mm": pa.array([float(v) for v, _ in rows]), "medium": pa.array([m for _, m in rows])}
    values = cols[column].to_pylist()
    cols[column] = pa.array([[v] for v in values]) if kind == "list" else pa.array([{"v": v} for v in values])
    pq.write_table(pa.table(cols), tmp_path / "heights.parquet")
    path = write(tmp_path, PLAN.replace("heights.csv", "heights.parquet"), data=None)
    refused(capsys, tmp_path, path, "heights.parquet", f"'{column}'", "Parquet type")


def test_a_5000_character_data_path(capsys, tmp_path):
    path = write(tmp_path, PLAN.replace('"heights.csv"', '"' + "d" * 5_000 + '.csv"'))
    refused(capsys, tmp_path, path, "plan.toml", "line 3", "'data.path'", "the limit is")


def test_a_data_path_component_longer_than_the_system_allows(capsys, tmp_path):
    path = write(tmp_path, PLAN.replace('"heights.csv"', '"' + "d" * 600 + '.csv"'))
    refused(capsys, tmp_path, path, "ddd", "longer than the system allows")


@pytest.mark.parametrize("length", [5_000, 600])
def test_a_very_long_plan_path(capsys, tmp_path, length):
    refused(capsys, tmp_path, tmp_path / ("p" * length + ".toml"), "ppp", "longer than the system allows")


def test_the_pdf_attachment_is_the_plan_as_hashed(tmp_path):
    """The plan keeps the exact bytes it hashed; the PDF attachment uses them, not a re-read."""
    from reporter.api import prepare
    from reporter.run import _attachments

    path = write(tmp_path)
    prep = prepare(path)
    original = path.read_bytes()
    assert prep.plan.source_bytes == original
    assert hashlib.sha256(prep.plan.source_bytes).hexdigest() == prep.plan.sha256
    path.write_text("title = 'changed after the run started'\n", encoding="utf-8")
    assert _attachments(prep, b"{}")["plan.toml"] == original


# ---------------------------------------------------------------------------------------------
# The plan's own names for options


@pytest.mark.parametrize(
    "setting, hint",
    [
        ('parameterization = "effects"', "Did you mean 'coding'?"),
        ('ss_type = "III"', "Did you mean 'sums_of_squares'?"),
        ('posthoc = ["all-pairs"]', "Did you mean 'follow_up'?"),
        ('posthoc_on = "cells"', "Did you mean 'follow_up_compares'?"),
        ('control = "peat"', "Did you mean 'follow_up_control'?"),
        ('coding = "effects"', 'Did you mean "sum-to-zero"?'),
        ('coding = "reference"', 'Did you mean "reference-level"?'),
        ('sums_of_squares = "III"', 'Did you mean "type-III"?'),
        ("sums_of_squares = 2", 'Write it as text: "type-II"'),
        ('follow_up = ["any-contrast"]', 'Did you mean "all-contrasts-scheffe"?'),
        ('follow_up = ["versus-control"]', 'Did you mean "versus-control-dunnett"?'),
    ],
)
def test_old_option_names_point_to_the_new_ones(capsys, tmp_path, setting, hint):
    path = write(tmp_path, with_analysis(setting))
    line = refused(capsys, tmp_path, path, "plan.toml", "line 12")
    assert hint in line


def test_new_option_names_reach_results_json(tmp_path):
    import json

    settings = ('coding = "sum-to-zero"\nsums_of_squares = "type-II"\nfollow_up = ["versus-control-dunnett"]\n'
                'follow_up_compares = "medium"\nfollow_up_control = "peat"\npermutations = 0')
    path = write(tmp_path, with_analysis(settings))
    assert main(["run", str(path), "--out", str(tmp_path / "out"), "--format", "json"]) == 0
    doc = json.loads((tmp_path / "out" / "results.json").read_text(encoding="utf-8"))
    a = doc["analysis"]
    assert (a["coding"], a["sums_of_squares"], a["follow_up"], a["follow_up_compares"], a["follow_up_control"]) == (
        "sum-to-zero", "type-II", ["versus-control-dunnett"], "medium", "peat")
    assert doc["design"]["coding"] == "sum-to-zero" and doc["anova"]["sums_of_squares"] == "type-II"
    assert [f["family"] for f in doc["follow_up"]] == ["versus-control-dunnett"]


# ---------------------------------------------------------------------------------------------
# Cell-summary tables follow the same rules for numbers and files

SUMMARY_PLAN = PLAN.replace('outcome = "height_mm"', 'outcome = "height_mm"\nlayout = "cell-summaries"').replace(
    "heights.csv", "cells.csv")
CELLS = "medium,n,mean,sd\npeat,12,101.23,4.12\ncoir,9,103.87,5.01\nbark,11,105.40,6.20\nsoil,10,108.02,7.33\n"


@pytest.mark.parametrize(
    "old, new, why",
    [("103.87", "1e999999999", "exponent of more than"), ("103.87", "1e400", "larger in magnitude"),
     ("103.87", "1_03.87", "uses '_'"), ("5.01", "５.01", "outside ASCII"), ("5.01", "inf", "infinite")],
    ids=["1e999999999", "1e400", "underscore", "full-width", "inf"],
)
def test_summary_numbers_follow_the_plain_decimal_rule(capsys, tmp_path, old, new, why):
    path = write(tmp_path, SUMMARY_PLAN, CELLS.replace(old, new), "cells.csv")
    refused(capsys, tmp_path, path, "cells.csv", "line 3", why)


def test_summary_table_that_is_a_fifo(capsys, tmp_path):
    os.mkfifo(tmp_path / "cells.csv")
    path = write(tmp_path, SUMMARY_PLAN, None)
    refused(capsys, tmp_path, path, "cells.csv", "named pipe")


@pytest.mark.parametrize("scale", [1e200, 1e-80], ids=["overflow", "underflow"])
def test_the_fit_refuses_sums_float64_cannot_hold(scale):
    """Arrays given from Python skip the reader's check; the fit itself refuses them clearly."""
    import numpy as np

    from reporter.errors import FitError
    from reporter.inference.analysis import fit_analysis_on_rows
    from reporter.model.design import Factor, build_design
    from reporter.model.hypotheses import compile_effect

    design = build_design([Factor("g", ("a", "b", "c"))])
    y = np.array([1.0, 2.0, 4.0, 3.0, 5.0, 9.0]) * scale
    cell = np.array([0, 0, 1, 1, 2, 2])
    with pytest.raises(FitError, match="rescale the outcome"):
        fit_analysis_on_rows(design, y, cell, [compile_effect(design, "g")], permutations=0)


def test_huge_values_are_shortened_in_messages(capsys, tmp_path):
    """A 100,000-character unknown level or key is named, shortened, in a readable message."""
    path = write(tmp_path, data=DATA + "12.0," + "z" * 100_000 + "\n")
    refused(capsys, tmp_path, path, "heights.csv", "line 18", "zzzz…")
    path = write(tmp_path, PLAN + "k" * 100_000 + ' = 1\n')
    refused(capsys, tmp_path, path, "plan.toml", "line 11", "is not a known key")
