"""Where a report came from: the inputs (hashes, paths, size, rows), the software, the machine,
the command line, every random seed and permutation count, and the time it was made.

``SOURCE_DATE_EPOCH`` (https://reproducible-builds.org/specs/source-date-epoch/) fixes the
creation time so that two runs of the same command on the same inputs give byte-identical output:
nothing else recorded here changes between two such runs (paths are relative to the results
folder, the command line is the one typed).

Where the inputs are recorded (the rule ``anova-report verify`` follows to find them again):
when the report files are written to a folder (``anova-report run``, ``Report.write``), the plan
and data paths are relative to that folder (``paths_relative_to = "results-folder"``); when the
outputs are made in memory (``Report.render``), they are the paths as the plan gave them, the plan
resolved to an absolute path and the data path joined to the plan's folder (``"as-given"``).
A data frame passed from Python has no path (None); with neither a plan file nor a data file,
``paths_relative_to`` is None too.
"""

from __future__ import annotations

import datetime as _dt
import os
import platform as _platform
from dataclasses import dataclass
from importlib import metadata
from pathlib import Path

from reporter.errors import OptionError, ReporterError

_PACKAGES = ("anova-report", "numpy", "scipy")


@dataclass(frozen=True)
class Randomness:
    """Every seed and permutation count a run used (Besag & Clifford 1991 for the sequential
    stopping rule of the permutation F; the Shapiro–Wilk sample above 5,000 residuals;
    the sideways jitter of the figures' dots)."""

    seed: int  # the plan's seed: permutation F tests and the Shapiro–Wilk sample
    seed_used_by: tuple[str, ...]  # what drew from it in this run (empty: nothing did)
    permutations: int  # the plan's most permutations per permutation F test (0: none)
    permutation_max_rows: int  # rows above which the permutation F is skipped
    permutation_stop_after: int  # permuted F at or above the observed one that end a test early
    permutations_run: tuple[tuple[str, int], ...]  # (test, permutations drawn) for each test run
    shapiro_sample: int | None  # residuals in the seeded Shapiro–Wilk sample; None: all were tested
    figure_jitter_seed: int  # fixed seed of the dots' sideways jitter in the figures


@dataclass(frozen=True)
class Provenance:
    data_sha256: str | None
    plan_sha256: str | None
    data_file: str
    plan_file: str | None
    data_format: str
    software: tuple[tuple[str, str], ...]
    created: str
    data_reader: str = "in-memory"  # "out-of-core": read by DuckDB queries (reporter.intake.duck)
    data_path: str | None = None  # see the module docstring for the rule
    plan_path: str | None = None
    paths_relative_to: str | None = "as-given"  # or "results-folder"; None when no path is recorded
    data_bytes: int | None = None  # size of the data file (all matched files of a glob); None for a frame
    rows_read: int | None = None
    rows_used: int | None = None
    rows_excluded: tuple[tuple[str, int], ...] = ()  # (reason, rows) in the reader's order
    platform: str = ""
    argv: tuple[str, ...] | None = None  # None when called from Python, not from the command
    randomness: Randomness | None = None
    lock_sha256: str | None = None  # the plan lock's SHA-256 when the run had one
    # The digest results.json stores of itself (its results_sha256), for the report to print; set
    # once the results are serialized, so results.json's own provenance never holds it.
    results_sha256: str | None = None


def _version(name: str) -> str:
    try:
        return metadata.version(name)
    except metadata.PackageNotFoundError:
        return "not installed"


def software_versions(extra: tuple[str, ...] = ()) -> tuple[tuple[str, str], ...]:
    """Versions of Python and of the packages the computation used."""
    out = [("python", _platform.python_version())]
    out += [(name, _version(name)) for name in (*_PACKAGES, *extra)]
    return tuple(out)


def platform_text() -> str:
    """The operating system, its release and the processor architecture, as Python names them."""
    return _platform.platform()


def created_timestamp() -> str:
    """ISO 8601 UTC time, from SOURCE_DATE_EPOCH when it is set."""
    epoch = os.environ.get("SOURCE_DATE_EPOCH")
    if epoch is not None:
        try:
            when = _dt.datetime.fromtimestamp(int(epoch), tz=_dt.timezone.utc)
        except (ValueError, OverflowError, OSError):
            raise OptionError(f"SOURCE_DATE_EPOCH must be whole seconds since 1970 (got {epoch!r}).") from None
    else:
        when = _dt.datetime.now(tz=_dt.timezone.utc).replace(microsecond=0)
    return when.isoformat().replace("+00:00", "Z")


