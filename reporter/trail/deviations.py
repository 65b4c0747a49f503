"""How a run departs from its locked plan.

A run looks for the lock beside its plan (:func:`reporter.trail.lock.lock_path`) or is given one
(``run --lock FILE``). :func:`check_against_lock` compares the plan as it is now with the lock:

* hypotheses by what they test, not by their wording: each compiled contrast C·μ = h is brought to
  a canonical form over the cells named by their levels (the reduced row echelon form of [C | h]
  in exact fractions for a two-sided test; for a directional test the single row with its
  direction made "greater" and its first non-zero weight scaled to ±1). A hypothesis whose form is
  unchanged is the same hypothesis, however it is written now; one found under another name is
  "renamed"; one whose form changed is "changed"; "added" and "removed" complete the list. Every
  hypothesis added after the lock is tested as exploratory (:func:`apply_lock`), whatever its role
  in the plan;
* every key of the ``[analysis]`` table (α, correction, sums of squares, coding, the unequal-
  variance policy, the follow-ups, ...), the outcome, the factors and their levels, the
  covariates (each ``[[covariates]]`` table by its name: added, removed, or a changed
  ``adjust_to`` or ``slopes``), and the
  exclusion rules (each factor's ``exclude`` list, ``[data] missing``, ``[study] exclusion_rules``),
  through the canonical plans (:func:`reporter.intake.canonical.plan_mapping`);
* the data: a level with data that the locked plan did not list.

Each difference is one :class:`Deviation`; no difference means the analysis matched the lock.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, replace
from fractions import Fraction
from pathlib import Path
from typing import Any

from reporter.trail.lock import Lock, lock_path, read_lock

#: Kinds of deviation, in the order the report lists them.
KINDS = (
    "hypothesis-added", "hypothesis-removed", "hypothesis-changed", "hypothesis-renamed", "hypothesis-role-changed",
    "analysis-option-changed", "outcome-changed", "factor-added", "factor-removed", "levels-changed",
    "covariate-added", "covariate-removed", "covariate-changed",
    "exclusion-rules-changed", "data-level-not-locked",
)


@dataclass(frozen=True)
class Deviation:
    """One way the run departs from the locked plan: ``kind`` (one of :data:`KINDS`), what it
    concerns (``subject``: a hypothesis name, a plan key, a factor), the locked and the present
    value as text (None where there is none), and one sentence saying it."""

    kind: str
    subject: str
    locked: str | None
    now: str | None
    text: str


@dataclass(frozen=True)
class LockCheck:
    """The comparison of a run with its lock. ``sha256`` is the SHA-256 of the lock file's bytes."""

    path: Path
    sha256: str
    canonical_sha256: str
    created: str
    deviations: tuple[Deviation, ...]
    added: tuple[str, ...]  # hypotheses added after the lock, tested as exploratory

    @property
    def matched(self) -> bool:
        return not self.deviations


def find_lock(plan_path, given: str | Path | None) -> Path | None:
    """The lock of a run: ``given`` (``--lock FILE``), else the lock beside the plan if it exists."""
    if given is not None:
        return Path(given)
    if plan_path is None:
        return None
    candidate = lock_path(plan_path)
    return candidate if candidate.is_file() else None


def apply_lock(prep, lock_file: str | Path | None = None, *, plan_path=None):
    """The prepared run checked against its lock: ``prep.lock`` holds the :class:`LockCheck`, and
    every hypothesis added after the lock is exploratory. The lock is ``lock_file``, else the lock
    beside the plan file (``plan_path``, by default the plan's source); without one, ``prep`` comes
    back as the plan states it. Applying another lock replaces the first."""
    roles = {h.name: h.role for h in prep.plan.hypotheses}
    contrasts = tuple(replace(c, role=roles.get(c.name, c.role)) for c in prep.contrasts)
    path = find_lock(plan_path if plan_path is not None else prep.plan.source, lock_file)
    if path is None:
        return replace(prep, contrasts=contrasts, lock=None) if prep.lock is not None else prep
    prep = replace(prep, contrasts=contrasts)
    check = check_against_lock(read_lock(path), prep)
    added = set(check.added)
    contrasts = tuple(replace(c, role="exploratory") if c.name in added else c for c in contrasts)
    return replace(prep, contrasts=contrasts, lock=check)


