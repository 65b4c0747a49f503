"""The summary-table route end to end: the README's GROUP BY query, run by DuckDB on a row file,
fed back in as a table of cell summaries, gives the row path's ANOVA table and tests; the report
says what summaries cannot give; rounding bounds; NIST StRD certified values through summaries.

References: the row path of this package (itself checked against NIST StRD and statsmodels),
DuckDB as the engine that runs the query, NIST StRD ANOVA certified values (tests/data/nist).
"""

from __future__ import annotations

import json
import math
import re
import subprocess
import sys
from decimal import Decimal, localcontext
from fractions import Fraction
from pathlib import Path

import duckdb
import numpy as np
import pytest

from conftest import lre, nist_anova
from reporter.api import prepare
from reporter.intake.plan import plan_from_dict
from reporter.provenance import collect_provenance
from reporter.render.results_json import load_schema, results_dict
from reporter.run import analyse, render_outputs

ROOT = Path(__file__).resolve().parents[2]
REL = 1e-12


def readme_query() -> str:
    """The SQL block that follows the summary-sql marker in README.md."""
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    m = re.search(r"<!-- summary-sql[^>]*-->\s*```sql\n(.*?)```", text, re.S)
    assert m, "README.md has no SQL block after the summary-sql marker"
    return m.group(1)


def _write_rows(folder: Path, factorial: bool, seed: int = 7) -> None:
    """Seeded simulated rows (an invented scenario), unequal n, two outcomes left empty."""
    rng = np.random.default_rng(seed)
    media = ["peat", "coir", "bark", "soil"]
    lights = ["dim", "bright"] if factorial else [None]
    lines = ["medium,light,height_mm"] if factorial else ["medium,height_mm"]
    for i, m in enumerate(media):
        for j, light in enumerate(lights):
            for _ in range(int(rng.integers(6, 15))):
                y = f"{100 + 3 * i + 2 * j + rng.normal(0, 4 + i):.3f}"
                lines.append(f"{m},{light},{y}" if factorial else f"{m},{y}")
    lines.insert(5, "coir,dim," if factorial else "coir,")
    lines.insert(9, "bark,bright," if factorial else "bark,")
    (folder / "heights.csv").write_text("\n".join(lines) + "\n")


def _plan(folder: Path, path: str, factorial: bool, full_posthoc: bool = True, **data):
    full = full_posthoc and not factorial
    factors = [{"name": "medium", "levels": ["peat", "coir", "bark", "soil"]}]
    hyps = [{"name": "coir beats bark", "means": "coir > bark"}, {"name": "media differ", "effect": "medium"},
            {"name": "peat equals soil", "means": "peat = soil", "role": "exploratory"}]
    if factorial:
        factors.append({"name": "light", "levels": ["dim", "bright"]})
        hyps.append({"name": "interaction", "effect": "medium x light"})
    return plan_from_dict(
        {"title": "Seedling height", "data": {"path": path, "outcome": "height_mm", **data},
         "factors": factors, "hypotheses": hyps,
         "analysis": {"permutations": 0, "sums_of_squares": "type-II" if factorial else "type-III",
                      # the studentized-range families are slow; Scheffé stands in for them where not needed
                      "follow_up": ["all-pairs-tukey", "versus-control-dunnett", "all-contrasts-scheffe"] if full
                      else ["all-contrasts-scheffe"],
                      **({"follow_up_control": "peat"} if full else {})}},
        base_dir=folder,
    )


def _run_query(folder: Path, factorial: bool, target: str) -> None:
    sql = readme_query()
    if factorial:
        sql = sql.replace("SELECT medium,", "SELECT medium, light,").replace("GROUP BY medium", "GROUP BY medium, light")
        sql = sql.replace("WHERE medium IS NOT NULL", "WHERE medium IS NOT NULL AND light IS NOT NULL")
    con = duckdb.connect()
    con.execute(f"CREATE VIEW heights AS SELECT * FROM read_csv('{folder / 'heights.csv'}')")
    fmt = "(FORMAT parquet)" if target.endswith(".parquet") else "(HEADER, DELIMITER ',')"
    con.execute(f"COPY ({sql}) TO '{folder / target}' {fmt}")
    con.close()


