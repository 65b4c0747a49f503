"""``anova-report verify RESULTS``: recompute a report from its recorded inputs and compare.

RESULTS is a results.json, or a PDF report holding results.json as an embedded file (the PDF
embeds it beside the plan, see :mod:`reporter.render.pdf`). The check has four parts:

1. **The results file itself.** results.json stores the SHA-256 of its own canonical JSON
   (:func:`reporter.render.results_json.canonical_json`: every other field, keys sorted,
   separators "," and ":", UTF-8) in ``results_sha256``; a file edited by hand no longer matches
   it, even when its inputs are unchanged.
2. **The inputs.** The plan and the data are found where provenance recorded them (relative to
   the folder of the results file when ``paths_relative_to`` is "results-folder", as given
   otherwise; see :mod:`reporter.provenance`), or where ``--plan`` and ``--data`` say. A PDF
   whose recorded plan is not there falls back on the plan embedded in it. Their SHA-256 are
   compared with the recorded ones.
3. **Every number.** The analysis is recomputed from those inputs, through the same steps as
   ``anova-report run`` (:func:`reporter.run.results_document`), and every field of the two
   documents is compared: whole numbers, text, flags and nulls exactly; other numbers within
   :data:`RELATIVE_TOLERANCE` of the larger magnitude, so that another machine or a newer numpy
   still verifies. Lists must have the same length and dictionaries the same keys.
4. **What may differ.** The fields of :data:`REPORTED_FIELDS` (the creation time, the software
   versions, the command line, the platform, the input names and paths) describe the run, not
   the results: they are reported when they differ, never failed.

The outcome is a :class:`Verification`; :func:`render_verification` writes it as text, with the
largest relative difference found and the software versions on each side.
"""

from __future__ import annotations

import contextlib
import glob
import hashlib
import io
import json
import logging
import os
import shlex
import tempfile
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

from reporter.errors import OptionError, ReporterError
from reporter.intake import defaults as D
from reporter.intake.files import describe_path, read_limited
from reporter.render.results_json import DIGEST_FIELD, SCHEMA_ID, results_digest

#: Two numbers agree when |a - b| <= RELATIVE_TOLERANCE * max(|a|, |b|).
RELATIVE_TOLERANCE = 1e-10

#: Fields that describe the run rather than its results: reported when they differ, not failed.
REPORTED_FIELDS = (
    ("provenance", "created"),
    ("provenance", "software"),
    ("provenance", "argv"),
    ("provenance", "platform"),
    ("provenance", "data_file"),
    ("provenance", "plan_file"),
    ("provenance", "data_path"),
    ("provenance", "plan_path"),
    ("provenance", "paths_relative_to"),
)

#: Largest results file read (a results.json or a PDF report), in bytes.
MAX_RESULTS_BYTES = 1 << 28

#: Differences listed in the text output; the count of the rest is given.
SHOWN_DIFFERENCES = 200

_FIX = "Give a results.json or a report.pdf written by 'anova-report run'."


@dataclass(frozen=True)
class Difference:
    """One thing that differs: an input ("plan", "data"), the results digest, or a field path."""

    where: str
    recorded: str
    recomputed: str


@dataclass(frozen=True)
class Verification:
    results_file: str
    from_pdf: bool
    plan_used: str  # the plan file read, or "the plan embedded in the PDF"
    data_used: str
    inputs: tuple[tuple[str, str], ...]  # (input, what its hash check found), for the text output
    differences: tuple[Difference, ...]  # what fails the check
    reported: tuple[Difference, ...]  # fields of REPORTED_FIELDS that differ
    numbers_compared: int
    values_compared: int  # texts, flags and nulls
    largest: tuple[float, str, Any, Any] | None  # (relative difference, field, recorded, recomputed)
    software_recorded: tuple[tuple[str, str], ...]
    software_now: tuple[tuple[str, str], ...]
    command: tuple[str, ...] | None = None  # the recorded command line (None: made from Python)
    note: str | None = None

    @property
    def agrees(self) -> bool:
        return not self.differences


