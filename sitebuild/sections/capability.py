"""Values against spec limits (results.json key ``capability``): for each measure with
``limits`` in the manifest, per group and for all groups together, the count and share of
values outside the limits (Wilson interval), Cp (two-sided limits only) and Cpk with
confidence intervals, the offset from ``target``, and findings with their cautions.

Means and SDs come from the summaries section (every row, on every engine). Counts outside
the limits use every row in memory; on data read in batches they are counted in the seeded
sample of rows and the page says so.
"""

from __future__ import annotations

import math

import numpy as np

from ..stats.capability import capability
from ..stats.findings import format_num, format_value, measure_decimals, measure_unit
from . import DataTable

# Cpk of at least this is commonly called capable (1.33: the process spread fits four SDs
# inside the nearer limit; common practice, not a law).
CAPABLE_CPK = 1.33


def _num(value) -> float | None:
    if value is None:
        return None
    value = float(value)
    return value if math.isfinite(value) else None


def _outside(values: np.ndarray, lower, upper) -> tuple[int, int]:
    values = values[~np.isnan(values)]
    below = int(np.sum(values < lower)) if lower is not None else 0
    above = int(np.sum(values > upper)) if upper is not None else 0
    return below, above


def _row(group, n, mean, sd, normality_p, below, above, lower, upper, target, settings):
    cap = capability(n, mean if mean is not None else math.nan,
                     sd if sd is not None else math.nan, below, above, lower, upper,
                     settings.confidence)  # fmt: skip
    return {
        "group": group,
        "n": n,
        "mean": _num(mean),
        "sd": _num(sd),
        "below": below,
        "above": above,
        "outside": below + above,
        "share_outside": _num(cap.share_outside),
        "share_low": _num(cap.share_low),
        "share_high": _num(cap.share_high),
        "cp": _num(cap.cp),
        "cp_low": _num(cap.cp_low),
        "cp_high": _num(cap.cp_high),
        "cpk": _num(cap.cpk),
        "cpk_low": _num(cap.cpk_low),
        "cpk_high": _num(cap.cpk_high),
        "off_target": _num(mean - target) if target is not None and mean is not None else None,
        "normality_p": _num(normality_p),
        "not_normal": bool(normality_p is not None and normality_p < settings.alpha),
    }


def compute(table, settings, rng: np.random.Generator, partial: dict | None = None) -> dict:
    """Return ``{"capability": [...]}``, one entry per measure with limits; ``{}`` without."""
    del rng
    spec = table.spec
    if not spec.limits:
        return {}
    summaries = (partial or {}).get("summaries", [])
    sampled = table.exact is not None
    out = []
    for measure in spec.measures:
        if measure not in spec.limits:
            continue
        lower, upper = spec.limits[measure]
        target = spec.target.get(measure)
        rows = {r["group"]: r for r in summaries if r["measure"] == measure}
        values = table.values(measure)
        entry_rows = []
        for code, group in enumerate(table.groups):
            s = rows.get(group)
            if s is None:
                continue
            mine = values[table.codes == code]
            below, above = _outside(mine, lower, upper)
            n = int(np.sum(~np.isnan(mine))) if sampled else s["n"]
            entry_rows.append(_row(group, n, s["mean"], s["sd"], s.get("normality_p"),
                                   below, above, lower, upper, target, settings))  # fmt: skip
        s = rows.get(None)
        if s is not None:
            below, above = _outside(values, lower, upper)
            n = int(np.sum(~np.isnan(values))) if sampled else s["n"]
            entry_rows.append(_row(None, n, s["mean"], s["sd"], s.get("normality_p"),
                                   below, above, lower, upper, target, settings))  # fmt: skip
        entry = {
            "measure": measure,
            "lower": lower,
            "upper": upper,
            "target": target,
            "better": spec.better.get(measure),
            "confidence": settings.confidence,
            "counted_from": "a seeded sample of rows" if sampled else "every row",
            "groups": entry_rows,
            "capable_cpk": CAPABLE_CPK,
        }
        entry["findings"] = findings(entry)
        out.append(entry)
    return {"capability": out}


def _limits_text(entry: dict, decimals, unit: str) -> str:
    u = f" {unit}" if unit else ""
    lower, upper = entry["lower"], entry["upper"]
    if lower is not None and upper is not None:
        return f"{format_value(lower, decimals)} to {format_value(upper, decimals)}{u}"
    if lower is not None:
        return f"at least {format_value(lower, decimals)}{u}"
    return f"at most {format_value(upper, decimals)}{u}"


