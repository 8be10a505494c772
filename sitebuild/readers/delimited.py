"""Delimited text: the cells that count as missing, where lines end, and which delimiter splits
a file's head."""

from __future__ import annotations

import csv
import io
import re

MISSING_TOKENS = ("", "NA", "NaN", "nan", "null", "NULL", "Null", "n/a", "N/A", "na", "-", "None")
DELIMITERS = (",", ";", "\t", "|")
LINE_END = re.compile(r"\r\n|\r|\n")
LINE_SAMPLE = 65536  # characters of a line that say enough about its delimiter


def split_lines(text: str) -> list[str]:
    """Return the lines of ``text`` split at CR, LF or CRLF only (never at U+0085, U+2028 or a
    form feed, which are data in a CSV file: a Windows-1252 '…' read as Latin-1 is U+0085).

    Examples
    --------
    >>> split_lines("a,b\\rc\\x85d,e\\r\\nf\\n")
    ['a,b', 'c\\x85d,e', 'f']
    """
    lines = LINE_END.split(text)
    if lines and lines[-1] == "":
        lines.pop()
    return lines


def sniff_delimiter(head: str, suffix: str) -> str:
    """Return the delimiter (comma, semicolon, tab, pipe) that splits the head most consistently."""
    # A line's first 64 KB say enough about its delimiter (a header may be far longer).
    lines = [line[:LINE_SAMPLE] for line in split_lines(head)[:50] if line.strip()]
    if not lines:
        return "\t" if suffix == ".tsv" else ","
    if len(lines) > 1 and not head.endswith(("\n", "\r")):
        lines = lines[:-1]  # the last line may be cut short by the head's end
    best, best_score = None, (0, 0)
    for delimiter in DELIMITERS:
        try:
            rows = list(csv.reader(io.StringIO("\n".join(lines)), delimiter=delimiter))
        except csv.Error:  # a field past the csv module's limit: not this delimiter's shape
            continue
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
