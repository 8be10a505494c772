"""What moved between two results trees, and the short history of headline numbers.

Everything here reads plain results dicts (as in results.json) and returns plain dicts, so the
previous site's results.json is all a rebuild needs to say what changed.
"""

from __future__ import annotations

import hashlib
import math
from statistics import NormalDist

from .cache import canonical

CORE_KEYS = ("tool_version", "site", "datasets")
HISTORY_GROUPS = 50  # per measure and build: enough to follow a trend, bounded in size


def core(results: dict) -> dict:
    """Return the part of a results tree that a build computes (not changes or history)."""
    return {k: results[k] for k in CORE_KEYS if k in results}


def results_digest(results: dict) -> str:
    """Return the SHA-256 (hex) of the computed numbers of a results tree."""
    return hashlib.sha256(canonical(core(results)).encode("utf-8")).hexdigest()


def results_id(results: dict) -> str:
    """Return a short identifier of the computed numbers of a results tree (for readers)."""
    return results_digest(results)[:16]


def _by(items, *keys) -> dict:
    out = {}
    for item in items or []:
        out.setdefault(tuple(item.get(k) for k in keys), item)
    return out


def _pair(a, b) -> tuple:
    return tuple(sorted((str(a), str(b))))


def _rows_per_group(ds: dict) -> dict:
    """Rows per group: n + missing of the first measure (every row counts once per measure)."""
    first = ds["measures"][0] if ds.get("measures") else None
    return {
        s["group"]: s["n"] + s.get("missing", 0)
        for s in ds.get("summaries", [])
        if s["measure"] == first and s["group"] is not None
    }


def _median_se(summary: dict, level: float) -> float | None:
    """A standard-error stand-in for the median: its CI half-width over the normal quantile.

    The distribution-free median interval is not symmetric; half its width divided by
    z_{1-α/2} puts it on the same scale as the mean's standard error.
    """
    low, high = summary.get("median_ci_low"), summary.get("median_ci_high")
    if low is None or high is None:
        return None
    level = summary.get("median_ci_level") or level
    z = NormalDist().inv_cdf(0.5 + level / 2)
    return (high - low) / (2 * z)


def _moved(old: dict, new: dict, level_old: float, level_new: float) -> list[dict]:
    """Means and medians that moved by more than sqrt(se_old² + se_new²)."""
    moved = []
    for statistic, se_of in (
        ("mean", lambda s, _lvl: s.get("se")),
        ("median", _median_se),
    ):
        before, after = old.get(statistic), new.get(statistic)
        se_before, se_after = se_of(old, level_old), se_of(new, level_new)
        if None in (before, after, se_before, se_after):
            continue
        # hypot: no overflow for standard errors near the largest double.
        threshold = math.hypot(se_before, se_after)
        if abs(after / 2 - before / 2) > threshold / 2:
            moved.append(
                {
                    "measure": new["measure"],
                    "group": new["group"],
                    "statistic": statistic,
                    "before": before,
                    "after": after,
                    "threshold": threshold,
                }
            )
    return moved


def _verdicts(old: dict, new: dict, alpha_old: float, alpha_new: float) -> list[dict]:
    """Pairwise conclusions that flipped: p_adjusted < alpha before versus after."""
    flipped = []
    old_pairs = {}
    for entry in old.get("comparisons") or []:
        for pair in entry.get("pairs") or []:
            key = (entry.get("measure"), entry.get("method"), _pair(pair.get("a"), pair.get("b")))
            old_pairs.setdefault(key, pair)
    for entry in new.get("comparisons") or []:
        for pair in entry.get("pairs") or []:
            key = (entry.get("measure"), entry.get("method"), _pair(pair.get("a"), pair.get("b")))
            before = old_pairs.get(key)
            if before is None:
                continue
            p_old, p_new = before.get("p_adjusted"), pair.get("p_adjusted")
            if p_old is None or p_new is None:
                continue
            was, now = p_old < alpha_old, p_new < alpha_new
            if was != now:
                flipped.append(
                    {
                        "measure": entry.get("measure"),
                        "a": pair.get("a"),
                        "b": pair.get("b"),
                        "p_before": p_old,
                        "p_after": p_new,
                        "before": "different" if was else "not shown different",
                        "after": "different" if now else "not shown different",
                    }
                )
    return flipped


