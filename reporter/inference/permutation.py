"""Monte Carlo permutation F tests for between-subjects designs.

The p value needs no normal errors: it compares the observed F with the F of data rearranged
under the null hypothesis. For a one-way design the rows' outcomes are exchangeable under the
null, so they are permuted across cells. For one effect of a factorial design (a contrast
matrix C over the cells, e.g. an interaction) the other effects are not null, so the residuals
of the reduced model (the model without that effect) are permuted and added back to its fitted
values: Freedman & Lane (1983), Journal of Business & Economic Statistics 1, 292-298; Anderson &
Legendre (1999), Journal of Statistical Computation and Simulation 62, 271-303, compare the
choices and recommend it.

Computation. Only the cell sums of the permuted residuals matter. With e0 the reduced-model
residuals (cell order), S the vector of their cell sums after permutation, D = diag(n):
the permuted cell means are mu0 + S/n, the hypothesis sum of squares is
||L^-1 C D^-1 S||^2 with L L' = C D^-1 C', and the within-cell sum of squares is
sum e0^2 - sum_c S_c^2 / n_c. Permutations are drawn in blocks: each row of a block is an
independent Fisher-Yates shuffle of e0 (``Generator.permuted``), and the cell sums of a block come
from one ``np.add.reduceat`` over rows sorted by cell, with no per-permutation Python work. The
random numbers come from numpy's SFC64 bit generator (Chris Doty-Humphrey's Small Fast Chaotic
generator) seeded with ``seed``, which shuffled about a third faster than the default PCG64 in our
benchmark. The stream does not depend on the block size.

Cost. Each permutation costs a shuffle of the N rows, so a run costs O(m N). Two rules bound it:

* sequential stopping (Besag & Clifford 1991, "Sequential Monte Carlo p-values", Biometrika 78,
  301-304): the run stops as soon as ``stop_after`` = h permuted F reach the observed one, at
  permutation l, with p = h / l; if fewer than h do in all m permutations, p = (b + 1)/(m + 1).
  A large p is thus known after about h / p permutations, and the number used is reported;
* above ``PERMUTATION_MAX_ROWS`` rows the report path does not run the test by default (see
  ``benchmarks/bench_permutation_threshold.py`` for the measurement behind the value): there
  the F reference distribution is accurate and the run would take minutes.

Before a run estimated (from its first 50 ms or 1% of permutations) to exceed ``TIME_BUDGET`` seconds a line is
passed to ``notify``; a progress bar (tqdm) is drawn on stderr for runs expected to take more
than a second when ``progress`` is set and stderr is a terminal.
"""

from __future__ import annotations

import sys
import time
from dataclasses import dataclass

import numpy as np

from reporter.errors import FitError
from reporter.intake.defaults import ANALYSIS_DEFAULTS
from reporter.inference.posthoc import _check_seed
from reporter.inference.robust import _cell_stats_from_rows, _reduce_rows, _rows

__all__ = ["PERMUTATION_MAX_ROWS", "SEQUENTIAL_EXCEEDANCES", "TIME_BUDGET", "PermutationResult", "permutation_f_test"]

_BLOCK_ELEMENTS = 1 << 16
_MAX_BLOCK = 128

# Rows above which the report path skips the permutation F by default (measured: see
# benchmarks/bench_permutation_threshold.py).
PERMUTATION_MAX_ROWS = int(ANALYSIS_DEFAULTS["permutation_max_rows"])
# Besag & Clifford's h of the report path: stop once this many permuted F reach the observed F.
# The relative Monte Carlo error of p = h / l is about 1 / sqrt(h), 14% for h = 50; a p of 0.05
# or more is settled within about 1,000 permutations.
SEQUENTIAL_EXCEEDANCES = 50
# Seconds: a run estimated to take longer is announced on stderr before it goes on.
TIME_BUDGET = 10.0
# Seconds: a run expected to take longer shows a progress bar (when asked for and on a terminal).
PROGRESS_AFTER = 1.0


@dataclass(frozen=True)
class PermutationResult:
    """A Monte Carlo permutation F test.

    ``statistic`` is the observed F with ``df1`` and ``df2`` (used only to form F; the p value
    comes from the permutations). ``p`` = (b + 1)/(m + 1) with b the number of the m permuted F
    at or above the observed one; ``mc_se`` = sqrt(p (1 - p) / m) is its Monte Carlo standard
    error. ``seed`` reproduces the permutations.
    """

    statistic: float
    df1: int
    df2: int
    p: float
    mc_se: float
    n_permutations: int
    n_extreme: int
    method: str
    seed: int
    max_permutations: int = 0
    stopped_early: bool = False


