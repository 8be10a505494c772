"""Compact letter display (Piepho 2004) on hand-checkable examples."""

from __future__ import annotations

import itertools

import numpy as np

from sitebuild.stats.letters import compact_letters


def _shares(letters: dict[str, str], a: str, b: str) -> bool:
    return bool(set(letters[a]) & set(letters[b]))


def test_letters_on_a_hand_checked_chain():
    # Hand check: A differs from C and D, B differs from D. Then A–B share a letter, B–C share
    # one, C–D share one: A=a, B=ab, C=bc, D=c.
    letters = compact_letters(["A", "B", "C", "D"], [("A", "C"), ("A", "D"), ("B", "D")])
    assert letters == {"A": "a", "B": "ab", "C": "bc", "D": "c"}


def test_no_differences_gives_one_shared_letter():
    assert compact_letters(["x", "y", "z"], []) == {"x": "a", "y": "a", "z": "a"}


def test_all_different_gives_distinct_letters():
    groups = ["p", "q", "r"]
    letters = compact_letters(groups, list(itertools.combinations(groups, 2)))
    assert sorted(letters.values()) == ["a", "b", "c"]


def test_letters_represent_every_random_pattern_exactly():
    # Property from Piepho (2004): two groups share a letter exactly when not declared different.
    rng = np.random.default_rng(3)
    for _ in range(200):
        k = int(rng.integers(2, 9))
        groups = [f"g{i}" for i in range(k)]
        pairs = [p for p in itertools.combinations(groups, 2) if rng.random() < 0.4]
        letters = compact_letters(groups, pairs)
        differ = set(pairs)
        for a, b in itertools.combinations(groups, 2):
            assert _shares(letters, a, b) == ((a, b) not in differ)