def _correlations(old: dict, new: dict) -> list[dict]:
    """Correlations whose new interval no longer overlaps the previous one."""
    keys = ("group", "a", "b", "method")
    before_all = _by(old.get("correlations"), *keys)
    out = []
    for key, after in _by(new.get("correlations"), *keys).items():
        before = before_all.get(key)
        if before is None:
            continue
        bounds = [
            before.get("ci_low"),
            before.get("ci_high"),
            after.get("ci_low"),
            after.get("ci_high"),
        ]
        if None in bounds:
            continue
        if after["ci_low"] > before["ci_high"] or after["ci_high"] < before["ci_low"]:
            out.append(
                {
                    "group": after.get("group"),
                    "a": after.get("a"),
                    "b": after.get("b"),
                    "method": after.get("method"),
                    "r_before": before.get("r"),
                    "r_after": after.get("r"),
                    "ci_before": [before["ci_low"], before["ci_high"]],
                    "ci_after": [after["ci_low"], after["ci_high"]],
                }
            )
    return out


def _curved(old: dict, new: dict) -> list[dict]:
    before_all = _by(old.get("relationships"), "group", "a", "b")
    out = []
    for key, after in _by(new.get("relationships"), "group", "a", "b").items():
        before = before_all.get(key)
        if before is None:
            continue
        if isinstance(before.get("curved"), bool) and isinstance(after.get("curved"), bool):
            if before["curved"] != after["curved"]:
                out.append(
                    {
                        "group": after.get("group"),
                        "a": after.get("a"),
                        "b": after.get("b"),
                        "before": before["curved"],
                        "after": after["curved"],
                    }
                )
    return out


def compare_dataset(old: dict, new: dict, old_site: dict, new_site: dict) -> dict:
    """Return what changed in one dataset between two builds (empty lists when nothing)."""
    groups_old, groups_new = list(old.get("groups", [])), list(new.get("groups", []))
    rows_old, rows_new = _rows_per_group(old), _rows_per_group(new)
    rows = []
    for group in groups_new:
        if group in rows_old and group in rows_new and rows_old[group] != rows_new[group]:
            rows.append(
                {
                    "group": group,
                    "before": rows_old[group],
                    "after": rows_new[group],
                    "change": rows_new[group] - rows_old[group],
                }
            )
    moved = []
    old_summaries = _by(old.get("summaries"), "measure", "group")
    for key, summary in _by(new.get("summaries"), "measure", "group").items():
        if key[1] is None or key not in old_summaries:
            continue  # the all-groups row repeats what the groups already say
        moved += _moved(
            old_summaries[key], summary, old_site.get("confidence", 0.95), new_site["confidence"]
        )
    return {
        "name": new["name"],
        "groups_added": [g for g in groups_new if g not in groups_old],
        "groups_removed": [g for g in groups_old if g not in groups_new],
        "rows": rows,
        "moved": moved,
        "verdicts": _verdicts(old, new, old_site.get("alpha", 0.05), new_site["alpha"]),
        "correlations": _correlations(old, new),
        "curved": _curved(old, new),
    }


CHANGE_LISTS = (
    "groups_added",
    "groups_removed",
    "rows",
    "moved",
    "verdicts",
    "correlations",
    "curved",
)