# ---------------------------------------------------------------------------------------------
# Canonical form of a contrast


def _rref(rows: list[list[Fraction]]) -> tuple[tuple[Fraction, ...], ...]:
    """Reduced row echelon form, exactly; zero rows dropped."""
    m = [list(row) for row in rows]
    r = 0
    for c in range(len(m[0]) if m else 0):
        pivot = next((i for i in range(r, len(m)) if m[i][c] != 0), None)
        if pivot is None:
            continue
        m[r], m[pivot] = m[pivot], m[r]
        p = m[r][c]
        m[r] = [x / p for x in m[r]]
        for i in range(len(m)):
            if i != r and m[i][c] != 0:
                f = m[i][c]
                m[i] = [a - f * b for a, b in zip(m[i], m[r])]
        r += 1
        if r == len(m):
            break
    return tuple(tuple(row) for row in m[:r])


def canonical_contrast(weights, rhs, alternative: str, cells, columns, bounds=None, unit: str = "raw") -> tuple:
    """The canonical form of C·μ = h over ``columns`` (cell level tuples); ``cells`` names the
    columns of ``weights``. Weights on cells outside ``columns`` make the form differ. The unit of
    the constants ("raw" or "sd") is part of the form, and so are an equivalence claim's bounds
    (``LOW < c'μ < HIGH`` is the same claim as ``-HIGH < -c'μ < -LOW``)."""
    index = {c: j for j, c in enumerate(cells)}
    rows = []
    for row, h in zip(weights, rhs):
        rows.append([Fraction(row[index[c]]) if c in index else Fraction(0) for c in columns] + [Fraction(h)])
    if alternative == "two-sided":
        return ("two-sided", unit, _rref(rows))
    row = rows[0]
    if alternative == "equivalence":
        low, high = (Fraction(b) for b in bounds)
        first = next((x for x in row[:-1] if x != 0), Fraction(1))
        scaled = tuple(x / first for x in row[:-1])
        ends = sorted((low / first, high / first))
        return ("equivalence", unit, scaled, tuple(ends))
    if alternative == "less":
        row = [-x for x in row]
    first = next((x for x in row[:-1] if x != 0), Fraction(1))
    return ("greater", unit, (tuple(x / abs(first) for x in row),))


# ---------------------------------------------------------------------------------------------
# The comparison


def check_against_lock(lock: Lock, prep) -> LockCheck:
    """Every deviation of the prepared run from ``lock``."""
    from reporter.intake.canonical import plan_mapping

    now = plan_mapping(prep.plan)
    design = prep.design
    devs: list[Deviation] = []
    devs += _hypotheses(lock, prep.contrasts, tuple(tuple(c.levels) for c in design.cells))
    devs += _analysis(lock.canonical, now)
    devs += _design(lock.canonical, now, lock)
    devs += _covariates(lock.canonical, now)
    devs += _exclusions(lock.canonical, now)
    devs += _data_levels(lock, prep)
    devs.sort(key=lambda d: KINDS.index(d.kind))
    added = tuple(d.subject for d in devs if d.kind == "hypothesis-added")
    return LockCheck(lock.path, lock.sha256, lock.canonical_sha256, lock.created, tuple(devs), added)


