"""The analysis of covariance fitted from the cell statistics alone (cost independent of N).

The model of row i in cell c with p covariates x is (Searle (1987), *Linear Models for Unbalanced
Data*, Wiley, section 9.2; Maxwell, Delaney & Kelley (2018), *Designing Experiments and Analyzing
Data*, 3rd ed., Routledge, chapter 9)::

    y_i = mu_c + b_c'(x_i − x*) + e_i

with b_c = b for every cell ("common" slopes, the usual analysis of covariance) or one slope
vector per cell ("per-cell", the separate-slopes model of Milliken & Johnson (2002), *Analysis of
Messy Data*, vol. 3: *Analysis of Covariance*, Chapman & Hall/CRC, chapters 2-3; effects are then
those of the adjusted means at the reference point x*). mu_c is the adjusted mean of cell c, the
cell mean at x = x*.

Compressed least squares. Writing y_i − a − b'x_i = (ȳ_c − a − b'x̄_c) + ((y_i − ȳ_c) − b'(x_i − x̄_c)),
the cross term vanishes within each cell, so the residual SS of any model whose fixed part is a
combination of cell-level columns G plus covariate columns is

    Σ_c n_c (ȳ_c − G_c·γ − (x̄_c − x*)'b_c)²  +  Σ_c [b_c; −1]' M_c [b_c; −1],

M_c = [[Sxx_c, Sxy_c], [Sxy_c', Syy_c]] the within-cell cross-products. Each M_c = U_c'U_c
(Cholesky, or a symmetric square root where a cell's M_c is singular), so the model is the least
squares problem on the pseudo-rows sqrt(n_c)·[G_c, x̄_c − x*, ȳ_c] and the rows of U_c: k·(p + 2)
rows whatever N. It is solved by a QR factorization (Golub & Van Loan (2013), *Matrix
Computations*, 4th ed., section 5.3), never through the normal equations. Columns are scaled by
powers of two (exact) before factoring. All covariate values are offsets from their pivots, and
the reference x* enters as an offset as well, so large constant leading digits never meet.

For the full model (one mu per cell) the cell intercepts absorb the first sum entirely, so the
slopes come from the within rows alone: with common slopes B = Sxx⁻¹Sxy (pooled), SSE = Syy − Sxy'B,
df = N − k_obs − p; with per-cell slopes each cell has its own, df = N − k_obs·(1 + p). The adjusted
mean is ȳ_c − b_c'(x̄_c − x*), and since the cell means are uncorrelated with the within-cell
slope estimates, its covariance over σ² is diag(1/n_c) + A·Cov(b)/σ²·A' with A_c = x̄_c − x*
(Searle 1987, section 9.2; Maxwell, Delaney & Kelley 2018, chapter 9, the variance of an
adjusted mean).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from fractions import Fraction
from typing import Sequence

import numpy as np

from reporter.errors import FitError
from reporter.intake.cells import CellStats, CovariateStats
from reporter.numerics.distributions import f_sf, t_sf

SLOPE_MODES = ("common", "per-cell")


@dataclass(frozen=True)
class Slope:
    """The estimated slope of one covariate: common to all cells (``cell`` None) or in one cell."""

    covariate: str
    cell: int | None
    estimate: float
    se: float
    t: float
    p: float
    df: int


@dataclass(frozen=True)
class SlopesCheck:
    """Homogeneity of slopes: the common-slope model against the per-cell-slope model.

    F = ((SSE_common − SSE_per-cell)/df1) / (SSE_per-cell/df2): the test of the cell × covariate
    interaction (Maxwell, Delaney & Kelley 2018, chapter 9, the test of homogeneity of regression
    slopes; Milliken & Johnson 2002, vol. 3, chapter 2).
    """

    F: float
    df1: int
    df2: int
    p: float
    ss: float
    ss_error_common: float
    ss_error_per_cell: float
    covariates: tuple[str, ...]


@dataclass(frozen=True)
class CovariateFit:
    """What the covariates change in the full-model fit (see :func:`fit_covariates`)."""

    modes: tuple[str, ...]
    reference: tuple[float, ...]  # x* on the original scale
    reference_offset: np.ndarray  # (p,) x* minus each covariate's pivot
    slope_matrix: np.ndarray  # (k, p) the slope of each covariate in each cell (zero rows for empty cells)
    slope_index: np.ndarray  # (k, p) position of b[c, j] in the slope vector (-1 for empty cells)
    slope_vector: np.ndarray  # (m,)
    slope_cov: np.ndarray  # (m, m) covariance of the slope vector divided by sigma^2
    ss_error: float
    df_error: int
    adjusted_offset_mean: np.ndarray  # (k,)
    unscaled_cov: np.ndarray  # (k, k)

    @property
    def mode(self) -> str:
        """"common", "per-cell", or "mixed" when covariates differ."""
        kinds = set(self.modes)
        return self.modes[0] if len(kinds) == 1 else "mixed"


def _modes(specs, p: int) -> tuple[str, ...]:
    if specs is None:
        return ("common",) * p
    modes = tuple(getattr(s, "slopes", "common") or "common" for s in specs)
    for m in modes:
        if m not in SLOPE_MODES:
            raise FitError(f"internal: slopes mode {m!r} is not one of {SLOPE_MODES}")
    return modes


def reference_point(cells: CellStats, specs=None) -> tuple[np.ndarray, tuple[float, ...]]:
    """x* as offsets from the covariates' pivots and on the original scale.

    A covariate's ``adjust_to`` None is the mean of the rows used, Σ n_c x̄_c / N (exactly rounded
    sum of the offsets); a number is taken exactly (its ``adjust_to_exact`` minus the exact pivot).
    """
    cov = cells.covariates
    o = cells.observed
    n = cells.n[o].astype(float)
    offs, values = [], []
    for j in range(cov.p):
        spec = None if specs is None else specs[j]
        target = None if spec is None else getattr(spec, "adjust_to", None)
        if target is None:
            off = math.fsum((n * cov.offset_mean[o, j]).tolist()) / cells.n_total
            value = float(cov.pivot[j]) + off
        else:
            exact = getattr(spec, "adjust_to_exact", None)
            exact = Fraction(target) if exact is None else Fraction(exact)
            off = float(exact - cov.pivot_exact[j])
            value = float(target)
        offs.append(off)
        values.append(value)
    return np.array(offs), tuple(values)


def _scales(cells: CellStats, cov: CovariateStats, chosen: Sequence[int]) -> tuple[np.ndarray, float]:
    """Powers of two near the within-cell spread of each chosen covariate and of the outcome."""
    o = cells.observed
    pooled = cov.pooled_sxx(o)

    def pow2(v: float) -> float:
        return 2.0 ** math.floor(math.log2(math.sqrt(v))) if v > 0 and math.isfinite(v) else 1.0

    sx = np.array([pow2(float(pooled[j, j])) for j in chosen])
    return sx, pow2(cells.ss_within)


def _square_root(S: np.ndarray) -> np.ndarray:
    """U with U'U = S for a symmetric positive semi-definite S.

    Cholesky when every pivot is clearly positive; otherwise (a cell whose covariates are
    constant, collinear, or with no more rows than covariates) the symmetric square root from
    the eigen-decomposition, with the directions of eigenvalues below 1e-12 of the largest
    dropped, so a rank-deficient cell adds only the directions its rows really span.
    """
    top = float(np.max(np.diag(S))) if S.size else 0.0
    if top <= 0.0:
        return np.zeros((0, S.shape[0]))
    try:
        U = np.linalg.cholesky(S).T
        if float(np.min(np.diag(U))) ** 2 > 1e-12 * top:
            return U
    except np.linalg.LinAlgError:
        pass
    lam, E = np.linalg.eigh(S)
    keep = lam > 1e-12 * max(float(lam.max()), top)
    return np.sqrt(lam[keep])[:, None] * E[:, keep].T


def _within_rows(cells: CellStats, chosen: Sequence[int], cols: np.ndarray, width: int,
                 sx: np.ndarray, sy: float) -> tuple[list[np.ndarray], list[float]]:
    """Pseudo-rows [U_c | u_y] of each cell's within-cell cross-products (scaled).

    ``cols[c, i]`` is the column of covariate ``chosen[i]`` in cell c; the outcome part is the
    Cholesky-like completion u_y with ||u_y||² = Syy_c − Sxy_c'Sxx_c⁺Sxy_c (exactly rounded sums).
    """
    cov = cells.covariates
    rows: list[np.ndarray] = []
    target: list[float] = []
    idx = list(chosen)
    for c in np.flatnonzero(cells.observed):
        if cells.n[c] < 2:
            continue
        Sxx = cov.sxx[c][np.ix_(idx, idx)] / np.outer(sx, sx)
        Sxy = cov.sxy[c][idx] / (sx * sy)
        syy = float(cells.ss[c]) / (sy * sy)
        U = _square_root(Sxx) if idx else np.zeros((0, 0))
        if U.shape[0]:
            r = np.linalg.lstsq(U.T, Sxy, rcond=None)[0]
            rest = max(math.fsum([syy, *(-(r * r)).tolist()]), 0.0)
        else:
            r = np.zeros(0)
            rest = syy
        for i in range(U.shape[0]):
            row = np.zeros(width)
            row[cols[c]] = U[i]
            rows.append(row)
            target.append(float(r[i]))
        rows.append(np.zeros(width))
        target.append(math.sqrt(rest))
    return rows, target


def _slot_columns(cells: CellStats, modes: Sequence[str], chosen: Sequence[int], start: int) -> tuple[np.ndarray, int]:
    """(k, len(chosen)) column of each chosen covariate's slope in each cell, and the next free column."""
    k = cells.k
    obs = np.flatnonzero(cells.observed)
    cols = np.full((k, len(chosen)), -1, dtype=np.int64)
    nxt = start
    for i, j in enumerate(chosen):
        if modes[j] == "common":
            cols[obs, i] = nxt
            nxt += 1
        else:
            cols[obs, i] = np.arange(nxt, nxt + obs.size)
            nxt += obs.size
    return cols, nxt


