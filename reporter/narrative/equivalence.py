"""Wording of equivalence claims and minimum-effect (margin) claims.

An equivalence claim ``LOW < c'mu < HIGH`` is tested by two one-sided tests (Schuirmann 1987,
Journal of Pharmacokinetics and Biopharmaceutics 15, 657-680); the report names one of three
outcomes and never reads a non-significant test of difference as equivalence:

* equivalent: both one-sided tests reject (the 1 − 2α interval lies inside the bounds), and the
  larger one-sided p, adjusted within its family, is below α;
* not equivalent: the 1 − 2α interval lies entirely outside the bounds;
* inconclusive: neither (the interval overlaps a bound), or equivalent before but not after the
  multiplicity adjustment.

Bounds written in residual SDs (``0.3 sd``) are converted with the residual SD estimated from the
same data, so the bounds are themselves estimates (Lakens 2017, "Equivalence tests: a practical
primer for t tests, correlations, and meta-analyses", Social Psychological and Personality
Science 8, 355-362); the report says so beside the raw-unit bounds.

A one-sided claim against a nonzero constant (``a - b > 2``, ``a - b > -0.3 sd``) is a
minimum-effect (superiority by a margin) or non-inferiority claim: the one-sided t against that
constant, not against 0.
"""

from __future__ import annotations

from reporter.fitting.equivalence import EQUIVALENT, INCONCLUSIVE, NOT_EQUIVALENT
from reporter.model.hypotheses import constant_text
from reporter.narrative import numbers as N
from reporter.narrative.document import Column, FigureSpec, Figure, Table, runs_of

__all__ = ["test_kind", "claim_decision", "decision_reading", "equivalence_items", "equivalence_table", "equivalence_figure",
           "power_table", "margin_kind", "margin_words", "result_claim", "words"]


def _num(x, d: int = 2) -> str:
    return N.format_number(x, d)


def _sd(value) -> str:
    """A constant written in SDs, as a number with the minus sign of the report (−0.3)."""
    return constant_text(value, "sd").replace(" sd", "").replace("-", N.MINUS)


def _pvalue_used(h) -> float:
    return h.p_adjusted if h.p_adjusted is not None else h.test.p


def confirmatory_tost(h):
    """The two one-sided tests that decide: the Welch-type version when the plan's policy made
    the robust test confirmatory, else the classical one."""
    e = h.extras
    if e is not None and e.confirmatory == "robust" and e.robust is not None and e.robust.equivalence is not None:
        return e.robust.equivalence
    return h.test


def claim_decision(h, alpha: float) -> tuple[str, bool]:
    """The reported decision word and whether the multiplicity adjustment turned "equivalent" into
    "inconclusive"."""
    word = confirmatory_tost(h).decision
    if word == EQUIVALENT and _pvalue_used(h) >= alpha:
        return INCONCLUSIVE, True
    return word, False


def _bounds_text(h) -> str:
    """"between −0.75 and 0.75 (±0.3 residual SD, with the residual SD 2.50 estimated from these data)"."""
    c = h.contrast
    low, high = (float(b) for b in c.bounds)
    text = f"between {_num(low)} and {_num(high)}"
    if c.from_sd is not None:
        lo_sd, hi_sd = c.from_sd.bounds
        sd_words = (f"±{_sd(hi_sd)} residual SD" if lo_sd == -hi_sd else
                    f"{_sd(lo_sd)} to {_sd(hi_sd)} residual SD")
        text += (f" ({sd_words}; the residual SD, {_num(c.from_sd.residual_sd)}, is estimated from these data, so "
                 "these bounds are estimates too)")
    return text


def words(h, outcome: str) -> str:
    """"In words: ..." for an equivalence claim."""
    mid, _, _ = h.contrast.equivalence_parts()
    return (f"In words: the claim is that {mid.replace('`', '')} lies {_bounds_text(h)} in units of {outcome}, that is, "
            "within bounds the plan states in advance as too small to matter. The null hypothesis is that it lies on "
            "or beyond either bound; two one-sided tests, one against each bound, must both reject it "
            "(Schuirmann, 1987).")


def equivalence_items(h, alpha: float) -> list[tuple]:
    """Definition-list items: the two one-sided tests, the 1 − 2α interval, the decision."""
    t = confirmatory_tost(h)
    which = "Welch-type " if t is not h.test else ""
    level = N.format_confidence_level(t.ci_level)
    items = [
        (runs_of("Lower test"), runs_of(f"H0: estimate ≤ {_num(t.lower.bound)}; ", N.stat_t(t.lower.statistic, t.df[0]),
                                        ", one-sided ", N.stat_p(t.lower.p))),
        (runs_of("Upper test"), runs_of(f"H0: estimate ≥ {_num(t.upper.bound)}; ", N.stat_t(t.upper.statistic, t.df[0]),
                                        ", one-sided ", N.stat_p(t.upper.p))),
        (runs_of("Interval"), runs_of(f"estimate {_num(t.estimate)}, {which}",
                                      N.stat_ci(t.ci[0], t.ci[1], t.ci_level),
                                      f" (the {level} interval, 1 − 2α, matches the two tests at α = "
                                      f"{N.format_bounded(alpha, 2)} each)")),
    ]
    word, adjusted = claim_decision(h, alpha)
    items.append((runs_of("Decision"), runs_of(word + (" after the multiplicity adjustment" if adjusted else ""))))
    return items