# ---------------------------------------------------------------------------------------------
# Reading the results file


def read_results(path: str | os.PathLike) -> tuple[dict[str, Any], bool, bytes | None]:
    """The results document, whether it came from a PDF, and the plan bytes embedded in that PDF."""
    path = Path(path)
    raw = read_limited(path, "the results file", OptionError, _FIX, MAX_RESULTS_BYTES, "a results file")
    shown = describe_path(path)
    plan_bytes = None
    from_pdf = raw.startswith(b"%PDF-")
    if from_pdf:
        files = _pdf_attachments(raw, shown)
        if "results.json" not in files:
            raise OptionError(
                f"{shown}: this PDF has no embedded results.json (it holds "
                f"{', '.join(sorted(files)) or 'no embedded file'}). Verify the results.json written beside it, "
                "or a PDF written by 'anova-report run --format pdf'."
            )
        raw = files["results.json"]
        plan_bytes = files.get("plan.toml")
        shown = f"{shown} (its embedded results.json)"
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise OptionError(f"{shown}: is neither a PDF nor UTF-8 JSON text (byte {exc.start} is 0x{raw[exc.start]:02x}). {_FIX}") from None
    try:
        doc = json.loads(text, parse_constant=_refuse_constant)
    except json.JSONDecodeError as exc:
        raise OptionError(f"{shown}, line {exc.lineno}, column {exc.colno}: is not valid JSON ({exc.msg}). {_FIX}") from None
    except (ValueError, RecursionError) as exc:
        raise OptionError(f"{shown}: is not a results file ({exc}). {_FIX}") from None
    if not isinstance(doc, dict) or doc.get("schema") != SCHEMA_ID:
        got = doc.get("schema") if isinstance(doc, dict) else type(doc).__name__
        raise OptionError(
            f"{shown}: is not a results file of anova-report: its 'schema' must be \"{SCHEMA_ID}\" "
            f"(got {json.dumps(got, ensure_ascii=False)[:80]}). {_FIX}"
        )
    if not isinstance(doc.get("provenance"), dict):
        raise OptionError(f"{shown}: has no 'provenance' table, so its inputs cannot be found. {_FIX}")
    return doc, from_pdf, plan_bytes


def _refuse_constant(name: str):
    raise ValueError(f"it holds {name}, which results.json never writes")


def _pdf_attachments(raw: bytes, shown: str) -> dict[str, bytes]:
    """The files embedded in a PDF, by name (the first one of each name)."""
    from pypdf import PdfReader

    quiet = logging.getLogger("pypdf")
    level = quiet.level
    quiet.setLevel(logging.ERROR)  # pypdf warns on stderr about repairs it makes
    try:
        return {name: bytes(data[0]) for name, data in PdfReader(io.BytesIO(raw)).attachments.items() if data}
    except Exception as exc:  # a third-party parser of untrusted bytes: any failure is bad input
        raise OptionError(f"{shown}: starts like a PDF but cannot be read as one ({type(exc).__name__}: "
                          f"{str(exc)[:120]}). {_FIX}") from None
    finally:
        quiet.setLevel(level)


# ---------------------------------------------------------------------------------------------
# Finding and hashing the inputs


def _recorded(prov: dict[str, Any], key: str, results: Path) -> Path | None:
    value = prov.get(key)
    if value is None:
        return None
    option = "--plan PLAN" if key == "plan_path" else "--data FILE"
    if not isinstance(value, str) or not value or "\0" in value:
        raise OptionError(
            f"{describe_path(results)}: provenance.{key} must be a path written as text, got "
            f"{json.dumps(value, ensure_ascii=False)[:80]}; the file was not written by 'anova-report run' as it is. "
            f"Give the file with {option}.")
    path = Path(value)
    if prov.get("paths_relative_to") == "results-folder" and not path.is_absolute():
        path = results.parent / path
    return path


def _where(prov) -> str:
    return "relative to the folder of the results file" if prov.get("paths_relative_to") == "results-folder" else "as given"