def _close(a, b):
    if a is None or b is None:
        return a is None and b is None
    return math.isclose(a, b, rel_tol=REL, abs_tol=1e-300)


@pytest.mark.parametrize("factorial", [False, True], ids=["one-way", "2x4"])
@pytest.mark.parametrize("target", ["cells.csv", "cells.parquet"])
def test_readme_query_gives_the_row_path_results(tmp_path, factorial, target):
    """The README's query through DuckDB, read back as cell summaries, reproduces the row path's
    ANOVA table, hypothesis tests, robust tests and post-hoc families to 1e-12 relative."""
    _write_rows(tmp_path, factorial)
    _run_query(tmp_path, factorial, target)
    full = target.endswith(".csv")
    rows = analyse(prepare(_plan(tmp_path, "heights.csv", factorial, full)))
    prep = prepare(_plan(tmp_path, target, factorial, full, layout="cell-summaries"))
    assert prep.rows is None and prep.data.summary is not None
    summ = analyse(prep)
    assert summ.cells.n.tolist() == rows.cells.n.tolist()
    assert summ.anova.df_error == rows.anova.df_error
    assert _close(summ.anova.ss_error, rows.anova.ss_error)
    for a, b in zip(summ.anova.rows, rows.anova.rows):
        assert a.df == b.df and _close(a.ss, b.ss) and _close(a.F, b.F) and _close(a.p, b.p)
    for a, b in zip(summ.hypotheses, rows.hypotheses):
        ta, tb = a.test, b.test
        assert _close(ta.statistic, tb.statistic) and _close(ta.p, tb.p) and _close(a.p_adjusted, b.p_adjusted)
        if ta.test == "t":
            assert _close(ta.estimate, tb.estimate) and all(_close(x, y) for x, y in zip(ta.ci, tb.ci))
        assert _close(a.extras.robust.statistic, b.extras.robust.statistic)
        assert _close(a.extras.robust.p, b.extras.robust.p)
        assert _close(a.effect_size.value, b.effect_size.value)
    for (_, _, fa, _), (_, _, fb, _) in zip(summ.inference.posthoc, rows.inference.posthoc):
        for ca, cb in zip(fa.comparisons, fb.comparisons):
            assert _close(ca.difference, cb.difference) and _close(ca.se, cb.se)
            assert math.isclose(ca.p_adjusted, cb.p_adjusted, rel_tol=1e-9, abs_tol=1e-12)  # simulated quantiles
    if not factorial:
        assert _close(summ.inference.welch_oneway.statistic, rows.inference.welch_oneway.statistic)
    if full and not factorial:
        assert summ.inference.games_howell is not None


def _summary_project(tmp_path, table: str, full_posthoc: bool = False, **data):
    (tmp_path / "cells.csv").write_text(table)
    return prepare(_plan(tmp_path, "cells.csv", False, full_posthoc, layout="cell-summaries", **data))


ROUNDED = "medium,n,mean,sd\npeat,12,101.23,4.12\ncoir,9,103.87,5.01\nbark,11,105.40,6.20\nsoil,10,108.02,7.33\n"


