"""Plain-text view of a prepared analysis for the terminal (``anova-report check``).

Control and bidirectional-formatting characters in user text (a terminal obeys escape
sequences; an override reverses what follows) are written as ``\\uXXXX``
(:mod:`reporter.render.visible`): in each table cell before the columns are measured, and
over the whole view at the end, where only the newlines between lines are kept.
"""

from __future__ import annotations

from fractions import Fraction

import numpy as np

from reporter.intake.defaults import CODINGS, plan_value
from reporter.render.visible import show_controls


def _fr(x: Fraction) -> str:
    if x == 0:
        return "0"
    return str(x.numerator) if x.denominator == 1 else f"{x.numerator}/{x.denominator}"


def _table(header: list[str], rows: list[list[str]], right: set[int] = frozenset()) -> list[str]:
    header = [show_controls(str(v)) for v in header]
    rows = [[show_controls(str(v)) for v in r] for r in rows]
    widths = [max(len(str(r[i])) for r in [header, *rows]) for i in range(len(header))]
    def fmt(r):
        return "  ".join(str(v).rjust(w) if i in right else str(v).ljust(w) for i, (v, w) in enumerate(zip(r, widths))).rstrip()
    return [fmt(header), "  ".join("-" * w for w in widths).rstrip(), *(fmt(r) for r in rows)]


def render_check(prep, checks=()) -> str:
    """Cells with n, the design matrix, coefficient meanings, every compiled contrast and the
    data checks (``checks``: :class:`reporter.checks.Finding` values)."""
    plan, data, design = prep.plan, prep.data, prep.design
    title = show_controls(plan.title)
    out: list[str] = [title, "=" * min(len(title), 78), ""]
    out.append(f"Plan   {plan.source or '(built in Python)'}")
    out.append(f"Data   {data.source}  ({data.format}, {data.n_read} rows read, {data.n} analysed)")
    for e in data.exclusions:
        rows = ", ".join(str(r) for r in e.rows[:8]) + (" ..." if e.count > 8 else "")
        extra = f"  [{e.detail}]" if e.detail else ""
        out.append(f"       left out: {e.count} row(s), {e.reason} (at {rows}){extra}")
    if data.exact_decimal:
        out.append(f"       outcome read as exact decimals, centred at {data.pivot_text} before conversion")
    out.append("")

    out.append(f"Cells ({design.k})")
    names = [f.name for f in design.factors]
    rows = [[*c.levels, str(n)] + (["empty: no data"] if n == 0 else []) for c, n in zip(design.cells, prep.counts)]
    width = max(len(r) for r in rows)
    rows = [r + [""] * (width - len(r)) for r in rows]
    out += ["  " + line for line in _table([*names, "n", ""][:width], rows, right={len(names)})]
    out.append("")

    coefs = design.coefficients
    out.append(f"Design matrix, coding \"{plan_value(CODINGS, design.parameterization)}\": one row per cell, "
               "with the number of data rows it stands for")
    header = ["/".join(names) if len(names) > 1 else "cell", *[c.symbol for c in coefs], "rows"]
    rows = [[c.short, *[str(int(v)) for v in design.matrix[c.index]], str(n)]
            for c, n in zip(design.cells, prep.counts) if n > 0]
    out += ["  " + line for line in _table(header, rows, right=set(range(1, len(header))))]
    out.append("  columns: " + "; ".join(f"{c.symbol} = {c.label}" for c in coefs))
    check = design.check_indicator_rule(prep.counts)
    if check.holds:
        out.append("  Every column is a 0/1 group indicator and each row has one 1: each β is the mean of its group.")
    else:
        out.append("  Not plain group indicators, so a β is not simply a group mean:")
        out += [f"    - {f}" for f in check.failures]
    out.append("")

    out.append("What each coefficient estimates (β = D⁻¹·μ)")
    estimable = design.estimable(prep.counts)
    for c, ok in zip(coefs, estimable):
        tail = "" if ok else "   NOT ESTIMABLE with the empty cells"
        out.append(f"  {c.symbol} = {c.meaning_text(design)}{tail}")
        out.append(f"       {c.meaning_words(design)}")
    if any(not ref.fixed for co in coefs for _, ref in co.meaning):
        out.append(f"  μ̄ is the average of the {design.k} cell means (each cell counts once, whatever its n).")
    out.append("")

    out.append(f"Hypotheses ({len(prep.contrasts)})")
    for i, h in enumerate(prep.contrasts, start=1):
        test = ("one-sided t" if h.alternative in ("greater", "less") else
                "two one-sided t tests (equivalence)" if h.is_equivalence else
                ("two-sided t" if h.test == "t" else f"F with {h.q} numerator df"))
        out.append(f"  [{i}] {h.name}  ({h.role}; {test})")
        if h.kind == "means":
            out.append(f"      statement  {h.statement}")
        else:
            out.append(f"      effect     {h.statement} (unweighted marginal means)")
        out.append(f"      H0: {h.null_text()}")
        out.append(f"      H1: {h.alternative_text()}")
        for n in h.notes:
            out.append(f"      note: {n}")
        unit = " sd" if h.unit == "sd" else ""
        rel, rhs = ("=", [_fr(r) + unit for r in h.rhs]) if not h.is_equivalence else \
            ("in", [f"({_fr(h.bounds[0])}{unit}, {_fr(h.bounds[1])}{unit})"])
        cell_rows = [[_fr(w) for w in row] + [rel, r] for row, r in zip(h.weights, rhs)]
        out.append("      over cell means (C·μ = h)" + (f", cells named {'/'.join(names)}:" if len(names) > 1 else ":"))
        out += ["        " + line for line in _table([c.short for c in design.cells] + ["", "h"], cell_rows, right=set(range(design.k + 2)))]
        beta_rows = [[_fr(w) for w in row] + [rel, r] for row, r in zip(h.beta_weights, rhs)]
        out.append("      over coefficients (L·β = h, L = C·D):")
        out += ["        " + line for line in _table([c.symbol for c in coefs] + ["", "h"], beta_rows, right=set(range(len(coefs) + 2)))]
    out.append("")
    if checks:
        out.append("Data checks")
        out += [f"  {c.status:<7} {c.check}: {c.message}" for c in checks]
        out.append("")
    if any(c.status == "failed" for c in checks):
        out.append("Nothing was written. Fix the failed data checks above before 'anova-report run'.")
    else:
        out.append("Nothing was written. Run 'anova-report run' to fit and write the report.")
    return show_controls("\n".join(out), keep="\n")
