"""The results as JSON (schema ``anova-report/results/1``, published in reporter/schema/).

Numbers are JSON numbers at full double precision; rounding is for prose. A value that is not
finite is written as null with a note that says why (``allow_nan=False`` guards the rest).
"""

from __future__ import annotations

import hashlib
import json
import math
from fractions import Fraction
from importlib import resources
from typing import Any

from reporter.intake import defaults as D
from reporter.intake.summary import ROW_LEVEL_STEPS

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


def _effect(es) -> dict[str, Any] | None:
    if es is None:
        return None
    out = {"name": es.name, "value": _num(es.value), "ci": _pair(es.ci), "ci_level": _num(es.ci_level),
           "method": es.method}
    if es.ci_method:
        out["ci_method"] = es.ci_method
    return out


def _robust(r) -> dict[str, Any] | None:
    if r is None:
        return None
    out = {"method": r.method, "test": r.test, "statistic": _num(r.statistic), "df": [_num(d) for d in r.df],
           "p": _num(r.p)}
    if r.estimate is not None:
        out["estimate"] = _num(r.estimate)
    if r.ci is not None:
        out["ci"] = _pair(r.ci)
    if r.note:
        out["note"] = r.note
    return out


def _tost(t) -> dict[str, Any]:
    """Two one-sided tests of an equivalence claim (classical or Welch-type)."""
    return {
        "bounds": _pair(t.bounds),
        "lower": {"bound": _num(t.lower.bound), "statistic": _num(t.lower.statistic), "p": _num(t.lower.p)},
        "upper": {"bound": _num(t.upper.bound), "statistic": _num(t.upper.statistic), "p": _num(t.upper.p)},
        "p": _num(t.p),
        "estimate": _num(t.estimate),
        "se": _num(t.se),
        "df": _num(t.df[0]),
        "ci": _pair(t.ci),
        "ci_level": t.ci_level,
        "decision": t.decision,
    }


def _equivalence_fields(h) -> dict[str, Any]:
    """``equivalence`` for an equivalence claim; ``sd_units`` when constants were written in SDs."""
    c, out = h.contrast, {}
    if c.is_equivalence:
        eq = _tost(h.test)
        rob = None if h.extras is None or h.extras.robust is None else h.extras.robust.equivalence
        eq["welch"] = None if rob is None else _tost(rob)
        eq["confirmatory_decision"] = (rob.decision if rob is not None and h.extras.confirmatory == "robust"
                                       else h.test.decision)
        pw = None if h.extras is None else h.extras.equivalence_power
        eq["power"] = None if pw is None else {
            "bounds_sd": _pair(pw.bounds_sd), "residual_sd": _num(pw.sd), "true_difference_sd": _num(pw.true_difference),
            "alpha": pw.alpha, "power": _num(pw.power_now), "powers": list(pw.powers), "n_per_cell": list(pw.n_per_cell),
        }
        out["equivalence"] = eq
    if c.from_sd is not None:
        out["sd_units"] = {
            "residual_sd": _num(c.from_sd.residual_sd),
            "rhs": [_frac(x) for x in c.from_sd.rhs],
            "bounds": None if c.from_sd.bounds is None else [_frac(x) for x in c.from_sd.bounds],
        }
    return out


def _perm(r) -> dict[str, Any] | None:
    if r is None:
        return None
    return {"method": r.method, "statistic": _num(r.statistic), "p": _num(r.p), "mc_se": _num(r.mc_se),
            "n_permutations": r.n_permutations, "max_permutations": r.max_permutations or r.n_permutations,
            "stopped_early": r.stopped_early, "n_at_least_observed": r.n_extreme, "seed": r.seed}


