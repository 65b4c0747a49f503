"""A validated plan written back out: as a plain mapping and as the text of a plan file.

:func:`plan_mapping` gives every key of the plan by the name a plan file uses (``coding``,
``sums_of_squares``, ``follow_up``, ``follow_up_compares``, ``follow_up_control``, ...), with
every default of :mod:`reporter.intake.defaults` filled in. Its values are plain ``dict``,
``list``, ``str``, ``int``, ``float`` and ``bool``, in a fixed order, so the mapping can be
written as JSON or TOML and compared or hashed as it stands. TOML has no null: a key whose value
is "not set" (``summary``, ``data.delimiter``, ``follow_up_control``, a factor's ``column``, a
hypothesis's ``description``, a ``[study]`` text, ...) is left out, which is what a plan file
does to say the same thing.

:func:`plan_toml` writes that mapping as a plan file that :func:`~reporter.intake.plan.load_plan`
reads back to an equal :class:`~reporter.intake.plan.Plan` (same data path, factors, analysis
options and hypotheses). TOML v1.0.0 (https://toml.io/en/v1.0.0) is the format; the writer covers
the fixed shape of a plan only, so no TOML library is needed to write one.
"""

from __future__ import annotations

import math
import os
from pathlib import Path
from typing import Any

from reporter.intake import defaults as D
from reporter.intake.plan import Plan, StudySpec

__all__ = ["plan_mapping", "plan_toml", "data_path_text"]


def data_path_text(plan: Plan) -> str:
    """The ``[data] path`` as a plan file would write it, with "/" between folders.

    For a plan read from a file, the path relative to that file's folder (the form the plan file
    uses, so the mapping does not change when the project folder moves); otherwise the plan's path
    as it stands.
    """
    path = Path(plan.data.path)
    if plan.source is not None:
        try:
            folder = Path(plan.source).parent
            # The plan's source is resolved; resolve the data file's folder alike (not the file,
            # which may be a link or a pattern of several files).
            full = Path(os.path.abspath(path.parent)).resolve() / path.name
            return Path(os.path.relpath(full, folder)).as_posix()
        except (OSError, ValueError, RuntimeError):  # another drive, or an unreadable folder
            pass
    return path.as_posix()


def plan_mapping(plan: Plan) -> dict[str, Any]:
    """Every key of ``plan`` by its plan-file name, every default filled in (see the module)."""
    out: dict[str, Any] = {"title": plan.title}
    if plan.summary is not None:
        out["summary"] = plan.summary
    out["data"] = _data(plan)
    out["factors"] = [_factor(f) for f in plan.factors]
    if plan.covariates:  # left out when there are none, as a plan file without [[covariates]] does
        out["covariates"] = [_covariate(c) for c in plan.covariates]
    out["analysis"] = _analysis(plan)
    out["hypotheses"] = [_hypothesis(h) for h in plan.hypotheses]
    out["study"] = {
        key: getattr(plan.study, key)
        for key in StudySpec.__dataclass_fields__
        if getattr(plan.study, key) is not None
    }
    if plan.planning is not None:
        out["planning"] = _planning(plan.planning)
    return out


def _planning(p) -> dict[str, Any]:
    """The ``[planning]`` table: the keys it sets, and its powers."""
    out: dict[str, Any] = {
        key: float(getattr(p, key))
        for key in ("smallest_effect_f", "smallest_effect_d", "smallest_difference", "assumed_sd")
        if getattr(p, key) is not None
    }
    out["powers"] = [float(x) for x in p.powers]
    return out


def _data(plan: Plan) -> dict[str, Any]:
    d = plan.data
    out: dict[str, Any] = {"path": data_path_text(plan), "outcome": d.outcome}
    if d.delimiter is not None:
        out["delimiter"] = d.delimiter
    out["decimal"] = d.decimal
    out["missing"] = list(d.missing)
    out["layout"] = d.layout
    out["reader"] = d.reader
    if d.summary is not None:
        s = d.summary
        out.update(n_column=s.n_column, mean_column=s.mean_column, spread=s.spread, spread_column=s.spread_column)
        if s.mean_decimals is not None:
            out["mean_decimals"] = s.mean_decimals
        if s.spread_decimals is not None:
            out["spread_decimals"] = s.spread_decimals
    return out


def _factor(f) -> dict[str, Any]:
    out: dict[str, Any] = {"name": f.name, "levels": list(f.levels), "exclude": list(f.exclude)}
    if f.column is not None:
        out["column"] = f.column
    return out


