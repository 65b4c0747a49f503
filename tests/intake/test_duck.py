"""The out-of-core reader (DuckDB) against the in-memory reader, numpy/scipy and NIST StRD.

Sources of reference values: NIST Statistical Reference Datasets, ANOVA section (certified
values, tests/data/nist/README.md); numpy (quantiles type 7, medians) and scipy.stats.rankdata
(mid-ranks) as reference libraries; otherwise the in-memory reader of this package, which the
rest of the suite checks against published data.
"""

from __future__ import annotations

import dataclasses
import hashlib
import math
import random
import re
import sys
from pathlib import Path

import numpy as np
import pytest
import scipy.stats

from reporter.errors import DataError, PlanError
from reporter.intake import defaults as D
from reporter.intake.duck import outcome as duck_outcome
from reporter.intake.duck import rows as duck_rows
from reporter.intake.cells import describe_cells
from reporter.intake.data import load_data
from reporter.intake.plan import load_plan, plan_from_dict

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "fitting"))
from test_nist import NAMES, lre, read_nist  # noqa: E402

TWO_WAY = """
title = "t"
[data]
path = "{path}"
outcome = "y"
reader = "{reader}"
[[factors]]
name = "dose"
levels = ["1", "2", "5"]
exclude = ["9"]
[[factors]]
name = "site"
levels = ["north", "south"]
[[hypotheses]]
name = "dose matters"
effect = "dose"
"""

# Rows chosen to exercise every rule of level matching and outcome reading (invented values).
MESSY = (
    "dose,site,y,note\n"
    "1,north,10.5,a\n"
    "1.0,south,11.25,b\n"
    " 2 ,north,9.75,c\n"
    "2,south,NA,d\n"
    "5,north,12,e\n"
    "\n"
    "5,south,abc,f\n"
    "9,north,13.5,g\n"
    ",south,8.5,h\n"
    "2,north,\u22121.5,i\n"
    '1,south,7.5,"two\nlines"\n'
    "2,south,\u00a08.25\u2003,k\n"
    "5,south,+3.5,m\n"
    "2,north,.5,n\n"
    "1,south,6.,o\n"
    "5,north,14.125,p\n"
)


def write_plan(tmp_path: Path, data: str, reader: str, name: str = "plan.toml", text: str = TWO_WAY) -> Path:
    p = tmp_path / name
    p.write_text(text.format(path=data, reader=reader), encoding="utf-8")
    return p


def both(tmp_path: Path, data: str, text: str = TWO_WAY):
    """The same data read by both readers (the in-memory data set's cells built as prepare does)."""
    mem = load_data(load_plan(write_plan(tmp_path, data, "in-memory", "m.toml", text)))
    duck = load_data(load_plan(write_plan(tmp_path, data, "out-of-core", "d.toml", text)))
    return mem, duck


def memory_cells(plan, data):
    from fractions import Fraction

    shape = tuple(len(f.levels) for f in plan.factors)
    cell = np.ravel_multi_index(tuple(data.levels.T), shape)
    exact = Fraction(data.pivot_text) if data.exact_decimal else Fraction(data.pivot)
    return describe_cells(data.y, cell, int(np.prod(shape)), data.pivot, exact), cell


def assert_close(a, b, rel=1e-12):
    a, b = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
    assert a.shape == b.shape
    both_nan = np.isnan(a) & np.isnan(b)
    scale = np.maximum(np.abs(a), np.abs(b))
    ok = both_nan | (np.abs(a - b) <= rel * np.where(scale > 0, scale, 1.0))
    assert ok.all(), (a, b)


# ---------------------------------------------------------------------------------------------
# The same data set from both readers


def test_messy_text_file_same_as_in_memory(tmp_path):
    (tmp_path / "d.csv").write_text(MESSY, encoding="utf-8")
    mem, duck = both(tmp_path, "d.csv")
    plan = load_plan(tmp_path / "m.toml")
    cells, _ = memory_cells(plan, mem)
    assert duck.reader == "out-of-core" and mem.reader == "in-memory"
    assert duck.n_read == mem.n_read and duck.n == mem.n
    assert duck.exclusions == mem.exclusions
    assert (duck.pivot, duck.pivot_text, duck.exact_decimal) == (mem.pivot, mem.pivot_text, mem.exact_decimal)
    assert np.array_equal(duck.cells.n, cells.n)
    assert_close(duck.cells.mean, cells.mean)
    assert_close(duck.cells.ss, cells.ss)
    assert duck.cells.pivot_exact == cells.pivot_exact
    assert sorted(map(tuple, duck.dropped_outcome_levels)) == sorted(map(tuple, mem.dropped_outcome_levels))
    assert duck.sha256 == hashlib.sha256((tmp_path / "d.csv").read_bytes()).hexdigest()
    # The quoted line break moves later lines: the row numbers still name the line.
    flagged = duck.row_access.flagged(np.zeros(6), np.full(6, -1.0), limit=100)
    assert sorted(r for r, _, _ in flagged.rows) == sorted(mem.rows.tolist())