def _family(fam, on, res, labels) -> dict[str, Any]:
    return {
        "family": fam,
        "method": res.method,
        "on": on,
        "alpha": res.alpha,
        "control": labels[res.control] if res.control is not None else None,
        "comparisons": [
            {"first": labels[c.first], "second": labels[c.second], "difference": _num(c.difference), "se": _num(c.se),
             "statistic": _num(c.statistic), "df": _num(c.df), "p_adjusted": _num(c.p_adjusted),
             "ci": _pair((c.ci_low, c.ci_high))}
            for c in res.comparisons
        ],
    }


def _inference_dict(prep, analysis) -> dict[str, Any]:
    inf = analysis.inference
    if inf is None:
        return {}
    a = inf.assumptions

    def homog(r):
        return None if r is None else {"method": r.method, "center": r.center, "statistic": _num(r.statistic),
                                       "df": [r.df1, r.df2], "p": _num(r.p)}

    sw = a.shapiro
    out = {
        "assumptions": {
            "brown_forsythe": homog(a.brown_forsythe),
            "levene": homog(a.levene),
            "unequal_variances_indicated": a.heterogeneous,
            "shapiro_wilk": _shapiro(sw),
            "qq": None if a.qq is None else {
                "theoretical": [_num(v) for v in a.qq.theoretical], "sample": [_num(v) for v in a.qq.sample],
                "n_residuals": a.qq.n_residuals, "summarized": a.qq.summarized,
                **({"note": f"{len(a.qq.sample)} order statistics at evenly spaced ranks of the "
                            f"{a.qq.n_residuals} residuals"} if a.qq.summarized else {})},
            "outliers": None if a.outliers is None else {
                "threshold": a.outliers.threshold,
                "rule": "externally studentized residual beyond ±threshold",
                "total": a.outliers.total,
                "listed": len(a.outliers.outliers),
                "rows": [{"row": o.row, "cell": analysis.design.cells[o.cell].as_dict(),
                          "residual": _num(o.residual), "studentized": _num(o.external)} for o in a.outliers.outliers],
                **({"note": f"the {len(a.outliers.outliers)} largest of {a.outliers.total} flagged rows are listed"}
                   if a.outliers.total > len(a.outliers.outliers) else {}),
            },
            "notes": list(a.notes) + ([a.unavailable] if a.unavailable else []),
        },
        "unequal_variances_policy": inf.policy,
        "robust": {
            "kruskal_wallis": ({"note": inf.kruskal_note} if inf.kruskal_note else None) if inf.kruskal is None else {
                "statistic": _num(inf.kruskal.statistic), "df": inf.kruskal.df, "p": _num(inf.kruskal.p),
                "over": "cells"},
            "permutation_note": inf.permutation_note,
            "welch_anova": None if inf.welch_oneway is None else {
                "statistic": _num(inf.welch_oneway.statistic), "df": [_num(inf.welch_oneway.df1), _num(inf.welch_oneway.df2)],
                "p": _num(inf.welch_oneway.p)},
        },
        "follow_up": [_family(D.plan_value(D.FOLLOW_UPS, f[0]), *f[1:]) for f in inf.posthoc],
        "not_available": [{"result": what, "reason": why} for what, why in inf.unavailable],
        "games_howell": None if inf.games_howell is None else _family(
            "all-pairs-unequal-variances", "cells", inf.games_howell, tuple(c.short for c in analysis.design.cells)),
    }
    if analysis.fit.has_covariates:
        check = a.slopes
        out["assumptions"]["slopes_homogeneity"] = {
            "covariates": [c.name for c in prep.plan.covariates],
            "F": None if check is None else _num(check.F),
            "df": None if check is None else [check.df1, check.df2],
            "p": None if check is None else _num(check.p),
            "ss_error_common": None if check is None else _num(check.ss_error_common),
            "ss_error_per_cell": None if check is None else _num(check.ss_error_per_cell),
            "note": a.slopes_note,
        }
        out["not_applicable"] = [{"result": what, "reason": why} for what, why in inf.not_applicable]
    if inf.outlier_sensitivity is not None:
        s = inf.outlier_sensitivity
        out["outlier_sensitivity"] = {
            "rows_removed": list(s.rows_removed),
            "n_removed": s.n_removed,
            "tests": [{"name": name, "statistic": None if t is None else _num(t.statistic),
                       "p": None if t is None else _num(t.p), **({"note": note} if note else {})}
                      for name, t, note in s.tests],
        }
    return out


