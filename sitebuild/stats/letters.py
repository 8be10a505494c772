"""Compact letter display: groups sharing a letter were not shown to differ."""

from __future__ import annotations

import string
from collections.abc import Iterable, Sequence


def _letter(i: int) -> str:
    """a, b, ..., z, then aa, ab, ... so any number of columns gets a distinct label."""
    alphabet = string.ascii_lowercase
    out = ""
    i += 1
    while i > 0:
        i, r = divmod(i - 1, 26)
        out = alphabet[r] + out
    return out


def compact_letters(groups: Sequence[str], different: Iterable[tuple[str, str]]) -> dict[str, str]:
    """Return a letter string per group such that two groups share a letter exactly when they
    were not declared different.

    ``groups`` gives the order in which letters are handed out (put the group with the
    highest mean or median first so it gets "a"); ``different`` lists the pairs declared
    significantly different.

    Notes
    -----
    Insert-and-absorb: start with one column holding every group. For each different pair
    (i, j), every column holding both is split into a copy without i and a copy without j;
    then any column contained in another is dropped (absorbed). The result has no column with
    a different pair, and each not-different pair shares a column. Columns are lettered in the
    order of their first group.

    References
    ----------
    Piepho, H.-P. (2004). An algorithm for a letter-based representation of all-pairwise
    comparisons. J. Comput. Graph. Stat. 13(2), 456–466.

    Examples
    --------
    >>> compact_letters(["A", "B", "C"], [("A", "C")])
    {'A': 'a', 'B': 'ab', 'C': 'b'}
    """
    order = {g: i for i, g in enumerate(groups)}
    if len(order) != len(groups):
        raise ValueError("group labels must be unique")
    columns: list[frozenset[int]] = [frozenset(range(len(groups)))] if groups else []
    for a, b in different:
        i, j = order[a], order[b]
        if i == j:
            continue
        split: list[frozenset[int]] = []
        for col in columns:
            if i in col and j in col:
                split.append(col - {j})
                split.append(col - {i})
            else:
                split.append(col)
        # Absorb: keep a column only if no other (distinct) column contains it.
        unique = list(dict.fromkeys(split))
        columns = [c for c in unique if not any(c < other for other in unique)]
    columns.sort(key=lambda c: (min(c), sorted(c)))
    letters = {g: "" for g in groups}
    for index, col in enumerate(columns):
        for member in sorted(col):
            letters[groups[member]] += _letter(index)
    return letters