def recorded_path(path, results_folder) -> str | None:
    """A path as provenance records it: relative to ``results_folder`` (POSIX separators) when
    there is one, else as given. None for no path."""
    if path is None:
        return None
    if results_folder is None:
        return Path(path).as_posix()
    try:
        rel = os.path.relpath(os.path.abspath(path), os.path.abspath(results_folder))
    except ValueError:  # another drive: no relative path exists
        return Path(os.path.abspath(path)).as_posix()
    return Path(rel).as_posix()


def _data_bytes(data, path) -> int | None:
    if path is None or data.sha256 is None:
        return None
    from reporter.intake.duck.files import matched_files

    try:
        return sum(os.stat(f).st_size for f in matched_files(Path(path)))
    except (OSError, ReporterError):
        return None


def randomness(plan, analysis) -> Randomness:
    """The seeds and permutation counts of a run: the plan's settings and what was drawn."""
    from reporter.inference.permutation import SEQUENTIAL_EXCEEDANCES
    from reporter.render import FIGURE_JITTER_SEED

    a = plan.analysis
    run: list[tuple[str, int]] = []
    shapiro = None
    inf = getattr(analysis, "inference", None) if analysis is not None else None
    if inf is not None:
        for row, extra in zip(analysis.anova.rows, inf.rows):
            if extra is not None and extra.permutation is not None:
                run.append((row.source, extra.permutation.n_permutations))
        for h, extra in zip(analysis.hypotheses, inf.hypotheses):
            if extra is not None and extra.permutation is not None:
                run.append((h.contrast.name, extra.permutation.n_permutations))
        sw = inf.assumptions.shapiro
        if sw.sampled:
            shapiro = sw.n
    used = (("permutation F",) if run else ()) + (("Shapiro-Wilk sample",) if shapiro is not None else ())
    return Randomness(
        seed=a.seed,
        seed_used_by=used,
        permutations=a.permutations,
        permutation_max_rows=a.permutation_max_rows,
        permutation_stop_after=SEQUENTIAL_EXCEEDANCES,
        permutations_run=tuple(run),
        shapiro_sample=shapiro,
        figure_jitter_seed=FIGURE_JITTER_SEED,
    )


def collect_provenance(
    prep,
    extra_packages: tuple[str, ...] = (),
    *,
    analysis=None,
    argv=None,
    results_folder=None,
    lock_sha256: str | None = None,
) -> Provenance:
    """The provenance of a run. ``argv`` is the command line as typed (None from Python);
    ``results_folder`` the folder the report files go to (None when made in memory);
    ``lock_sha256`` defaults to the hash of the lock the prepared run was checked against."""
    plan, data = prep.plan, prep.data
    data_path = plan.data.path if data.sha256 is not None else None
    n_used = analysis.cells.n_total if analysis is not None else prep.cells.n_total
    return Provenance(
        data_sha256=data.sha256,
        plan_sha256=plan.sha256,
        data_file=os.path.basename(data.source),
        plan_file=os.path.basename(str(plan.source)) if plan.source else None,
        data_format=data.format,
        software=software_versions(extra_packages + (("duckdb",) if data.reader == "out-of-core" else ())),
        created=created_timestamp(),
        data_reader=data.reader,
        data_path=recorded_path(data_path, results_folder),
        plan_path=recorded_path(plan.source, results_folder),
        paths_relative_to=None if data_path is None and plan.source is None else (
            "as-given" if results_folder is None else "results-folder"),
        data_bytes=_data_bytes(data, data_path),
        rows_read=data.n_read,
        rows_used=n_used,
        rows_excluded=tuple((e.reason, e.count) for e in data.exclusions),
        platform=platform_text(),
        argv=None if argv is None else tuple(str(a) for a in argv),
        randomness=randomness(plan, analysis),
        lock_sha256=lock_sha256 or getattr(getattr(prep, "lock", None), "sha256", None),
    )