def data_sha256(path: Path) -> str:
    """The SHA-256 the readers record for a data path: of the file's bytes, or for a pattern of
    several files, of their names and hashes (as :mod:`reporter.intake.duck.files` does)."""
    from reporter.intake.data import hash_file
    from reporter.intake.duck.files import _glob_digest, matched_files

    files = matched_files(path)
    digests = [(hash_file(f),) for f in files]
    return digests[0][0] if len(files) == 1 else _glob_digest(files, digests)


def _data_exists(path: Path) -> bool:
    from reporter.intake.duck.files import is_glob

    return bool(glob.glob(str(path))) if is_glob(path) else _exists(path)


def _exists(path: Path) -> bool:
    """Whether a recorded path names something; a path the system refuses (too long, a name
    part too long) names nothing here."""
    try:
        return path.exists()
    except (OSError, ValueError):
        return False


def _short_hash(h) -> str:
    return "(none)" if not h else str(h)


# ---------------------------------------------------------------------------------------------
# Comparing two documents


@dataclass
class _Walk:
    differences: list[Difference]
    reported: list[Difference]
    numbers: int = 0
    values: int = 0
    largest: tuple[float, str, Any, Any] | None = None


def _show(value: Any, limit: int = 100) -> str:
    if isinstance(value, float):
        text = repr(value)
    elif isinstance(value, (dict, list)):
        text = json.dumps(value, ensure_ascii=False, sort_keys=True)
    elif value is _ABSENT:
        text = "(absent)"
    else:
        text = json.dumps(value, ensure_ascii=False)
    return text if len(text) <= limit else text[: limit - 1] + "…"


_ABSENT = object()


def _field(path: tuple) -> str:
    out = ""
    for part in path:
        out += f"[{part}]" if isinstance(part, int) else (f".{part}" if out else str(part))
    return out


def _is_number(x) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool)


def relative_difference(a: float, b: float) -> float:
    """|a - b| / max(|a|, |b|); 0 when both are 0."""
    if a == b:
        return 0.0
    return abs(a - b) / max(abs(a), abs(b))


def _compare(rec: Any, new: Any, path: tuple, w: _Walk) -> None:
    if path in REPORTED_FIELDS:
        if rec != new:
            w.reported.append(Difference(_field(path), _show(rec), _show(new)))
        return
    if isinstance(rec, dict) and isinstance(new, dict):
        for key in [*rec, *(k for k in new if k not in rec)]:
            if key not in new or key not in rec:
                w.differences.append(Difference(_field((*path, key)), _show(rec.get(key, _ABSENT)),
                                                _show(new.get(key, _ABSENT))))
            else:
                _compare(rec[key], new[key], (*path, key), w)
        return
    if isinstance(rec, list) and isinstance(new, list):
        if len(rec) != len(new):
            w.differences.append(Difference(_field(path), f"{len(rec)} items", f"{len(new)} items"))
        for i, (a, b) in enumerate(zip(rec, new)):
            _compare(a, b, (*path, i), w)
        return
    if _is_number(rec) and _is_number(new):
        w.numbers += 1
        rel = relative_difference(float(rec), float(new))
        agree = rec == new if isinstance(rec, int) and isinstance(new, int) else rel <= RELATIVE_TOLERANCE
        if rel > 0 and (w.largest is None or rel > w.largest[0]):
            w.largest = (rel, _field(path), rec, new)
        if not agree:
            w.differences.append(Difference(_field(path), _show(rec), _show(new)))
        return
    w.values += 1
    if type(rec) is not type(new) or rec != new:
        w.differences.append(Difference(_field(path), _show(rec), _show(new)))


# ---------------------------------------------------------------------------------------------
# The check


