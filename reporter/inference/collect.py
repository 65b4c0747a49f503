"""Everything around the tests: effect sizes, assumption checks, robust alternatives, post-hoc
families, power, and which test is confirmatory under the plan's unequal-variance policy.

Each piece is computed by its own module; this one decides what applies to the design and the
plan and collects the results. The choice rule for unequal variances:

* ``classical``: the equal-variance tests are confirmatory; robust versions are shown beside them;
* ``robust-if-heterogeneous``: the robust version is confirmatory when the Brown–Forsythe test
  rejects equal variances at α. This two-stage rule distorts error rates (Zimmerman (2004),
  "A note on preliminary tests of equality of variances", British Journal of Mathematical and
  Statistical Psychology 57, 173-181);
* ``always-robust``: the robust version is always confirmatory, which avoids that distortion.

Robust versions: a Welch–Satterthwaite t for a one-row contrast, Welch's ANOVA for a one-way
effect, and an HC3 Wald F otherwise.

With covariates (an analysis of covariance) every test is about the adjusted cell means
(``ModelFit.adjusted_offset_mean``, with covariance ``MSE · ModelFit.unscaled_cov`` and the error
df counting the slopes), and so is everything collected here: effect sizes, post-hoc families,
power. What applies and what does not:

* robust tests: an HC3 t (one row) or HC3 Wald F with the leverage of each row from the
  covariance-analysis design (:func:`reporter.inference.robust.hc3_adjusted_covariance`).
  Welch's ANOVA, the Welch–Satterthwaite t and Games–Howell weight each cell mean by its own
  variance, s_c²/n_c; an adjusted mean also depends on the slopes pooled over cells, so its
  variance is not s_c²/n_c and those tests are not defined; they are listed in
  ``Inference.not_applicable`` with that reason;
* Kruskal–Wallis ranks the outcome itself and cannot adjust for a covariate: not applicable;
* permutation F: Freedman–Lane with the covariates kept in the reduced model;
* assumption checks: on the residuals of the covariance analysis (rows of z = y − b'x through
  ``rows.adjusted``), with the homogeneity-of-slopes F among them and a note when it rejects;
* the outlier-sensitivity rerun updates the cell table from the removed rows' outcome sums; with
  covariates it would also need their covariate cross-products to refit the slopes, which the row
  access does not give, so it is not computed (stated in ``unavailable``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from fractions import Fraction

import numpy as np

from reporter.errors import FitError
from reporter.inference import assumptions as A
from reporter.inference import posthoc as P
from reporter.inference import robust as R
from reporter.inference.covariate_model import covariate_model_of
from reporter.fitting.ancova import SlopesCheck, slopes_homogeneity
from reporter.intake.cells import CellStats
from reporter.inference.effectsizes import AnovaEffectSizes, EffectSize, describe_anova_effect_sizes, standardized_contrast
from reporter.fitting.linear import ContrastTest, ModelFit, constant_part, fit_contrast, fit_model
from reporter.inference.permutation import (PERMUTATION_MAX_ROWS, SEQUENTIAL_EXCEEDANCES, PermutationResult,
                                         permutation_f_test)
from reporter.inference.power import EquivalencePower, Sensitivity, describe_equivalence_power, describe_sensitivity
from reporter.fitting.equivalence import EquivalenceTest, test_contrast
from reporter.intake.plan import level_key
from reporter.errors import PlanError
from reporter.model.hypotheses import compile_effect


@dataclass(frozen=True)
class RobustTest:
    """A robust alternative to one classical test (statistic, df, p; an interval for t)."""

    method: str
    test: str
    statistic: float
    df: tuple[float, ...]
    p: float
    estimate: float | None = None
    ci: tuple[float | None, float | None] | None = None
    note: str | None = None
    # An equivalence claim's Welch-type two one-sided tests (p is the larger one-sided p, ci the
    # 1 − 2α interval); None otherwise.
    equivalence: EquivalenceTest | None = None


@dataclass(frozen=True)
class HypothesisExtras:
    """Effect sizes and robust alternatives of one hypothesis, and the confirmatory choice."""

    effect_size: EffectSize | None
    effect_sizes: tuple[EffectSize, ...]
    robust: RobustTest | None
    permutation: PermutationResult | None
    confirmatory: str  # "classical" or "robust"
    confirmatory_p: float
    reason: str
    effect_size_note: str | None = None  # why no effect size is given, when none is
    # An equivalence claim: the power of its two one-sided tests and the n per cell for each power.
    equivalence_power: EquivalencePower | None = None


@dataclass(frozen=True)
class AssumptionChecks:
    """The row-level checks. Without row access (``unavailable`` holds the reason, starting
    "not available: ") the variance checks, the Q–Q data and the outlier scan are None and the
    Shapiro–Wilk result is skipped with that reason."""

    brown_forsythe: A.HomogeneityResult | None
    levene: A.HomogeneityResult | None
    shapiro: A.NormalityResult
    qq: A.QQData | None
    outliers: A.OutlierScan | None
    heterogeneous: bool
    notes: tuple[str, ...]
    unavailable: str | None = None
    # with covariates: the homogeneity-of-slopes F (cell × covariate interaction) and, when it
    # rejects at alpha (or cannot be computed), what that means and what to do
    slopes: SlopesCheck | None = None
    slopes_note: str | None = None


@dataclass(frozen=True)
class OutlierSensitivity:
    """Planned tests refitted without the flagged rows (reported beside, never substituted).

    ``rows_removed`` lists at most the scan's limit of the removed rows (row numbers as in the
    input); ``n_removed`` counts them all.
    """

    rows_removed: tuple[int, ...]
    tests: tuple[tuple[str, ContrastTest | None, str | None], ...]
    n_removed: int = 0


@dataclass(frozen=True)
class RowExtras:
    """Per ANOVA row: effect sizes, robust F, permutation F and sensitivity (power)."""

    effect_sizes: AnovaEffectSizes | None
    robust: RobustTest | None
    permutation: PermutationResult | None
    sensitivity: Sensitivity | None


@dataclass(frozen=True)
class Inference:
    rows: tuple[RowExtras, ...]
    hypotheses: tuple[HypothesisExtras, ...]
    assumptions: AssumptionChecks
    kruskal: R.KruskalWallisResult | None
    welch_oneway: R.WelchAnovaResult | None
    posthoc: tuple[tuple[str, str, P.ComparisonFamily], ...]  # (family key, target, result)
    games_howell: P.ComparisonFamily | None
    outlier_sensitivity: OutlierSensitivity | None
    policy: str
    kruskal_note: str | None = None
    permutation_note: str | None = None
    unavailable: tuple[tuple[str, str], ...] = ()  # (auxiliary result, why it could not be computed)
    # (result, why it does not apply to this analysis): with covariates, the tests that are not
    # defined for adjusted means
    not_applicable: tuple[tuple[str, str], ...] = ()


def _observed(cells: CellStats):
    """Observed cells: mask, n, means as offsets from the pivot, and centred SS."""
    o = cells.observed
    return o, cells.n[o], cells.offset_mean[o], cells.ss[o]


OUTLIER_LIMIT = 100
ROWS_UNAVAILABLE = "not available: the input gives one summary row per cell, not the rows"


def check_assumptions(rows, cells: CellStats, fit: ModelFit, alpha: float, *, seed: int = 0,
                      unavailable: str = ROWS_UNAVAILABLE) -> tuple[AssumptionChecks, object]:
    """The row-level checks through the row access, and the flagged rows (for the sensitivity
    rerun; None when not scanned)."""
    if rows is None:
        sw = A.NormalityResult("Shapiro-Wilk", 0, True, unavailable, None, None)
        return AssumptionChecks(None, None, sw, None, None, False, (), unavailable), None
    notes = []
    extra = {}
    if cells.covariates is not None:
        rows, cells, extra, more = _covariate_checks(rows, cells, fit, alpha)
        notes.extend(more)
    try:
        bf, lev = A.homogeneity_both(rows, cells)
    except FitError as exc:
        bf = lev = None
        notes.append(f"Variance checks not possible: {exc}")
    sw = A.normality(rows, cells, seed=seed)
    qq = scan = flagged = None
    try:
        qq = A.qq_quantiles(rows, cells, fit.mse, **extra.get("qq", {}))
        scan, flagged = A.screen_outliers(rows, cells, limit=OUTLIER_LIMIT, **extra.get("screen", {}))
    except FitError as exc:
        notes.append(f"Residual checks not possible: {exc}")
    hetero = bool(bf is not None and bf.p is not None and bf.p < alpha)
    return AssumptionChecks(bf, lev, sw, qq, scan, hetero, tuple(notes), None, extra.get("slopes"),
                            extra.get("slopes_note")), flagged


def _covariate_checks(rows, cells: CellStats, fit: ModelFit, alpha: float):
    """With covariates: the rows and cell table of z = y − b'x (whose within-cell deviations are
    the covariance analysis's residuals), the options of the residual checks (the adjusted
    model's MSE and df, each cell's average leverage), the slopes check with its note, and notes
    saying what the checks ran on."""
    model = covariate_model_of(fit)
    leverage = model.mean_leverage(cells.covariates.sxx)
    extra = {"qq": {"leverage": leverage},
             "screen": {"mse": fit.mse, "df_e": fit.df_error, "leverage": leverage}}
    notes = ["The checks use the residuals of the covariance analysis (the outcome minus the fitted covariate "
             "slopes, about each cell's adjusted mean). The Q–Q plot and the outlier screen take each row's "
             "leverage as its cell's average leverage (1 + tr(Q_c S_xx,c))/n_c, where the exact leverage adds "
             "(x_i − x̄_c)'Q_c(x_i − x̄_c) − tr(Q_c S_xx,c)/n_c; a row far from its cell's covariate mean is "
             "therefore screened a little leniently."]
    try:
        check = slopes_homogeneity(cells)
    except FitError as exc:
        check, note = None, f"The homogeneity of slopes could not be tested: {exc}."
    else:
        extra["slopes"] = check
        note = _slopes_note(check, fit, alpha)
    extra["slopes_note"] = note
    return rows.adjusted(model.slopes), A.adjusted_cells(cells, model.slopes), extra, notes


def _slopes_note(check: SlopesCheck, fit: ModelFit, alpha: float) -> str | None:
    """What a rejected homogeneity-of-slopes test means for the fitted model, and what to do."""
    if not check.p < alpha:
        return None
    if fit.covariate_slopes_mode == "per-cell":
        return ("The slopes differ between cells; the plan already fits a slope per cell, so the adjusted means "
                "and every comparison of them hold at the stated covariate values (adjust_to) only, and "
                "differences between cells would be different at other covariate values.")
    return ("The slopes differ between cells (the cell × covariate interaction is significant), so a common "
            "slope misdescribes at least one cell and the adjusted differences depend on the covariate value. "
            "Fit separate slopes (slopes = \"per-cell\" under [[covariates]] in the plan); the effects are then "
            "evaluated at the covariate value adjust_to (the covariate's mean unless a number is given), "
            "which the report states.")


def cell_names(design) -> tuple[str, ...]:
    """Each cell named by its levels ("dose=high", "dose=high, sex=f"), for messages."""
    return tuple(", ".join(f"{f}={lv}" for f, lv in zip(c.factors, c.levels)) for c in design.cells)


def _robust_for(contrast, cells: CellStats, one_way_effect: bool, alpha: float, labels=None) -> RobustTest | None:
    """The robust version of one test, on the offsets from the pivot (C·ȳ − h formed exactly).

    The robust functions see the offsets and h − pivot·(row sums of C), computed exactly, so a
    contrast whose weights sum to zero never meets the pivot; a location (the estimate of a
    combination whose weights do not sum to zero, its interval) gets h added back at the end.
    """
    o, n, m, ss = _observed(cells)
    C = contrast.C[:, o]
    h = contrast.h
    h_off = -constant_part(contrast.weights, contrast.rhs, cells.pivot_exact)
    lab = None if labels is None else tuple(np.asarray(labels, dtype=object)[o])
    try:
        if contrast.is_equivalence and getattr(cells, "covariates", None) is not None:
            return RobustTest("not available", "t", float("nan"), (), float("nan"),
                              note="the Welch-type two one-sided tests use unadjusted cell variances, which do not "
                                   "apply to covariate-adjusted means")
        if contrast.is_equivalence:
            # bound − pivot·Σc, exact then rounded once: the bounds on the offset scale
            off = -constant_part(contrast.weights * 2, contrast.bounds, cells.pivot_exact)
            shift = float(cells.pivot_exact * sum(contrast.weights[0], Fraction(0)))
            e = R.welch_tost(C[0], n, m, ss, (float(off[0]), float(off[1])), alpha=alpha, labels=lab, shift=shift,
                             bounds_shown=tuple(float(b) for b in contrast.bounds))
            return RobustTest("Welch–Satterthwaite TOST", "t", e.statistic, e.df, e.p, e.estimate, e.ci,
                              equivalence=e)
        if contrast.test == "t" and contrast.q == 1:
            r = R.welch_contrast(C[0], n, m, ss, h=float(h_off[0]), alternative=contrast.alternative, alpha=alpha,
                                 labels=lab)
            d = r.estimate - r.null_value  # C·ȳ − h
            ci = (r.ci_low - r.null_value + h[0], r.ci_high - r.null_value + h[0])
            return RobustTest("Welch–Satterthwaite t", "t", r.statistic, (r.df,), r.p, float(d + h[0]), ci)
        if one_way_effect:
            r = R.welch_anova(n, m, ss, labels=lab)
            return RobustTest("Welch's ANOVA", "F", r.statistic, (r.df1, r.df2), r.p)
        r = R.hc3_wald(C, n, m, ss, h=h_off, labels=lab)
        return RobustTest("HC3 Wald F", "F", r.statistic, (r.df1, r.df2), r.p)
    except FitError as exc:
        return RobustTest("not available", contrast.test, float("nan"), (), float("nan"), note=str(exc))


def _robust_adjusted(contrast, test: ContrastTest, hc, alpha: float, labels=None) -> RobustTest:
    """The HC3 version of one test of adjusted cell means (with covariates): a t for one row, a
    Wald F otherwise, on C·mu_adj − h as the fit computed it (``test.row_estimates``)."""
    d = np.asarray(test.row_estimates, dtype=float)
    if hc is None:
        return RobustTest("not available", contrast.test, float("nan"), (), float("nan"),
                          note="the HC3 covariance of the adjusted means could not be computed")
    try:
        if contrast.test == "t" and contrast.q == 1:
            r = R.hc3_contrast_adjusted(contrast.C[0], d[0], float(contrast.h[0]), hc,
                                        alternative=contrast.alternative, alpha=alpha, labels=labels)
            return RobustTest("HC3 t", "t", r.statistic, (r.df,), r.p, r.estimate, (r.ci_low, r.ci_high))
        r = R.hc3_wald_adjusted(contrast.C, d, hc, labels=labels)
        return RobustTest("HC3 Wald F", "F", r.statistic, (r.df1, r.df2), r.p)
    except FitError as exc:
        return RobustTest("not available", contrast.test, float("nan"), (), float("nan"), note=str(exc))


# Why each test that weights cells by their own variance, or ranks the outcome, is not computed
# with covariates (Inference.not_applicable).
NOT_WITH_COVARIATES = (
    ("Welch's ANOVA", "not defined for covariate-adjusted means: it weights each cell mean by n/s², but an "
                      "adjusted mean also carries the slopes estimated from all cells, so its variance is not "
                      "s²/n of its own cell; the HC3 tests are the robust versions here"),
    ("Welch–Satterthwaite t", "not defined for covariate-adjusted means, for the same reason; the HC3 t is the "
                              "robust version here"),
    ("Games–Howell pairs", "not defined for covariate-adjusted means: each pair's standard error would come from "
                           "the two cells' own variances, which leave out the variance of the estimated slopes"),
    ("Kruskal–Wallis test", "not applicable with covariates: it ranks the outcome itself and cannot adjust for "
                            "a covariate; the Freedman–Lane permutation F is the test here that does not assume normal errors"),
)


class _Attempts:
    """Runs auxiliary computations; one that cannot be computed is recorded, never raised."""

    def __init__(self):
        self.unavailable: list[tuple[str, str]] = []

    def __call__(self, what: str, fn, *args, **kwargs):
        try:
            return fn(*args, **kwargs)
        except FitError as exc:
            self.unavailable.append((what, str(exc)))
            return None


def describe_inference(design, cells: CellStats, rows, fit: ModelFit, table, contrasts, tests, *, alpha: float,
                       policy: str = "classical", posthoc=(), posthoc_on="cells", control=None,
                       permutations: int = 10_000, seed: int = 0,
                       permutation_max_rows: int = PERMUTATION_MAX_ROWS,
                       progress: bool = False, notify=None,
                       rows_unavailable: str = ROWS_UNAVAILABLE) -> Inference:
    """Collect effect sizes, checks, robust tests, post-hoc families and power for one fit.

    Every auxiliary result that cannot be computed (a one-row or constant cell, too few degrees
    of freedom) is reported in ``unavailable`` with its reason; only a confirmatory test that
    cannot be computed raises :class:`FitError`.

    ``rows`` (a :class:`reporter.intake.rows.RowAccess`, or None) answers every row-level step;
    without it those steps are skipped with the reason ``rows_unavailable``.
    """
    checks, flagged = check_assumptions(rows, cells, fit, alpha, seed=seed, unavailable=rows_unavailable)
    o, n_obs, mean_obs, ss_obs = _observed(cells)
    one_way = len(design.factors) == 1
    names = cell_names(design)
    names_obs = tuple(names[i] for i in np.flatnonzero(o))
    attempt = _Attempts()
    perm_arrays, perm_note = _permutation_rows(rows, cells, permutations, permutation_max_rows, rows_unavailable)
    covariates = cells.covariates is not None
    hc = perm_x = None
    if covariates:
        model = covariate_model_of(fit)
        if rows is not None:
            hc = attempt("HC3 covariance of the adjusted means", R.hc3_adjusted_covariance, model, cells.offset_mean,
                         rows.batches(HC3_BATCH_ROWS), fit.df_error)
        if perm_arrays is not None:
            perm_x = rows.covariate_arrays()
            if perm_x is None:
                perm_arrays, perm_note = None, ("not available: the covariate values are read from the data file by "
                                                "queries and are not held in memory")

    def permute(C, label):
        if perm_arrays is None or np.any(C[:, ~o] != 0):
            return None
        y, cell = perm_arrays
        if covariates:
            return permutation_f_test(y, cell, cells.k, C, n_permutations=permutations, seed=seed,
                                      stop_after=SEQUENTIAL_EXCEEDANCES, progress=progress, notify=notify,
                                      label=label, x=perm_x, covariate_model=model, cell_means=cells.offset_mean)
        return permutation_f_test(y, cell, cells.k, C, n_permutations=permutations, seed=seed,
                                  stop_after=SEQUENTIAL_EXCEEDANCES, progress=progress, notify=notify,
                                  label=label)

    def robust(contrast, test, one_way_effect):
        if covariates and not contrast.is_equivalence:  # equivalence: _robust_for says why there is none
            return _robust_adjusted(contrast, test, hc, alpha, names)
        return _robust_for(contrast, cells, one_way_effect, alpha, names)

    rows_out = []
    for r in table.rows:
        if not r.testable:
            rows_out.append(RowExtras(None, None, None, None))
            continue
        es = attempt(f"effect sizes of {r.source}", describe_anova_effect_sizes, r.ss, r.df, fit.ss_error,
                     fit.df_error, fit.ss_total, cells.n_total, alpha=alpha)
        sens = attempt(f"sensitivity (power) of {r.source}", describe_sensitivity, r.df, cells.n_total, fit.df_error,
                       alpha=alpha)
        if r.covariate is not None:  # a covariate's slope row: no cell-mean contrast
            rows_out.append(RowExtras(es, None, None, sens))
            continue
        eff = compile_effect(design, " x ".join(r.factors))
        if np.any(eff.C[:, ~o] != 0):  # the unweighted-means contrast needs an empty cell
            rows_out.append(RowExtras(es, None, None, sens))
            continue
        eff_test = fit_contrast(fit, eff.weights, eff.rhs, test="F") if covariates else None
        rob = robust(eff, eff_test, one_way)
        rows_out.append(RowExtras(es, rob, attempt(f"permutation F of {r.source}", permute, eff.C, r.source), sens))

    extras = []
    for c, t in zip(contrasts, tests):
        es_note = None
        if t.test == "t":
            primary, sizes = None, ()
            if sum(c.weights[0], Fraction(0)) != 0:
                es_note = _NOT_A_CONTRAST
            else:
                try:
                    # C·ȳ − h as fitted (exact pivot part), not the estimate minus h again.
                    sc = standardized_contrast([float(w) for w in c.weights[0]], 0.0, t.row_estimates[0], cells.n,
                                               fit.mse, fit.df_error, level=1 - alpha,
                                               alternative="two-sided" if c.is_equivalence else c.alternative,
                                               cov=fit.unscaled_cov if covariates else None)
                    primary, sizes = sc.d, (sc.d, sc.g)
                except FitError as exc:
                    es_note = f"no standardized contrast: {exc}"
        else:
            es = attempt(f"effect sizes of '{c.name}'", describe_anova_effect_sizes, t.ss, t.df[0], fit.ss_error,
                         fit.df_error, fit.ss_total, cells.n_total, alpha=alpha)
            primary, sizes = (None, ()) if es is None else (es.partial_eta_squared, (es.partial_eta_squared, es.cohens_f))
            if es is None:
                es_note = attempt.unavailable[-1][1]
        is_oneway_effect = one_way and c.kind == "effect"
        rob = robust(c, t, is_oneway_effect)
        perm = None
        if c.test == "F" and np.allclose(c.h, 0) and np.allclose(c.C.sum(axis=1), 0):
            perm = attempt(f"permutation F of '{c.name}'", permute, c.C, c.name)
        robust_ok = rob is not None and np.isfinite(rob.p)
        if policy == "always-robust" or (policy == "robust-if-heterogeneous" and checks.heterogeneous):
            if not robust_ok:
                why = ("the plan makes the robust test confirmatory (unequal_variances = \"always-robust\")"
                       if policy == "always-robust" else
                       "the Brown–Forsythe test indicated unequal variances (unequal_variances = "
                       "\"robust-if-heterogeneous\")")
                raise FitError(
                    f"hypothesis '{c.name}': {why}, but the robust test cannot be computed: "
                    f"{rob.note if rob is not None else 'no robust version exists'}. Set unequal_variances = "
                    "\"classical\" in [analysis], or collect at least two distinct values in every cell."
                )
            choice = "robust"
            reason = ("the plan makes the robust test confirmatory (always-robust)" if policy == "always-robust"
                      else "the Brown–Forsythe test indicated unequal variances (robust-if-heterogeneous)")
        elif policy == "robust-if-heterogeneous" and checks.brown_forsythe is None:
            choice, reason = "classical", ("the Brown–Forsythe test was not available, so the classical test stays "
                                           "confirmatory (robust-if-heterogeneous)")
        elif policy == "robust-if-heterogeneous":
            choice, reason = "classical", "the Brown–Forsythe test did not indicate unequal variances (robust-if-heterogeneous)"
        else:
            choice, reason = "classical", "the plan makes the classical test confirmatory"
        p = rob.p if choice == "robust" else t.p
        eq_power = None
        if c.is_equivalence:
            eq_power = attempt(f"power of the equivalence test '{c.name}'", describe_equivalence_power, c.weights[0],
                               cells.n, c.bounds, fit.residual_sd, fit.df_error, alpha=alpha,
                               unscaled_cov=getattr(fit, "unscaled_cov", None))
        extras.append(HypothesisExtras(primary, sizes, rob, perm, choice, p, reason, es_note, eq_power))

    kw, kw_note = None, None
    not_applicable = NOT_WITH_COVARIATES if covariates else ()
    if covariates:
        kw_note = dict(NOT_WITH_COVARIATES)["Kruskal–Wallis test"]
    elif rows is None:
        kw_note = rows_unavailable
    elif int(o.sum()) >= 2:
        try:
            kw = R.kruskal_wallis_ranked(rows.rank_sums(), cells.n)
        except FitError as exc:
            kw_note = f"not available: {exc}"
    welch = None
    if one_way and not covariates:
        welch = attempt("Welch's ANOVA", R.welch_anova, n_obs, mean_obs, ss_obs, labels=names_obs)

    families = []
    for fam in posthoc:
        got = attempt(f"{_FAMILY_NAMES[fam]} on the {posthoc_on if posthoc_on == 'cells' else 'levels of ' + posthoc_on}",
                      _posthoc_family, fam, design, cells, fit, alpha, posthoc_on, control, names)
        if got is not None:
            families.append(got)
    gh = None
    if "all-pairs" in posthoc and posthoc_on == "cells" and not covariates:
        gh = attempt("Games–Howell pairs on the cells", _games_howell, cells, alpha, names_obs)

    if covariates:
        sens = None
        if flagged is not None and flagged.total:
            attempt.unavailable.append(("planned tests without the flagged rows", _NO_SENSITIVITY_RERUN))
    else:
        sens = _outlier_sensitivity(design, cells, flagged, contrasts, alpha)
    return Inference(tuple(rows_out), tuple(extras), checks, kw, welch, tuple(families), gh, sens, policy,
                     kw_note, perm_note, tuple(attempt.unavailable), not_applicable)


def _permutation_rows(rows, cells: CellStats, permutations: int, max_rows: int, unavailable: str):
    """The row arrays the permutation F runs on, or None with the reason it does not run."""
    if permutations <= 0:
        return None, "not computed: the plan sets permutations = 0"
    if rows is None:
        return None, unavailable
    n = cells.n_total
    if n > max_rows:
        return None, (
            f"not computed by default: with {n:,} rows (more than {max_rows:,}) the F distribution is an "
            f"accurate reference and {permutations:,} permutations would cost a great deal of time; to run it anyway, "
            f"set permutation_max_rows = {n} (or more) under [analysis] in the plan"
        )
    arrays = rows.arrays()
    if arrays is None:
        return None, "not available: the rows are read from the data file by queries and are not held in memory"
    return arrays, None


# Rows per chunk of the one pass over the rows that the HC3 covariance with covariates makes.
HC3_BATCH_ROWS = 65_536

_NO_SENSITIVITY_RERUN = (
    "not computed with covariates: refitting without the flagged rows would re-estimate the covariate slopes, "
    "which needs the removed rows' covariate cross-products; the row access returns only their outcome sums")

_NOT_A_CONTRAST = ("no standardized contrast: the weights do not sum to zero, so the combination is not a "
                   "difference of means and its size in SD units depends on where the scale starts")

_FAMILY_NAMES = {"all-pairs": "Tukey–Kramer pairs", "versus-control": "Dunnett comparisons with the control",
                 "any-contrast": "Scheffé pairs"}


def _games_howell(cells: CellStats, alpha: float, names_obs) -> P.ComparisonFamily:
    """Games–Howell over the observed cells, on the offsets; comparisons keep design cell indices."""
    o, n, m, ss = _observed(cells)
    res = R.games_howell(n, m, ss, alpha=alpha, labels=names_obs)
    idx = np.flatnonzero(o)
    return replace(res, comparisons=tuple(replace(c, first=int(idx[c.first]), second=int(idx[c.second]))
                                          for c in res.comparisons))


def _posthoc_family(fam, design, cells, fit, alpha, on, control, names):
    """One post-hoc family on the offsets from the pivot (it reports differences only).

    On cells, the observed cells are compared; on a factor, its unweighted marginal means, each
    of which needs every cell at its level.
    """
    o = cells.observed
    adjusted = cells.covariates is not None
    means = fit.adjusted_offset_mean if adjusted else cells.offset_mean
    if on == "cells":
        idx = np.flatnonzero(o)
        labels = [design.cells[i].short for i in idx]
        weights = None
        n = cells.n[o]
        est = means[o]
        cov = fit.unscaled_cov[np.ix_(o, o)] if adjusted else None
    else:
        f = design.factor(on)
        labels = list(f.levels)
        W = np.zeros((len(f.levels), design.k))
        for i, lv in enumerate(f.levels):
            idx = [c.index for c in design.cells if c.as_dict()[on] == lv]
            gap = [j for j in idx if not o[j]]
            if gap:
                raise FitError(f"the marginal mean of {on}={lv} needs {R.name_cells(gap, names)}, which "
                               f"{'is' if len(gap) == 1 else 'are'} empty")
            W[i, idx] = 1.0 / len(idx)
        weights = W
        n = cells.n
        est = np.array([math.fsum((row[o] * means[o]).tolist()) for row in W])
        cov = fit.unscaled_cov if adjusted else None
    if fam == "all-pairs":
        res = P.tukey_kramer(est, n, fit.mse, fit.df_error, weights=weights, alpha=alpha, cov=cov)
    elif fam == "versus-control":
        if on == "cells":
            empty = [c for c in design.cells if not o[c.index]]
            gone = [c for c in empty if level_key(c.short) == level_key(control)]
            if gone:
                raise FitError(f"the control cell {names[gone[0].index]} is empty, so nothing can be compared with it")
        ctrl = _control_index(labels, control, design, on)
        res = P.dunnett(est, n, fit.mse, fit.df_error, control=ctrl, weights=weights, alpha=alpha, cov=cov)
    else:
        res = P.scheffe_pairs(est, n, fit.mse, fit.df_error, weights=weights, alpha=alpha, cov=cov)
    return (fam, on, res, tuple(labels))


def _control_index(labels, control, design, on) -> int:
    keys = [level_key(lv) for lv in labels]
    k = level_key(control)
    if k in keys:
        return keys.index(k)
    raise PlanError(
        f"'analysis.follow_up_control' is \"{control}\", which is not one of the compared groups "
        f"({', '.join(labels)}). Name one of them (for cells of several factors use the form a/b)."
    )


def _outlier_sensitivity(design, cells, flagged, contrasts, alpha) -> OutlierSensitivity | None:
    """Planned tests on the cell table updated without the flagged rows (no pass over the rows)."""
    if flagged is None or flagged.total == 0:
        return None
    removed = tuple(r for r, _, _ in flagged.rows)
    cs2 = A.cells_without(cells, flagged)
    try:
        fit2 = fit_model(cs2, design.matrix)
    except FitError as exc:
        return OutlierSensitivity(removed, tuple((c.name, None, str(exc)) for c in contrasts if c.role == "planned"),
                                  flagged.total)
    out = []
    for c in contrasts:
        if c.role != "planned":
            continue
        touched = np.any(c.C[:, cs2.n == 0] != 0)
        if touched:
            out.append((c.name, None, "removing the flagged rows empties a cell this hypothesis needs"))
            continue
        out.append((c.name, test_contrast(fit2, c, alpha), None))
    return OutlierSensitivity(removed, tuple(out), flagged.total)
