"""Adjusted p-values for a family of tests."""

from __future__ import annotations

import numpy as np

METHOD_NAMES = {
    "holm": "Holm (1979) step-down",
    "bh": "Benjamini–Hochberg (1995) false discovery rate",
    "bonferroni": "Bonferroni",
    "none": "no adjustment",
}


def adjust_pvalues(p: list[float | None], method: str = "holm") -> list[float | None]:
    """Return p-values adjusted for multiplicity across the family ``p``; None stays None.

    Notes
    -----
    Undefined p-values (None) are left out of the family. With m defined p-values sorted
    ascending p_(1) <= ... <= p_(m):

    - Bonferroni: min(1, m p_i).
    - Holm: q_(i) = max_{j<=i} min(1, (m - j + 1) p_(j)).
    - Benjamini–Hochberg: q_(i) = min_{j>=i} min(1, m p_(j) / j).

    References
    ----------
    Holm, S. (1979). A simple sequentially rejective multiple test procedure. Scand. J. Stat. 6.
    Benjamini, Y. & Hochberg, Y. (1995). Controlling the false discovery rate. JRSS B 57(1).

    Examples
    --------
    >>> adjust_pvalues([0.01, 0.04, None, 0.03], "holm")
    [0.03, 0.06, None, 0.06]
    """
    if method not in METHOD_NAMES:
        raise ValueError(f"unknown adjustment method {method!r}")
    index = [i for i, v in enumerate(p) if v is not None]
    out: list[float | None] = [None] * len(p)
    if not index:
        return out
    values = np.array([p[i] for i in index], dtype=float)
    m = len(values)
    if method == "none":
        adjusted = values
    elif method == "bonferroni":
        adjusted = np.minimum(1.0, values * m)
    else:
        order = np.argsort(values, kind="stable")
        ranked = values[order]
        if method == "holm":
            step = np.minimum(1.0, (m - np.arange(m)) * ranked)
            step = np.maximum.accumulate(step)
        else:
            step = np.minimum(1.0, ranked * m / np.arange(1, m + 1))
            step = np.minimum.accumulate(step[::-1])[::-1]
        adjusted = np.empty(m)
        adjusted[order] = step
    for i, value in zip(index, adjusted, strict=True):
        # 15 significant digits hide float noise (0.06, not 0.06000000000000001) and keep
        # tiny p-values tiny.
        out[i] = float(f"{float(value):.15g}")
    return out
