"""Cell-summary tables (one row per cell): plan keys, conversions, rounding read off the text, and
one clear error for each class of bad table."""

from __future__ import annotations

import math
from decimal import Decimal
from fractions import Fraction

import numpy as np
import pytest

from reporter.errors import DataError, PlanError
from reporter.intake.plan import load_plan
from reporter.intake.summary import read_summary

PLAN = """
title = "Seedling height under three media"
[data]
path = "cells.csv"
outcome = "height_mm"
layout = "cell-summaries"
{extra}
[[factors]]
name = "medium"
levels = ["peat", "coir", "bark"]
[[hypotheses]]
name = "media differ"
effect = "medium"
"""

GOOD = "medium,n,mean,sd\npeat,5,12.34,1.20\ncoir,4,11.5,0.87\nbark,3,10.10,0.5\n"


def _read(project, table=GOOD, extra="", name="cells.csv"):
    return read_summary(load_plan(project(PLAN.format(extra=extra), {name: table})))


def test_sd_table_gives_cell_statistics(project):
    """n, mean and S = (n − 1)·SD² per cell in the plan's level order; the mean is an exact decimal
    offset from the first row's mean (arithmetic checked with fractions.Fraction)."""
    t = _read(project, "medium,n,mean,sd\nbark,3,10.10,0.5\npeat,5,12.34,1.20\ncoir,4,11.5,0.87\n")
    c = t.cells
    assert c.n.tolist() == [5, 4, 3]
    assert t.pivot_text == "10.10" and c.pivot_exact == Fraction(101, 10)
    assert c.offset_mean.tolist() == [float(Fraction(1234, 100) - Fraction(101, 10)),
                                      float(Fraction(115, 10) - Fraction(101, 10)), 0.0]
    assert c.ss.tolist() == [float(4 * Fraction(12, 10) ** 2), float(3 * Fraction(87, 100) ** 2),
                             float(2 * Fraction(5, 10) ** 2)]
    assert t.summary.rows.tolist() == [3, 4, 2]
    assert t.summary.mean_rounding.decimals == 2 and t.summary.mean_rounding.half_unit == 0.005
    assert t.summary.spread_rounding.decimals == 2 and t.summary.spread_rounding.source == "text"


@pytest.mark.parametrize(
    "spread, values",
    [("variance", ["1.44", "0.7569", "0.25"]),
     ("se", [str(Decimal("1.20") / Decimal(5).sqrt()), str(Decimal("0.87") / Decimal(4).sqrt()),
             str(Decimal("0.5") / Decimal(3).sqrt())])],
    ids=["variance", "se"],
)
def test_variance_and_se_convert_to_the_same_ss(project, spread, values):
    """Variance enters as S = (n − 1)·v and SE as SD = SE·√n; both give the SD table's S."""
    sd = _read(project).cells.ss
    rows = "".join(f"{m},{n},{mean},{v}\n" for (m, n, mean), v in
                   zip([("peat", 5, "12.34"), ("coir", 4, "11.5"), ("bark", 3, "10.10")], values))
    t = _read(project, f"medium,n,mean,{spread}\n" + rows, extra=f'spread = "{spread}"')
    np.testing.assert_allclose(t.cells.ss, sd, rtol=1e-15)
    assert ("SE·√n" in t.summary.conversion) == (spread == "se")


def test_single_observation_cell_has_no_spread(project):
    """A cell with n = 1 carries an empty SD (as stddev_samp writes it) and S = 0."""
    t = _read(project, "medium,n,mean,sd\npeat,5,12.34,1.20\ncoir,1,11.5,\nbark,3,10.10,0.5\n")
    assert t.cells.n.tolist() == [5, 1, 3] and t.cells.ss[1] == 0.0 and math.isnan(t.cells.sd[1])


def test_column_names_and_stated_decimals_from_the_plan(project):
    """n_column, mean_column, spread_column rename the columns; stated decimals override the text."""
    table = "medium,count,avg_h,sd_h\npeat,5,12.34,1.20\ncoir,4,11.5,0.87\nbark,3,10.10,0.5\n"
    t = _read(project, table, extra='n_column = "count"\nmean_column = "avg_h"\nspread_column = "sd_h"\n'
                                     "mean_decimals = 3\nspread_decimals = 1")
    assert t.cells.n.tolist() == [5, 4, 3]
    assert t.summary.mean_rounding.decimals == 3 and t.summary.mean_rounding.source == "plan"
    assert t.summary.spread_rounding.half_unit == 0.05


