"""``anova-report lock PLAN``: freeze an analysis plan before any data exist.

The lock is a JSON file beside the plan, named after it: ``oneway.toml`` is locked in
``oneway.lock.json`` (:func:`lock_path`). It holds

* ``canonical_plan``: the plan as parsed, every default filled in, keys by their plan names
  (:func:`reporter.intake.canonical.plan_mapping`, with the ``[planning]`` table);
* ``canonical_plan_sha256``: the SHA-256 of that mapping's canonical JSON (:func:`canonical_json`:
  keys sorted, no spaces, UTF-8, as in RFC 8785's JSON Canonicalization Scheme for the values a
  plan holds: text, whole numbers, decimals, booleans, lists and tables);
* ``created`` (SOURCE_DATE_EPOCH honoured, :func:`reporter.provenance.created_timestamp`) and the
  software versions;
* ``cells`` and ``hypotheses``: every hypothesis compiled to its contrast over the cell means
  (exact fractions written as text, such as "-1/2"), so that a later run compares what each
  hypothesis tests, not how it is worded (:mod:`reporter.trail.deviations`);
* ``power``: the a-priori power table of the plan's ``[planning]`` table, if any.

The file follows the JSON Schema ``reporter/schema/lock-1.schema.json``. Beside the lock, the
analysis-plan document is written as ``oneway.analysis-plan.html`` and
``oneway.analysis-plan.pdf`` (PDF/A-3b, with the plan and the lock attached). No data file is
read: the levels come from the plan. An existing lock (or plan document) is replaced only with
``--force``; the three files are written all or nothing.
"""

from __future__ import annotations

import hashlib
import json
import os
from dataclasses import dataclass
from fractions import Fraction
from pathlib import Path
from typing import Any

from reporter.errors import OptionError, PlanError
from reporter.intake.files import describe_path, read_limited

LOCK_SCHEMA = "anova-report/lock/1"
LOCK_SUFFIX = ".lock.json"
DOCUMENT_SUFFIX = ".analysis-plan"
#: A lock holds at most 100 hypotheses over at most 256 cells; this bounds any real one.
MAX_LOCK_BYTES = 64 << 20


def lock_path(plan_path: str | os.PathLike) -> Path:
    """The lock beside a plan: the plan's name with its last suffix replaced by ``.lock.json``."""
    p = Path(plan_path)
    return p.with_name(p.stem + LOCK_SUFFIX) if p.suffix else p.with_name(p.name + LOCK_SUFFIX)


def document_paths(plan_path: str | os.PathLike) -> dict[str, Path]:
    """The analysis-plan document's files beside a plan, by format."""
    p = Path(plan_path)
    stem = p.stem if p.suffix else p.name
    return {fmt: p.with_name(f"{stem}{DOCUMENT_SUFFIX}.{fmt}") for fmt in ("html", "pdf")}


def canonical_json(value: Any) -> bytes:
    """The canonical JSON bytes of ``value``: keys sorted, no insignificant space, UTF-8."""
    return json.dumps(value, sort_keys=True, separators=(",", ":"), ensure_ascii=False,
                      allow_nan=False).encode("utf-8")