def verify(results: str | os.PathLike, *, plan: str | os.PathLike | None = None,
           data: str | os.PathLike | None = None, lock: str | os.PathLike | None = None,
           quiet: bool = True) -> Verification:
    """Check a results file against its inputs and a recomputation (see the module docstring).

    The run is compared with a plan lock as it was: ``lock`` when given, else the lock beside the
    plan file, else (when the results record one) the lock of that name beside the recorded plan.

    Raises a :class:`ReporterError` (exit 2) when the check cannot be made: the results file is
    missing or is not one, a PDF holds no results.json, an input cannot be found.
    """
    from reporter.api import prepare
    from reporter.intake.plan import load_plan
    from reporter.provenance import software_versions
    from reporter.run import analyse, results_document

    results = Path(results)
    doc, from_pdf, embedded_plan = read_results(results)
    prov = doc["provenance"]
    shown = describe_path(results)
    differences: list[Difference] = []
    inputs: list[tuple[str, str]] = []

    recorded_digest = doc.get(DIGEST_FIELD)
    own_digest = results_digest(doc)
    if recorded_digest != own_digest:
        differences.append(Difference(
            "results digest (results_sha256)", _short_hash(recorded_digest),
            f"{own_digest} (the SHA-256 of the file's content: it was changed after it was written)"))

    with contextlib.ExitStack() as stack:
        plan_path = Path(plan) if plan is not None else _recorded(prov, "plan_path", results)
        if plan_path is None or (plan is None and not _exists(plan_path)):
            if embedded_plan is None:
                missing = ("records no plan file (the plan was built in Python)" if plan_path is None else
                           f"records the plan at {describe_path(prov.get('plan_path'))} ({_where(prov)}), which is not there")
                raise OptionError(f"{shown}: {missing}; give the plan with --plan PLAN.")
            folder = stack.enter_context(tempfile.TemporaryDirectory(prefix="anova-report-verify-"))
            plan_path = Path(folder) / (prov.get("plan_file") or "plan.toml")
            plan_path.write_bytes(embedded_plan)
            plan_used = "the plan embedded in the PDF"
        else:
            plan_used = os.path.normpath(plan_path)

        data_path = Path(data) if data is not None else _recorded(prov, "data_path", results)
        if data_path is None:
            raise OptionError(f"{shown}: records no data file (the data came from a data frame in Python); "
                              "give a file with the same rows with --data FILE.")
        if data is None and not _data_exists(data_path):
            raise OptionError(f"{shown}: records the data at {describe_path(prov.get('data_path'))} ({_where(prov)}), "
                              "which is not there; give the data file with --data FILE.")
        given = f"--data {describe_path(data_path)}" if data is not None else (
            f"{shown}: the data it records at {describe_path(data_path)}")
        if data_path.suffix.lower() not in D.DATA_SUFFIXES:
            raise OptionError(f"{given}: must end in .csv, .tsv or .parquet; give the data file with --data FILE.")
        from reporter.intake.duck.files import is_glob

        if not is_glob(data_path):
            from reporter.intake.data import require_file

            require_file(data_path, "Give the data file with --data FILE." if data is not None else
                         f"It is the data path recorded in {shown}; give the data file with --data FILE.")

        raw_plan = read_limited(plan_path, "the plan file", OptionError, "Give the plan with --plan PLAN.",
                                D.MAX_PLAN_BYTES, "a plan file")
        changed = False
        for name, path, now, was in (
            ("plan", plan_used, hashlib.sha256(raw_plan).hexdigest(), prov.get("plan_sha256")),
            ("data", os.path.normpath(data_path), data_sha256(data_path), prov.get("data_sha256")),
        ):
            if was is None:
                inputs.append((name, f"{path}: no SHA-256 was recorded, so its content is not checked"))
            elif now == was:
                inputs.append((name, f"{path}: SHA-256 matches the recorded one"))
            else:
                changed = True
                inputs.append((name, f"{path}: SHA-256 differs from the recorded one"))
                differences.append(Difference(f"input {name} ({path}), SHA-256", was, now))

        note = None
        new = None
        argv = prov.get("argv")  # the command is not run again: keep the one recorded
        argv = argv if isinstance(argv, list) and all(isinstance(a, str) for a in argv) else None
        try:
            spec = load_plan(plan_path)
            spec = replace(spec, data=replace(spec.data, path=data_path))
            prep = prepare(spec)
            prep = _with_lock(prep, doc, lock, _recorded(prov, "plan_path", results))
            _, new = results_document(prep, analyse(prep, quiet=quiet), argv=argv, results_folder=results.parent)
        except ReporterError as exc:
            if not changed:
                raise
            note = f"the inputs as they are now cannot be analysed, so no number was recomputed: {exc}"

    walk = _Walk(differences, [])
    if new is not None:
        rec = {k: v for k, v in doc.items() if k != DIGEST_FIELD}
        _compare(rec, {k: v for k, v in new.items() if k != DIGEST_FIELD}, (), walk)
    software = prov.get("software")
    return Verification(
        results_file=str(results),
        from_pdf=from_pdf,
        plan_used=plan_used,
        data_used=os.path.normpath(data_path),
        inputs=tuple(inputs),
        differences=tuple(walk.differences),
        reported=tuple(walk.reported),
        numbers_compared=walk.numbers,
        values_compared=walk.values,
        largest=walk.largest,
        software_recorded=tuple((str(k), str(v)) for k, v in software.items()) if isinstance(software, dict) else (),
        software_now=tuple(new["provenance"]["software"].items()) if new is not None else software_versions(),
        command=None if argv is None else tuple(argv),
        note=note,
    )