def _basis(X: np.ndarray) -> tuple[np.ndarray, int]:
    """An orthonormal basis of the columns of X and its rank (QR, SVD when rank deficient)."""
    if X.shape[1] == 0:
        return np.zeros((X.shape[0], 0)), 0
    Q, R = np.linalg.qr(X)
    diag = np.abs(np.diag(R))
    rank = int((diag > 1e-10 * max(diag.max(), 1e-300)).sum())
    if rank < X.shape[1]:
        U, s, _ = np.linalg.svd(X, full_matrices=False)
        rank = int((s > 1e-10 * s.max()).sum())
        Q = U[:, :rank]
    return Q, rank


@dataclass(frozen=True)
class WithinBlock:
    """The within-cell pseudo-rows of every covariate, reduced once by QR to a triangle.

    ``cols[c, j]`` is the slope column of covariate j in cell c (from 0; -1 for empty cells),
    ``m`` the number of slope columns, ``T`` the triangle R of QR([U | u_y]) over all cells
    (``m + 1`` columns, the last one the outcome), ``sx`` and ``sy`` the power-of-two scales.
    A model with only some covariates drops the other columns of ``T``: setting a slope to zero
    is dropping its column, and an orthogonal transformation of rows keeps every least-squares
    residual (Golub & Van Loan 2013, section 5.3), so the rows never need building again.
    """

    modes: tuple[str, ...]
    cols: np.ndarray
    m: int
    T: np.ndarray
    colnorm: np.ndarray
    sx: np.ndarray
    sy: float