def test_parquet_floats_are_unrounded_and_decimals_types_are_read(project, tmp_path):
    """Parquet floating point carries no rounding (taken as unrounded); a DECIMAL column's scale is
    its number of decimals."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    pq.write_table(pa.table({"medium": ["peat", "coir", "bark"], "n": [5, 4, 3],
                             "mean": [12.34, 11.5, 10.1], "sd": [1.2, 0.87, 0.5]}), tmp_path / "f.parquet")
    plan = load_plan(project(PLAN.format(extra="").replace("cells.csv", "f.parquet")))
    t = read_summary(plan)
    assert not t.summary.rounded and t.summary.mean_rounding.source == "binary"
    np.testing.assert_allclose(t.cells.ss, _read(project).cells.ss, rtol=1e-15)
    dec = pa.decimal128(6, 3)
    pq.write_table(pa.table({"medium": ["peat", "coir", "bark"], "n": [5, 4, 3],
                             "mean": pa.array([Decimal("12.340"), Decimal("11.500"), Decimal("10.100")], dec),
                             "sd": [1.2, 0.87, 0.5]}), tmp_path / "f.parquet")
    t = read_summary(plan)
    assert t.exact_decimal and t.summary.mean_rounding.decimals == 3 and t.summary.mean_rounding.source == "decimal type"


def test_excluded_level_drops_its_cell_and_counts_it(project):
    """A row for a level the plan excludes is left out and counted, as rows are."""
    plan = PLAN.format(extra="").replace('levels = ["peat", "coir", "bark"]',
                                         'levels = ["peat", "coir", "bark"]\nexclude = ["soil"]')
    t = read_summary(load_plan(project(plan, {"cells.csv": GOOD + "soil,6,9.0,1.0\n"})))
    assert t.cells.k == 3 and t.exclusions[0].count == 1 and t.exclusions[0].rows == (5,)


BAD = [
    ("medium,n,mean,sd\npeat,0,12.34,1.20\ncoir,4,11.5,0.87\nbark,3,10.10,0.5\n",
     ["line 2, column 'n'", "n is 0", "at least one observation", "exclude = [...]"]),
    ("medium,n,mean,sd\npeat,5.5,12.34,1.20\ncoir,4,11.5,0.87\nbark,3,10.10,0.5\n",
     ["line 2, column 'n'", '"5.5"', "not a whole number"]),
    ("medium,n,mean,sd\npeat,5,12.34,1.20\ncoir,4,11.5,-0.87\nbark,3,10.10,0.5\n",
     ["line 3, column 'sd'", '"-0.87"', "cannot be negative"]),
    ("medium,n,mean,sd\npeat,5,12.34,1.20\ncoir,1,11.5,0\nbark,3,10.10,0.5\n",
     ["line 3, column 'sd'", '"0"', "n is 1", "Leave the field empty"]),
    ("medium,n,mean,sd\npeat,5,12.34,1.20\ncoir,4,11.5,\nbark,3,10.10,0.5\n",
     ["line 3, column 'sd'", "is empty but n is 4"]),
    ("medium,n,mean,sd\npeat,5,12.34,1.20\nbark,3,10.10,0.5\n",
     ["has no row for the cell medium=coir", "2 of the plan's 3 cells", "add the missing rows"]),
    ("medium,n,mean,sd\npeat,5,12.34,1.20\ncoir,4,11.5,0.87\nbark,3,10.10,0.5\nPeat,2,1,1\n",
     ["holds levels that the plan does not list", '"Peat"', "line 5"]),
    ("medium,n,mean,sd\npeat,5,12.34,1.20\ncoir,4,11.5,0.87\nbark,3,10.10,0.5\n1.0,2,1,1\n",
     ['"1.0"', "does not list"]),
    ("medium,n,mean,sd\npeat,5,12.34,1.20\ncoir,4,11.5,0.87\nbark,3,10.10,0.5\ncoir,2,1,1\n",
     ["lines 3 and 5", "medium=coir", "each cell must appear once", "GROUP BY"]),
    ("medium,n,mean,sd\npeat,5,12.34,1.20\ncoir,4,eleven,0.87\nbark,3,10.10,0.5\n",
     ["line 3, column 'mean'", '"eleven"', "not a number"]),
    ("medium,n,mean,sd\npeat,5,12.34,1.20\ncoir,four,11.5,0.87\nbark,3,10.10,0.5\n",
     ["line 3, column 'n'", '"four"', "not a number"]),
    ("medium,n,mean,sd\npeat,5,12.34,1.20\ncoir,4,11.5,0,87\nbark,3,10.10,0.5\n",
     ["line 3: has 5 fields"]),
    ("medium,n,mean,sd\npeat,5,12.34,1.2x\ncoir,4,11.5,0.87\nbark,3,10.10,0.5\n",
     ["line 2, column 'sd'", '"1.2x"', "not a number"]),
    ("medium,n,mean,sd\npeat,5,12.34,1.20\ncoir,4,inf,0.87\nbark,3,10.10,0.5\n",
     ["line 3, column 'mean'", '"inf"', "finite"]),
    ("medium,n,mean,sd\npeat,5,12.34,1.20\n,4,11.5,0.87\nbark,3,10.10,0.5\n",
     ["line 3, column 'medium'", "is empty", "IS NOT NULL"]),
    ("medium,n,mean,sd\npeat,5,,1.20\ncoir,4,11.5,0.87\nbark,3,10.10,0.5\n",
     ["line 2, column 'mean'", "the mean is empty"]),
    ("medium,n,mean,sd\npeat,5,12.34,1.20\ncoir,4,1_000,0.87\nbark,3,10.10,0.5\n",
     ["line 3, column 'mean'", '"1_000"', "without separators"]),
    ("medium,n,mean,sd\npeat,5,12.34,1.20\ncoir,4,1e999,0.87\nbark,3,10.10,0.5\n",
     ["line 3, column 'mean'", '"1e999"', "larger in magnitude than float64"]),
    ("medium,n,mean,sd\npeat,5,1e300,1.20\ncoir,4,-1e300,0.87\nbark,3,10.10,0.5\n",
     ["the means (lines 3 and 2) differ by", "Rescale the outcome"]),
    ("medium,n,mean,sd\npeat,5,12.34,1e200\ncoir,4,11.5,0.87\nbark,3,10.10,0.5\n",
     ["line 2, column 'sd': the SD 1e+200 gives an SD outside", "Rescale the outcome"]),
    ("medium,n,mean\npeat,5,12.34\n",
     ["has no column 'sd'", 'layout = "cell-summaries"', "one row per cell"]),
    ("medium,height_mm\npeat,12.3\n",
     ["has no column 'n'", "one row per cell"]),
]


@pytest.mark.parametrize(
    "table, fragments", BAD,
    ids=["n-zero", "n-fraction", "sd-negative", "sd-with-n-1", "sd-missing", "missing-cell", "unknown-level",
         "numeric-unknown-level", "duplicate-cell", "mean-text", "n-text", "ragged", "sd-text", "mean-inf",
         "empty-level", "mean-empty", "separator-digits", "beyond-float64", "means-too-far-apart", "sd-too-large",
         "no-spread-column", "rows-not-cells"],
)
def test_bad_tables_get_one_clear_message(project, table, fragments):
    """Each class of bad summary table gets one DataError naming file, line, column, value and fix."""
    with pytest.raises(DataError) as err:
        _read(project, table)
    msg = str(err.value)
    assert "cells.csv" in msg
    for f in fragments:
        assert f in msg, (f, msg)


def test_missing_cells_are_listed_with_a_count(project):
    """Many missing cells of a factorial design: the first six are named and the rest counted."""
    plan = PLAN.format(extra="") + '[[factors]]\nname = "light"\nlevels = ["a", "b", "c", "d"]\n'
    with pytest.raises(DataError) as err:
        read_summary(load_plan(project(plan, {"cells.csv": "medium,light,n,mean,sd\npeat,a,5,1,1\n"})))
    assert "and 5 more" in str(err.value) and "(1 of the plan's 12 cells" in str(err.value)


@pytest.mark.parametrize(
    "extra, fragment",
    [('layout = "cells"', "'data.layout' must be one of \"rows\", \"cell-summaries\""),
     ('spread = "sem"', "'data.spread' must be one of \"sd\", \"variance\", \"se\""),
     ('mean_decimals = -1', "'data.mean_decimals' must be a whole number of decimals from 0 to 20"),
     ('spread_decimals = 2.5', "'data.spread_decimals' must be a whole number"),
     ('mean_column = "n"', "'data.mean_column' names the column \"n\", which data.n_column names too"),
     ('n_column = "medium"', "'factors[1].name' reads the column \"medium\", which [data] names as the n"),
     ('spred = "sd"', "'data.spred' is not a known key. Did you mean 'spread'?"),
     ('reader = "out-of-core"', "'data.reader' is \"out-of-core\", but a table of cell summaries")],
    ids=["layout", "spread", "decimals-negative", "decimals-float", "same-column", "factor-column", "typo", "reader"],
)
def test_plan_keys_are_checked(project, extra, fragment):
    """The summary keys of [data] are validated with the key path, the value and the fix."""
    text = PLAN.format(extra=extra)
    if extra.startswith("layout"):
        text = text.replace('layout = "cell-summaries"\n', "")
    with pytest.raises(PlanError) as err:
        load_plan(project(text))
    assert fragment in str(err.value)


def test_summary_keys_need_the_summary_layout(project):
    """A summary key in a plan of rows is refused with the fix (set the layout)."""
    text = PLAN.format(extra='n_column = "count"').replace('layout = "cell-summaries"\n', "")
    with pytest.raises(PlanError) as err:
        load_plan(project(text))
    assert "'data.n_column' is only read from a table of cell summaries" in str(err.value)