def _shapiro(sw) -> dict[str, Any]:
    out = {"n": sw.n, "n_available": sw.n_available, "statistic": _num(sw.statistic), "p": _num(sw.p),
           "skipped": sw.skipped, "sampled": sw.sampled}
    if sw.skipped:
        out["note"] = sw.reason if sw.reason.startswith("not available") else f"skipped: {sw.reason}"
    elif sw.sampled:
        out["seed"] = sw.seed
        out["note"] = (f"tested on a simple random sample of {sw.n} of the {sw.n_available} residuals (seed {sw.seed}): "
                       "the test's p value approximation holds up to 5,000 values")
    return out


def _summary_dict(info, bounds) -> dict[str, Any]:
    """How a table of cell summaries was read, what it cannot give, and the rounding bounds."""

    def rounding(r):
        return {"column": r.column, "decimals": r.decimals, "half_unit": r.half_unit, "source": r.source,
                "rounded": r.rounded}

    def ends(lo, hi):
        return [_num(lo), _num(hi)]

    out = {
        "spread": info.spread,
        "columns": {"n": info.n_column, "mean": info.mean_column, "spread": info.spread_column},
        "conversion": info.conversion,
        "rounding": {"mean": rounding(info.mean_rounding), "spread": rounding(info.spread_rounding)},
        "not_computed": [{"step": step, "reason": why} for step, why in ROW_LEVEL_STEPS],
        "rounding_bounds": None,
    }
    if bounds is not None:
        note = ("an upper end of null has no bound: the spreads' intervals reach 0 in every cell"
                if any(x.high == math.inf for x in (*bounds.anova, *bounds.hypotheses)) else None)
        out["rounding_bounds"] = {
            "mean_half_unit": bounds.mean_half_unit,
            "spread_half_unit": bounds.spread_half_unit,
            "ss_within": ends(*bounds.ss_within),
            "guarantee": "every value the statistic and its p can take for data whose rounded summaries are the "
                         "ones given lies within [low, high]; exact: both ends are attained by such data",
            "anova": [{"source": x.name, "F": ends(x.low, x.high), "p": ends(x.p_low, x.p_high), "exact": x.exact}
                      for x in bounds.anova],
            "hypotheses": [{"name": x.name, "test": x.test, "statistic": ends(x.low, x.high),
                            "p": ends(x.p_low, x.p_high), "exact": x.exact} for x in bounds.hypotheses],
            **({"note": note} if note else {}),
        }
    return out


def _covariates_dict(plan, analysis) -> dict[str, Any]:
    """The covariates, where the adjusted means are taken, the slopes and the adjusted marginal means."""
    fit, design = analysis.fit, analysis.design
    return {
        "covariates": [
            {"name": s.name, "description": s.description, "slopes": s.slopes,
             "adjust_to": "mean" if s.adjust_to is None else s.adjust_to, "reference": _num(ref)}
            for s, ref in zip(plan.covariates, fit.covariate_reference)],
        "slopes": [
            {"covariate": s.covariate, "cell": None if s.cell is None else design.cells[s.cell].as_dict(),
             "estimate": _num(s.estimate), "se": _num(s.se), "t": _num(s.t), "df": s.df, "p": _num(s.p)}
            for s in fit.slopes],
        "adjusted_marginal_means": [
            {"factor": m.factor, "level": m.level, "mean": _num(m.mean), "se": _num(m.se), "ci": _pair(m.ci),
             **({"note": m.note} if m.note else {})}
            for m in analysis.marginal_means],
    }


