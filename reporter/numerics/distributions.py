"""Distribution functions of the fitting layer, computed with ``scipy.special`` alone.

``scipy.stats`` costs about a second and a half to import, more than the rest of a report run;
the fitting layer needs only a few distribution functions, and ``scipy.stats`` computes each of
them with one ``scipy.special`` function (the cephes and Boost wrappers). This module calls
those functions directly, with the boundary and argument handling of ``scipy.stats``'s generic
``rv_continuous`` methods, so the results are the same numbers:

=====================  ==========================================  ==========================
function               computed as                                 as ``scipy.stats``
=====================  ==========================================  ==========================
``t_cdf(x, df)``       ``stdtr(df, x)``                            ``t.cdf``
``t_sf(x, df)``        ``stdtr(df, -x)``                           ``t.sf``
``t_ppf(q, df)``       ``stdtrit(df, q)``                          ``t.ppf``
``t_isf(q, df)``       ``-stdtrit(df, q)``                         ``t.isf``
``f_cdf(x, d1, d2)``   ``fdtr(d1, d2, x)``                         ``f.cdf``
``f_sf(x, d1, d2)``    ``fdtrc(d1, d2, x)``                        ``f.sf``
``f_ppf(q, d1, d2)``   ``fdtri(d1, d2, q)``                        ``f.ppf``
``f_isf(q, d1, d2)``   ``fdtri(d1, d2, 1 - q)``; beta inverse      ``f.isf`` (see below)
                       for q < 1e-3
``chi2_sf(x, df)``     ``chdtrc(df, x)``                           ``chi2.sf``
``norm_cdf(x)``        ``ndtr(x)``                                 ``norm.cdf``
``norm_ppf(q)``        ``ndtri(q)``                                ``norm.ppf``
``ncf_cdf(x, ...)``    ``ncfdtr(d1, d2, nc, x)``                   ``ncf.cdf``
``ncf_sf(x, ...)``     Boost's noncentral F complement             ``ncf.sf``
``nct_cdf(x, df, nc)`` ``nctdtr(df, nc, x)``                       ``nct.cdf``
=====================  ==========================================  ==========================

Upper F quantile: ``scipy.stats.f.isf(q)`` is ``fdtri(d1, d2, 1 - q)``, and forming ``1 - q``
loses the relative precision of a small ``q`` (all of it below 1e-16). Below ``q = 1e-3`` the
quantile is therefore taken from the beta distribution instead: if X ~ F(d1, d2) then
V = d2 / (d1 X + d2) ~ Beta(d2/2, d1/2) and P(X > x) = P(V < v) (Johnson, Kotz & Balakrishnan
1995, *Continuous Univariate Distributions* vol. 2, 2nd ed., ch. 27), so
x = d2 (1 - v) / (d1 v) with v = ``betaincinv(d2/2, d1/2, q)``, which keeps the precision of q.

The noncentral F survival function is ``scipy.special._ufuncs._ncf_sf``, the Boost function that
``scipy.stats.ncf.sf`` itself calls (``scipy.special`` has no public name for it);
``1 - ncfdtr`` would lose the relative precision of small upper tails. Like ``ncf.sf`` it is
wrong at a noncentrality of exactly 0 (scipy issue 26188); ``ncf_sf`` returns the central F
there instead.

Every function takes scalars or arrays (broadcast together) and returns a NumPy float (0-d) for
scalar arguments, an array otherwise. Invalid parameters (degrees of freedom <= 0 or NaN,
probabilities outside [0, 1]) give NaN, as in ``scipy.stats``.
"""

from __future__ import annotations

import numpy as np
from scipy import special
from scipy.special._ufuncs import _ncf_sf

__all__ = [
    "chi2_sf",
    "f_cdf",
    "f_isf",
    "f_ppf",
    "f_sf",
    "ncf_cdf",
    "ncf_sf",
    "nct_cdf",
    "norm_cdf",
    "norm_ppf",
    "t_cdf",
    "t_isf",
    "t_ppf",
    "t_sf",
]

# Below this upper-tail probability f_isf uses the beta inverse (see the module docstring); at and
# above it, 1 - q loses at most ~1e-13 of q's relative precision and f_isf equals scipy.stats.
_F_ISF_BETA_BELOW = 1e-3
# The smallest normal double; betaincinv returns it (or less) when the true v underflows.
_TINY = np.finfo(np.float64).tiny


def _out(value):
    """A 0-d result as a NumPy scalar, an array as itself."""
    return value[()] if isinstance(value, np.ndarray) else value


