"""What every format shares after reading: row filters (``where``), group labels trimmed
and merged (``aliases``), warnings about labels that look alike, and "did you mean" for a
column the file does not have."""

from __future__ import annotations

import difflib
import unicodedata
from dataclasses import dataclass, field

import numpy as np

from ..errors import SitebuildError

WHERE_REASON = "left out by where"


@dataclass(frozen=True)
class Prepared:
    """The rows kept and what was done to them: dropped counts by reason and reading notes."""

    frame: object
    dropped: dict[str, int] = field(default_factory=dict)
    notes: tuple[str, ...] = ()


def did_you_mean(name: str, header: list[str]) -> str:
    """Return " — did you mean 'X'?" for the closest column name, or "" when none is close.

    The same name apart from surrounding spaces or letter case is always suggested first.

    Examples
    --------
    >>> did_you_mean("Kosten", ["kosten ", "Linie"])
    " — did you mean 'kosten '?"
    """
    folded = name.strip().casefold()
    for column in header:
        if column.strip().casefold() == folded:
            return f" — did you mean '{column}'?"
    close = difflib.get_close_matches(name, header, n=1, cutoff=0.6)
    return f" — did you mean '{close[0]}'?" if close else ""


def _label_key(label: str) -> str:
    return unicodedata.normalize("NFC", label).casefold()


def similar_label_warnings(groups: tuple[str, ...], column: str) -> list[str]:
    """One warning per set of group labels equal apart from letter case or Unicode form.

    Examples
    --------
    >>> similar_label_warnings(("Cardiology", "cardiology", "Oncology"), "clinic")[0][:48]
    "labels 'Cardiology' and 'cardiology' in column '"
    """
    alike: dict[str, list[str]] = {}
    for label in groups:
        alike.setdefault(_label_key(label), []).append(label)
    out = []
    for labels in alike.values():
        if len(labels) < 2:
            continue
        shown = " and ".join(f"'{x}'" for x in labels)
        out.append(
            f"labels {shown} in column '{column}' differ only in letter case or Unicode form, "
            "so they are counted as separate groups; merge them with aliases = { "
            + ", ".join(f'"{x}" = "{labels[0]}"' for x in labels[1:])
            + " } if they are one group."
        )
    return out


def reference_warnings(spec, groups: tuple[str, ...]) -> list[str]:
    """A warning when the manifest's ``reference`` is not one of the groups in the data."""
    if spec.reference is None or spec.reference in groups:
        return []
    close = difflib.get_close_matches(spec.reference, list(groups), n=1, cutoff=0.5)
    hint = f" (did you mean '{close[0]}'?)" if close else ""
    return [
        f"reference names '{spec.reference}', which is not a group in column '{spec.group}'"
        f"{hint}; all pairs are compared instead — labels are compared exactly."
    ]


def prepare(frame, spec, header: list[str]) -> Prepared:
    """Return the rows ``where`` keeps, with group labels trimmed and ``aliases`` applied."""
    dropped: dict[str, int] = {}
    notes: list[str] = []
    if spec.where and len(frame):
        keep = np.ones(len(frame), dtype=bool)
        for column, wanted in spec.where.items():
            if column not in frame.columns:
                raise SitebuildError(
                    f"{spec.file}: where names column '{column}', which is not in the file"
                    f"{did_you_mean(column, header)}; use a column name from the header."
                )
            keep &= _where_mask(frame[column], wanted, column, spec)
        left_out = int((~keep).sum())
        if left_out:
            dropped[WHERE_REASON] = left_out
            frame = frame[keep]
        notes.append(
            f"where kept {int(keep.sum()):,} of {len(keep):,} rows ("
            + "; ".join(_describe(c, w) for c, w in spec.where.items())
            + ")."
        )
    labels = frame[spec.group]
    if labels.dtype.kind in "OSUT" or str(labels.dtype) in ("string", "str"):
        text = labels.astype("string")
        trimmed = text.str.strip()
        changed = int((trimmed != text).fillna(False).sum())
        if changed:
            notes.append(
                f"{changed:,} group label{'s' if changed != 1 else ''} in '{spec.group}' "
                f"{'was' if changed == 1 else 'were'} trimmed of surrounding spaces."
            )
        if spec.aliases:
            merged = int(trimmed.isin(list(spec.aliases)).sum())
            trimmed = trimmed.replace(spec.aliases)
            if merged:
                notes.append(
                    f"aliases renamed {merged:,} group label{'s' if merged != 1 else ''} in "
                    f"'{spec.group}'."
                )
        if changed or spec.aliases:
            frame = frame.copy()
            frame[spec.group] = trimmed.astype(object).where(trimmed.notna(), None)
    return Prepared(frame=frame, dropped=dropped, notes=tuple(notes))


def _describe(column: str, wanted) -> str:
    if _is_range(wanted):
        return f"'{column}' from {wanted[0]} to {wanted[1]}"
    return f"'{column}' one of " + ", ".join(str(w) for w in wanted)


def _is_range(wanted) -> bool:
    from .dates import ISO

    if len(wanted) != 2:
        return False
    if all(isinstance(w, int | float) and not isinstance(w, bool) for w in wanted):
        return True
    return all(isinstance(w, str) and ISO.match(w) for w in wanted)


def _where_mask(raw, wanted, column: str, spec) -> np.ndarray:
    """Return the rows whose value in ``raw`` is inside the range or in the set ``wanted``."""
    import pandas as pd

    from .dates import time_axis
    from .decimals import as_floats, choose_decimal

    text = raw.astype("string").str.strip()
    if not _is_range(wanted):
        choices = {str(w).strip() for w in wanted}
        floats = {float(w) for w in wanted if isinstance(w, int | float)}
        inside = text.isin(choices).fillna(False).to_numpy()
        if floats and raw.dtype.kind in "fiu":
            inside |= np.isin(raw.to_numpy(dtype=float, na_value=np.nan), list(floats))
        return inside
    low, high = wanted
    if isinstance(low, str):
        if low > high:
            raise SitebuildError(
                f"{spec.file}: where for '{column}' runs from {low} to {high}; put the earlier "
                "date first."
            )
        if raw.dtype.kind == "M":
            text = raw.dt.strftime("%Y-%m-%dT%H:%M:%S").astype("string")
        both = pd.concat([pd.Series([low, high], dtype="string"), text], ignore_index=True)
        # The bounds are ISO dates; the column may use date_format, so each is read its way.
        bounds = time_axis(both[:2], both[:2], None, np.zeros(2, dtype=bool))
        column_axis = time_axis(text, text, spec.date_format, np.zeros(len(text), dtype=bool))
        shift = (column_axis.origin_ms - bounds.origin_ms) / 86_400_000
        axis_days = np.concatenate([bounds.days, column_axis.days + shift])
        values, bounds = axis_days[2:], axis_days[:2]
    else:
        if low > high:
            raise SitebuildError(
                f"{spec.file}: where for '{column}' runs from {low} to {high}; put the smaller "
                "number first."
            )
        if raw.dtype.kind in "fiu":
            values = raw.to_numpy(dtype=float, na_value=np.nan)
        else:
            values = as_floats(text, choose_decimal(text, column, spec.decimal).mark)
        bounds = np.array([low, high], dtype=float)
    with np.errstate(invalid="ignore"):
        return (values >= bounds[0]) & (values <= bounds[1])