def _provenance_more(p) -> dict[str, Any]:
    """Input paths and size, rows, platform, command line, seeds and the lock's hash."""
    r = p.randomness
    return {
        "data_path": p.data_path,
        "plan_path": p.plan_path,
        "paths_relative_to": p.paths_relative_to,
        "data_bytes": p.data_bytes,
        "rows": {"read": p.rows_read, "used": p.rows_used,
                 "excluded": [{"reason": reason, "count": count} for reason, count in p.rows_excluded]},
        "platform": p.platform,
        "argv": None if p.argv is None else list(p.argv),
        "randomness": None if r is None else {
            "seed": r.seed,
            "seed_used_by": list(r.seed_used_by),
            "permutations": r.permutations,
            "permutation_max_rows": r.permutation_max_rows,
            "permutation_stop_after": r.permutation_stop_after,
            "permutations_run": [{"test": test, "permutations": m} for test, m in r.permutations_run],
            "shapiro_wilk_sample": r.shapiro_sample,
            "figure_jitter_seed": r.figure_jitter_seed,
        },
        "lock_sha256": p.lock_sha256,
    }


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
        if analysis.fit.has_covariates:
            entry["adjusted_mean"] = _num(s.adjusted_mean)
            entry["adjusted_se"] = _num(s.adjusted_se)
            entry["adjusted_ci"] = _pair(s.adjusted_ci)
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
        if r.covariate is not None:
            row["covariate"] = r.covariate
        if r.df_hypothesis is not None:
            row["df_hypothesis"] = r.df_hypothesis
            row["tested_contrast"] = [[_frac(w) for w in t] for t in r.tested]
        extra = analysis.inference.rows[len(rows)] if analysis.inference else None
        if extra is not None and extra.effect_sizes is not None:
            es = extra.effect_sizes
            row["effect_sizes"] = [_effect(e) for e in es.effect_sizes()]
            row["effect_size_interval_rule"] = es.ci_rule
            row["noncentrality_mapping"] = es.noncentrality_mapping
            row["robust"] = _robust(extra.robust)
            row["permutation"] = _perm(extra.permutation)
            sens = extra.sensitivity
            row["sensitivity"] = {"powers": list(sens.powers), "detectable_cohens_f": [_num(f) for f in sens.detectable_f],
                                  "alpha": sens.alpha, "convention": sens.convention}
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
                "coefficients": [[_frac(w) for w in row] + [0.0] * len(design.covariates) for row in c.beta_weights],
                "rhs": [_frac(x) for x in c.rhs],
            },
            "notes": list(h.notes),
        }
        if h.extras is not None:
            e = h.extras
            entry["effect_size"] = _effect(e.effect_size)
            if e.effect_size_note:
                entry["effect_size_note"] = e.effect_size_note
            entry["effect_sizes"] = [_effect(x) for x in e.effect_sizes]
            entry["robust"] = _robust(e.robust)
            entry["permutation"] = _perm(e.permutation)
            entry["confirmatory"] = {"test": e.confirmatory, "p": _num(e.confirmatory_p), "reason": e.reason}
        if t.test == "t":
            entry.update(
                estimate=_num(t.estimate),
                se=_num(t.se),
                ci=_pair(t.ci),
                ci_sides=t.ci_sides,
                ci_level=t.ci_level,
            )
        entry.update(_equivalence_fields(h))
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
            "data_reader": provenance.data_reader,
            "exact_decimal_intake": data.exact_decimal,
            **_provenance_more(provenance),
            "software": dict(provenance.software),
            "created": provenance.created,
        },
        "analysis": {
            "alpha": a.alpha,
            "confidence_level": 1 - a.alpha,
            "coding": D.plan_value(D.CODINGS, a.parameterization),
            "sums_of_squares": D.plan_value(D.SUMS_OF_SQUARES, a.ss_type),
            "correction": a.correction,
            "unequal_variances": a.unequal_variances,
            "follow_up": [D.plan_value(D.FOLLOW_UPS, f) for f in a.posthoc],
            "follow_up_compares": a.posthoc_on,
            "follow_up_control": a.control,
            "permutations": a.permutations,
            "permutation_max_rows": a.permutation_max_rows,
            "seed": a.seed,
        },
        "data": {
            "outcome": data.outcome,
            "n_read": data.n_read,
            "n_analysed": analysis.cells.n_total,
            "layout": plan.data.layout,
            "exclusions": [
                {"reason": e.reason, "count": e.count, "rows": list(e.rows), "detail": e.detail}
                for e in data.exclusions
            ],
        },
        "design": {
            "factors": [{"name": f.name, "levels": list(f.levels)} for f in design.factors],
            "coding": D.plan_value(D.CODINGS, design.parameterization),
            "matrix": [[int(v) for v in row] for row in design.matrix],
            "coefficients": coefficients,
        },
        "cells": cells,
        "anova": {
            "sums_of_squares": D.plan_value(D.SUMS_OF_SQUARES, table.ss_type),
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
    if data.summary is not None:
        doc["data"]["summary"] = _summary_dict(data.summary, analysis.rounding)
    if analysis.fit.has_covariates:
        doc["design"]["covariate_columns"] = [
            {"symbol": col.symbol, "covariate": col.covariate,
             "cell": None if col.cell is None else design.cells[col.cell].as_dict(),
             "label": col.label, "meaning_words": col.meaning_words(design)} for col in design.covariates]
        doc.update(_covariates_dict(plan, analysis))
    doc.update(_inference_dict(prep, analysis))
    doc["lock"] = _lock_dict(getattr(prep, "lock", None))
    return doc


#: The field of results.json that holds the SHA-256 of the rest of the document in canonical form.
DIGEST_FIELD = "results_sha256"


def canonical_json(doc: dict[str, Any]) -> bytes:
    """The canonical form of a results document: every field except :data:`DIGEST_FIELD`, keys
    sorted at every depth, separators "," and ":" with no spaces, text as UTF-8 (not escaped),
    numbers as Python's ``json`` writes them (the shortest text that reads back as the same
    double), NaN and infinities refused."""
    rest = {k: v for k, v in doc.items() if k != DIGEST_FIELD}
    return json.dumps(rest, sort_keys=True, separators=(",", ":"), ensure_ascii=False, allow_nan=False).encode("utf-8")


def results_digest(doc: dict[str, Any]) -> str:
    """The SHA-256 (hex) of :func:`canonical_json`: changes whenever any value of the document does."""
    return hashlib.sha256(canonical_json(doc)).hexdigest()


def _lock_dict(check) -> dict[str, Any] | None:
    """The comparison with the locked plan (reporter.trail.deviations.LockCheck), or None."""
    if check is None:
        return None
    return {
        "file": check.path.name,
        "sha256": check.sha256,
        "canonical_plan_sha256": check.canonical_sha256,
        "created": check.created,
        "matched": check.matched,
        "deviations": [{"kind": d.kind, "subject": d.subject, "locked": d.locked, "now": d.now, "text": d.text}
                       for d in check.deviations],
        "added_after_lock": list(check.added),
    }


def with_digest(doc: dict[str, Any]) -> dict[str, Any]:
    """The document with :data:`DIGEST_FIELD` (the digest of every other field) as its last field."""
    return {**{k: v for k, v in doc.items() if k != DIGEST_FIELD}, DIGEST_FIELD: results_digest(doc)}


def render_json(doc: dict[str, Any]) -> bytes:
    """Serialize with the digest of the rest as the last field; refuses NaN and Infinity (they
    must have become null with a note)."""
    return (json.dumps(with_digest(doc), ensure_ascii=False, indent=2, allow_nan=False) + "\n").encode("utf-8")


def load_schema() -> dict[str, Any]:
    """The published JSON Schema of results.json."""
    text = resources.files("reporter.schema").joinpath("results-1.schema.json").read_text(encoding="utf-8")
    return json.loads(text)
