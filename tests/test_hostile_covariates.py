"""Hostile covariate input, class by class, on both readers: each case gets exit code 2, one line
naming the file with the line or column (or the plan key), no traceback, no output, inputs
unchanged (the contract checked by ``test_hostile_inputs.refused``).

Classes: text that is no number; infinite and not-a-number text; a column that is empty or all
missing; a column missing from the file or named twice; a covariate named like the outcome or a
factor; a covariate that cannot carry a slope (constant, constant within cells, constant in a
cell with per-cell slopes, a copy of another covariate); magnitudes float64 cannot hold or square.
"""

from __future__ import annotations

import textwrap

import pytest

from test_hostile_inputs import refused

READERS = ["in-memory", "out-of-core"]

PLAN = """
title = "Recall after two schedules (simulated)"
[data]
path = "recall.csv"
outcome = "recall"
reader = "{reader}"
[[factors]]
name = "schedule"
levels = ["massed", "spaced"]
{covariates}
[[hypotheses]]
name = "spaced beats massed"
means = "spaced > massed"
"""

PRETEST = [41.5, 47.25, 52.0, 38.75, 55.5, 44.0, 49.5, 51.25, 39.0, 46.5, 53.75, 42.25]
AGE = [21, 24, 19, 22, 27, 23, 20, 25, 26, 18, 22, 24]


def data(pretest=None, age=None, header="recall,schedule,pretest,age") -> str:
    """Twelve rows of simulated scores; ``pretest``/``age`` replace values by row index."""
    rows = [header]
    for i in range(12):
        pre = (pretest or {}).get(i, PRETEST[i])
        a = (age or {}).get(i, AGE[i])
        rows.append(f"{30 + 0.3 * PRETEST[i] + (2 if i % 2 else 0) + (i % 3) * 0.5},{['massed', 'spaced'][i % 2]},{pre},{a}")
    return "\n".join(rows) + "\n"


def project(folder, reader, text: str, covariates='[[covariates]]\nname = "pretest"'):
    (folder / "recall.csv").write_text(text, encoding="utf-8")
    plan = folder / "plan.toml"
    plan.write_text(textwrap.dedent(PLAN).lstrip().format(reader=reader, covariates=covariates), encoding="utf-8")
    return plan


def line(i: int) -> str:
    return f"line {i + 2}"  # data row i sits on line i + 2 (the header is line 1)


@pytest.mark.parametrize("reader", READERS)
@pytest.mark.parametrize("value, expected", [
    ("abc", "which is not a number"),
    ("12abc", "which is not a number"),
    ("TRUE", "which is not a number"),
    ("4,5", "which is not a number"),
    ("1_000", "uses '_' between digits"),
    ("\uff14\uff15", "uses digits outside ASCII 0-9"),
    ("0x1F", "is written in base 16, 8 or 2"),
    ("1e99999", "has an exponent of more than"),
], ids=["word", "digits-then-word", "boolean", "decimal-comma", "underscore", "full-width", "hex", "long-exponent"])
def test_text_that_is_no_number(capsys, tmp_path, reader, value, expected):
    plan = project(tmp_path, reader, data({4: f'"{value}"'}))
    refused(capsys, tmp_path, plan, "recall.csv", line(4), "the covariate 'pretest'", expected)


@pytest.mark.parametrize("reader", READERS)
@pytest.mark.parametrize("value", ["inf", "-Infinity", "+inf"])
def test_infinite_text(capsys, tmp_path, reader, value):
    plan = project(tmp_path, reader, data({7: value}))
    refused(capsys, tmp_path, plan, "recall.csv", line(7), "the covariate 'pretest'", "is infinite")


@pytest.mark.parametrize("reader", READERS)
@pytest.mark.parametrize("fill", ["", "NA", "nan", "NaN", "-nan"])
def test_column_empty_or_all_missing(capsys, tmp_path, reader, fill):
    plan = project(tmp_path, reader, data({i: fill for i in range(12)}))
    refused(capsys, tmp_path, plan, "recall.csv", "the covariate 'pretest'", "has no value in any of the 12 rows")


@pytest.mark.parametrize("reader", READERS)
def test_column_missing_from_the_file(capsys, tmp_path, reader):
    plan = project(tmp_path, reader, data(), '[[covariates]]\nname = "pretset"')
    refused(capsys, tmp_path, plan, "recall.csv", "has no column 'pretset' (the covariate named in the plan)",
            "Did you mean 'pretest'?")


@pytest.mark.parametrize("reader", READERS)
def test_column_named_twice_in_the_header(capsys, tmp_path, reader):
    plan = project(tmp_path, reader, data(header="recall,schedule,pretest,pretest"))
    refused(capsys, tmp_path, plan, "recall.csv", "names the column 'pretest' (the covariate named in the plan) 2 times")


@pytest.mark.parametrize("reader", READERS)
@pytest.mark.parametrize("name, expected", [("recall", "which is the outcome column"),
                                            ("schedule", "which is the column of factor 'schedule'")])
def test_named_like_the_outcome_or_a_factor(capsys, tmp_path, reader, name, expected):
    plan = project(tmp_path, reader, data(), f'[[covariates]]\nname = "{name}"')
    refused(capsys, tmp_path, plan, "plan.toml", "line 10", "'covariates[1].name'", expected)


