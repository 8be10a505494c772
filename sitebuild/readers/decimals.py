"""Numbers written the way people write them: decimal commas, thousands separators.

Which character is the decimal mark is decided per column from its values, whatever the
file's delimiter: ``1.234,5`` and ``12,5`` use a decimal comma; ``1,234.5`` uses a decimal
point with a thousands comma. The manifest's ``decimal`` key overrides the guess.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np

# A comma followed by other than exactly three digits can only be a decimal comma.
_COMMA_DECIMAL = re.compile(r"^[+-]?(?:\d{1,3}(?:\.\d{3})+|\d*),\d+$")
_POINT_THOUSANDS = re.compile(r"^[+-]?\d{1,3}(?:,\d{3})+(?:\.\d*)?$")
_SURE_COMMA = re.compile(r"(?:,\d{1,2}$)|(?:,\d{4,}$)|(?:\.\d{3},)")
_SURE_POINT = re.compile(r"(?:,\d{3}\.)|(?:,\d{3},\d{3})")
_SPACES = re.compile(r"(?<=\d)[ \u00a0\u202f'](?=\d{3}\b)")


@dataclass(frozen=True)
class DecimalChoice:
    """The decimal mark chosen for one column, and a note saying why (None: nothing to say)."""

    mark: str  # "," or "."
    note: str | None = None


def choose_decimal(text, name: str, override: str | None = None) -> DecimalChoice:
    """Return the decimal mark of a text column (a pandas string Series of stripped values).

    Examples
    --------
    >>> import pandas as pd
    >>> choose_decimal(pd.Series(["1.234,5", "12,5"]), "v").mark
    ','
    >>> choose_decimal(pd.Series(["1,234.5", "12.5"]), "v").mark
    '.'
    """
    if override:
        return DecimalChoice(override)
    with_comma = text[text.str.contains(",", regex=False, na=False)]
    if with_comma.empty:
        return DecimalChoice(".")
    sample = with_comma.head(5000)
    if sample.str.contains(_SURE_POINT, na=False).any():
        return DecimalChoice(".")
    if sample.str.contains(_SURE_COMMA, na=False).any():
        example = sample[sample.str.contains(_SURE_COMMA, na=False)].iloc[0]
        return DecimalChoice(
            ",", f"column '{name}' uses decimal commas (e.g. '{example[:20]}'), read as such."
        )
    if sample.str.fullmatch(_POINT_THOUSANDS, na=False).all():
        # Only values like 1,234: a decimal point appearing elsewhere settles it; otherwise
        # the comma is taken as a decimal comma when no value has a point at all.
        has_point = text.str.contains(".", regex=False, na=False).any()
        mark = "." if has_point else ","
        shown = sample.iloc[0][:20]
        meaning = "a thousands separator" if mark == "." else "a decimal comma"
        return DecimalChoice(
            mark,
            f"column '{name}': a value like '{shown}' could use either mark; the comma was read "
            f"as {meaning} — set decimal in the manifest if that is wrong.",
        )
    return DecimalChoice(",")


def normalise(text, mark: str):
    """Return the stripped text column rewritten with a decimal point and no thousands marks.

    Only values holding a space, comma or (with a decimal comma) a point are rewritten, so
    a column of plain numbers costs one scan per mark.
    """
    cleaned = text
    spaced = cleaned.str.contains(r"\d[ \u00a0\u202f']\d", regex=True, na=False)
    if spaced.any():
        cleaned = cleaned.where(~spaced, cleaned.str.replace(_SPACES, "", regex=True))
    if mark == ",":
        dotted = cleaned.str.contains(".", regex=False, na=False)
        if dotted.any():
            grouped = dotted & (
                cleaned.str.fullmatch(_COMMA_DECIMAL, na=False)
                | cleaned.str.fullmatch(r"[+-]?\d{1,3}(?:\.\d{3})+", na=False)
            )
            cleaned = cleaned.where(~grouped, cleaned.str.replace(".", "", regex=False))
        return cleaned.str.replace(",", ".", regex=False)
    commas = cleaned.str.contains(",", regex=False, na=False)
    if not commas.any():
        return cleaned
    grouped = commas & cleaned.str.fullmatch(_POINT_THOUSANDS, na=False)
    return cleaned.where(~grouped, cleaned.str.replace(",", "", regex=False))


def as_floats(text, mark: str) -> np.ndarray:
    """Return a text column as float64 (NaN where it is not a number)."""
    import pandas as pd

    cleaned = normalise(text, mark)
    return pd.to_numeric(cleaned, errors="coerce").to_numpy(dtype=np.float64, na_value=np.nan)