@dataclass(frozen=True, eq=False)
class _NullDistribution:
    """The permuted F drawn (``null``; fewer than asked when the run stopped early) and the
    number of them at or above the observed F (``n_extreme``)."""

    observed: float
    observed_by_sums: float
    null: np.ndarray
    df1: int
    df2: int
    method: str
    n_extreme: int = 0
    stopped: bool = False


def _check_count(n_permutations) -> int:
    if (
        isinstance(n_permutations, (bool, np.bool_))
        or not isinstance(n_permutations, (int, np.integer))
        or n_permutations < 1
    ):
        raise FitError(
            f"'n_permutations' must be a positive whole number (got {n_permutations!r}); "
            "10000 gives a Monte Carlo standard error below 0.005."
        )
    return int(n_permutations)


def _null_distribution(
    y, codes, k, C, n_permutations: int, seed: int, block: int | None = None, *,
    stop_after: int | None = None, progress: bool = False, notify=None, label: str = ""
) -> _NullDistribution:
    y, codes, k = _rows(y, codes, k)
    n, mean, ss = _cell_stats_from_rows(y, codes, k)
    obs = np.flatnonzero(n > 0)
    g = obs.size
    big_n = y.size
    df2 = big_n - g
    if df2 < 1:
        raise FitError(
            f"the F test needs residual degrees of freedom (N - cells = {df2}); collect more "
            "than one row per cell."
        )
    sse = float(ss.sum())
    if not sse > 0.0:
        raise FitError(
            "every cell's values are equal (no within-cell variation), so F is undefined."
        )
    if C is None:
        if g < 2:
            raise FitError(
                f"a one-way permutation test compares at least 2 observed cells (got {g})."
            )
        cm = np.zeros((g - 1, k))
        cm[np.arange(g - 1), obs[:-1]] = 1.0
        cm[:, obs[-1]] = -1.0
        method = "permutation of rows"
    else:
        cm = _contrast_rows(C, n, k)
        method = "Freedman-Lane permutation of reduced-model residuals"
    cn = cm[:, obs]
    nn = n[obs].astype(np.float64)
    ybar = mean[obs]
    a = (cn / nn) @ cn.T
    try:
        chol = np.linalg.cholesky(a)
    except np.linalg.LinAlgError as exc:
        raise FitError(
            "the rows of 'C' are not estimable from the observed cells; check 'C'."
        ) from exc
    q = cn.shape[0]
    if C is None:
        # The reduced model of the one-way null is the grand mean.
        mu0 = np.full(g, float(np.sum(nn * ybar) / big_n))
    else:
        # Weighted least squares projection of the cell means onto {mu : C mu = 0}.
        mu0 = ybar - (cn.T / nn[:, None]) @ np.linalg.solve(a, cn @ ybar)
    g_mat = np.linalg.solve(chol, cn / nn)

    z = np.linalg.solve(chol, cn @ ybar)
    observed = (float(z @ z) / q) / (sse / df2)

    order = np.argsort(codes, kind="stable")
    position = np.full(k, -1)
    position[obs] = np.arange(g)
    cell_of_row = position[codes[order]]
    resid = y[order] - mu0[cell_of_row]
    starts = np.concatenate(([0], np.cumsum(nn.astype(np.int64))[:-1]))
    total = float(resid @ resid)

    def f_from_sums(sums: np.ndarray) -> np.ndarray:
        u = g_mat @ sums
        ss_h = np.einsum("ij,ij->j", u, u)
        ss_w = total - np.einsum("ij,ij->j", sums, sums / nn[:, None])
        with np.errstate(divide="ignore", invalid="ignore"):
            return (ss_h / q) / (np.maximum(ss_w, 0.0) / df2)

    observed_by_sums = float(f_from_sums(np.add.reduceat(resid, starts)[:, None])[0])

    def f_of_rows(rows: np.ndarray) -> np.ndarray:
        return f_from_sums(np.add.reduceat(rows, starts, axis=1).T)

    return _permute(resid, f_of_rows, observed, observed_by_sums, q, df2, method, n_permutations, seed, block,
                    stop_after=stop_after, progress=progress, notify=notify, label=label)