def findings(entry: dict) -> list[str]:
    """Return the findings sentences of one measure's capability entry (results shape)."""
    measure = entry["measure"]
    rows = [r for r in entry["groups"] if r["group"] is not None]
    overall = next((r for r in entry["groups"] if r["group"] is None), None)
    decimals = measure_decimals({"groups": rows})
    unit = measure_unit(measure)
    level = f"{entry['confidence']:.0%}"
    out = [f"Spec limits for '{measure}': {_limits_text(entry, decimals, unit)}."]
    if overall is not None and overall["n"]:
        out.append(
            f"All groups together: {overall['outside']:,} of {overall['n']:,} values outside "
            f"({overall['share_outside']:.1%}, {level} CI {overall['share_low']:.1%} to "
            f"{overall['share_high']:.1%}; Wilson)."
        )
    ranked = sorted((r for r in rows if r["cpk"] is not None), key=lambda r: -r["cpk"])
    if ranked:
        best, worst = ranked[0], ranked[-1]
        out.append(
            f"Highest Cpk: '{best['group']}' ({format_num(best['cpk'])}, {level} CI "
            f"{format_num(best['cpk_low'])} to {format_num(best['cpk_high'])}); lowest: "
            f"'{worst['group']}' ({format_num(worst['cpk'])}, {format_num(worst['cpk_low'])} to "
            f"{format_num(worst['cpk_high'])}). Cpk intervals use Bissell's (1990) normal "
            f"approximation; a Cpk of {entry['capable_cpk']} or more is commonly called capable "
            "(common practice)."
        )
        most = max(rows, key=lambda r: r["share_outside"] or 0.0)
        if most["outside"]:
            out.append(
                f"Most values outside: '{most['group']}', {most['outside']:,} of {most['n']:,} "
                f"({most['share_outside']:.1%}, {level} CI {most['share_low']:.1%} to "
                f"{most['share_high']:.1%})."
            )
    if entry.get("target") is not None:
        far = max(
            (r for r in rows if r["off_target"] is not None),
            key=lambda r: abs(r["off_target"]),
            default=None,
        )
        if far is not None:
            out.append(
                f"Target {format_value(entry['target'], decimals)}: the mean furthest from it "
                f"is '{far['group']}' ({format_value(far['mean'], decimals)}, "
                f"{'above' if far['off_target'] > 0 else 'below'} by "
                f"{format_value(abs(far['off_target']), decimals)})."
            )
    rejected = [r["group"] for r in rows if r["not_normal"]]
    if rejected:
        out.append(
            "The normality check rejects for "
            + ", ".join(f"'{g}'" for g in rejected)
            + ": there the indices and their intervals can mislead; the counted share outside "
            "the limits does not depend on normality."
        )
    out.append(
        "Capability indices assume a stable process whose values are roughly normal; a process "
        "that drifts or jumps can have a good index and still make parts outside the limits."
    )
    if entry["counted_from"] != "every row":
        out.append(
            "The data were read in batches: means and SDs use every row, but the values "
            "outside the limits were counted in a seeded sample of rows."
        )
    return out


def charts(dataset: dict, settings) -> list:
    """Return no charts of its own: the limits are drawn on the summaries' box view."""
    return []


def tables(dataset: dict, settings) -> list[DataTable]:
    """Return, per measure with limits, the capability table (ids cap-{mi})."""
    out = []
    for entry in dataset.get("capability", []):
        mi = dataset["measures"].index(entry["measure"])
        out.append(
            DataTable(
                id=f"cap-{mi}",
                title=f"{entry['measure']} against its spec limits",
                columns=(
                    ("group", "Group"),
                    ("n", "n"),
                    ("mean", "Mean"),
                    ("sd", "SD"),
                    ("below", "Below lower"),
                    ("above", "Above upper"),
                    ("share_outside", "Share outside"),
                    ("share_low", "Share CI low"),
                    ("share_high", "Share CI high"),
                    ("cp", "Cp"),
                    ("cp_low", "Cp CI low"),
                    ("cp_high", "Cp CI high"),
                    ("cpk", "Cpk"),
                    ("cpk_low", "Cpk CI low"),
                    ("cpk_high", "Cpk CI high"),
                    ("off_target", "Mean minus target"),
                    ("normality_p", "Normality p"),
                ),  # fmt: skip
                rows=tuple(
                    {**r, "group": r["group"] if r["group"] is not None else "All groups"}
                    for r in entry["groups"]
                ),
                caption="Share outside: Wilson interval. Cp (two-sided limits only): chi-square "
                "interval. Cpk: Bissell (1990) normal approximation. Indices assume a stable, "
                "roughly normal process.",
            )
        )
    return out