def test_report_states_once_what_summaries_cannot_give(tmp_path):
    """HTML, Markdown and JSON say, once, which steps need rows and why; the tests that need only
    the cell table (Welch, Games–Howell, Tukey, Dunnett, effect sizes, power) are present."""
    prep = _summary_project(tmp_path, ROUNDED, full_posthoc=True)
    analysis = analyse(prep)
    out = render_outputs(prep, analysis, ("json", "md", "html"))
    md = out["md"].decode()
    for step in ("residual", "Q–Q", "Shapiro–Wilk", "Levene", "Brown–Forsythe", "rank", "permutation", "outlier"):
        assert step in md, step
    assert md.count("one row per cell") == 1, md
    assert "Tukey–Kramer" in md and "Dunnett" in md and "Games–Howell" in md and "Welch" in md
    assert "partial η²" in md and "power" in md
    assert "S = (n − 1)·SD²" in md
    doc = json.loads(out["json"])
    summary = doc["data"]["summary"]
    assert doc["data"]["layout"] == "cell-summaries" and doc["data"]["n_analysed"] == 42
    steps = {x["step"] for x in summary["not_computed"]}
    assert {"residual diagnostics", "Shapiro–Wilk", "Levene and Brown–Forsythe", "rank tests", "permutation F",
            "outliers"} <= steps
    assert all(x["reason"] for x in summary["not_computed"])
    import jsonschema

    jsonschema.validate(doc, load_schema())


def test_rounding_bounds_reach_report_and_json(tmp_path):
    """Means and SDs written to 2 decimals: the report and results.json give [min, max] of F and p of
    the ANOVA row and every hypothesis, each containing the value computed from the summaries."""
    prep = _summary_project(tmp_path, ROUNDED)
    analysis = analyse(prep)
    assert analysis.rounding is not None
    doc = results_dict(prep, analysis, collect_provenance(prep))
    bounds = doc["data"]["summary"]["rounding_bounds"]
    assert bounds["mean_half_unit"] == 0.005 and bounds["spread_half_unit"] == 0.005
    row = bounds["anova"][0]
    F = doc["anova"]["rows"][0]["F"]
    assert row["F"][0] < F < row["F"][1] and row["p"][0] < doc["anova"]["rows"][0]["p"] < row["p"][1]
    for h, entry in zip(doc["hypotheses"], bounds["hypotheses"]):
        assert entry["name"] == h["name"]
        assert entry["statistic"][0] <= h["statistic"] <= entry["statistic"][1]
    md = render_outputs(prep, analysis, ("md",))["md"].decode()
    assert "rounded" in md and "2 decimals" in md


def test_unrounded_parquet_says_no_bounds(tmp_path):
    """Floating-point Parquet summaries count as unrounded; the report says how to state decimals."""
    _write_rows(tmp_path, False)
    _run_query(tmp_path, False, "cells.parquet")
    prep = prepare(_plan(tmp_path, "cells.parquet", False, False, layout="cell-summaries"))
    analysis = analyse(prep)
    assert analysis.rounding is None
    md = render_outputs(prep, analysis, ("md",))["md"].decode().replace("\\", "")
    assert "taken as unrounded" in md and "state mean_decimals and spread_decimals in [data]" in md


def test_se_conversion_is_stated(tmp_path):
    """A table of standard errors: the report states SD = SE·√n."""
    table = "medium,n,mean,se\npeat,12,101.23,1.19\ncoir,9,103.87,1.67\nbark,11,105.40,1.87\nsoil,10,108.02,2.32\n"
    prep = _summary_project(tmp_path, table, spread="se")
    md = render_outputs(prep, analyse(prep), ("md",))["md"].decode()
    assert "SE·√n" in md


def test_bad_table_exits_2_with_one_line_and_no_output(tmp_path):
    """The command: a bad summary table exits 2 with one line on stderr and writes nothing."""
    (tmp_path / "cells.csv").write_text(ROUNDED.replace("coir,9,", "coir,0,"))
    (tmp_path / "plan.toml").write_text(
        'title = "t"\n[data]\npath = "cells.csv"\noutcome = "height_mm"\nlayout = "cell-summaries"\n'
        '[[factors]]\nname = "medium"\nlevels = ["peat", "coir", "bark", "soil"]\n'
        '[[hypotheses]]\nname = "m"\neffect = "medium"\n')
    res = subprocess.run([sys.executable, "-m", "reporter", "run", str(tmp_path / "plan.toml"), "--out",
                          str(tmp_path / "out")], capture_output=True, text=True)
    assert res.returncode == 2 and "Traceback" not in res.stderr
    assert len(res.stderr.strip().splitlines()) == 1 and "line 3, column 'n': n is 0" in res.stderr
    assert not (tmp_path / "out").exists()