@pytest.mark.parametrize("reader", READERS)
@pytest.mark.parametrize("values, covariates, expected", [
    ({i: 50 for i in range(12)}, "", "has the same value, 50.0, in every analysed row"),
    ({i: 40 + 10 * (i % 2) for i in range(12)}, "", "does not vary within any cell"),
    ({i: 50 for i in range(0, 12, 2)}, 'slopes = "per-cell"', "does not vary within 1 cell (massed)"),
], ids=["constant", "constant-within-cells", "per-cell-constant"])
def test_covariate_without_a_slope(capsys, tmp_path, reader, values, covariates, expected):
    plan = project(tmp_path, reader, data(values), f'[[covariates]]\nname = "pretest"\n{covariates}')
    refused(capsys, tmp_path, plan, "recall.csv", "the covariate 'pretest' (covariates[1] in the plan)", expected)


@pytest.mark.parametrize("reader", READERS)
def test_covariates_that_are_copies_of_one_another(capsys, tmp_path, reader):
    twice = {i: 2 * PRETEST[i] - 3 for i in range(12)}  # age := 2·pretest − 3: one direction, two names
    plan = project(tmp_path, reader, data(age=twice), '[[covariates]]\nname = "pretest"\n[[covariates]]\nname = "age"')
    refused(capsys, tmp_path, plan, "recall.csv", "the covariates 'pretest' and 'age' are linear combinations")


@pytest.mark.parametrize("reader", READERS)
@pytest.mark.parametrize("values, where, expected", [
    ({3: "1e400"}, line(3), "is larger in magnitude than float64 can hold"),
    ({3: "-2e308"}, line(3), "is larger in magnitude than float64 can hold"),
    ({3: "1e-400"}, line(3), "is smaller in magnitude than the smallest normal float64"),
    ({0: "1.7e308", 3: "-1.7e308"}, line(3), "differs from the first value"),
    ({0: "1e200", 3: "-1e200"}, "ranges from", "makes the fit's sums of squares overflow"),
    ({i: f"{1 + i * 1e-15}e-60" for i in range(12)}, "ranges from", "underflow float64"),
], ids=["overflow", "negative-overflow", "underflow", "offset-overflow", "spread-overflow", "spread-underflow"])
def test_magnitudes_float64_cannot_hold(capsys, tmp_path, reader, values, where, expected):
    plan = project(tmp_path, reader, data(values))
    message = refused(capsys, tmp_path, plan, "recall.csv", "the covariate 'pretest'", where, expected)
    assert "Rescale the covariate" in message


def parquet_project(folder, reader, pretest) -> object:
    import pyarrow as pa
    import pyarrow.parquet as pq

    rows = [r.split(",") for r in data().splitlines()[1:]]
    table = pa.table({"recall": [float(r[0]) for r in rows], "schedule": [r[1] for r in rows], "pretest": pretest})
    pq.write_table(table, folder / "recall.parquet")
    plan = folder / "plan.toml"
    text = textwrap.dedent(PLAN).lstrip().format(reader=reader, covariates='[[covariates]]\nname = "pretest"')
    plan.write_text(text.replace("recall.csv", "recall.parquet"), encoding="utf-8")
    return plan


@pytest.mark.parametrize("reader", READERS)
@pytest.mark.parametrize("pretest, expected", [
    ([[1.0]] * 12, "has the Parquet type"),
    ([b"x"] * 12, "has the Parquet type"),
    ([None] * 12, "has the Parquet type"),
    ([str(v) for v in PRETEST[:5]] + ["abc"] + [str(v) for v in PRETEST[6:]], "row 6: the covariate 'pretest'"),
    (PRETEST[:2] + [float("inf")] + PRETEST[3:], "row 3: the covariate 'pretest' is inf"),
    ([float("nan")] * 12, "has no value in any of the 12 rows"),
], ids=["list", "binary", "null-type", "text-not-a-number", "infinite", "all-nan"])
def test_parquet_columns(capsys, tmp_path, reader, pretest, expected):
    plan = parquet_project(tmp_path, reader, pretest)
    refused(capsys, tmp_path, plan, "recall.parquet", expected)


@pytest.mark.parametrize("reader", READERS)
def test_slopes_that_leave_no_residual_degree_of_freedom(capsys, tmp_path, reader):
    """Four rows in two cells with a slope per cell: 4 − 2 − 2 = 0 residual degrees of freedom."""
    text = "recall,schedule,pretest,age\n31,massed,40,20\n33,massed,44,21\n35,spaced,41,22\n36,spaced,47,23\n"
    plan = project(tmp_path, reader, text, '[[covariates]]\nname = "pretest"\nslopes = "per-cell"')
    refused(capsys, tmp_path, plan, "recall.csv", "4 analysed rows in 2 cells with data leave no residual degree of "
            "freedom once the covariates' 2 slopes are estimated (4 − 2 − 2 = 0)", 'use slopes = "common"')


@pytest.mark.parametrize("reader", READERS)
def test_per_cell_slope_in_a_cell_of_one_row(capsys, tmp_path, reader):
    rows = data().splitlines()
    text = "\n".join([rows[0], *[r for r in rows[1:] if ",massed," not in r], rows[1]]) + "\n"
    plan = project(tmp_path, reader, text, '[[covariates]]\nname = "pretest"\nslopes = "per-cell"')
    refused(capsys, tmp_path, plan, "recall.csv", "does not vary within 1 cell (massed has one row)")