def within_block(cells: CellStats, modes: Sequence[str]) -> WithinBlock:
    """The reduced within-cell rows of all covariates with the given slope modes."""
    cov = cells.covariates
    every = list(range(cov.p))
    cols, m = _slot_columns(cells, modes, every, 0)
    sx, sy = _scales(cells, cov, every)
    rows, target = _within_rows(cells, every, cols, m, sx, sy)
    W = np.column_stack([np.vstack(rows), np.array(target)]) if rows else np.zeros((0, m + 1))
    colnorm = np.sqrt((W[:, :m] * W[:, :m]).sum(axis=0))
    T = np.linalg.qr(W, mode="r") if W.shape[0] else W
    return WithinBlock(tuple(modes), cols, m, T, colnorm, sx, sy)


def _rss(A: np.ndarray, t: np.ndarray) -> tuple[float, int]:
    """Residual SS of t on the columns of A and the rank of A: QR of [A | t] (the last diagonal
    entry of R is the residual norm), through an orthonormal basis when A is rank deficient."""
    n = A.shape[1]
    R = np.linalg.qr(np.column_stack([A, t]), mode="r")
    if R.shape[0] > n and n:
        diag = np.abs(np.diag(R[:n, :n]))
        if bool((diag > 1e-10 * max(diag.max(), 1e-300)).all()):
            return float(R[n, n]) ** 2, n
    Q, rank = _basis(R[:, :n])
    res = R[:, n] - Q @ (Q.T @ R[:, n])
    return math.fsum((res * res).tolist()), rank


