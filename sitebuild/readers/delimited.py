"""Delimited text: the cells that count as missing, and which delimiter splits a file's head."""

from __future__ import annotations

import csv
import io

MISSING_TOKENS = ("", "NA", "NaN", "nan", "null", "NULL", "Null", "n/a", "N/A", "na", "-", "None")
DELIMITERS = (",", ";", "\t", "|")


def sniff_delimiter(head: str, suffix: str) -> str:
    """Return the delimiter (comma, semicolon, tab, pipe) that splits the head most consistently."""
    lines = [line for line in head.splitlines()[:50] if line.strip()]
    if not lines:
        return "\t" if suffix == ".tsv" else ","
    if len(lines) > 1 and not head.endswith("\n"):
        lines = lines[:-1]  # the last line may be cut short by the head's end
    best, best_score = None, (0, 0)
    for delimiter in DELIMITERS:
        rows = list(csv.reader(io.StringIO("\n".join(lines)), delimiter=delimiter))
        counts = [len(r) for r in rows]
        if not counts or counts[0] < 2:
            continue
        consistent = sum(c == counts[0] for c in counts)
        score = (consistent, counts[0])
        if score > best_score:
            best, best_score = delimiter, score
    if best is None:
        return "\t" if suffix == ".tsv" else ","
    return best