def _positive(*params) -> np.ndarray:
    """True where every shape parameter is a positive number (NaN fails)."""
    ok = np.asarray(True)
    for p in params:
        ok = ok & (np.asarray(p, dtype=np.float64) > 0)
    return ok


def _on_support(x: np.ndarray) -> np.ndarray:
    """x with the points outside (0, inf) replaced by 1, for functions of [0, inf)."""
    return np.where((x > 0) & (x < np.inf), x, 1.0)


def _probability(q) -> np.ndarray:
    q = np.asarray(q, dtype=np.float64)
    return (q >= 0) & (q <= 1)


# ---------------------------------------------------------------------------------------------
# Student's t


def t_cdf(x, df):
    """P(T <= x) for Student's t with ``df`` degrees of freedom (``scipy.stats.t.cdf``)."""
    x, df = np.broadcast_arrays(np.asarray(x, np.float64), np.asarray(df, np.float64))
    return _out(np.where(_positive(df), special.stdtr(df, x), np.nan))


def t_sf(x, df):
    """P(T > x) for Student's t, by symmetry ``stdtr(df, -x)`` (``scipy.stats.t.sf``)."""
    x, df = np.broadcast_arrays(np.asarray(x, np.float64), np.asarray(df, np.float64))
    return _out(np.where(_positive(df), special.stdtr(df, -x), np.nan))


def t_ppf(q, df):
    """The q quantile of Student's t (``scipy.stats.t.ppf``); -inf at q = 0, inf at q = 1."""
    q, df = np.broadcast_arrays(np.asarray(q, np.float64), np.asarray(df, np.float64))
    with np.errstate(invalid="ignore"):
        inner = special.stdtrit(df, q)
    value = np.where(q == 0, -np.inf, np.where(q == 1, np.inf, inner))
    return _out(np.where(_positive(df) & _probability(q), value, np.nan))


def t_isf(q, df):
    """The x with P(T > x) = q (``scipy.stats.t.isf``); inf at q = 0, -inf at q = 1.

    Computed as ``-stdtrit(df, q)``, which keeps the precision of small q.
    """
    q, df = np.broadcast_arrays(np.asarray(q, np.float64), np.asarray(df, np.float64))
    with np.errstate(invalid="ignore"):
        inner = -special.stdtrit(df, q)
    value = np.where(q == 0, np.inf, np.where(q == 1, -np.inf, inner))
    return _out(np.where(_positive(df) & _probability(q), value, np.nan))


# ---------------------------------------------------------------------------------------------
# F


def f_cdf(x, df1, df2):
    """P(F <= x) for the F(df1, df2) distribution (``scipy.stats.f.cdf``); 0 for x <= 0."""
    x, df1, df2 = np.broadcast_arrays(*(np.asarray(a, np.float64) for a in (x, df1, df2)))
    with np.errstate(invalid="ignore"):
        inner = special.fdtr(df1, df2, _on_support(x))
    value = np.where(x <= 0, 0.0, np.where(x == np.inf, 1.0, inner))
    return _out(np.where(_positive(df1, df2) & ~np.isnan(x), value, np.nan))


def f_sf(x, df1, df2):
    """P(F > x) for the F(df1, df2) distribution (``scipy.stats.f.sf``); 1 for x <= 0."""
    x, df1, df2 = np.broadcast_arrays(*(np.asarray(a, np.float64) for a in (x, df1, df2)))
    with np.errstate(invalid="ignore"):
        inner = special.fdtrc(df1, df2, _on_support(x))
    value = np.where(x <= 0, 1.0, np.where(x == np.inf, 0.0, inner))
    return _out(np.where(_positive(df1, df2) & ~np.isnan(x), value, np.nan))


def f_ppf(q, df1, df2):
    """The q quantile of F(df1, df2) (``scipy.stats.f.ppf``); 0 at q = 0, inf at q = 1."""
    q, df1, df2 = np.broadcast_arrays(*(np.asarray(a, np.float64) for a in (q, df1, df2)))
    with np.errstate(invalid="ignore"):
        inner = special.fdtri(df1, df2, q)
    value = np.where(q == 0, 0.0, np.where(q == 1, np.inf, inner))
    return _out(np.where(_positive(df1, df2) & _probability(q), value, np.nan))


