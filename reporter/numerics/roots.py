"""Root finding by Brent's method, without importing scipy.optimize (0.3 s of import time).

Brent, R. P. (1973), *Algorithms for Minimization without Derivatives*, Prentice-Hall,
chapter 4 (procedure ``zero``): inverse quadratic interpolation and secant steps, safeguarded by
bisection, on a bracket [a, b] with f(a) and f(b) of opposite sign. Converges when the bracket
is narrower than 2·(4·eps·|b| + xtol), as in the published procedure; ``rtol`` adds a relative
term, as in ``scipy.optimize.brentq``.
"""

from __future__ import annotations

from typing import Callable

from reporter.errors import FitError

_EPS = 2.220446049250313e-16


def find_root(f: Callable[[float], float], a: float, b: float, *, xtol: float = 2e-12,
              rtol: float = 4 * _EPS, maxiter: int = 200) -> float:
    """A root of ``f`` in [a, b], where f(a) and f(b) have opposite signs (or one is zero)."""
    fa, fb = float(f(a)), float(f(b))
    if fa == 0.0:
        return a
    if fb == 0.0:
        return b
    if (fa > 0) == (fb > 0):
        raise FitError(f"internal: the root bracket [{a!r}, {b!r}] does not change sign ({fa!r}, {fb!r}).")
    c, fc = a, fa
    d = e = b - a
    for _ in range(maxiter):
        if (fb > 0) == (fc > 0):
            c, fc = a, fa
            d = e = b - a
        if abs(fc) < abs(fb):
            a, b, c = b, c, b
            fa, fb, fc = fb, fc, fb
        tol = 2 * _EPS * abs(b) + 0.5 * xtol + 0.5 * rtol * abs(b)
        m = 0.5 * (c - b)
        if abs(m) <= tol or fb == 0.0:
            return b
        if abs(e) < tol or abs(fa) <= abs(fb):
            d = e = m  # bisection
        else:
            s = fb / fa
            if a == c:  # secant step
                p = 2 * m * s
                q = 1 - s
            else:  # inverse quadratic interpolation
                q = fa / fc
                r = fb / fc
                p = s * (2 * m * q * (q - r) - (b - a) * (r - 1))
                q = (q - 1) * (r - 1) * (s - 1)
            if p > 0:
                q = -q
            else:
                p = -p
            if 2 * p < min(3 * m * q - abs(tol * q), abs(e * q)):
                e, d = d, p / q
            else:
                d = e = m
        a, fa = b, fb
        b += d if abs(d) > tol else (tol if m > 0 else -tol)
        fb = float(f(b))
    raise FitError(f"internal: root finding did not converge in {maxiter} iterations on [{a!r}, {b!r}].")
