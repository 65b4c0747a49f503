"""Data intake: formats, encodings, level matching, exclusions, hashes, exact decimals."""

from __future__ import annotations

import hashlib
import os

import numpy as np
import pandas as pd
import pytest

from conftest import ONEWAY_DATA, ONEWAY_PLAN
from reporter.errors import DataError
from reporter.intake.data import data_from_frame, load_data
from reporter.intake.plan import load_plan


def _load(project, plan=ONEWAY_PLAN, files=None):
    files = {"heights.csv": ONEWAY_DATA} if files is None else files
    return load_data(load_plan(project(plan, files)))


def test_csv_reads_all_rows_with_hash(project, tmp_path):
    """Every row is read, coded to the plan's level order, and the file's SHA-256 recorded."""
    ds = _load(project)
    assert ds.n == 16 and ds.n_read == 16
    assert np.bincount(ds.levels[:, 0]).tolist() == [4, 3, 5, 4]
    assert ds.sha256 == hashlib.sha256((tmp_path / "heights.csv").read_bytes()).hexdigest()
    assert ds.rows[0] == 2  # line numbers as a person counts them (header is line 1)
    np.testing.assert_allclose(ds.outcome_values()[:4], [12.1, 13.4, 11.8, 12.9], rtol=0, atol=1e-12)


def test_input_file_is_not_modified(project, tmp_path):
    """Reading leaves the data file's bytes and modification time untouched."""
    path = project(ONEWAY_PLAN, {"heights.csv": ONEWAY_DATA})
    data = tmp_path / "heights.csv"
    before = (data.read_bytes(), os.stat(data).st_mtime_ns)
    load_data(load_plan(path))
    assert (data.read_bytes(), os.stat(data).st_mtime_ns) == before


def test_bom_and_tsv(project):
    """A UTF-8 byte-order mark is accepted, and .tsv files split on tabs."""
    tsv = ONEWAY_DATA.replace(",", "\t").encode("utf-8")
    ds = _load(project, ONEWAY_PLAN.replace("heights.csv", "heights.tsv"), {"heights.tsv": b"\xef\xbb\xbf" + tsv})
    assert ds.n == 16


def test_semicolon_and_decimal_comma(project):
    """Files with ';' separators and decimal commas read through [data] delimiter and decimal."""
    text = ONEWAY_DATA.replace(",", ";").replace(".", ",")
    plan = ONEWAY_PLAN.replace('outcome = "height_mm"', 'outcome = "height_mm"\ndelimiter = ";"\ndecimal = ","')
    ds = _load(project, plan, {"heights.csv": text})
    np.testing.assert_allclose(ds.outcome_values()[:2], [12.1, 13.4], atol=1e-12)


def test_numeric_levels_match_as_numbers(project):
    """A plan level 1 matches data written 1.0, and 0.5 matches .5."""
    plan = ONEWAY_PLAN.replace('levels = ["peat", "coir", "bark", "soil"]', "levels = [0.5, 1, 2]")
    plan = plan.replace('means = "coir > bark"', 'means = "mean(medium=1) > mean(medium=2)"')
    data = "height_mm,medium\n1,1.0\n2,0.5\n3,2\n4, 2.00 \n5,.5\n6,1\n"
    ds = _load(project, plan, {"heights.csv": data})
    assert ds.levels[:, 0].tolist() == [1, 0, 2, 2, 0, 1]


def test_level_not_in_plan_is_listed(project):
    """A data level the plan does not list is an error that names it, its count and first line."""
    with pytest.raises(DataError) as err:
        _load(project, files={"heights.csv": ONEWAY_DATA + "7.7,sand\n7.9,sand\n"})
    msg = str(err.value)
    assert '"sand" (2 rows, first at line 18)' in msg and "exclude = [...]" in msg


def test_excluded_level_is_counted(project):
    """A level excluded explicitly is left out and counted by reason."""
    plan = ONEWAY_PLAN.replace('"soil"]', '"soil"]\nexclude = ["sand"]')
    ds = _load(project, plan, {"heights.csv": ONEWAY_DATA + "7.7,sand\n"})
    assert ds.n == 16
    assert [(e.reason, e.count, e.rows) for e in ds.exclusions] == [
        ("level of 'medium' excluded by the plan", 1, (18,))
    ]