def _hypotheses(lock: Lock, contrasts, cells_now) -> list[Deviation]:
    columns = sorted(set(lock.cells) | set(cells_now))
    old = {h.name: (h, canonical_contrast(h.weights, h.rhs, h.alternative, lock.cells, columns, h.bounds, h.unit))
           for h in lock.hypotheses}
    new = {c.name: (c, canonical_contrast(c.weights, c.rhs, c.alternative, cells_now, columns, c.bounds, c.unit))
           for c in contrasts}
    out: list[Deviation] = []
    unmatched_old = [n for n in old if n not in new]
    for name, (c, form) in new.items():
        if name in old:
            h, locked_form = old[name]
            if form != locked_form:
                out.append(Deviation("hypothesis-changed", name, _statement(h.kind, h.statement), _statement(c.kind, c.statement),
                                     f"Hypothesis “{name}” now tests another contrast: locked as "
                                     f"{_statement(h.kind, h.statement)}, now {_statement(c.kind, c.statement)}."))
            elif h.role != c.role:
                out.append(Deviation("hypothesis-role-changed", name, h.role, c.role,
                                     f"Hypothesis “{name}” was locked as {h.role} and is now {c.role}."))
            continue
        twin = next((n for n in unmatched_old if old[n][1] == form), None)
        if twin is not None:
            unmatched_old.remove(twin)
            out.append(Deviation("hypothesis-renamed", name, twin, name,
                                 f"Hypothesis “{twin}” is now named “{name}”; it tests the same contrast."))
            if old[twin][0].role != c.role:
                out.append(Deviation("hypothesis-role-changed", name, old[twin][0].role, c.role,
                                     f"Hypothesis “{name}” was locked as {old[twin][0].role} and is now {c.role}."))
            continue
        out.append(Deviation("hypothesis-added", name, None, _statement(c.kind, c.statement),
                             f"Hypothesis “{name}” ({_statement(c.kind, c.statement)}) was added after the lock; "
                             "it is reported as exploratory."))
    for name in unmatched_old:
        h = old[name][0]
        out.append(Deviation("hypothesis-removed", name, _statement(h.kind, h.statement), None,
                             f"Hypothesis “{name}” ({_statement(h.kind, h.statement)}, {h.role}) was in the locked "
                             "plan and is no longer tested."))
    return out


def _statement(kind: str, statement: str) -> str:
    return f'effect = "{statement}"' if kind == "effect" else statement


def _text(value: Any) -> str:
    if isinstance(value, str):
        return f'"{value}"'
    return json.dumps(value, ensure_ascii=False)


def _plain(value: Any) -> str | None:
    """A plan value as the ``locked``/``now`` text of a deviation: text as it is, others as JSON."""
    if value is None or isinstance(value, str):
        return value
    return json.dumps(value, ensure_ascii=False)


def _table(mapping: dict, key: str) -> dict:
    value = mapping.get(key)
    return value if isinstance(value, dict) else {}


def _analysis(old: dict, new: dict) -> list[Deviation]:
    a, b = _table(old, "analysis"), _table(new, "analysis")
    out = []
    for key in list(a) + [k for k in b if k not in a]:
        if a.get(key) != b.get(key):
            out.append(Deviation("analysis-option-changed", f"analysis.{key}", _plain(a.get(key)), _plain(b.get(key)),
                                 f"analysis.{key} was {_text(a.get(key))} in the locked plan and is now {_text(b.get(key))}."))
    return out


def _factors(mapping: dict) -> dict[str, dict]:
    out = {}
    for f in mapping.get("factors") or []:
        if isinstance(f, dict) and "name" in f:
            out[str(f["name"])] = f
    return out


def _design(old: dict, new: dict, lock: Lock) -> list[Deviation]:
    out = []
    a, b = _table(old, "data"), _table(new, "data")
    if a.get("outcome") != b.get("outcome"):
        out.append(Deviation("outcome-changed", "data.outcome", _plain(a.get("outcome")), _plain(b.get("outcome")),
                             f"The outcome was {_text(a.get('outcome'))} in the locked plan and is now {_text(b.get('outcome'))}."))
    fa, fb = _factors(old), _factors(new)
    for name in fb:
        if name not in fa:
            out.append(Deviation("factor-added", name, None, _plain(fb[name].get("levels")),
                                 f"Factor {name} (levels {_levels(fb[name])}) was added after the lock."))
    for name in fa:
        if name not in fb:
            out.append(Deviation("factor-removed", name, _plain(fa[name].get("levels")), None,
                                 f"Factor {name} (levels {_levels(fa[name])}) was in the locked plan and is no longer."))
        elif fa[name].get("levels") != fb[name].get("levels") or fa[name].get("column") != fb[name].get("column"):
            lo, ln = list(fa[name].get("levels") or []), list(fb[name].get("levels") or [])
            parts = []
            if [x for x in ln if x not in lo]:
                parts.append("added " + ", ".join(x for x in ln if x not in lo))
            if [x for x in lo if x not in ln]:
                parts.append("removed " + ", ".join(x for x in lo if x not in ln))
            if not parts and lo != ln:
                parts.append("reordered")
            if fa[name].get("column") != fb[name].get("column"):
                parts.append(f"read from column {_text(fb[name].get('column'))} instead of {_text(fa[name].get('column'))}")
            out.append(Deviation("levels-changed", name, _plain(lo), _plain(ln),
                                 f"The levels of {name} changed ({'; '.join(parts)}): locked {_levels(fa[name])}, "
                                 f"now {_levels(fb[name])}."))
    return out


