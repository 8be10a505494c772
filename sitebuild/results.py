"""The results tree: JSON-ready cleaning, stable serialisation and the shipped JSON Schema."""

from __future__ import annotations

import json
import math
from importlib import resources


def clean(value):
    """Return ``value`` with numpy scalars made plain and NaN/Infinity made None (recursively)."""
    import numpy as np  # here, not at the top: the schema is read on the no-op path too

    return _clean(value, np)


def _clean(value, np):
    if isinstance(value, dict):
        return {str(k): _clean(v, np) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_clean(v, np) for v in value]
    if isinstance(value, bool | np.bool_):
        return bool(value)
    if isinstance(value, int | np.integer):
        return int(value)
    if isinstance(value, float | np.floating):
        value = float(value)
        return value if math.isfinite(value) else None
    if isinstance(value, np.ndarray):
        return _clean(value.tolist(), np)
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
    # Section keys (schema/sections/*.json) join the dataset object; top-level keys such as
    # changes and history (schema/top/*.json) join the root.
    _merge_fragments(base / "sections", core["$defs"]["dataset"], core["$defs"])
    _merge_fragments(base / "top", core, core["$defs"])
    return core


def _merge_fragments(folder, target: dict, defs: dict) -> None:
    """Merge each ``{"properties", "required", "$defs"}`` fragment in ``folder`` into ``target``."""
    if not folder.is_dir():
        return
    for fragment_file in sorted(folder.iterdir(), key=lambda p: p.name):
        if not fragment_file.name.endswith(".json"):
            continue
        fragment = json.loads(fragment_file.read_text(encoding="utf-8"))
        target["properties"].update(fragment.get("properties", {}))
        target["required"] = sorted(set(target["required"]) | set(fragment.get("required", [])))
        defs.update(fragment.get("$defs", {}))
