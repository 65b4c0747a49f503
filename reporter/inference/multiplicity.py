"""Adjusted p-values for a family of tests.

Methods (m = number of p-values in the family, p_(1) <= ... <= p_(m) the sorted values):

- ``"holm"`` (default): step-down, adjusted p_(i) = max_{j<=i} min(1, (m - j + 1) p_(j))
  (Holm 1979, Scandinavian Journal of Statistics 6:65). Controls the familywise error rate under
  any dependence.
- ``"hochberg"``: step-up, adjusted p_(i) = min_{j>=i} min(1, (m - j + 1) p_(j))
  (Hochberg 1988, Biometrika 75:800). Familywise control under independence or positive
  dependence; never larger than Holm's.
- ``"bonferroni"``: min(1, m p) (Dunn 1961, Journal of the American Statistical Association 56:52).
- ``"benjamini-hochberg"``: step-up, adjusted p_(i) = min_{j>=i} min(1, m p_(j) / j)
  (Benjamini & Hochberg 1995, JRSS B 57:289). Controls the false discovery rate.
- ``"none"``: the p-values unchanged.

Every adjusted value is at least its raw p, at most 1, and the adjusted values keep the order of
the raw ones. Missing p-values (None or NaN) stay None and do not count in m.
"""

from __future__ import annotations

import difflib
import math
from dataclasses import dataclass

import numpy as np

from reporter.errors import FitError, PlanError

__all__ = ["ADJUSTMENT_METHODS", "PAdjustment", "adjust_p"]

ADJUSTMENT_METHODS = {
    "holm": "Holm (1979) step-down",
    "hochberg": "Hochberg (1988) step-up",
    "bonferroni": "Bonferroni",
    "benjamini-hochberg": "Benjamini & Hochberg (1995) false discovery rate",
    "none": "no adjustment",
}


@dataclass(frozen=True)
class PAdjustment:
    """Raw and adjusted p-values of one family, in the input order.

    ``family_size`` counts the p-values that were present; entries that were None or NaN are
    None in both ``p`` and ``p_adjusted``. ``source`` names the method and its paper.
    """

    method: str
    p: tuple[float | None, ...]
    p_adjusted: tuple[float | None, ...]
    family_size: int
    source: str


def _as_float_or_none(value) -> float | None:
    if value is None:
        return None
    value = float(value)
    if math.isnan(value):
        return None
    if not (0.0 <= value <= 1.0):
        raise FitError(f"a p-value must lie between 0 and 1 (got {value:g}).")
    return value


def _adjust_sorted(p_sorted: np.ndarray, method: str) -> np.ndarray:
    m = p_sorted.size
    rank = np.arange(1, m + 1, dtype=float)
    if method == "bonferroni":
        return np.minimum(1.0, m * p_sorted)
    if method == "holm":
        return np.minimum(1.0, np.maximum.accumulate((m - rank + 1.0) * p_sorted))
    if method == "hochberg":
        stepped = (m - rank + 1.0) * p_sorted
        return np.minimum(1.0, np.minimum.accumulate(stepped[::-1])[::-1])
    if method == "benjamini-hochberg":
        stepped = m * p_sorted / rank
        return np.minimum(1.0, np.minimum.accumulate(stepped[::-1])[::-1])
    return p_sorted.copy()


def adjust_p(pvalues, method: str = "holm") -> PAdjustment:
    """Adjust a family of p-values for multiplicity; see the module docstring for the methods.

    ``pvalues`` is any sequence of numbers, None or NaN; the result keeps the input order.
    """
    if method not in ADJUSTMENT_METHODS:
        supported = ", ".join(repr(name) for name in ADJUSTMENT_METHODS)
        close = difflib.get_close_matches(str(method), list(ADJUSTMENT_METHODS), n=1)
        hint = f" Did you mean {close[0]!r}?" if close else ""
        raise PlanError(
            f"'correction' (the multiplicity method) must be one of {supported} "
            f"(got {method!r}).{hint}"
        )
    raw = tuple(_as_float_or_none(v) for v in pvalues)
    present = [i for i, v in enumerate(raw) if v is not None]
    adjusted: list[float | None] = [None] * len(raw)
    if present:
        values = np.array([raw[i] for i in present], dtype=float)
        order = np.argsort(values, kind="stable")
        adjusted_sorted = _adjust_sorted(values[order], method)
        result = np.empty_like(values)
        result[order] = adjusted_sorted
        for slot, value in zip(present, result):
            adjusted[slot] = float(value)
    return PAdjustment(
        method=method,
        p=raw,
        p_adjusted=tuple(adjusted),
        family_size=len(present),
        source=ADJUSTMENT_METHODS[method],
    )