def _covariate_tables(mapping: dict) -> dict[str, dict]:
    out = {}
    for c in mapping.get("covariates") or []:
        if isinstance(c, dict) and "name" in c:
            out[str(c["name"])] = c
    return out


def _covariates(old: dict, new: dict) -> list[Deviation]:
    """Covariates added, removed, or read at another value or with other slopes than locked (a
    lock made before covariates existed holds none). A changed description is no deviation."""
    ca, cb = _covariate_tables(old), _covariate_tables(new)
    out = []
    for name, c in cb.items():
        if name not in ca:
            out.append(Deviation("covariate-added", name, None, _covariate_text(c),
                                 f"Covariate {name} ({_covariate_text(c)}) was added after the lock; the means compared "
                                 "are now adjusted for it."))
    for name, c in ca.items():
        if name not in cb:
            out.append(Deviation("covariate-removed", name, _covariate_text(c), None,
                                 f"Covariate {name} ({_covariate_text(c)}) was in the locked plan and is no longer "
                                 "adjusted for."))
        elif any(c.get(k) != cb[name].get(k) for k in ("adjust_to", "slopes")):
            out.append(Deviation("covariate-changed", name, _covariate_text(c), _covariate_text(cb[name]),
                                 f"Covariate {name} changed: locked {_covariate_text(c)}, now {_covariate_text(cb[name])}."))
    return out


def _covariate_text(c: dict) -> str:
    return f"adjust_to = {_text(c.get('adjust_to', 'mean'))}, slopes = {_text(c.get('slopes', 'common'))}"


def _levels(f: dict) -> str:
    return ", ".join(str(x) for x in f.get("levels") or [])


def _exclusions(old: dict, new: dict) -> list[Deviation]:
    out = []
    fa, fb = _factors(old), _factors(new)
    for name in fb:
        if name in fa and list(fa[name].get("exclude") or []) != list(fb[name].get("exclude") or []):
            was, now = list(fa[name].get("exclude") or []), list(fb[name].get("exclude") or [])
            out.append(Deviation("exclusion-rules-changed", f"factors.{name}.exclude", _plain(was), _plain(now),
                                 f"The levels of {name} left out changed: locked {_text(was)}, now {_text(now)}."))
    for table, key in (("data", "missing"), ("study", "exclusion_rules")):
        was, now = _table(old, table).get(key), _table(new, table).get(key)
        if was != now:
            out.append(Deviation("exclusion-rules-changed", f"{table}.{key}", _plain(was), _plain(now),
                                 f"{table}.{key} was {_text(was)} in the locked plan and is now {_text(now)}."))
    return out


def _data_levels(lock: Lock, prep) -> list[Deviation]:
    """Levels that hold data now but that the locked plan did not list."""
    out = []
    design, counts = prep.design, prep.counts
    for j, f in enumerate(design.factors):
        if f.name not in lock.factors:
            continue
        jl = lock.factors.index(f.name)
        locked_levels = {cell[jl] for cell in lock.cells}
        for i, level in enumerate(f.levels):
            if level in locked_levels:
                continue
            n = sum(counts[c.index] for c in design.cells if c.levels[j] == level)
            if n:
                out.append(Deviation("data-level-not-locked", f"{f.name}={level}", None, str(n),
                                     f"The data hold {n} analysed {'row' if n == 1 else 'rows'} at level {level} of "
                                     f"{f.name}, which the locked plan did not list."))
    return out
