"""Whether JSON data has the shape the shipped results schema describes (a small, fast subset
of JSON Schema: type, enum, const, required, properties, additionalProperties, items, $ref,
oneOf, anyOf, minimum, maximum), so a cache entry or a previous results.json that was damaged
or forged is treated as absent instead of failing the build later.

The full jsonschema library takes about a second to import; a no-op rebuild must stay fast.
"""

from __future__ import annotations

import math
from functools import lru_cache

_TYPES = {
    "object": lambda v: isinstance(v, dict),
    "array": lambda v: isinstance(v, list),
    "string": lambda v: isinstance(v, str),
    "boolean": lambda v: isinstance(v, bool),
    "null": lambda v: v is None,
    "integer": lambda v: isinstance(v, int) and not isinstance(v, bool),
    "number": lambda v: isinstance(v, int | float) and not isinstance(v, bool),
}


@lru_cache(maxsize=1)
def _schema() -> dict:
    from .results import schema

    return schema()


def conforms(value, definition: str | None = None) -> bool:
    """Return True when ``value`` fits the results schema, or its ``$defs`` entry
    ``definition`` (such as ``"dataset"`` or ``"changes"``).

    Examples
    --------
    >>> conforms({"first_build": True}, "changes")
    False
    """
    root = _schema()
    node = root if definition is None else root["$defs"][definition]
    try:
        return _fits(value, node, root, 0)
    except RecursionError:
        return False


_NOTES = frozenset({"description", "title", "$comment", "examples", "default"})
_SIMPLE: dict[int, tuple] = {}  # id of a schema node -> its type checks, () if not simple
# The exact Python types json.loads gives for each JSON type (bool is not a number here).
_EXACT = {
    "object": (dict,),
    "array": (list,),
    "string": (str,),
    "boolean": (bool,),
    "null": (type(None),),
    "integer": (int,),
    "number": (int, float),
}


def _simple(node: dict) -> tuple:
    """The type checks of a node that says nothing but its type (most leaves), else ().

    Keyed by the node's id: the nodes live in the cached schema for the whole process.
    """
    found = _SIMPLE.get(id(node))
    if found is None:
        found = ()
        if set(node) - _NOTES == {"type"}:
            kinds = node["type"]
            kinds = [kinds] if isinstance(kinds, str) else kinds
            exact = frozenset(t for k in kinds for t in _EXACT[k])
            found = (exact, *(_TYPES[k] for k in kinds))
        _SIMPLE[id(node)] = found
    return found


def _leaf(value, simple: tuple) -> bool:
    """Whether ``value`` has one of a simple node's types (and is finite if a float)."""
    if type(value) in simple[0]:  # the usual case: a value as json.loads made it
        return type(value) is not float or math.isfinite(value)
    if not any(check(value) for check in simple[1:]):
        return False
    return not (isinstance(value, float) and not math.isfinite(value))


def _fits(value, node: dict, root: dict, depth: int) -> bool:
    if depth > 64:  # results are a few levels deep; deeper is damage
        return False
    simple = _simple(node)
    if simple:  # a leaf: its type, and a finite number (the checks below, taken short)
        return _leaf(value, simple)
    if "$ref" in node:
        target = root
        for part in node["$ref"].removeprefix("#/").split("/"):
            target = target[part]
        if not _fits(value, target, root, depth + 1):
            return False
    kinds = node.get("type")
    if kinds is not None:
        kinds = [kinds] if isinstance(kinds, str) else kinds
        if not any(_TYPES[k](value) for k in kinds):
            return False
    if "enum" in node and value not in node["enum"]:
        return False
    if "const" in node and value != node["const"]:
        return False
    for key in ("oneOf", "anyOf"):
        if key in node and not any(_fits(value, n, root, depth + 1) for n in node[key]):
            return False
    if isinstance(value, int | float) and not isinstance(value, bool):
        if isinstance(value, float) and not math.isfinite(value):
            return False
        if "minimum" in node and value < node["minimum"]:
            return False
        if "maximum" in node and value > node["maximum"]:
            return False
    if isinstance(value, dict):
        if any(k not in value for k in node.get("required", ())):
            return False
        properties = node.get("properties", {})
        extra = node.get("additionalProperties", True)
        for k, v in value.items():
            if k in properties:
                prop = properties[k]
                simple = _simple(prop) if depth < 64 else ()
                if simple:  # a leaf, checked here (most of a results tree)
                    if not _leaf(v, simple):
                        return False
                elif not _fits(v, prop, root, depth + 1):
                    return False
            elif extra is False:
                return False
            elif isinstance(extra, dict) and not _fits(v, extra, root, depth + 1):
                return False
    if isinstance(value, list) and isinstance(node.get("items"), dict):
        items = node["items"]
        simple = _simple(items)
        if simple and depth < 64:
            return all(_leaf(v, simple) for v in value)
        return all(_fits(v, items, root, depth + 1) for v in value)
    return True