def test_semicolon_decimal_comma_and_tsv(tmp_path):
    text = TWO_WAY.replace('reader = "{reader}"', 'reader = "{reader}"\ndelimiter = ";"\ndecimal = ","')
    (tmp_path / "d.csv").write_text(
        "dose;site;y\n1;north;10,5\n2;south;11,25\n5;north;-0,75\n1;south;x\n", encoding="utf-8"
    )
    mem, duck = both(tmp_path, "d.csv", text)
    assert duck.exclusions == mem.exclusions
    assert_close(duck.cells.mean, memory_cells(load_plan(tmp_path / "m.toml"), mem)[0].mean)
    (tmp_path / "t.tsv").write_text("dose\tsite\ty\n1\tnorth\t3.5\n2\tsouth\t4.5\n", encoding="utf-8")
    mem, duck = both(tmp_path, "t.tsv")
    assert duck.n == mem.n == 2 and duck.format == "tsv"


def test_parquet_typed_columns_same_as_in_memory(tmp_path):
    import pyarrow as pa
    import pyarrow.parquet as pq

    table = pa.table({
        "dose": pa.array([1, 1, 2, 2, 5, 5, 9, None, 2], pa.int64()),
        "site": pa.array(["north", "south", "north", "south", "north", "south", "north", "north", None]),
        "y": pa.array([1.5, 2.5, float("nan"), 4.0, 5.25, None, 7.0, 8.0, 9.0]),
    })
    pq.write_table(table, tmp_path / "d.parquet")
    mem, duck = both(tmp_path, "d.parquet")
    cells, _ = memory_cells(load_plan(tmp_path / "m.toml"), mem)
    assert duck.exclusions == mem.exclusions
    assert (duck.pivot, duck.exact_decimal, duck.n_read) == (mem.pivot, mem.exact_decimal, mem.n_read)
    assert np.array_equal(duck.cells.n, cells.n)
    assert_close(duck.cells.mean, cells.mean)
    assert_close(duck.cells.ss, cells.ss)


def test_float_factor_and_text_outcome_in_parquet(tmp_path):
    import pyarrow as pa
    import pyarrow.parquet as pq

    pq.write_table(pa.table({
        "dose": pa.array([1.0, 2.0, 5.0, 9.0, float("nan")]),
        "site": pa.array(["north"] * 5),
        "y": pa.array(["1000000000000.4", "1000000000000.3", "x", "1", "2"]),
    }), tmp_path / "d.parquet")
    mem, duck = both(tmp_path, "d.parquet")
    assert duck.exclusions == mem.exclusions
    assert duck.exact_decimal and duck.pivot_text == mem.pivot_text == "1000000000000.4"
    assert_close(duck.cells.mean, memory_cells(load_plan(tmp_path / "m.toml"), mem)[0].mean)