def _permute(resid: np.ndarray, f_of_rows, observed: float, observed_by_sums: float, q: int, df2: int, method: str,
             n_permutations: int, seed: int, block: int | None, *, stop_after: int | None, progress: bool, notify,
             label: str) -> _NullDistribution:
    """Shuffle ``resid`` in blocks of rows (seeded SFC64 stream, one Fisher-Yates shuffle per
    permutation) and collect the F of each permutation from ``f_of_rows`` (a block of permuted
    residual vectors in, their F out), with the sequential stopping rule."""
    big_n = resid.size
    cut = observed_by_sums - abs(observed_by_sums) * 100.0 * np.finfo(float).eps

    if block is None:
        block = int(min(_MAX_BLOCK, max(1, _BLOCK_ELEMENTS // max(big_n, 1))))
    rng = np.random.Generator(np.random.SFC64(seed))
    null = np.empty(n_permutations)
    block = min(block, n_permutations)
    template = np.tile(resid, (block, 1))
    buffer = np.empty_like(template)
    done = extreme = 0
    stopped = announced = False
    bar = None
    started = time.perf_counter()
    try:
        while done < n_permutations:
            size = min(block, n_permutations - done)
            rows = buffer[:size]
            np.copyto(rows, template[:size])
            rng.permuted(rows, axis=1, out=rows)
            f = f_of_rows(rows)
            null[done : done + size] = f
            hits = f >= cut
            if stop_after is not None and extreme + int(hits.sum()) >= stop_after:
                # the h-th exceedance: stop right after that permutation
                at = int(np.flatnonzero(hits)[stop_after - extreme - 1])
                done += at + 1
                extreme = stop_after
                stopped = done < n_permutations
                break
            extreme += int(hits.sum())
            done += size
            if not announced and done < n_permutations:
                # estimate the whole run once the first 50 ms (or 1% of the permutations) are done
                elapsed = time.perf_counter() - started
                if elapsed >= 0.05 or done * 100 >= n_permutations:
                    announced = True
                    bar = _announce(elapsed / done * n_permutations, n_permutations, big_n, label, progress, notify)
                    if bar is not None:
                        bar.update(done)
            elif bar is not None:
                bar.update(size)
    finally:
        if bar is not None:
            bar.close()
    return _NullDistribution(
        observed=observed,
        observed_by_sums=observed_by_sums,
        null=null[:done],
        df1=q,
        df2=df2,
        method=method,
        n_extreme=extreme,
        stopped=stopped,
    )


def _contrast_rows(C, n: np.ndarray, k: int) -> np.ndarray:
    """C reduced to independent rows; refused unless every row is a contrast over observed cells."""
    cm, _ = _reduce_rows(C, None, k)
    sums = np.abs(cm.sum(axis=1))
    if np.any(sums > 1e-9 * np.abs(cm).sum(axis=1)):
        raise FitError(
            "a permutation test can only test contrasts, whose rows of 'C' sum to 0 over the "
            "cells (a row here sums to a non-zero value): permuting rows leaves the grand mean "
            "unchanged, so a null like 'a mean equals 0' cannot be tested this way."
        )
    empty = np.flatnonzero(np.any(cm != 0.0, axis=0) & (n == 0))
    if empty.size:
        raise FitError(
            f"'C' puts weight on empty cells {empty.tolist()}, so the effect is not "
            "estimable; give those cells zero weight."
        )
    return cm


def _null_distribution_adjusted(
    y, codes, x, k, C, model, cell_means, n_permutations: int, seed: int, block: int | None = None, *,
    stop_after: int | None = None, progress: bool = False, notify=None, label: str = ""
) -> _NullDistribution:
    """Freedman-Lane with covariates: the reduced model keeps the covariates (with the same
    slopes, common or per cell) and restricts the adjusted cell means by C·mu_adj = 0.

    ``model`` is the fitted covariance analysis (:class:`reporter.inference.covariate_model.
    CovariateModel`: its slopes, their covariance, the covariate cell means and reference values)
    and ``cell_means`` (k,) the outcome's cell means (offsets), both as the fit computed them; the
    rows give the residuals. With the within-cell-centred parameters theta = (alpha, beta),
    G = (X'X)^-1 and L = C·A (A maps theta to the adjusted means), a residual vector r enters F
    only through z = X'r, that is its cell sums and its sums of r_i d_i (d_i the row's centred
    covariates) laid out as the slopes: the hypothesis SS is ||R^-1 L G z||^2 with R R' = L G L',
    and the residual SS is r'r - z'G z (Searle 1987, section 8.5, the general linear hypothesis).
    Each permutation costs O(N p).
    """
    y, codes, k = _rows(y, codes, k)
    xx = np.asarray(x, dtype=np.float64)
    if xx.ndim == 1:
        xx = xx[:, None]
    if xx.ndim != 2 or xx.shape != (y.size, model.p) or not np.all(np.isfinite(xx)):
        raise FitError(f"'x' must be a finite (N, p) array of covariate values, one row per row of 'y' and one "
                       f"column per covariate of the model (got shape {np.shape(x)}).")
    p = model.p
    n = np.bincount(codes, minlength=k)
    if n.size != model.n.size or np.any(n != model.n):
        raise FitError("internal: the rows given to the permutation F are not the rows of the fitted model")
    obs = np.flatnonzero(n > 0)
    means = np.where(n > 0, np.nan_to_num(np.asarray(cell_means, dtype=np.float64)), 0.0)
    d = xx - model.xbar[codes]
    g, m, big_n = model.g, model.m, y.size
    df2 = big_n - g - m
    if df2 < 1:
        raise FitError(
            f"the F test needs residual degrees of freedom (N - cells - slopes = {df2}); collect more rows."
        )
    e_full = (y - means[codes]) - np.einsum("ij,ij->i", d, model.slopes[codes])
    sse = float(e_full @ e_full)
    if not sse > 0.0:
        raise FitError("the covariance analysis fits every row exactly (no residual variation), so F is undefined.")
    if C is None:
        cm = np.zeros((g - 1, k))
        cm[np.arange(g - 1), obs[:-1]] = 1.0
        cm[:, obs[-1]] = -1.0
    else:
        cm = _contrast_rows(C, n, k)
    gram = model.gram_inverse()
    L = cm @ model.adjusting_matrix()
    scatter = model.scatter()
    # the slope vector as the fit laid it out (each slope read from its first cell)
    beta = np.zeros(m)
    for c in obs:
        beta[model.index[c]] = model.slopes[c]
    theta = np.concatenate([means[obs], beta])
    try:
        chol = np.linalg.cholesky(L @ gram @ L.T)
    except np.linalg.LinAlgError as exc:
        raise FitError("the rows of 'C' are not estimable from the observed cells; check 'C'.") from exc
    q = cm.shape[0]
    z = np.linalg.solve(chol, L @ theta)
    observed = (float(z @ z) / q) / (sse / df2)
    # reduced-model residuals: e_full + X G L' (L G L')^-1 L theta
    v = gram @ L.T @ np.linalg.solve(chol.T, z)
    position = np.full(k, -1)
    position[obs] = np.arange(g)
    e0 = e_full + v[position[codes]] + np.einsum("ij,ij->i", d, v[g:][model.index[codes]])

    order = np.argsort(codes, kind="stable")
    resid = e0[order]
    ds = np.ascontiguousarray(d[order])
    starts = np.concatenate(([0], np.cumsum(n[obs])[:-1]))
    kmat = np.linalg.solve(chol, L @ gram)
    inv_n = 1.0 / n[obs].astype(np.float64)
    slope_cov = model.slope_cov
    total = float(resid @ resid)

    def f_of_rows(rows: np.ndarray) -> np.ndarray:
        sums = np.add.reduceat(rows, starts, axis=1)
        t = np.stack([np.add.reduceat(rows * ds[:, j], starts, axis=1) for j in range(p)], axis=2)
        tb = t.reshape(rows.shape[0], g * p) @ scatter
        quad = np.einsum("sj,jl,sl->s", tb, slope_cov, tb)
        u = np.hstack([sums, tb]) @ kmat.T
        ss_h = np.einsum("ij,ij->i", u, u)
        ss_w = total - (sums * sums) @ inv_n - quad
        with np.errstate(divide="ignore", invalid="ignore"):
            return (ss_h / q) / (np.maximum(ss_w, 0.0) / df2)

    observed_by_sums = float(f_of_rows(resid[None, :])[0])
    return _permute(resid, f_of_rows, observed, observed_by_sums, q, df2,
                    "Freedman-Lane permutation of reduced-model residuals, covariates kept", n_permutations, seed,
                    block, stop_after=stop_after, progress=progress, notify=notify, label=label)


def _announce(estimate: float, m: int, big_n: int, label: str, progress: bool, notify):
    """Say so before a long run; return a progress bar for one expected to take over a second."""
    what = f"the permutation F test of {label}" if label else "the permutation F test"
    if notify is not None and estimate > TIME_BUDGET:
        notify(
            f"{what} may take up to about {estimate:.0f} s ({m:,} permutations of {big_n:,} rows; it stops "
            "early once the p value is clear). Lower 'permutations' under [analysis] in the plan to shorten it, "
            "or set it to 0 to skip the test."
        )
    if progress and estimate > PROGRESS_AFTER and sys.stderr.isatty():
        from tqdm import tqdm

        return tqdm(total=m, desc=what, unit="perm", file=sys.stderr, leave=False, dynamic_ncols=True)
    return None


def permutation_f_test(
    y,
    codes,
    k: int | None = None,
    C=None,
    *,
    n_permutations: int = 10_000,
    seed: int | None = None,
    stop_after: int | None = None,
    progress: bool = False,
    notify=None,
    label: str = "",
    x=None,
    covariate_model=None,
    cell_means=None,
) -> PermutationResult:
    """Permutation p value of the F for C mu = 0 (default: all cell means equal).

    With ``C=None`` the outcomes are permuted across rows (the cells keep their sizes) and F is
    the one-way F over the observed cells. With a contrast matrix ``C`` (q x k, one column per
    cell) the Freedman-Lane scheme is used: the reduced model (cell means restricted by
    C mu = 0, fitted by least squares with weights n) gives fitted values and residuals; the
    residuals are permuted and added back; F of C is recomputed each time. For a one-way C of
    all differences the reduced model is the grand mean and both schemes coincide.

    p = (b + 1) / (m + 1), counting as extreme the permuted F at or above the observed F, with a
    relative tolerance of 100 machine epsilons for rounding (Phipson & Smyth 2010, Statistical
    Applications in Genetics and Molecular Biology 9(1), article 39: this p is exact for a
    test that adds the observed arrangement to m random ones). The Monte Carlo standard error
    is sqrt(p (1 - p) / m). ``seed=None`` draws a seed and records it in the result.

    With ``stop_after`` = h the run is sequential (Besag & Clifford 1991, Biometrika 78,
    301-304): it stops at the permutation l where the h-th permuted F reaches the observed one,
    with p = h / l (``stopped_early``; ``n_permutations`` = l, and ``mc_se`` uses l); if that
    never happens within ``n_permutations`` the p above is reported. ``progress`` and ``notify``
    are described in the module docstring; ``label`` names the test in those messages.

    With covariates ``x`` (N, p; offsets) the model is the fitted analysis of covariance given as
    ``covariate_model`` (:func:`reporter.inference.covariate_model.covariate_model_of`) with the
    outcome's ``cell_means`` (offsets), and C is a hypothesis about the adjusted cell means at the
    model's reference values. The Freedman-Lane reduced model then keeps
    the covariates: its residuals are permuted and F of C recomputed on the full covariance
    model each time (Freedman & Lane 1983, Journal of Business & Economic Statistics 1, 292-298;
    Anderson & Robinson 2001, Australian & New Zealand Journal of Statistics 43, 75-88, who show
    it keeps the level best among the schemes for a test with nuisance covariates).
    """
    m = _check_count(n_permutations)
    seed = _check_seed(seed)
    if stop_after is not None and (isinstance(stop_after, bool) or not isinstance(stop_after, (int, np.integer)) or stop_after < 1):
        raise FitError(f"'stop_after' must be a positive whole number or None (got {stop_after!r}).")
    if x is None:
        dist = _null_distribution(y, codes, k, C, m, seed, stop_after=stop_after, progress=progress,
                                  notify=notify, label=label)
    else:
        if covariate_model is None or cell_means is None:
            raise FitError("a permutation F with covariates needs the fitted covariance model and the cell means")
        dist = _null_distribution_adjusted(y, codes, x, k, C, covariate_model, cell_means, m, seed,
                                           stop_after=stop_after, progress=progress, notify=notify, label=label)
    b = dist.n_extreme
    used = int(dist.null.size)
    p = b / used if dist.stopped else (b + 1.0) / (m + 1.0)
    return PermutationResult(
        statistic=dist.observed,
        df1=dist.df1,
        df2=dist.df2,
        p=p,
        mc_se=float(np.sqrt(p * (1.0 - p) / used)),
        n_permutations=used,
        n_extreme=b,
        method=dist.method,
        seed=seed,
        max_permutations=m,
        stopped_early=dist.stopped,
    )
