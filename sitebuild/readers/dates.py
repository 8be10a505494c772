"""Dates and times as an x axis: ISO 8601 recognised on sight, other layouts by
``date_format``. A date axis is measured in days since the first date, so a slope is
"per day" and the charts can draw the dates back."""

from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np

ISO = re.compile(r"^\d{4}-\d{2}-\d{2}([T ]\d{2}:\d{2}(:\d{2}(\.\d+)?)?(Z|[+-]\d{2}:?\d{2})?)?$")
DAY_MS = 86_400_000


@dataclass(frozen=True)
class TimeAxis:
    """A date column as numbers: ``days`` since ``origin`` (NaN where missing or unreadable)."""

    days: np.ndarray
    origin: str  # ISO date or timestamp of day 0
    origin_ms: int  # the same instant in milliseconds since 1970-01-01 UTC (for charts)
    bad: int  # present values that are not dates
    examples: tuple[str, ...]

    def to_json(self) -> dict:
        """Return the ``x_time`` block of results.json's source."""
        return {"origin": self.origin, "origin_ms": self.origin_ms, "unit": "day"}


def looks_like_dates(text, date_format: str | None) -> bool:
    """Return True when most present values of a stripped text column are dates."""
    present = text.dropna()
    if present.empty:
        return False
    sample = present.head(200)
    if date_format:
        import pandas as pd

        parsed = pd.to_datetime(sample, format=date_format, errors="coerce")
        return bool(parsed.notna().mean() >= 0.5)
    return bool(sample.str.fullmatch(ISO, na=False).mean() >= 0.5)


def time_axis(raw, text, date_format: str | None, missing: np.ndarray) -> TimeAxis:
    """Return the date column ``raw`` (datetimes, or stripped ``text``) as a :class:`TimeAxis`.

    ``missing`` marks rows whose value is a missing-value token. Time zones are converted to
    UTC; values without one are taken as they are.

    Examples
    --------
    >>> import pandas as pd, numpy as np
    >>> s = pd.Series(["2026-01-01", "2026-01-03T12:00"], dtype="string")
    >>> time_axis(s, s, None, np.zeros(2, bool)).days.tolist()
    [0.0, 2.5]
    """
    import pandas as pd

    if raw.dtype.kind == "M":
        stamps = pd.to_datetime(raw)
    elif date_format:
        stamps = pd.to_datetime(text, format=date_format, errors="coerce")
    else:
        iso = text.str.fullmatch(ISO, na=False)
        values = text.where(iso)
        zoned = values.str.contains(r"(?:Z|[+-]\d{2}:?\d{2})$", regex=True, na=False)
        stamps = pd.to_datetime(values, format="ISO8601", errors="coerce", utc=bool(zoned.any()))
    if getattr(stamps.dt, "tz", None) is not None:
        stamps = stamps.dt.tz_convert("UTC").dt.tz_localize(None)
    ns = stamps.astype("datetime64[ns]").to_numpy()
    valid = ~np.isnat(ns)
    bad_mask = ~valid & ~missing & text.notna().to_numpy()
    examples = tuple(str(v)[:40] for v in text[bad_mask].head(3).tolist())
    if not valid.any():
        return TimeAxis(np.full(len(ns), np.nan), "", 0, int(bad_mask.sum()), examples)
    first = ns[valid].min()
    days = np.full(len(ns), np.nan)
    days[valid] = (ns[valid] - first).astype("timedelta64[ns]").astype(np.float64) / 86_400e9
    origin = pd.Timestamp(first)
    shown = origin.date().isoformat() if origin == origin.normalize() else origin.isoformat()
    origin_ms = int(first.astype("datetime64[ms]").astype(np.int64))
    return TimeAxis(days, shown, origin_ms, int(bad_mask.sum()), examples)