def covariate_rss(cells: CellStats, columns: np.ndarray, chosen: Sequence[int], block: WithinBlock,
                  reference_offset: np.ndarray) -> tuple[float, int]:
    """Residual SS (between plus within cells) and rank of the model with cell-level ``columns``
    (k x r, an intercept among them) and the ``chosen`` covariates, each with its slope mode in
    ``block`` (:func:`within_block`).

    Solved by QR on the pseudo-rows described in the module docstring (Searle 1987, section 9.2).
    """
    cov = cells.covariates
    o = cells.observed
    obs = np.flatnonzero(o)
    chosen = list(chosen)
    r = columns.shape[1]
    keep = [int(c) for j in chosen for c in np.unique(block.cols[obs, j])]
    where = {c: r + i for i, c in enumerate(keep)}
    width = r + len(keep)
    w = np.sqrt(cells.n[o].astype(float))
    between = np.zeros((obs.size, width))
    between[:, :r] = columns[o] * w[:, None]
    for j in chosen:
        d = (cov.offset_mean[obs, j] - reference_offset[j]) / block.sx[j]
        between[np.arange(obs.size), [where[int(c)] for c in block.cols[obs, j]]] = d * w
    tb = (cells.offset_mean[o] - cells.grand_offset_mean) / block.sy * w
    within = np.zeros((block.T.shape[0], width))
    within[:, r:] = block.T[:, keep]
    A = np.vstack([between, within])
    t = np.concatenate([tb, block.T[:, block.m]])
    rss, rank = _rss(A, t)
    return rss * block.sy * block.sy, rank


def _slope_system(cells: CellStats, block: WithinBlock, labels: Sequence[str] | None = None):
    """The within-cell least squares problem of the full model: slopes, their unscaled covariance
    and the residual SS."""
    m, T = block.m, block.T
    if T.shape[0] < m + 1:
        raise FitError("there are fewer rows than slopes to estimate; use common slopes or fewer covariates")
    R = T[:m, :m]
    diag = np.abs(np.diag(R))
    bad = np.flatnonzero(~(diag > 1e-9 * np.maximum(block.colnorm, 1e-300)) | (block.colnorm == 0))
    if bad.size:
        raise FitError(_not_estimable(cells, block.modes, list(range(cells.covariates.p)), block.cols, int(bad[0]),
                                      labels))
    b = np.linalg.solve(R, T[:m, m])
    Rinv = np.linalg.solve(R, np.eye(m))
    scale = _column_scales(block.cols, block.sx, m)
    b = b * block.sy / scale
    slope_cov = (Rinv @ Rinv.T) / np.outer(scale, scale)
    sse = float(T[m, m]) ** 2 * block.sy * block.sy
    return b, slope_cov, sse


def _column_scales(cols: np.ndarray, sx: np.ndarray, m: int) -> np.ndarray:
    """The scale of each slope column (that of its covariate)."""
    out = np.ones(m)
    for i in range(cols.shape[1]):
        out[np.unique(cols[cols[:, i] >= 0, i])] = sx[i]
    return out


def _not_estimable(cells, modes, chosen, cols, col, labels=None) -> str:
    cov = cells.covariates
    for i, j in enumerate(chosen):
        hit = np.flatnonzero(cols[:, i] == col)
        if hit.size == 0:
            continue
        name = cov.names[j]
        where = str(int(hit[0]) + 1) if labels is None else labels[int(hit[0])]
        if modes[j] == "per-cell":
            return (f"the slope of covariate '{name}' in the cell ({where}) cannot be estimated: within that cell "
                    f"the covariate is constant or collinear with the other covariates (or the cell has too few rows). "
                    f"Use slopes = \"common\" for '{name}', or collect more varied values in every cell.")
        return (f"the slope of covariate '{name}' cannot be estimated: it is constant within every cell or collinear "
                f"with the other covariates within cells. Remove it from [[covariates]] (or the covariate it "
                f"duplicates).")
    return "internal: a slope column that belongs to no covariate"