def decision_reading(h, alpha: float, adj: str, exploratory: bool) -> str:
    """The reading of the three outcomes; a non-significant difference is never read as equivalence."""
    t = confirmatory_tost(h)
    word, adjusted = claim_decision(h, alpha)
    level = N.format_confidence_level(t.ci_level)
    lo, hi = (_num(x) for x in t.ci)
    low, high = (_num(x) for x in t.bounds)
    a = N.format_bounded(alpha, 2)
    explor = (" As an exploratory result it suggests what to test next rather than confirming anything."
              if exploratory else "")
    if word == EQUIVALENT:
        return (f"Reading: equivalent. The {level} interval [{lo}, {hi}] lies inside the bounds ({low}, {high}) and "
                f"both one-sided tests reject at α = {a} ({adj} p): differences as large as the bounds are not "
                f"compatible with the data. This supports a difference too small to matter by the plan's bounds; "
                f"it does not show a difference of exactly zero.{explor}")
    if word == NOT_EQUIVALENT:
        side = "below the lower" if t.ci[1] < t.bounds[0] else "above the upper"
        return (f"Reading: not equivalent. The whole {level} interval [{lo}, {hi}] lies {side} bound, so the "
                f"difference is larger than the plan's bounds allow.{explor}")
    if adjusted:
        return (f"Reading: inconclusive. The {level} interval [{lo}, {hi}] lies inside the bounds ({low}, {high}), "
                f"but after the multiplicity adjustment the larger one-sided p is not below α = {a} ({adj} p), so "
                f"equivalence is not claimed.{explor}")
    return (f"Reading: inconclusive. The {level} interval [{lo}, {hi}] overlaps a bound ({low}, {high}): the data "
            f"show neither equivalence nor a difference beyond the bounds. A test of difference that is not "
            f"significant would not show equivalence either; more data would narrow the interval.{explor}")


def result_claim(h, alpha: float) -> str:
    """The clause of the Results paragraph."""
    word, adjusted = claim_decision(h, alpha)
    if word == EQUIVALENT:
        return f"equivalent within the bounds {_bounds_text(h)}"
    if word == NOT_EQUIVALENT:
        return f"not equivalent: the difference lies beyond the bounds {_bounds_text(h)}"
    tail = " after the multiplicity adjustment" if adjusted else ""
    return (f"inconclusive: neither equivalence nor a difference beyond the bounds {_bounds_text(h)} was "
            f"shown{tail}")


def equivalence_table(hyps, alpha: float, outcome: str) -> Table | None:
    """One row per equivalence claim: bounds (raw, and in SD), estimate, the 1 − 2α interval, the
    two one-sided p values and the decision."""
    rows = []
    for i, h in hyps:
        if not h.contrast.is_equivalence:
            continue
        t = confirmatory_tost(h)
        c = h.contrast
        sd = "—" if c.from_sd is None else "[{}, {}]".format(*(_sd(b) for b in c.from_sd.bounds))
        rows.append((runs_of(f"{i}. {c.name}"), runs_of(f"[{_num(t.bounds[0])}, {_num(t.bounds[1])}]"), runs_of(sd),
                     runs_of(_num(t.estimate)), runs_of(f"[{_num(t.ci[0])}, {_num(t.ci[1])}]"),
                     runs_of(N.format_p_cell(t.lower.p)), runs_of(N.format_p_cell(t.upper.p)),
                     runs_of(claim_decision(h, alpha)[0])))
    if not rows:
        return None
    level = N.format_confidence_level(1 - 2 * alpha)
    cols = (Column(runs_of("claim")), Column(runs_of(f"bounds ({outcome})"), "right", nowrap=True),
            Column(runs_of("bounds (SD)"), "right", nowrap=True), Column(runs_of("estimate"), "right"),
            Column(runs_of(f"{level} ", N.symbol("CI")), "right", nowrap=True),
            Column(runs_of(N.symbol("p"), " lower"), "right"), Column(runs_of(N.symbol("p"), " upper"), "right"),
            Column(runs_of("decision")))
    notes = [runs_of(
        "Two one-sided tests (Schuirmann, 1987): equivalent when the ", f"{level} interval lies inside the bounds "
        "(both one-sided p below α, after any multiplicity adjustment of the larger one); not equivalent when it lies "
        "entirely outside them; otherwise inconclusive. An interval that touches a bound is inconclusive.")]
    if any(h.contrast.from_sd is not None for _, h in hyps if h.contrast.is_equivalence):
        notes.append(runs_of("Bounds in SD are in residual standard deviations, converted with the residual SD "
                             "estimated from these data; such bounds are estimates (Lakens, 2017)."))
    return Table("equivalence", runs_of("Equivalence claims: the interval against the bounds"), cols, tuple(rows),
                 notes=tuple(notes))