def sha256_hex(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def fraction_text(x: Fraction) -> str:
    return str(Fraction(x))


def compiled_hypotheses(contrasts) -> list[dict[str, Any]]:
    """Each compiled hypothesis as the lock records it (exact weights over the cell means)."""
    return [
        {
            "name": c.name,
            "role": c.role,
            "kind": c.kind,
            "statement": c.statement,
            "test": c.test,
            "alternative": c.alternative,
            "cells": [[fraction_text(w) for w in row] for row in c.weights],
            "rhs": [fraction_text(x) for x in c.rhs],
            **({"unit": c.unit} if c.unit != "raw" else {}),
            **({"bounds": [fraction_text(x) for x in c.bounds]} if c.bounds is not None else {}),
        }
        for c in contrasts
    ]


def power_records(rows) -> list[dict[str, Any]]:
    return [
        {"name": r.name, "test": r.test, "sides": r.sides, "df1": r.df1, "effect_kind": r.effect_kind,
         "effect": r.effect, "powers": list(r.powers), "n_per_cell": list(r.n_per_cell),
         "achieved_power": list(r.achieved), **({"note": r.reason} if r.reason else {}),
         **({"bounds_sd": list(r.bounds), "true_difference_sd": r.true_difference} if r.bounds is not None else {})}
        for r in rows
    ]


@dataclass(frozen=True)
class LockedPlan:
    """What ``lock`` computed from a plan: the lock's content and what the document shows."""

    plan: Any
    design: Any
    contrasts: tuple
    power: tuple
    content: dict[str, Any]
    lock_bytes: bytes

    @property
    def sha256(self) -> str:
        """The SHA-256 of the lock file's bytes."""
        return sha256_hex(self.lock_bytes)


def build_lock(plan) -> LockedPlan:
    """Validate ``plan`` without data and compute the lock's content (nothing is written)."""
    from reporter.intake.canonical import plan_mapping
    from reporter.model.design import design_from_plan
    from reporter.model.hypotheses import compile_hypotheses
    from reporter.provenance import created_timestamp, software_versions
    from reporter.trail.planning import a_priori_power

    design = design_from_plan(plan)
    contrasts = compile_hypotheses(plan, design)
    power = a_priori_power(plan, design, contrasts)
    mapping = plan_mapping(plan)
    content = {
        "schema": LOCK_SCHEMA,
        "plan_file": os.path.basename(str(plan.source)) if plan.source else None,
        "plan_file_sha256": plan.sha256,
        "canonical_plan": mapping,
        "canonical_plan_sha256": sha256_hex(canonical_json(mapping)),
        "created": created_timestamp(),
        "software": dict(software_versions()),
        "factors": [f.name for f in design.factors],
        "cells": [list(c.levels) for c in design.cells],
        "hypotheses": compiled_hypotheses(contrasts),
        "power": power_records(power),
    }
    data = (json.dumps(content, ensure_ascii=False, indent=2, sort_keys=True, allow_nan=False) + "\n").encode("utf-8")
    return LockedPlan(plan, design, contrasts, power, content, data)


def lock_plan(plan_path: str | os.PathLike, *, force: bool = False) -> list[Path]:
    """``anova-report lock``: validate the plan, write its lock and the analysis-plan document
    (HTML, PDF) beside it, all or nothing; return the paths written."""
    from reporter.intake.plan import load_plan
    from reporter.render.html import render_html
    from reporter.render.pdf import render_pdf
    from reporter.run import commit
    from reporter.trail.plan_document import build_plan_document

    plan_path = Path(plan_path)
    if not plan_path.name:  # ".", "/": a folder, which has no name to put the lock beside; the reader refuses it
        load_plan(plan_path)
    targets = {"lock": lock_path(plan_path), **document_paths(plan_path)}
    _refuse_existing(targets, force)
    plan = load_plan(plan_path)
    locked = build_lock(plan)
    document = build_plan_document(locked)
    attachments = {Path(plan_path).name: plan.source_bytes or b"", targets["lock"].name: locked.lock_bytes}
    files = {
        targets["lock"]: locked.lock_bytes,
        targets["html"]: render_html(document, template="plan.html.j2"),
        targets["pdf"]: render_pdf(document, attachments, template="plan.html.j2"),
    }
    _refuse_existing(targets, force)  # a lock may have appeared meanwhile
    folder = plan_path.parent
    if not os.access(folder, os.W_OK):
        raise OptionError(f"{describe_path(folder)}: the folder of the plan is not writable, so the lock cannot be "
                          "written beside the plan; make it writable (chmod u+w).")
    return commit(folder, files)


def _refuse_existing(targets: dict[str, Path], force: bool) -> None:
    if force:
        for path in targets.values():
            if os.path.lexists(path) and not path.is_file():
                raise OptionError(f"{describe_path(path)}: exists and is not a regular file, so lock cannot replace "
                                  "it; remove it or rename the plan.")
        return
    if os.path.lexists(targets["lock"]):
        raise OptionError(
            f"{describe_path(targets['lock'])}: the plan is already locked. A lock records the plan as it was "
            "before the data; to replace it anyway, run lock again with --force (the report of a later run "
            "will compare against the new lock).")
    for path in (targets["html"], targets["pdf"]):
        if os.path.lexists(path):
            raise OptionError(f"{describe_path(path)}: exists; lock writes the analysis-plan document there. "
                              "Remove or rename it, or run lock with --force to replace it.")


# ---------------------------------------------------------------------------------------------
# Reading a lock back


@dataclass(frozen=True)
class LockedHypothesis:
    name: str
    role: str
    kind: str
    statement: str
    test: str
    alternative: str
    weights: tuple[tuple[Fraction, ...], ...]
    rhs: tuple[Fraction, ...]
    bounds: tuple[Fraction, Fraction] | None = None  # an equivalence claim's bounds, in ``unit``
    unit: str = "raw"  # "raw" or "sd": the unit of rhs and bounds as written


@dataclass(frozen=True)
class Lock:
    """A lock file read back and checked. ``sha256`` is the SHA-256 of the file's bytes."""

    path: Path
    sha256: str
    created: str
    canonical: dict[str, Any]
    canonical_sha256: str
    factors: tuple[str, ...]
    cells: tuple[tuple[str, ...], ...]
    hypotheses: tuple[LockedHypothesis, ...]


def read_lock(path: str | os.PathLike) -> Lock:
    """Read and check a lock file; a broken or edited lock is a :class:`PlanError` naming the file."""
    path = Path(path)
    fix = f"Give the {LOCK_SUFFIX} file that anova-report lock wrote."
    raw = read_limited(path, "the lock file", PlanError, fix, MAX_LOCK_BYTES, "a lock file")
    shown = describe_path(path)
    try:
        doc = json.loads(raw.decode("utf-8"))
    except (UnicodeDecodeError, json.JSONDecodeError, RecursionError) as exc:
        raise PlanError(f"{shown}: is not a lock file (not valid JSON: {exc}). {fix}") from None
    if not isinstance(doc, dict) or doc.get("schema") != LOCK_SCHEMA:
        got = doc.get("schema") if isinstance(doc, dict) else None
        raise PlanError(f"{shown}: 'schema' must be \"{LOCK_SCHEMA}\" (got {json.dumps(got)[:60]}). {fix}")
    try:
        canonical = doc["canonical_plan"]
        stated = doc["canonical_plan_sha256"]
        factors = tuple(str(f) for f in doc["factors"])
        cells = tuple(tuple(str(x) for x in c) for c in doc["cells"])
        hyps = tuple(
            LockedHypothesis(
                name=str(h["name"]), role=str(h["role"]), kind=str(h["kind"]), statement=str(h["statement"]),
                test=str(h["test"]), alternative=str(h["alternative"]),
                weights=tuple(tuple(Fraction(str(w)) for w in row) for row in h["cells"]),
                rhs=tuple(Fraction(str(x)) for x in h["rhs"]),
                bounds=None if h.get("bounds") is None else tuple(Fraction(str(x)) for x in h["bounds"]),
                unit=str(h.get("unit", "raw")),
            )
            for h in doc["hypotheses"]
        )
        created = str(doc["created"])
    except (KeyError, TypeError, ValueError, ZeroDivisionError) as exc:
        raise PlanError(f"{shown}: is incomplete or damaged ({type(exc).__name__}: {str(exc)[:80]}). {fix}") from None
    if not isinstance(canonical, dict) or sha256_hex(canonical_json(canonical)) != stated:
        raise PlanError(
            f"{shown}: its canonical plan does not match its canonical_plan_sha256, so the lock was changed after it "
            "was written. Restore the lock as written (version control keeps it), or lock the plan again with --force.")
    if any(len(c) != len(factors) for c in cells) or any(len(row) != len(cells) for h in hyps for row in h.weights):
        raise PlanError(f"{shown}: its cells and contrasts do not fit together. {fix}")
    return Lock(path, sha256_hex(raw), created, canonical, stated, factors, cells, hyps)
