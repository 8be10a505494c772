"""Values against spec limits: the share outside with Wilson's interval, and the process
capability indices Cp and Cpk with confidence intervals.

Capability indices assume a stable process whose values are roughly normal; the callers say
so on the page and note when the normality check rejects.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from scipy import stats


def wilson_interval(count: int, n: int, confidence: float = 0.95) -> tuple[float, float]:
    """Return Wilson's score interval (low, high) for the proportion count / n.

    Notes
    -----
    With p̂ = k/n and z = Φ⁻¹(1 − α/2): centre (p̂ + z²/(2n)) / (1 + z²/n), half-width
    z √(p̂(1 − p̂)/n + z²/(4n²)) / (1 + z²/n). It stays inside [0, 1] and keeps close to its
    nominal coverage for small counts, where the Wald interval fails.

    References
    ----------
    Wilson, E. B. (1927). Probable inference, the law of succession, and statistical
    inference. JASA 22(158), 209–212.

    Examples
    --------
    >>> [round(v, 4) for v in wilson_interval(3, 50)]
    [0.0206, 0.1622]
    """
    if n <= 0:
        return math.nan, math.nan
    z = float(stats.norm.ppf(0.5 + confidence / 2))
    p = count / n
    denom = 1 + z * z / n
    centre = (p + z * z / (2 * n)) / denom
    half = z * math.sqrt(p * (1 - p) / n + z * z / (4 * n * n)) / denom
    return max(0.0, centre - half), min(1.0, centre + half)


@dataclass(frozen=True)
class Capability:
    """One group's values against its spec limits."""

    n: int
    below: int  # values under the lower limit
    above: int  # values over the upper limit
    share_outside: float
    share_low: float  # Wilson interval of the share outside
    share_high: float
    cp: float  # NaN unless both limits are given
    cp_low: float
    cp_high: float
    cpk: float  # Cpk, or Cpu / Cpl with one limit
    cpk_low: float
    cpk_high: float
    confidence: float


def capability(
    n: int,
    mean: float,
    sd: float,
    below: int,
    above: int,
    lower: float | None,
    upper: float | None,
    confidence: float = 0.95,
) -> Capability:
    """Return the share outside the limits and the capability indices of one group.

    Notes
    -----
    - Share outside (below + above) / n with Wilson's interval (:func:`wilson_interval`).
    - Cp = (USL − LSL) / (6 s), two-sided limits only; its interval from the chi-square
      distribution of the sample variance under normality:
      Cp √(χ²_{α/2, n−1} / (n − 1)) to Cp √(χ²_{1−α/2, n−1} / (n − 1)).
    - Cpk = min(USL − x̄, x̄ − LSL) / (3 s) (with one limit, the one side: Cpu or Cpl), with
      Bissell's normal approximation Cpk ± z_{1−α/2} √(1/(9n) + Cpk² / (2(n − 1))).

    References
    ----------
    Bissell, A. F. (1990). How reliable is your capability index? Applied Statistics 39(3),
    331–340. Kane, V. E. (1986). Process capability indices. J. Quality Technology 18(1),
    41–52 (Cp, Cpk and the chi-square interval for Cp).

    Examples
    --------
    >>> c = capability(50, 10.1, 0.15, 0, 1, 9.5, 10.5)
    >>> round(c.cp, 3), round(c.cpk, 3)
    (1.111, 0.889)
    """
    outside = below + above
    share = outside / n if n > 0 else math.nan
    share_low, share_high = wilson_interval(outside, n, confidence)
    nan = math.nan
    cp = cp_low = cp_high = cpk = cpk_low = cpk_high = nan
    z = float(stats.norm.ppf(0.5 + confidence / 2))
    if n >= 2 and sd > 0 and math.isfinite(sd):
        alpha = 1 - confidence
        if lower is not None and upper is not None:
            cp = (upper - lower) / (6 * sd)
            cp_low = cp * math.sqrt(float(stats.chi2.ppf(alpha / 2, n - 1)) / (n - 1))
            cp_high = cp * math.sqrt(float(stats.chi2.ppf(1 - alpha / 2, n - 1)) / (n - 1))
        sides = []
        if upper is not None:
            sides.append((upper - mean) / (3 * sd))
        if lower is not None:
            sides.append((mean - lower) / (3 * sd))
        cpk = min(sides)
        half = z * math.sqrt(1 / (9 * n) + cpk * cpk / (2 * (n - 1)))
        cpk_low, cpk_high = cpk - half, cpk + half
    return Capability(
        n=n,
        below=below,
        above=above,
        share_outside=share,
        share_low=share_low,
        share_high=share_high,
        cp=cp,
        cp_low=cp_low,
        cp_high=cp_high,
        cpk=cpk,
        cpk_low=cpk_low,
        cpk_high=cpk_high,
        confidence=confidence,
    )