def equivalence_figure(hyps, alpha: float, outcome: str) -> Figure | None:
    """Each equivalence claim's 1 − 2α interval drawn against its bounds."""
    items = [(f"{i}. {h.contrast.name}", confirmatory_tost(h)) for i, h in hyps if h.contrast.is_equivalence]
    if not items:
        return None
    level = N.format_confidence_level(1 - 2 * alpha)
    spec = FigureSpec("equivalence", (
        ("claims", tuple(name for name, _ in items)),
        ("estimates", tuple(t.estimate for _, t in items)),
        ("ci_low", tuple(t.ci[0] for _, t in items)),
        ("ci_high", tuple(t.ci[1] for _, t in items)),
        ("bound_low", tuple(t.bounds[0] for _, t in items)),
        ("bound_high", tuple(t.bounds[1] for _, t in items)),
        ("x_label", f"difference in {outcome}"),
        ("ci_label", f"{level} CI"),
    ))
    alt = (f"For each equivalence claim, a shaded band from its lower to its upper bound and a horizontal line for "
           f"the {level} interval of the estimate, with a dot at the estimate; an interval inside its band supports "
           f"equivalence.")
    return Figure("fig-equivalence", runs_of(f"Equivalence claims: each {level} interval (line, estimate as a dot) "
                                             "against its bounds (shaded band)"), alt, spec)


def power_table(hyps, alpha: float) -> Table | None:
    """Sensitivity of the equivalence tests: exact power at this study's cell sizes when the true
    difference is 0, and the equal n per cell for each power (Phillips, 1990)."""
    rows, powers = [], None
    for i, h in hyps:
        p = None if h.extras is None else h.extras.equivalence_power
        if p is None:
            continue
        powers = p.powers
        rows.append((runs_of(f"{i}. {h.contrast.name}"),
                     runs_of(f"[{_num(p.bounds_sd[0])}, {_num(p.bounds_sd[1])}]"),
                     runs_of(N.format_bounded(p.power_now, 2)),
                     *(runs_of("—" if n is None else N.format_count(n)) for n in p.n_per_cell)))
    if not rows:
        return None
    cols = (Column(runs_of("claim")), Column(runs_of("bounds (SD)"), "right", nowrap=True),
            Column(runs_of("power now"), "right"),
            *(Column(runs_of(f"n per cell, {N.format_confidence_level(pw)} power"), "right") for pw in powers))
    return Table("equivalence-power", runs_of(
        f"Power of the equivalence tests at α = {N.format_bounded(alpha, 2)} with this study's cell sizes, when the true difference is 0"),
        cols, tuple(rows), notes=(runs_of(
            "Exact power of the two one-sided tests from the joint distribution of the two t statistics "
            "(Phillips, 1990), with the residual SD of this fit taken as known; n per cell is the smallest equal "
            "cell size reaching each power. These describe the design, not the observed difference."),))


def test_kind(c) -> str:
    """The kind of test a compiled hypothesis asks for, in words (methods and analysis plan)."""
    if c.is_equivalence:
        return "equivalence claim, two one-sided t tests"
    if c.alternative != "two-sided":
        margin = margin_kind(c)
        return f"{margin} claim, one-sided t test against its margin" if margin else "directional, one-sided t test"
    return "two-sided t test" if c.test == "t" else f"F test with {c.q} numerator df"


def margin_kind(c) -> str | None:
    """"minimum-effect" or "non-inferiority" for a one-sided claim against a nonzero constant
    (``c`` a compiled contrast, or a result holding one)."""
    c = getattr(c, "contrast", c)
    if c.kind != "means" or c.alternative not in ("greater", "less") or c.test != "t":
        return None
    h_written = c.from_sd.rhs[0] if c.from_sd is not None else c.rhs[0]
    if h_written == 0:
        return None
    toward_zero = (c.alternative == "greater" and h_written < 0) or (c.alternative == "less" and h_written > 0)
    return "non-inferiority" if toward_zero else "minimum-effect"


def margin_words(h) -> str | None:
    """A sentence that names a margin claim for what it is: a one-sided test against the margin."""
    kind = margin_kind(h.contrast)
    if kind is None:
        return None
    c = h.contrast
    margin = _num(float(c.rhs[0]))
    unit = ""
    if c.from_sd is not None:
        unit = (f" ({_sd(c.from_sd.rhs[0])} residual SD; the residual SD, "
                f"{_num(c.from_sd.residual_sd)}, is estimated from these data, so the margin is an estimate too)")
    if kind == "minimum-effect":
        return (f"This is a minimum-effect claim: the one-sided test is against the margin {margin}{unit}, not "
                "against 0, so support means the difference exceeds the margin, not merely that it is nonzero.")
    return (f"This is a non-inferiority claim: the one-sided test is against the margin {margin}{unit}, so support "
            "means the difference is not worse than the margin; it does not show superiority.")
