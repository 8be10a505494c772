"""Quantiles and tail areas of the normal and t distributions, one value at a time.

scipy.stats' distribution objects check and broadcast their arguments on every call (about
a quarter of a millisecond, ten times the arithmetic); the comparisons call them several
times for each of hundreds of pairs. These functions call the scipy.special functions those
objects call, so the numbers are the same to the last bit (tests/test_distributions.py
compares them with scipy.stats over a grid that includes the edges).
"""

from __future__ import annotations

from scipy import special


def norm_ppf(q: float) -> float:
    """Standard normal quantile: the same as ``scipy.stats.norm.ppf(q)``.

    Examples
    --------
    >>> round(norm_ppf(0.975), 6)
    1.959964
    """
    return float(special.ndtri(q))


def norm_sf(z: float) -> float:
    """Standard normal upper tail area: the same as ``scipy.stats.norm.sf(z)``."""
    return float(special.ndtr(-z))


def t_ppf(q: float, df: float) -> float:
    """Student t quantile: the same as ``scipy.stats.t.ppf(q, df)``."""
    if not df > 0:
        return float("nan")
    if q == 0 or q == 1:  # the support's ends (scipy.special gives +inf at both)
        return float("-inf") if q == 0 else float("inf")
    return float(special.stdtrit(df, q))


def t_sf(x: float, df: float) -> float:
    """Student t upper tail area: the same as ``scipy.stats.t.sf(x, df)``."""
    if not df > 0:
        return float("nan")
    return float(special.stdtr(df, -x))


def t_cdf(x: float, df: float) -> float:
    """Student t lower tail area: the same as ``scipy.stats.t.cdf(x, df)``."""
    if not df > 0:
        return float("nan")
    return float(special.stdtr(df, x))