def test_missing_and_non_numeric_outcomes_are_counted(project):
    """Missing and non-numeric outcomes are counted by reason; non-numeric ones name their line."""
    data = ONEWAY_DATA + ",peat\nNA,coir\nabc,bark\n"
    ds = _load(project, files={"heights.csv": data})
    reasons = {e.reason: e for e in ds.exclusions}
    assert reasons["missing outcome 'height_mm'"].count == 2
    bad = reasons["non-numeric outcome 'height_mm'"]
    assert bad.count == 1 and bad.rows == (20,) and 'line 20: "abc"' in bad.detail
    assert ds.dropped_outcome_levels[:, 0].tolist() == [0, 1, 2]


def test_empty_cell_is_allowed(project):
    """A plan level with no rows is an empty cell, not an error."""
    data = "".join(line + "\n" for line in ONEWAY_DATA.splitlines() if not line.endswith("soil"))
    ds = _load(project, files={"heights.csv": data})
    assert np.bincount(ds.levels[:, 0], minlength=4).tolist() == [4, 3, 5, 0]


def test_level_with_markup_is_plain_text(project):
    """A level such as <script> is matched as ordinary text."""
    plan = ONEWAY_PLAN.replace('"soil"]', '"<script>alert(1)</script>"]')
    data = ONEWAY_DATA.replace(",soil", ",<script>alert(1)</script>")
    ds = _load(project, plan, {"heights.csv": data})
    assert np.bincount(ds.levels[:, 0]).tolist() == [4, 3, 5, 4]


def test_exact_decimal_pivot(project):
    """Values with 13 constant leading digits keep their decimals exactly after the pivot."""
    data = "height_mm,medium\n1000000000000.4,peat\n1000000000000.3,coir\n1000000000000.5,bark\n1000000000000.2,soil\n"
    ds = _load(project, files={"heights.csv": data})
    assert ds.pivot_text == "1000000000000.4"
    np.testing.assert_array_equal(ds.y, [0.0, -0.1, 0.1, -0.2])  # exact decimals, then one rounding


def test_parquet_and_dataframe_agree_with_csv(project, tmp_path):
    """Parquet files and pandas DataFrames give the same rows as the CSV."""
    import io

    frame = pd.read_csv(io.StringIO(ONEWAY_DATA))
    frame.to_parquet(tmp_path / "heights.parquet")
    ds_csv = _load(project)
    plan = load_plan(project(ONEWAY_PLAN.replace("heights.csv", "heights.parquet"), {}))
    ds_pq = load_data(plan)
    ds_df = data_from_frame(plan, frame)
    for ds in (ds_pq, ds_df):
        np.testing.assert_array_equal(ds.levels, ds_csv.levels)
        np.testing.assert_allclose(ds.outcome_values(), ds_csv.outcome_values(), rtol=1e-15)
    assert ds_pq.rows[0] == 1 and ds_pq.sha256 is not None and ds_df.sha256 is None


@pytest.mark.parametrize(
    "files, expected",
    [
        ({}, "the data file does not exist"),
        ({"heights.csv": ""}, "the file is empty"),
        ({"heights.csv": "height_mm,medium\n"}, "has a header but no data rows"),
        ({"heights.csv": "height,medium\n1,peat\n"}, "has no column 'height_mm' (the outcome named in the plan)"),
        ({"heights.csv": "height_mm,medum\n1,peat\n"}, "Did you mean 'medum'?"),
        ({"heights.csv": "height_mm,medium\n1,peat\n2,coir,x\n"}, "line 3: has 3 fields but the header has 2"),
        ({"heights.csv": "height_mm,medium\n1,p\xe9at\n".encode("latin-1")}, "is not UTF-8 text: line 2 holds the byte 0xe9"),
    ],
    ids=["missing-file", "empty", "header-only", "no-outcome", "no-factor", "ragged", "not-utf8"],
)
def test_bad_data_files(project, files, expected):
    """Each unreadable or mismatched data file gets one clear DataError."""
    with pytest.raises(DataError) as err:
        _load(project, files=files)
    assert expected in str(err.value)