# ---------------------------------------------------------------------------------------------
# NIST StRD through summaries


def _exact_summaries(rows) -> str:
    """Per group: n, the mean and the SD computed in exact rational arithmetic (fractions.Fraction)
    from the certified data values as written, each written with 30 significant digits (the SD as
    the correctly rounded square root of the exact variance)."""
    groups: dict[str, list[Fraction]] = {}
    for g, y in rows:
        groups.setdefault(g, []).append(Fraction(y))
    out = ["group,n,mean,sd"]
    with localcontext() as ctx:
        ctx.prec = 30
        for g in sorted(groups, key=int):
            v = groups[g]
            n = len(v)
            mean = sum(v, Fraction(0)) / n
            var = sum(((x - mean) ** 2 for x in v), Fraction(0)) / (n - 1)
            as_dec = lambda f: Decimal(f.numerator) / Decimal(f.denominator)  # noqa: E731
            ctx.prec = 60
            sd = as_dec(var).sqrt()
            ctx.prec = 30
            out.append(f"{g},{n},{as_dec(mean)},{+sd}")
    return "\n".join(out) + "\n"


NIST_NAMES = ["SiRstv", "SmLs01", "SmLs02", "SmLs03", "AtmWtAg", "SmLs04", "SmLs05", "SmLs06", "SmLs07", "SmLs08",
              "SmLs09"]


@pytest.mark.parametrize("name", NIST_NAMES)
def test_nist_through_summaries(name, tmp_path):
    """NIST StRD ANOVA certified values through a summary table built from the certified data (exact
    rational n, mean and SD, 30 significant digits): LRE ≥ 13 on every statistic (the text route's
    bar in tests/fitting/test_nist.py) and no lower than the row text route's LRE less half a digit."""
    cert, rows = nist_anova(name)
    levels = sorted({g for g, _ in rows}, key=int)
    (tmp_path / "cells.csv").write_text(_exact_summaries(rows))
    (tmp_path / "data.csv").write_text("group,y\n" + "".join(f"{g},{y}\n" for g, y in rows))

    def scores(path, **data):
        plan = plan_from_dict({"title": name, "data": {"path": path, "outcome": "y", **data},
                               "factors": [{"name": "group", "levels": levels}],
                               "hypotheses": [{"name": "groups differ", "effect": "group"}],
                               "analysis": {"permutations": 0}}, base_dir=tmp_path)
        a = analyse(prepare(plan))
        got = {"ss_between": a.anova.rows[0].ss, "ss_within": a.anova.ss_error, "F": a.anova.rows[0].F,
               "r_squared": a.anova.r_squared, "residual_sd": a.anova.residual_sd}
        return {k: lre(v, cert[k]) for k, v in got.items()}

    by_summary = scores("cells.csv", layout="cell-summaries")
    by_rows = scores("data.csv")
    print(f"\nLRE {name} via summaries: " + "  ".join(f"{k}={v:.1f}" for k, v in by_summary.items()))
    for k, v in by_summary.items():
        assert v >= 13.0 and v >= by_rows[k] - 0.5, (k, v, by_rows[k])


def test_single_observation_cell_runs_through(tmp_path):
    """A cell with n = 1 and an empty SD (as stddev_samp writes it) gives a whole report; the robust
    test that needs every cell's variance says it is not available instead of stopping the run."""
    table = "medium,n,mean,sd\npeat,12,101.23,4.12\ncoir,1,103.87,\nbark,11,105.40,6.20\nsoil,10,108.02,7.33\n"
    prep = _summary_project(tmp_path, table)
    analysis = analyse(prep)
    assert analysis.cells.ss[1] == 0.0 and analysis.anova.df_error == 34 - 4
    md = render_outputs(prep, analysis, ("md",))["md"].decode()
    assert "robust test not available" in md and "cell medium=coir has one row" in md