def fit_covariates(cells: CellStats, specs=None, cell_labels: Sequence[str] | None = None) -> CovariateFit:
    """The full model with covariates: slopes, residual SS and df, adjusted cell means at x* and
    their covariance over σ² (see the module docstring for the formulas and their sources).
    ``cell_labels`` name the cells in messages (a cell too small for its own slopes)."""
    cov = cells.covariates
    p = cov.p
    modes = _modes(specs, p)
    ref_off, ref = reference_point(cells, specs)
    block = within_block(cells, modes)
    cols = block.cols
    b, slope_cov, sse = _slope_system(cells, block, cell_labels)
    k = cells.k
    o = cells.observed
    obs = np.flatnonzero(o)
    m = b.size
    df = cells.n_total - obs.size - m
    if df <= 0:
        raise FitError(
            f"with {m} slope{'s' if m != 1 else ''} and {obs.size} cell means to estimate from {cells.n_total} rows "
            "there are no residual degrees of freedom left; use common slopes, fewer covariates or more rows."
        )
    slopes = np.zeros((k, p))
    G = np.zeros((k, m))
    adjusted = np.full(k, np.nan)
    for c in obs:
        d = cov.offset_mean[c] - ref_off
        slopes[c] = b[cols[c]]
        G[c, cols[c]] = d
        adjusted[c] = math.fsum([float(cells.offset_mean[c]), *(-(slopes[c] * d)).tolist()])
    V = np.zeros((k, k))
    V[np.ix_(obs, obs)] = G[obs] @ slope_cov @ G[obs].T
    V[obs, obs] += 1.0 / cells.n[obs]
    V = (V + V.T) / 2.0
    for arr in (ref_off, slopes, cols, b, slope_cov, adjusted, V):
        arr.setflags(write=False)
    return CovariateFit(modes=modes, reference=ref, reference_offset=ref_off, slope_matrix=slopes, slope_index=cols,
                        slope_vector=b, slope_cov=slope_cov, ss_error=sse, df_error=df,
                        adjusted_offset_mean=adjusted, unscaled_cov=V)


def describe_slopes(cells: CellStats, cf: CovariateFit, mse: float) -> tuple[Slope, ...]:
    """Each slope with its SE, t and two-sided p on the model's error df."""
    out = []
    names = cells.covariates.names
    obs = np.flatnonzero(cells.observed)
    for j, name in enumerate(names):
        cells_of = [None] if cf.modes[j] == "common" else [int(c) for c in obs]
        for c in cells_of:
            i = int(cf.slope_index[obs[0] if c is None else c, j])
            est = float(cf.slope_vector[i])
            se = math.sqrt(mse * float(cf.slope_cov[i, i]))
            t = est / se
            out.append(Slope(name, c, est, se, t, float(2 * t_sf(abs(t), cf.df_error)), cf.df_error))
    return tuple(out)


def covariate_wald(cf: CovariateFit, j: int, mse: float) -> tuple[float, int]:
    """SS and df of the hypothesis that every slope of covariate j is zero (b'Cov⁻¹b, Searle 1987,
    eq. 8.47, with Cov the slopes' covariance over σ²)."""
    idx = np.unique(cf.slope_index[cf.slope_index[:, j] >= 0, j])
    b = cf.slope_vector[idx]
    S = cf.slope_cov[np.ix_(idx, idx)]
    L = np.linalg.cholesky(S)
    z = np.linalg.solve(L, b)
    return math.fsum((z * z).tolist()), int(idx.size)


def slopes_homogeneity(cells: CellStats) -> SlopesCheck:
    """The F test of equal slopes in every cell (the cell × covariate interaction), comparing the
    common-slope model with the per-cell-slope model of all covariates (Maxwell, Delaney & Kelley
    2018, chapter 9; Milliken & Johnson 2002, vol. 3, chapter 2). Degrees of freedom come from the
    ranks of the two fits, so a cell too small for its own slopes lowers df1 instead of failing."""
    cov = cells.covariates
    p = cov.p
    chosen = list(range(p))
    ref = np.zeros(p)
    ident = np.eye(cells.k)[:, cells.observed]
    sse0, rank0 = covariate_rss(cells, ident, chosen, within_block(cells, ("common",) * p), ref)
    sse1, rank1 = covariate_rss(cells, ident, chosen, within_block(cells, ("per-cell",) * p), ref)
    df1 = rank1 - rank0
    df2 = cells.n_total - rank1
    if df1 <= 0 or df2 <= 0 or sse1 <= 0:
        raise FitError("the homogeneity of slopes cannot be tested: no cell has enough rows for its own slopes"
                       if df1 <= 0 else "the per-cell-slope model leaves no residual degrees of freedom")
    ss = max(sse0 - sse1, 0.0)
    F = (ss / df1) / (sse1 / df2)
    return SlopesCheck(F=F, df1=df1, df2=df2, p=float(f_sf(F, df1, df2)), ss=ss, ss_error_common=sse0,
                       ss_error_per_cell=sse1, covariates=cov.names)