def _covariate(c) -> dict[str, Any]:
    """One ``[[covariates]]`` table with its defaults; ``adjust_to`` a whole number when the
    plan gave one, else the float64 (whose shortest decimal the plan reader takes as exact)."""
    out: dict[str, Any] = {"name": c.name}
    if c.adjust_to_exact is None:
        out["adjust_to"] = "mean"
    elif c.adjust_to_exact.denominator == 1 and -(2**63) <= c.adjust_to_exact < 2**63:  # TOML's integers
        out["adjust_to"] = int(c.adjust_to_exact)
    else:
        out["adjust_to"] = float(c.adjust_to)
    out["slopes"] = c.slopes
    if c.description is not None:
        out["description"] = c.description
    missing = [k for k in D.COVARIATES_DEFAULTS if k not in out and D.COVARIATES_DEFAULTS[k] is not None]
    if missing:  # a key added to the defaults must be added here too
        raise AssertionError(f"plan_mapping does not write [[covariates]] {', '.join(missing)}")
    return out


def _analysis(plan: Plan) -> dict[str, Any]:
    a = plan.analysis
    out: dict[str, Any] = {
        "alpha": float(a.alpha),
        "coding": D.plan_value(D.CODINGS, a.parameterization),
        "sums_of_squares": D.plan_value(D.SUMS_OF_SQUARES, a.ss_type),
        "correction": a.correction,
        "follow_up": [D.plan_value(D.FOLLOW_UPS, f) for f in a.posthoc],
        "follow_up_compares": a.posthoc_on,
    }
    if a.control is not None:
        out["follow_up_control"] = a.control
    out.update(
        unequal_variances=a.unequal_variances,
        permutations=int(a.permutations),
        seed=int(a.seed),
        permutation_max_rows=int(a.permutation_max_rows),
    )
    missing = [k for k in D.ANALYSIS_DEFAULTS if k not in out and D.ANALYSIS_DEFAULTS[k] is not None]
    if missing:  # a key added to the defaults must be added here too
        raise AssertionError(f"plan_mapping does not write [analysis] {', '.join(missing)}")
    return out


def _hypothesis(h) -> dict[str, Any]:
    out: dict[str, Any] = {"name": h.name}
    if h.means is not None:
        out["means"] = h.means
    else:
        out["effect"] = h.effect
    out["role"] = h.role
    if h.description is not None:
        out["description"] = h.description
    return out


# ---------------------------------------------------------------------------------------------
# TOML


def plan_toml(plan: Plan, *, header: str | None = None) -> str:
    """The plan file of ``plan``: :func:`plan_mapping` written as TOML.

    ``header`` is an optional comment put on the first lines (each line gets a ``#``).
    """
    return mapping_toml(plan_mapping(plan), header=header)


def mapping_toml(doc: dict[str, Any], *, header: str | None = None) -> str:
    """Write a mapping of the shape :func:`plan_mapping` returns as TOML text.

    Top-level plain values come first, then the tables (``[data]``, ``[analysis]``, ``[study]``)
    and the arrays of tables (``[[factors]]``, ``[[hypotheses]]``) in the order of the mapping.
    """
    lines: list[str] = []
    if header:
        lines += [f"# {line}".rstrip() for line in header.splitlines()]
        lines.append("")
    sections: list[tuple[str, Any]] = []
    for key, value in doc.items():
        if isinstance(value, dict) or (isinstance(value, list) and value and all(isinstance(v, dict) for v in value)):
            sections.append((key, value))
        else:
            lines.append(f"{_key(key)} = {_value(value)}")
    for key, value in sections:
        tables = [value] if isinstance(value, dict) else value
        opener = f"[{_key(key)}]" if isinstance(value, dict) else f"[[{_key(key)}]]"
        for table in tables:
            lines.append("")
            lines.append(opener)
            for k, v in table.items():
                lines.append(f"{_key(k)} = {_value(v)}")
    return "\n".join(lines).lstrip("\n") + "\n"


def _key(key: str) -> str:
    if key and all(c.isascii() and (c.isalnum() or c in "_-") for c in key):
        return key
    return _string(key)


def _value(value: Any) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if not math.isfinite(value):
            return ("-inf" if value < 0 else "inf") if math.isinf(value) else "nan"
        text = repr(value)
        return text if any(c in text for c in ".eE") else text + ".0"
    if isinstance(value, str):
        return _string(value)
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(_value(v) for v in value) + "]"
    raise TypeError(f"cannot write {type(value).__name__} as a plan value")


_ESCAPES = {"\\": "\\\\", '"': '\\"', "\b": "\\b", "\t": "\\t", "\n": "\\n", "\f": "\\f", "\r": "\\r"}


def _string(text: str) -> str:
    """A TOML basic string: quotes, backslashes and every control character escaped."""
    out = []
    for ch in text:
        if ch in _ESCAPES:
            out.append(_ESCAPES[ch])
        elif ord(ch) < 0x20 or ord(ch) == 0x7F:
            out.append(f"\\u{ord(ch):04X}")
        elif 0xD800 <= ord(ch) <= 0xDFFF:
            raise ValueError(f"the text {text[:40]!r} holds a lone surrogate (U+{ord(ch):04X}), which TOML cannot hold")
        else:
            out.append(ch)
    return '"' + "".join(out) + '"'