def _with_lock(prep, doc, lock, recorded_plan: Path | None):
    """The prepared run checked against the lock the recorded run used (see :func:`verify`)."""
    from reporter.trail.deviations import apply_lock

    if lock is not None:
        return apply_lock(prep, lock)
    recorded = doc.get("lock")
    if prep.lock is None and isinstance(recorded, dict) and isinstance(recorded.get("file"), str) and recorded_plan:
        beside = recorded_plan.parent / Path(recorded["file"]).name
        if beside.is_file():
            return apply_lock(prep, beside)
    return prep


def _versions(pairs) -> str:
    return ", ".join(f"{k} {v}" for k, v in pairs) or "(none recorded)"


def render_verification(v: Verification) -> str:
    """The verification as lines of text for the terminal."""
    source = f"{v.results_file} (the results.json embedded in the PDF)" if v.from_pdf else v.results_file
    lines = [f"verify {source}"]
    lines.append("  made by: " + (shlex.join(v.command) if v.command is not None else "a call from Python (no command line)"))
    lines += [f"  {name}: {found}" for name, found in v.inputs]
    digest_bad = any(d.where.startswith("results digest") for d in v.differences)
    lines.append("  results digest: " + ("does not match the file's content" if digest_bad else "matches the file's content"))
    if v.note:
        lines.append(f"  {v.note}")
    else:
        largest = ("no difference at all" if v.largest is None else
                   f"{v.largest[0]:.3g} at {v.largest[1]} (recorded {_show(v.largest[2])}, recomputed {_show(v.largest[3])})")
        lines.append(f"  compared {v.numbers_compared:,} numbers and {v.values_compared:,} texts, flags and nulls; "
                     f"largest relative difference: {largest}")
        lines.append(f"  rule: numbers agree within {RELATIVE_TOLERANCE:g} relative; whole numbers, text, flags and nulls exactly")
    lines.append(f"  software recorded: {_versions(v.software_recorded)}")
    lines.append(f"  software now:      {_versions(v.software_now)}")
    if v.reported:
        lines.append("  reported, not failed (they describe the run, not its results):")
        lines += [f"    {d.where}: recorded {d.recorded}, now {d.recomputed}" for d in v.reported]
    if v.agrees:
        lines.append("verified: the inputs match their recorded hashes and every recomputed number agrees.")
        return "\n".join(lines)
    n = len(v.differences)
    lines.append(f"NOT verified: {n} {'difference' if n == 1 else 'differences'} (what, recorded, recomputed):")
    for d in v.differences[:SHOWN_DIFFERENCES]:
        lines.append(f"  {d.where}: recorded {d.recorded}, recomputed {d.recomputed}")
    if n > SHOWN_DIFFERENCES:
        lines.append(f"  … and {n - SHOWN_DIFFERENCES:,} more")
    return "\n".join(lines)
