"""The results tree: JSON-ready cleaning, stable serialisation and the shipped JSON Schema."""

from __future__ import annotations

import json
import math
from importlib import resources

import numpy as np


def clean(value):
    """Return ``value`` with numpy scalars made plain and NaN/Infinity made None (recursively)."""
    if isinstance(value, dict):
        return {str(k): clean(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [clean(v) for v in value]
    if isinstance(value, bool | np.bool_):
        return bool(value)
    if isinstance(value, int | np.integer):
        return int(value)
    if isinstance(value, float | np.floating):
        value = float(value)
        return value if math.isfinite(value) else None
    if isinstance(value, np.ndarray):
        return clean(value.tolist())
    return value


def dumps(results: dict) -> str:
    """Return results as stable JSON text: sorted keys, no NaN allowed, UTF-8 kept readable.

    Compact separators: the file travels in the zip and single-file outputs, and indentation
    alone made it about twice the size.
    """
    return json.dumps(
        results, sort_keys=True, allow_nan=False, ensure_ascii=False, separators=(",", ":")
    )


def schema() -> dict:
    """Return the full JSON Schema of results.json: the core plus each section's fragment."""
    base = resources.files("sitebuild") / "schema"
    core = json.loads((base / "results.schema.json").read_text(encoding="utf-8"))
    dataset = core["$defs"]["dataset"]
    sections = base / "sections"
    if sections.is_dir():
        for fragment_file in sorted(sections.iterdir(), key=lambda p: p.name):
            if not fragment_file.name.endswith(".json"):
                continue
            fragment = json.loads(fragment_file.read_text(encoding="utf-8"))
            dataset["properties"].update(fragment.get("properties", {}))
            dataset["required"] = sorted(
                set(dataset["required"]) | set(fragment.get("required", []))
            )
            core["$defs"].update(fragment.get("$defs", {}))
    # Top-level keys (e.g. changes, history) come from schema/top/*.json the same way.
    top = base / "top"
    if top.is_dir():
        for fragment_file in sorted(top.iterdir(), key=lambda p: p.name):
            if not fragment_file.name.endswith(".json"):
                continue
            fragment = json.loads(fragment_file.read_text(encoding="utf-8"))
            core["properties"].update(fragment.get("properties", {}))
            core["required"] = sorted(set(core["required"]) | set(fragment.get("required", [])))
            core["$defs"].update(fragment.get("$defs", {}))
    return core