def compare(previous: dict | None, current: dict) -> dict:
    """Return the ``changes`` block: what moved from ``previous`` results to ``current``."""
    if previous is None:
        return {
            "first_build": True,
            "previous_id": None,
            "current_id": results_id(current),
            "datasets_added": [d["name"] for d in current["datasets"]],
            "datasets_removed": [],
            "datasets": [],
            "count": 0,
            "summary": ["First build of this site: nothing earlier to compare with."],
        }
    old_by_name = {d["name"]: d for d in previous.get("datasets", [])}
    new_names = [d["name"] for d in current["datasets"]]
    per_dataset = []
    for ds in current["datasets"]:
        if ds["name"] in old_by_name:
            found = compare_dataset(
                old_by_name[ds["name"]], ds, previous.get("site", {}), current["site"]
            )
            if any(found[k] for k in CHANGE_LISTS):
                per_dataset.append(found)
    changes = {
        "first_build": False,
        "previous_id": results_id(previous),
        "current_id": results_id(current),
        "datasets_added": [n for n in new_names if n not in old_by_name],
        "datasets_removed": [n for n in old_by_name if n not in new_names],
        "datasets": per_dataset,
    }
    changes["count"] = (
        len(changes["datasets_added"])
        + len(changes["datasets_removed"])
        + sum(len(d[k]) for d in per_dataset for k in CHANGE_LISTS)
    )
    changes["summary"] = summary_lines(changes)
    return changes


def _plural(n: int, word: str) -> str:
    return f"{n} {word}{'' if n == 1 else 's'}"


def summary_lines(changes: dict, limit: int = 8) -> list[str]:
    """Return a few plain sentences saying what changed (for the index page and the CLI)."""
    if changes.get("first_build"):
        return ["First build of this site: nothing earlier to compare with."]
    lines = []
    if changes["datasets_added"]:
        lines.append("Datasets added: " + ", ".join(changes["datasets_added"]) + ".")
    if changes["datasets_removed"]:
        lines.append("Datasets removed: " + ", ".join(changes["datasets_removed"]) + ".")
    for d in changes["datasets"]:
        parts = []
        if d["groups_added"]:
            parts.append("groups added: " + ", ".join(d["groups_added"]))
        if d["groups_removed"]:
            parts.append("groups removed: " + ", ".join(d["groups_removed"]))
        if d["rows"]:
            net = sum(r["change"] for r in d["rows"])
            parts.append(f"rows changed in {_plural(len(d['rows']), 'group')} (net {net:+,})")
        if d["moved"]:
            n = len(d["moved"])
            what = "group mean or median" if n == 1 else "group means or medians"
            whose = "its" if n == 1 else "their"
            parts.append(f"{n} {what} moved by more than {whose} combined standard error")
        if d["verdicts"]:
            parts.append(f"{_plural(len(d['verdicts']), 'pairwise conclusion')} changed")
        if d["correlations"]:
            parts.append(
                f"{_plural(len(d['correlations']), 'correlation')} moved out of its interval"
            )
        if d["curved"]:
            parts.append(f"{_plural(len(d['curved']), 'curved-relationship flag')} changed")
        lines.append(f"{d['name']}: " + "; ".join(parts) + ".")
    if not lines:
        lines.append(
            "Numbers were recomputed; no mean or median moved by more than its combined standard error."
        )
    if len(lines) > limit:
        lines = lines[: limit - 1] + [
            f"... and {len(lines) - limit + 1} more (see the change page)."
        ]
    return lines


def history_entry(results: dict, build: int, built_at: str | None) -> dict:
    """Return one history entry: rows used and group means per dataset."""
    datasets = []
    for ds in results["datasets"]:
        means = []
        for measure in ds.get("measures", []):
            rows = [
                s
                for s in ds.get("summaries", [])
                if s["measure"] == measure and s["group"] is not None
            ]
            means += [
                {"measure": measure, "group": s["group"], "mean": s["mean"]}
                for s in rows[:HISTORY_GROUPS]
            ]
        datasets.append(
            {"name": ds["name"], "rows_used": ds["source"]["rows_used"], "means": means}
        )
    return {
        "build": build,
        "built_at": built_at,
        "results_id": results_id(results),
        "datasets": datasets,
    }


def extend_history(
    previous: dict | None, results: dict, keep: int, built_at: str | None
) -> list[dict]:
    """Return the previous site's history with this build appended, the last ``keep`` kept."""
    history = list((previous or {}).get("history") or [])
    number = history[-1]["build"] + 1 if history else 1
    history.append(history_entry(results, number, built_at))
    return history[-keep:]
