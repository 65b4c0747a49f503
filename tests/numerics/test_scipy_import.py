"""What the command-line program imports: scipy.special without NumPy's unused submodules
(reporter.numerics.scipy_import), and nothing that only other outputs need on --format json.
Each case runs in a new interpreter, where nothing is imported yet."""

from __future__ import annotations

import os
import re
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
ENV = dict(os.environ, PYTHONPATH=os.pathsep.join(filter(None, [str(ROOT), os.environ.get("PYTHONPATH")])))

LEAN = """
import sys
import numpy
listed, listing, names = numpy.__all__, numpy.__dict__["__dir__"], sorted(dir(numpy))
if {lean}:
    from reporter.numerics.scipy_import import import_special_lean
    special = import_special_lean()
else:
    import scipy.special as special
assert special is sys.modules["scipy.special"]
assert numpy.__all__ is listed and numpy.__dict__["__dir__"] is listing and sorted(dir(numpy)) == names
print("numpy.f2py imported:", "numpy.f2py" in sys.modules)
print("numpy.testing imported:", "numpy.testing" in sys.modules)

import scipy.stats
from reporter.numerics import distributions as D
pairs = [
    (D.f_sf(3.2, 3, 40), scipy.stats.f.sf(3.2, 3, 40)),
    (D.t_ppf(0.975, 17), scipy.stats.t.ppf(0.975, 17)),
    (D.chi2_sf(7.5, 3), scipy.stats.chi2.sf(7.5, 3)),
    (D.ncf_sf(2.5, 3, 36, 4.0), scipy.stats.ncf.sf(2.5, 3, 36, 4.0)),
    (D.norm_ppf(0.9), scipy.stats.norm.ppf(0.9)),
]
print("same values:", all(a == b for a, b in pairs))
import numpy.f2py
print("numpy.f2py loads on demand:", numpy.f2py.__name__ == "numpy.f2py")
"""


@pytest.mark.parametrize("lean", [True, False], ids=["lean-import", "plain-import-probe-sees-f2py"])
def test_lean_import_leaves_numpy_as_it_was_and_scipy_computes_the_same(lean, tmp_path):
    """The lean import loads neither numpy.f2py nor numpy.testing, puts numpy.__all__ and
    numpy.__dir__ back (the same objects), and scipy.stats (the reference library, imported
    after it) gives exactly our distribution values; the plain import loads both submodules,
    which shows the probe can see them."""
    res = subprocess.run([sys.executable, "-c", LEAN.format(lean=lean)], capture_output=True, text=True,
                         env=ENV, cwd=tmp_path)
    assert res.returncode == 0, res.stderr
    assert res.stdout.splitlines() == [
        f"numpy.f2py imported: {not lean}",
        f"numpy.testing imported: {not lean}",
        "same values: True",
        "numpy.f2py loads on demand: True",
    ]


#: Modules that only other outputs (figures, HTML, PDF) or other commands need.
NOT_FOR_JSON = ("matplotlib", "jinja2", "weasyprint", "pypdf", "statsmodels", "pandas", "scipy.stats",
                "numpy.f2py", "numpy.testing")


def _imported(args: list[str], cwd: Path) -> set[str]:
    res = subprocess.run([sys.executable, "-X", "importtime", "-m", "reporter", *args], capture_output=True,
                         text=True, env=ENV, cwd=cwd)
    assert res.returncode == 0, res.stderr
    return set(re.findall(r"^import time:\s+\d+ \|\s+\d+ \|\s*(\S+)\s*$", res.stderr, flags=re.M))


@pytest.mark.parametrize("reader, fmt", [("in-memory", "csv"), ("out-of-core", "csv"), ("in-memory", "parquet")])
def test_run_with_json_output_imports_nothing_only_other_outputs_need(reader, fmt, tmp_path):
    """`anova-report run --format json` on the one-way demo, with either reader and from a
    Parquet copy, imports none of NOT_FOR_JSON (Python's -X importtime lists every module
    imported); the same run with --format html imports matplotlib and jinja2, which shows the
    listing sees them."""
    plan = (ROOT / "demo_project" / "oneway.toml").read_text(encoding="utf-8")
    if fmt == "parquet":
        import pyarrow.csv
        import pyarrow.parquet

        pyarrow.parquet.write_table(pyarrow.csv.read_csv(ROOT / "demo_project" / "recall_oneway.csv"),
                                    tmp_path / "recall_oneway.parquet")
        assert "recall_oneway.csv" in plan
        plan = plan.replace("recall_oneway.csv", "recall_oneway.parquet")
    else:
        (tmp_path / "recall_oneway.csv").write_bytes((ROOT / "demo_project" / "recall_oneway.csv").read_bytes())
    (tmp_path / "oneway.toml").write_text(plan.replace("[data]\n", f'[data]\nreader = "{reader}"\n', 1),
                                          encoding="utf-8")
    json_run = _imported(["run", "oneway.toml", "--out", "out-json", "--format", "json", "--quiet"], tmp_path)
    assert (tmp_path / "out-json" / "results.json").is_file()
    assert {"reporter.fitting.anova", "scipy.special"} <= json_run
    assert ("duckdb" in json_run) == (reader == "out-of-core")
    leaked = sorted(m for m in json_run if any(m == n or m.startswith(n + ".") for n in NOT_FOR_JSON))
    assert leaked == []
    html_run = _imported(["run", "oneway.toml", "--out", "out-html", "--format", "html", "--quiet"], tmp_path)
    assert {"matplotlib", "jinja2"} <= html_run


BLAS_PROBE = """
import os, runpy, sys
sys.argv = ["anova-report", "run", {plan!r}, "--out", "out", "--format", "json", "--quiet"]
try:
    runpy.run_module("reporter", run_name="__main__", alter_sys=True)
except SystemExit as exc:
    assert exc.code in (0, None), exc.code
"""


@pytest.mark.parametrize(("given", "expected"), [(None, "1"), ("2", "2")], ids=["unset", "set-by-the-user"])
def test_program_loads_openblas_with_one_thread_unless_the_user_chose(given, expected, tmp_path):
    """The program sets OPENBLAS_NUM_THREADS=1 before NumPy loads (OpenBLAS reads it then) and
    keeps a value the user set; /proc lists the process's threads, so on Linux the OpenBLAS
    workers are seen to be absent after the run."""
    env = {k: v for k, v in ENV.items() if k != "OPENBLAS_NUM_THREADS"}
    if given is not None:
        env["OPENBLAS_NUM_THREADS"] = given
    code = BLAS_PROBE.format(plan=str(ROOT / "demo_project" / "oneway.toml")) + (
        "print(os.environ.get('OPENBLAS_NUM_THREADS'))\n"
        "import glob; print(len(glob.glob('/proc/self/task/*')) or 'unknown')\n"
    )
    res = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env, cwd=tmp_path)
    assert res.returncode == 0, res.stderr
    value, threads = res.stdout.splitlines()[-2:]
    assert value == expected
    if threads != "unknown" and given is None:
        assert int(threads) == 1