def f_isf(q, df1, df2):
    """The x with P(F > x) = q for F(df1, df2); inf at q = 0, 0 at q = 1.

    Equals ``scipy.stats.f.isf`` (``fdtri(df1, df2, 1 - q)``) for q >= 1e-3; below, it is
    ``df2 (1 - v) / (df1 v)`` with ``v = betaincinv(df2/2, df1/2, q)``, which keeps the relative
    precision of q that ``1 - q`` loses (see the module docstring). When v underflows (is not
    above the smallest normal double, 2.2e-308) the quantile exceeds ``(df2/df1) 4.5e307`` and
    is returned as inf.
    """
    q, df1, df2 = np.broadcast_arrays(*(np.asarray(a, np.float64) for a in (q, df1, df2)))
    with np.errstate(invalid="ignore", divide="ignore"):
        central = special.fdtri(df1, df2, 1.0 - q)
        v = special.betaincinv(df2 / 2.0, df1 / 2.0, q)
        tail = np.where(v > _TINY, df2 * (1.0 - v) / (df1 * v), np.inf)
    inner = np.where(q < _F_ISF_BETA_BELOW, tail, central)
    value = np.where(q == 0, np.inf, np.where(q == 1, 0.0, inner))
    return _out(np.where(_positive(df1, df2) & _probability(q), value, np.nan))


# ---------------------------------------------------------------------------------------------
# chi-square and normal


def chi2_sf(x, df):
    """P(X > x) for chi-square with ``df`` degrees of freedom (``scipy.stats.chi2.sf``)."""
    x, df = np.broadcast_arrays(np.asarray(x, np.float64), np.asarray(df, np.float64))
    with np.errstate(invalid="ignore"):
        inner = special.chdtrc(df, _on_support(x))
    value = np.where(x <= 0, 1.0, np.where(x == np.inf, 0.0, inner))
    return _out(np.where(_positive(df) & ~np.isnan(x), value, np.nan))


def norm_cdf(x):
    """The standard normal distribution function Phi(x) (``scipy.stats.norm.cdf``)."""
    return _out(special.ndtr(np.asarray(x, np.float64)))


def norm_ppf(q):
    """The standard normal quantile Phi^-1(q) (``scipy.stats.norm.ppf``); NaN outside [0, 1]."""
    q = np.asarray(q, np.float64)
    with np.errstate(invalid="ignore"):
        inner = special.ndtri(q)
    return _out(np.where(_probability(q), inner, np.nan))


# ---------------------------------------------------------------------------------------------
# noncentral F and t


def ncf_cdf(x, df1, df2, nc):
    """P(F' <= x) for the noncentral F(df1, df2, nc) (``scipy.stats.ncf.cdf``); 0 for x <= 0."""
    x, df1, df2, nc = np.broadcast_arrays(*(np.asarray(a, np.float64) for a in (x, df1, df2, nc)))
    with np.errstate(invalid="ignore"):
        inner = special.ncfdtr(df1, df2, nc, _on_support(x))
    value = np.where(x <= 0, 0.0, np.where(x == np.inf, 1.0, inner))
    ok = _positive(df1, df2) & (nc >= 0) & ~np.isnan(x)
    return _out(np.where(ok, value, np.nan))


def ncf_sf(x, df1, df2, nc):
    """P(F' > x) for the noncentral F(df1, df2, nc) (``scipy.stats.ncf.sf``); 1 for x <= 0.

    At ``nc == 0`` the central F survival function: Boost's complement, which ``ncf.sf`` calls,
    returns ``-cdf`` there (scipy issue 26188).
    """
    x, df1, df2, nc = np.broadcast_arrays(*(np.asarray(a, np.float64) for a in (x, df1, df2, nc)))
    xc = _on_support(x)
    with np.errstate(invalid="ignore"):
        inner = np.where(nc == 0, special.fdtrc(df1, df2, xc), _ncf_sf(xc, df1, df2, nc))
    value = np.where(x <= 0, 1.0, np.where(x == np.inf, 0.0, inner))
    ok = _positive(df1, df2) & (nc >= 0) & ~np.isnan(x)
    return _out(np.where(ok, value, np.nan))


def nct_cdf(x, df, nc):
    """P(T' <= x) for the noncentral t(df, nc) (``scipy.stats.nct.cdf``)."""
    x, df, nc = np.broadcast_arrays(*(np.asarray(a, np.float64) for a in (x, df, nc)))
    with np.errstate(invalid="ignore"):
        inner = special.nctdtr(df, nc, x)
    ok = _positive(df) & ~np.isnan(nc)
    return _out(np.where(ok, inner, np.nan))
