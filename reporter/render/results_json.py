"""The results as JSON (schema ``anova-report/results/1``, published in reporter/schema/).

Numbers are JSON numbers at full double precision; rounding is for prose. A value that is not
finite is written as null with a note that says why (``allow_nan=False`` guards the rest).
"""

from __future__ import annotations

import json
import math
from fractions import Fraction
from importlib import resources
from typing import Any

SCHEMA_ID = "anova-report/results/1"


def _num(x) -> float | int | None:
    if x is None:
        return None
    if isinstance(x, (int,)) and not isinstance(x, bool):
        return int(x)
    x = float(x)
    return x if math.isfinite(x) else None


def _frac(x: Fraction) -> float:
    return float(x)


def _pair(ci):
    return None if ci is None else [_num(ci[0]), _num(ci[1])]


def results_dict(prep, analysis, provenance) -> dict[str, Any]:
    """The results document as plain Python values, ready for ``json.dumps``."""
    plan, data, design = prep.plan, prep.data, analysis.design
    notes: list[str] = []
    cells = []
    for c, s in zip(design.cells, analysis.summaries):
        entry = {
            "levels": c.as_dict(),
            "n": s.n,
            "mean": _num(s.mean),
            "sd": _num(s.sd),
            "se": _num(s.se),
            "ci": _pair(s.ci),
            "ci_pooled": _pair(s.ci_pooled),
        }
        if s.n == 0:
            entry["note"] = "empty cell: no data, so no mean, SD or CI"
        elif s.n == 1:
            entry["note"] = "one observation: SD, SE and the cell's own CI are undefined"
        cells.append(entry)

    table = analysis.anova
    rows = []
    for r in table.rows:
        row = {"source": r.source, "factors": list(r.factors), "df": r.df, "ss": _num(r.ss), "ms": _num(r.ms),
               "F": _num(r.F), "p": _num(r.p)}
        if r.note:
            row["note"] = r.note
        rows.append(row)
    rows.append({"source": "residual", "df": table.df_error, "ss": _num(table.ss_error), "ms": _num(table.ms_error)})

    fit = analysis.fit
    coefficients = []
    for coef, est, se, ok in zip(design.coefficients, fit.coefficients, fit.coefficient_se, fit.estimable):
        entry = {
            "symbol": coef.symbol,
            "label": coef.label,
            "meaning": coef.meaning_text(design),
            "meaning_words": coef.meaning_words(design),
            "weights": [_frac(w) for w in coef.weights],
            "estimable": ok,
            "estimate": _num(est),
            "se": _num(se),
        }
        if not ok:
            entry["note"] = "not estimable: the empty cells leave this coefficient undetermined"
        coefficients.append(entry)

    hyps = []
    for h in analysis.hypotheses:
        c, t = h.contrast, h.test
        entry = {
            "name": c.name,
            "statement": c.statement,
            "kind": c.kind,
            "role": c.role,
            "family": h.family,
            "null": c.null_text(),
            "alternative_hypothesis": c.alternative_text(),
            "test": t.test,
            "alternative": t.alternative,
            "df": [_num(d) for d in t.df],
            "statistic": _num(t.statistic),
            "p": _num(t.p),
            "p_adjusted": _num(h.p_adjusted),
            "correction": h.correction,
            "ss": _num(t.ss),
            "contrast": {
                "cells": [[_frac(w) for w in row] for row in c.weights],
                "coefficients": [[_frac(w) for w in row] for row in c.beta_weights],
                "rhs": [_frac(x) for x in c.rhs],
            },
            "notes": list(h.notes),
        }
        if t.test == "t":
            entry.update(
                estimate=_num(t.estimate),
                se=_num(t.se),
                ci=_pair(t.ci),
                ci_sides=t.ci_sides,
                ci_level=t.ci_level,
            )
        hyps.append(entry)

    a = plan.analysis
    doc = {
        "schema": SCHEMA_ID,
        "title": plan.title,
        "provenance": {
            "data_sha256": provenance.data_sha256,
            "plan_sha256": provenance.plan_sha256,
            "data_file": provenance.data_file,
            "plan_file": provenance.plan_file,
            "data_format": provenance.data_format,
            "exact_decimal_intake": data.exact_decimal,
            "software": dict(provenance.software),
            "created": provenance.created,
        },
        "analysis": {
            "alpha": a.alpha,
            "confidence_level": 1 - a.alpha,
            "parameterization": a.parameterization,
            "ss_type": a.ss_type,
            "correction": a.correction,
        },
        "data": {
            "outcome": data.outcome,
            "n_read": data.n_read,
            "n_analysed": data.n,
            "exclusions": [
                {"reason": e.reason, "count": e.count, "rows": list(e.rows), "detail": e.detail}
                for e in data.exclusions
            ],
        },
        "design": {
            "factors": [{"name": f.name, "levels": list(f.levels)} for f in design.factors],
            "parameterization": design.parameterization,
            "matrix": [[int(v) for v in row] for row in design.matrix],
            "coefficients": coefficients,
        },
        "cells": cells,
        "anova": {
            "ss_type": table.ss_type,
            "ss_label": table.label,
            "rows": rows,
            "total": {"df": table.df_total, "ss": _num(table.ss_total)},
            "r_squared": _num(table.r_squared),
            "residual_sd": _num(table.residual_sd),
            "balanced": table.balanced,
            "types_agree": table.types_agree,
            "notes": list(table.notes),
        },
        "hypotheses": hyps,
        "notes": notes,
    }
    return doc


def render_json(doc: dict[str, Any]) -> bytes:
    """Serialize; refuses NaN and Infinity (they must have become null with a note)."""
    return (json.dumps(doc, ensure_ascii=False, indent=2, allow_nan=False) + "\n").encode("utf-8")


def load_schema() -> dict[str, Any]:
    """The published JSON Schema of results.json."""
    text = resources.files("reporter.schema").joinpath("results-1.schema.json").read_text(encoding="utf-8")
    return json.loads(text)