@pytest.mark.parametrize("n_levels", [3, D.MAX_LEVELS // 2], ids=["few levels", "most levels"])
def test_first_factor_code_and_outcome_status_in_every_combination(tmp_path, n_levels):
    """The compact table keeps the first factor's code and the outcome's status in one column
    (reader._CodeStatus; up to the most levels the cell limit leaves with a second factor): every pair of (level as written in
    the plan, level written otherwise, excluded level, missing factor) and (valid, missing,
    non-numeric outcome), in both factor positions, gives the in-memory reader's exclusions,
    cells and dropped-outcome levels."""
    levels = [f"L{i}" for i in range(n_levels)]
    text = f"""
title = "t"
[data]
path = "{{path}}"
outcome = "y"
reader = "{{reader}}"
[[factors]]
name = "dose"
levels = {levels!r}
exclude = ["X"]
[[factors]]
name = "site"
levels = ["north", "south"]
exclude = ["east"]
""".replace("'", '"')
    spellings = ["L1", " L2 ", "X", "", "L0"]  # as in the plan, trimmed by the matching rules, excluded, missing
    outcomes = ["1.5", "NA", "abc", "2.25"]
    lines = ["dose,site,y"]
    for dose in spellings:
        for y in outcomes:
            for site in ["north", " south", "east", ""]:  # ' south': the second factor's matching too
                lines.append(f"{dose},{site},{y}")
    (tmp_path / "d.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    mem, duck = both(tmp_path, "d.csv", text)
    cells, _ = memory_cells(load_plan(tmp_path / "m.toml"), mem)
    assert (duck.n_read, duck.n) == (mem.n_read, mem.n)
    assert duck.exclusions == mem.exclusions
    assert np.array_equal(duck.cells.n, cells.n)
    assert_close(duck.cells.mean, cells.mean)
    assert sorted(map(tuple, duck.dropped_outcome_levels)) == sorted(map(tuple, mem.dropped_outcome_levels))
    assert len(duck.exclusions) >= 5


# ---------------------------------------------------------------------------------------------
# NIST StRD through the out-of-core reader


@pytest.mark.parametrize("name", NAMES)
def test_nist_certified_values_out_of_core(name, tmp_path):
    """Between SS, within SS, F, R² and residual SD at LRE ≥ 14 from the cell table that DuckDB
    builds (certified values: NIST StRD ANOVA)."""
    cert, levels = read_nist(name, tmp_path)
    plan = plan_from_dict(
        {"title": name, "data": {"path": "data.csv", "outcome": "y", "reader": "out-of-core"},
         "factors": [{"name": "group", "levels": levels}], "hypotheses": []},
        base_dir=tmp_path,
    )
    data = load_data(plan)
    assert data.reader == "out-of-core" and data.exact_decimal
    c = data.cells
    df_b, df_w = c.k - 1, c.df_within
    assert (df_b, df_w) == (cert["df_between"], cert["df_within"])
    ssb, ssw = c.ss_between, c.ss_within
    got = {
        "ss_between": ssb,
        "ss_within": ssw,
        "F": (ssb / df_b) / (ssw / df_w),
        "r_squared": ssb / (ssb + ssw),
        "residual_sd": math.sqrt(ssw / df_w),
    }
    scores = {k: lre(v, cert[k]) for k, v in got.items()}
    assert min(scores.values()) >= 14.0, scores


# ---------------------------------------------------------------------------------------------
# Row access against the in-memory answers and numpy / scipy


@pytest.fixture(params=["scans", "sorted", "sorted-slices", "distinct"])
def rows_pair(tmp_path, request, monkeypatch):
    """Rows with many ties, answered by scans of the rows, from each cell's sorted values held in
    memory (fetched a cell at a time, or in slices of rows), or from the distinct values."""
    monkeypatch.setattr(duck_rows, "_DISTINCT_SHARE", 1.0 if request.param == "distinct" else 0.0)
    monkeypatch.setattr(duck_rows, "MAX_ROWS", 0 if request.param == "scans" else duck_rows.MAX_ROWS)
    monkeypatch.setattr(duck_rows, "_FETCH", 1000)  # the sorted values fetched in several slices
    if request.param == "sorted-slices":
        monkeypatch.setattr(duck_rows, "_CELL_QUERIES", 0)
    if request.param == "scans":  # rank slabs of a few hundred rows, and buckets heavier than a slab
        monkeypatch.setattr(duck_rows, "_RANK_SLAB_ROWS", 150)
        monkeypatch.setattr(duck_rows, "_RANK_BUCKETS", 64)
    rng = np.random.default_rng(7)
    n = 3000
    dose = rng.choice(["1", "2", "5"], n)
    site = rng.choice(["north", "south"], n, p=[0.7, 0.3])
    y = np.round(rng.normal(50, 10, n), 1)  # one decimal: many ties
    y[:5] = [200.0, -150.0, 50.0, 50.0, 50.0]
    text = "dose,site,y\n" + "".join(f"{a},{b},{c}\n" for a, b, c in zip(dose, site, y))
    (tmp_path / "d.csv").write_text(text, encoding="utf-8")
    mem, duck = both(tmp_path, "d.csv")
    cells, cell = memory_cells(load_plan(tmp_path / "m.toml"), mem)
    assert (duck.row_access._distinct() is not None) == (request.param == "distinct")
    assert (duck.row_access._sorted() is not None) == request.param.startswith("sorted")
    return mem.y, cell, cells, duck.row_access, mem.rows


def test_medians_and_deviation_stats(rows_pair):
    y, cell, cells, rows, _ = rows_pair
    med = np.array([np.median(y[cell == c]) for c in range(6)])
    assert_close(rows.medians(), med)
    for centre in (med, cells.offset_mean):
        z = np.abs(y - centre[cell])
        ref = describe_cells(z, cell, 6)
        n, m, s = rows.deviation_stats(centre)
        assert np.array_equal(n, ref.n)
        assert_close(m, ref.offset_mean)
        assert_close(s, ref.ss)


def test_rank_sums_match_scipy_rankdata(rows_pair):
    y, cell, _, rows, _ = rows_pair
    ranks = scipy.stats.rankdata(y)  # mid-ranks (scipy.stats as reference library)
    got = rows.rank_sums()
    assert_close(got.rank_sum, np.bincount(cell, weights=ranks, minlength=6))
    _, t = np.unique(y, return_counts=True)
    assert got.tie_term == float(np.sum(t.astype(float) ** 3 - t)) and got.n == y.size


def test_quantiles_points_flagged_and_sample(rows_pair):
    y, cell, cells, rows, line = rows_pair
    means = cells.offset_mean
    scale = np.array([2.0, 3.0, np.nan, 4.0, 0.0, 5.0])
    probs = np.linspace(0.01, 0.99, 37)
    keep = np.isfinite(scale[cell]) & (scale[cell] > 0)
    ref = np.quantile((y[keep] - means[cell[keep]]) / scale[cell[keep]], probs)  # numpy type 7
    assert_close(rows.residual_quantiles(means, scale, probs), ref, rel=1e-10)

    points = rows.cell_points(400)
    for c, p in enumerate(points):
        seg = np.sort(y[cell == c])
        assert p.n == seg.size
        if seg.size <= 400:
            assert not p.summarized and np.array_equal(p.values, seg)
        else:
            assert p.summarized
            assert_close(p.values, np.quantile(seg, np.linspace(0, 1, 400)), rel=1e-10)

    bound = np.array([20.0, 25.0, np.inf, 15.0, 30.0, 10.0])
    f = rows.flagged(means, bound, limit=7)
    dev = y - means[cell]
    mask = np.abs(dev) > bound[cell]
    assert f.total == int(mask.sum())
    assert np.array_equal(f.count, np.bincount(cell[mask], minlength=6))
    assert_close(f.sum_dev, np.bincount(cell[mask], weights=dev[mask], minlength=6))
    assert_close(f.sum_dev2, np.bincount(cell[mask], weights=dev[mask] ** 2, minlength=6))
    order = np.argsort(-np.abs(dev[mask]), kind="stable")[:7]
    assert [r for r, _, _ in f.rows] == line[mask][order].tolist()

    v1, c1 = rows.sample(500, seed=3)
    v2, c2 = rows.sample(500, seed=3)
    v3, _ = rows.sample(500, seed=4)
    assert v1.size == 500 and np.array_equal(v1, v2) and np.array_equal(c1, c2) and not np.array_equal(v1, v3)
    pairs = {(float(a), int(b)) for a, b in zip(y, cell)}
    assert all((float(a), int(b)) in pairs for a, b in zip(v1, c1))
    vall, call = rows.sample(10**6, seed=1)
    assert np.array_equal(vall, y) and np.array_equal(call, cell)
    assert rows.arrays() is None and rows.kind == "duckdb" and rows.n == y.size and rows.k == 6


def test_order_statistics_when_buckets_must_be_refined(rows_pair, monkeypatch):
    """With a fetch budget of a few values every wanted bucket is refined again (down to the
    depth limit); medians, quantiles and figure points still equal numpy's (reference library)."""
    y, cell, cells, rows, _ = rows_pair
    monkeypatch.setattr(duck_rows, "_FETCH", 1)
    depths = []
    refine = duck_rows.DuckRows._refine

    def counted(self, *args, **kwargs):
        depths.append(args[4])
        return refine(self, *args, **kwargs)

    monkeypatch.setattr(duck_rows.DuckRows, "_refine", counted)
    rows._medians = None
    rows._distinct_state = rows._sorted_state = False  # the bucket search, whichever route the fixture chose
    assert_close(rows.medians(), np.array([np.median(y[cell == c]) for c in range(6)]))
    scale = np.array([2.0, 3.0, 1.0, 4.0, 2.5, 5.0])
    probs = np.linspace(0.0, 1.0, 41)
    ref = np.quantile((y - cells.offset_mean[cell]) / scale[cell], probs)
    assert_close(rows.residual_quantiles(cells.offset_mean, scale, probs), ref, rel=1e-10)
    for c, p in enumerate(rows.cell_points(50)):
        assert_close(p.values, np.quantile(y[cell == c], np.linspace(0, 1, 50)), rel=1e-10)
    assert max(depths) >= 1


def test_sample_key_is_murmur3_fmix32_and_both_searches_agree():
    """The sampling key equals MurmurHash3's fmix32 (Appleby 2011) of (p · 2654435761 + seed)
    mod 2^32, written here in Python from that definition; the search through the inverse hash
    picks the same positions as sorting every key (numpy's argsort as reference)."""
    from reporter.intake.rows import _key_inverse, sample_key, sample_positions

    m = (1 << 32) - 1

    def fmix32(h: int) -> int:
        h ^= h >> 16
        h = (h * 0x85EBCA6B) & m
        h ^= h >> 13
        h = (h * 0xC2B2AE35) & m
        return h ^ (h >> 16)

    pos = np.arange(5000)
    keys = sample_key(pos, 2**40 + 99)
    assert all(int(k) == fmix32((int(p) * 2654435761 + (2**40 + 99)) & m) for p, k in zip(pos, keys))
    assert len(set(keys.tolist())) == pos.size
    some = np.random.default_rng(1).integers(0, 2**32, 10_000, dtype=np.uint64)
    assert np.array_equal(_key_inverse(sample_key(some, 7), 7), some)
    for n, size in ((6000, 5000), (300_000, 50), (3_000_000, 5000)):  # forward and inverse search
        ref = np.sort(np.argsort(sample_key(np.arange(n), 11), kind="stable")[:size])
        assert np.array_equal(sample_positions(n, size, 11), ref)
    assert np.array_equal(sample_positions(40, 50, 1), np.arange(40))


def test_shapiro_wilk_sample_is_the_same_from_both_readers(tmp_path):
    """About 20,000 rows (some left out, so positions differ from row numbers): the seeded
    sample of 5,000 residuals, hence W and p, are the same from both readers; W and p equal
    scipy.stats.shapiro on that sample (reference library)."""
    from reporter.inference.assumptions import normality

    rng = np.random.default_rng(20)
    n = 20_000
    dose = rng.choice(["1", "2", "5"], n)
    site = rng.choice(["north", "south"], n)
    y = np.round(rng.gamma(4.0, 10.0, n), 2).astype(str).astype(object)
    y[rng.choice(n, 300, replace=False)] = "NA"
    dose[rng.choice(n, 200, replace=False)] = "9"  # an excluded level
    text = "dose,site,y\n" + "".join(f"{a},{b},{c}\n" for a, b, c in zip(dose, site, y))
    (tmp_path / "d.csv").write_text(text, encoding="utf-8")
    mem, duck = both(tmp_path, "d.csv")
    cells, cell = memory_cells(load_plan(tmp_path / "m.toml"), mem)
    from reporter.intake.memory_rows import MemoryRows

    a = normality(MemoryRows(mem.y, cell, 6, mem.rows), cells, seed=5)
    b = normality(duck.row_access, duck.cells, seed=5)
    assert a.sampled and b.sampled and a.n == b.n == 5000 and a.n_available == b.n_available
    assert_close([a.statistic, a.p], [b.statistic, b.p])
    ys, cs = MemoryRows(mem.y, cell, 6).sample(5000, 5)
    w, p = scipy.stats.shapiro(ys - cells.offset_mean[cs])
    assert_close([a.statistic, a.p], [w, p], rel=1e-4)


# ---------------------------------------------------------------------------------------------
# Globs


def test_glob_reads_every_file_in_sorted_order(tmp_path):
    body = MESSY.split("\n", 1)[1]
    lines = [ln for ln in body.split("\n") if ln.strip() and "two" not in ln and "lines" not in ln]
    head = "dose,site,y,note\n"
    (tmp_path / "part-2.csv").write_text(head + "\n".join(lines[6:]) + "\n", encoding="utf-8")
    (tmp_path / "part-1.csv").write_text(head + "\n".join(lines[:6]) + "\n", encoding="utf-8")
    (tmp_path / "all.csv").write_text(head + "\n".join(lines) + "\n", encoding="utf-8")
    glob = load_data(load_plan(write_plan(tmp_path, "part-*.csv", "automatic")))
    whole = load_data(load_plan(write_plan(tmp_path, "all.csv", "in-memory", "w.toml")))
    assert glob.reader == "out-of-core" and glob.n == whole.n and glob.n_read == whole.n_read
    assert_close(glob.cells.mean, memory_cells(load_plan(tmp_path / "w.toml"), whole)[0].mean)
    # Rows are numbered through the files in sorted order (headers not counted).
    assert [e.count for e in glob.exclusions] == [e.count for e in whole.exclusions]
    assert [list(e.rows) for e in glob.exclusions] == [[r - 1 for r in e.rows] for e in whole.exclusions]
    h = hashlib.sha256()
    for name in ("part-1.csv", "part-2.csv"):
        digest = hashlib.sha256((tmp_path / name).read_bytes()).hexdigest()
        h.update(name.encode() + b"\0" + digest.encode() + b"\n")
    assert glob.sha256 == h.hexdigest()


def test_glob_errors(tmp_path):
    with pytest.raises(DataError, match="no file matches this pattern"):
        load_data(load_plan(write_plan(tmp_path, "none-*.csv", "automatic")))
    (tmp_path / "a-1.csv").write_text("dose,site,y\n1,north,1\n", encoding="utf-8")
    (tmp_path / "a-2.csv").write_text("dose,place,y\n1,north,1\n", encoding="utf-8")
    with pytest.raises(DataError, match=r"a-2\.csv: its header .* differs from that of a-1\.csv"):
        load_data(load_plan(write_plan(tmp_path, "a-*.csv", "automatic")))
    with pytest.raises(DataError, match="only the out-of-core reader reads"):
        load_data(load_plan(write_plan(tmp_path, "a-*.csv", "in-memory")))


# ---------------------------------------------------------------------------------------------
# Bad input: the same kind of message from both readers


def _message(tmp_path, data: str, reader: str) -> str:
    with pytest.raises(DataError) as info:
        load_data(load_plan(write_plan(tmp_path, data, reader, f"{reader}.toml")))
    return str(info.value)


@pytest.mark.parametrize(
    "content, pattern",
    [
        ("dose,place,y\n1,north,1\n", r"has no column 'site' \(the factor named in the plan\)"),
        ("dose,site,y\n1,north,1\n3,north,2\n3,south,x\n7,north,1\n",
         r"levels that the plan does not list for factor 'dose': \"3\" \(2 rows, first at line 3\), \"7\" \(1 row, first at line 5\)"),
        ("", r"the file is empty"),
        ("dose,site,y\n", r"has a header but no data rows"),
        ("dose,site,y\n1,north,1\n2,south,2,9\n", r"line 3: has 4 fields but the header has 3"),
    ],
)
def test_bad_input_messages_match_in_memory(tmp_path, content, pattern):
    (tmp_path / "d.csv").write_text(content, encoding="utf-8")
    mem = _message(tmp_path, "d.csv", "in-memory")
    duck = _message(tmp_path, "d.csv", "out-of-core")
    assert re.search(pattern, mem), mem
    assert re.search(pattern, duck), duck
    assert mem == duck


def test_non_numeric_outcome_is_listed_like_in_memory(tmp_path):
    (tmp_path / "d.csv").write_text("dose,site,y\n1,north,1\n2,north,n/a\n5,south,12 kg\n", encoding="utf-8")
    mem, duck = both(tmp_path, "d.csv")
    assert duck.exclusions == mem.exclusions
    assert 'line 3: "n/a"; line 4: "12 kg"' in duck.exclusions[0].detail


@pytest.mark.parametrize(
    "value",
    ["1_000", "\uff11\uff12", "1e400", "1e-400", "1e00001", "inf", "-Infinity", "0x10", "1" * 101, "2e308"],
)
def test_numbers_the_readers_refuse_give_the_same_error(tmp_path, value):
    """A number-like text that breaks the plain-decimal rule or float64's range is an error naming
    its line in an analysed row (reporter.intake.numtext), and only left out in an excluded row."""
    (tmp_path / "d.csv").write_text(f"dose,site,y\n1,north,1\n9,north,{value}\n2,south,{value}\n5,south,3\n",
                                    encoding="utf-8")
    mem = _message(tmp_path, "d.csv", "in-memory")
    assert "line 4" in mem
    assert _message(tmp_path, "d.csv", "out-of-core") == mem


def test_spread_beyond_float64_gives_the_same_error(tmp_path):
    (tmp_path / "d.csv").write_text("dose,site,y\n1,north,1e200\n2,south,-1e200\n5,south,3\n", encoding="utf-8")
    mem = _message(tmp_path, "d.csv", "in-memory")
    assert "overflow" in mem and _message(tmp_path, "d.csv", "out-of-core") == mem


def test_parquet_infinite_outcome_and_nested_column(tmp_path):
    import pyarrow as pa
    import pyarrow.parquet as pq

    pq.write_table(pa.table({"dose": ["1", "2", "9"], "site": ["north"] * 3, "y": [1.0, float("inf"), float("inf")]}),
                   tmp_path / "d.parquet")
    mem = _message(tmp_path, "d.parquet", "in-memory")
    assert "row 2" in mem and _message(tmp_path, "d.parquet", "out-of-core") == mem
    pq.write_table(pa.table({"dose": ["1"], "site": ["north"], "y": pa.array([[1.0]])}), tmp_path / "d.parquet")
    mem = _message(tmp_path, "d.parquet", "in-memory")
    duck = _message(tmp_path, "d.parquet", "out-of-core")
    for msg in (mem, duck):
        assert "column 'y' (the outcome named in the plan) has the Parquet type" in msg and "plain values" in msg


def test_not_utf8_and_bad_parquet(tmp_path):
    (tmp_path / "d.csv").write_bytes(b"dose,site,y\n1,north,1\n2,south,\xff2\n")
    msg = _message(tmp_path, "d.csv", "out-of-core")
    assert "line 3" in msg and "is not UTF-8 text" in msg
    (tmp_path / "d.parquet").write_bytes(b"not parquet at all")
    assert "is not a readable Parquet file" in _message(tmp_path, "d.parquet", "out-of-core")


# ---------------------------------------------------------------------------------------------
# The reader choice and the number rule


def test_reader_key_and_automatic_switch(tmp_path, monkeypatch):
    (tmp_path / "d.csv").write_text("dose,site,y\n1,north,1\n2,south,2\n", encoding="utf-8")
    with pytest.raises(PlanError, match=r'data.reader.*must be one of "automatic", "in-memory", "out-of-core"'):
        load_plan(write_plan(tmp_path, "d.csv", "duck"))
    plan = load_plan(write_plan(tmp_path, "d.csv", "automatic"))
    assert plan.data.reader == "automatic" and load_data(plan).reader == "in-memory"
    monkeypatch.setattr(D, "OUT_OF_CORE_BYTES", 10)
    assert load_data(plan).reader == "out-of-core"
    assert load_data(load_plan(write_plan(tmp_path, "d.csv", "in-memory"))).reader == "in-memory"


def test_whitespace_list_is_python_strip():
    assert set(duck_outcome._WS) == {chr(c) for c in range(0x110000) if chr(c).isspace()}


def test_number_rule_in_sql_equals_the_plain_decimal_rule(tmp_path):
    """Random texts over digits, signs, points, exponents, underscores and blanks: the SQL
    status equals the Python rule (regular expression plus float64 range)."""
    import duckdb

    plan = load_plan(write_plan(tmp_path, "d.csv", "out-of-core"))
    rnd = random.Random(5)
    alphabet = "0123456789.eE+-_ \t\u00a0\u2212xnfia\uff11"
    texts = sorted({"".join(rnd.choice(alphabet) for _ in range(rnd.randint(0, 8))) for _ in range(30000)})
    texts += ["NA", " nan ", "-NaN", "None", "1e400", "-1e-400", "1e-310", "0e-999", "1e00001", "1_000", "+-1",
              "\u22121.5", "1" * 100, "1" * 101, "0." + "0" * 98, "infinity", "0x1p3", "1.5f", "1d5"]
    fast, t, status, value = duck_outcome._status_sql("y", plan)
    con = duckdb.connect()
    con.execute("CREATE TABLE s (i INTEGER, y VARCHAR)")
    con.executemany("INSERT INTO s VALUES (?, ?)", [[i, x] for i, x in enumerate(texts)])
    got = con.execute(
        f"SELECT i, {status}, {value} FROM (SELECT *, {t} AS t FROM (SELECT *, {fast} AS fast FROM s)) ORDER BY i"
    ).fetchall()
    for (i, st, val), x in zip(got, texts):
        want = duck_outcome._clean_number(x, plan)
        assert (st == 0) == (want is not None), x
        if want is not None:
            assert float(val) == float(want), x


@pytest.mark.parametrize("comma", [False, True], ids=["point", "comma"])
def test_quick_decimal_read_only_takes_valid_numbers(tmp_path, comma):
    """The one-cast read of common rows (``_quick_sql``) takes a text only when the Python rule
    takes it too, and then gives exactly its value minus the pivot (Python's decimal module as
    the reference); texts it leaves go through the full tests of ``_status_sql``."""
    import decimal

    import duckdb

    text = TWO_WAY.replace('[data]', '[data]\ndecimal = ","\ndelimiter = ";"\nmissing = ["NA", "-99"]' if comma else '[data]')
    plan = load_plan(write_plan(tmp_path, "d.csv", "out-of-core", text=text))
    rnd = random.Random(7)
    alphabet = "0123456789.,eE+-_ \t\n\u00a0\u2212xnfia\uff11"
    texts = sorted({"".join(rnd.choice(alphabet) for _ in range(rnd.randint(0, 8))) for _ in range(30000)})
    texts += ["+ 1", "- 1", "1 .5", "1. 5", " +.5 ", "-.", "+.", "-99", " -99 ", "1_000", "1e2", "1.2345",
              "0" * 120 + "1", "1" * 17, "1" * 18 + ".5", "12345678901234567890", "\u22121.5", "1.5\n", "\t-2"]
    pivot = decimal.Decimal("462.553")
    dot, q, offset = duck_outcome._quick_sql("y", plan, pivot, ["1.5", "2.25", "3.125"])
    con = duckdb.connect()
    con.execute("CREATE TABLE s (i INTEGER, y VARCHAR)")
    con.executemany("INSERT INTO s VALUES (?, ?)", [[i, x] for i, x in enumerate(texts)])
    got = con.execute(f"SELECT i, q, {offset} FROM (SELECT *, {q} AS q FROM (SELECT *, {dot} AS dot FROM s)) ORDER BY i").fetchall()
    taken = 0
    for (i, value, off), x in zip(got, texts):
        if value is None:
            continue
        taken += 1
        want = duck_outcome._clean_number(x, plan)
        assert want is not None, x
        assert decimal.Decimal(want) == value, x
        assert off == float(decimal.Decimal(want) - pivot), x
    assert taken > 100


# ---------------------------------------------------------------------------------------------
# Whole reports from both readers


def _numbers_agree(a, b, path=""):
    """Every number of two results.json documents agrees to 1e-12 relative; other values equal.
    Returns the paths that differ."""
    if isinstance(a, bool) or isinstance(b, bool) or not (isinstance(a, (int, float)) and isinstance(b, (int, float))):
        if type(a) is not type(b):
            return [path]
    if isinstance(a, dict):
        return [p for k in sorted(set(a) | set(b)) for p in
                (_numbers_agree(a[k], b[k], f"{path}/{k}") if k in a and k in b else [f"{path}/{k}"])]
    if isinstance(a, list):
        if len(a) != len(b):
            return [path]
        return [p for i, (x, y) in enumerate(zip(a, b)) for p in _numbers_agree(x, y, f"{path}[{i}]")]
    if isinstance(a, float) or isinstance(b, float):
        return [] if a == b or abs(a - b) <= 1e-12 * max(abs(a), abs(b)) else [path]
    return [] if a == b else [path]


@pytest.mark.parametrize("case", ["oneway", "two-way messy"])
def test_reports_agree_between_readers(tmp_path, case, monkeypatch):
    """reporter.report() under both readers: the same cell table, ANOVA table, hypothesis tests,
    effect sizes, assumption checks and robust tests to 1e-12 relative. Only the permutation F
    differs: the out-of-core rows are not held in memory, and the report says so."""
    import json

    import reporter
    from conftest import ONEWAY_DATA, ONEWAY_PLAN

    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1800000000")
    if case == "oneway":
        (tmp_path / "heights.csv").write_text(ONEWAY_DATA, encoding="utf-8")
        text = ONEWAY_PLAN.replace('outcome = "height_mm"', 'outcome = "height_mm"\nreader = "{reader}"')
        text = text.replace('path = "heights.csv"', 'path = "{path}"')
        data = "heights.csv"
    else:
        (tmp_path / "d.csv").write_text(MESSY, encoding="utf-8")
        text, data = TWO_WAY, "d.csv"
    docs = {}
    for reader in ("in-memory", "out-of-core"):
        rep = reporter.report(write_plan(tmp_path, data, reader, f"{reader}.toml", text))
        assert rep.prepared.data.reader == reader
        docs[reader] = json.loads(rep.render("json"))
    mem, duck = docs["in-memory"], docs["out-of-core"]
    assert duck["provenance"]["data_reader"] == "out-of-core" and mem["provenance"]["data_reader"] == "in-memory"
    assert "duckdb" in duck["provenance"]["software"]
    differ = _numbers_agree(mem, duck)
    allowed = re.compile(r"^/provenance/(data_reader|software|plan_sha256|plan_file|plan_path|randomness/(permutations_run|seed_used_by))"
                         r"|^/results_sha256$|/permutation(_note)?$|/permutation/")
    assert [p for p in differ if not allowed.search(p)] == []
    assert duck["anova"]["rows"] and duck["hypotheses"]


def test_rank_slabs_out_of_core_take_both_paths(rows_pair, monkeypatch):
    """Out-of-core, small slabs are fetched and ranked in numpy and buckets heavier than a slab
    are ranked from their distinct values; both give scipy's mid-rank sums (reference library)."""
    y, cell, _, rows, _ = rows_pair
    monkeypatch.setattr(duck_rows, "_RANK_SLAB_ROWS", 150)
    monkeypatch.setattr(duck_rows, "_RANK_BUCKETS", 64)
    used = {"slab": 0, "heavy": 0}
    slab, heavy = duck_rows.slab_rank_sums, duck_rows.DuckRows._heavy_bucket_ranks

    def count_slab(*a):
        used["slab"] += 1
        return slab(*a)

    def count_heavy(self, *a):
        used["heavy"] += 1
        return heavy(self, *a)

    monkeypatch.setattr(duck_rows, "slab_rank_sums", count_slab)
    monkeypatch.setattr(duck_rows.DuckRows, "_heavy_bucket_ranks", count_heavy)
    got = rows._rank_sums_by_slabs()
    assert used["slab"] >= 2 and used["heavy"] >= 2
    ranks = scipy.stats.rankdata(y)
    assert_close(got.rank_sum, np.bincount(cell, weights=ranks, minlength=6))
    _, t = np.unique(y, return_counts=True)
    assert got.tie_term == float(np.sum(t.astype(float) ** 3 - t))
