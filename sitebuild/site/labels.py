"""Display names for group codes (the manifest's ``labels``): a display copy of a dataset's
results for pages and charts, and name columns beside the codes in CSV tables.

results.json keeps the codes; only what people read shows the names.
"""

from __future__ import annotations

import dataclasses
import re

# Keys whose string value names one group, in every section's results.
GROUP_KEYS = frozenset({"group", "a", "b", "reference"})
# Keys whose value is a list of group names.
GROUP_LIST_KEYS = frozenset({"groups", "order"})
# Keys whose value maps group names to something (compact letters).
GROUP_MAP_KEYS = frozenset({"letters"})


def _quoted(labels: dict[str, str]):
    """Return a function replacing 'code' (in quotes, as findings write groups) by 'name'."""
    if not labels:
        return lambda text: text
    pattern = re.compile("'(" + "|".join(re.escape(code) for code in labels) + ")'")
    return lambda text: pattern.sub(lambda m: f"'{labels[m.group(1)]}'", text)


def display_copy(ds: dict, labels: dict[str, str]) -> dict:
    """Return a copy of one dataset's results with group codes shown as their names.

    Group fields (``group``, ``a``, ``b``, ``reference``), lists of groups and the keys of
    the letters map are replaced; in every other text a code written in quotes (as the
    findings write groups) becomes the name. Numbers and other keys are untouched.

    Examples
    --------
    >>> display_copy({"groups": ["01"], "findings": ["'01' is higher."]}, {"01": "clay"})
    {'groups': ['clay'], 'findings': ["'clay' is higher."]}
    """
    if not labels:
        return ds
    quoted = _quoted(labels)

    def walk(value, key=None):
        if isinstance(value, dict):
            if key in GROUP_MAP_KEYS:
                return {labels.get(k, k): walk(v) for k, v in value.items()}
            return {k: walk(v, k) for k, v in value.items()}
        if isinstance(value, list):
            if key in GROUP_LIST_KEYS and all(isinstance(v, str) for v in value):
                return [labels.get(v, v) for v in value]
            return [walk(v) for v in value]
        if isinstance(value, str):
            if key in GROUP_KEYS:
                return labels.get(value, value)
            return quoted(value)
        return value

    return walk(ds)


def with_codes(table, labels: dict[str, str]):
    """Return a DataTable whose CSV also holds the code beside each group-name column."""
    if not labels:
        return table
    names = {name: code for code, name in labels.items()}
    columns, extra = [], []
    for key, heading in table.columns:
        columns.append((key, heading))
        if key in GROUP_KEYS:
            columns.append((f"{key}_code", f"{heading} (code)"))
            extra.append(key)
    if not extra:
        return table
    rows = tuple(
        {**row, **{f"{k}_code": names.get(row.get(k), row.get(k)) for k in extra}}
        for row in table.rows
    )
    return dataclasses.replace(
        table,
        columns=tuple(columns),
        rows=rows,
        csv_only=tuple(table.csv_only) + tuple(f"{k}_code" for k in extra),
    )
