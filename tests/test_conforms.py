"""sitebuild.conforms (the fast shape check of cached results) against the jsonschema library
(the reference) on the example's real results and on many damaged copies of them."""

from __future__ import annotations

import copy
import json
import random

import jsonschema
import pytest

from sitebuild.conforms import conforms
from sitebuild.results import schema


@pytest.fixture(scope="module")
def datasets(example_site):
    return json.loads((example_site / "results.json").read_text())["datasets"]


@pytest.fixture(scope="module")
def validator():
    whole = schema()
    return jsonschema.Draft202012Validator({"$ref": "#/$defs/dataset", "$defs": whole["$defs"]})


def _leaves(node, path=()):
    if isinstance(node, dict):
        for key, value in node.items():
            yield from _leaves(value, (*path, key))
    elif isinstance(node, list):
        for index, value in enumerate(node):
            yield from _leaves(value, (*path, index))
    else:
        yield path


def _set(node, path, value):
    for part in path[:-1]:
        node = node[part]
    node[path[-1]] = value


def test_the_example_results_conform(datasets, validator):
    for ds in datasets:
        assert validator.is_valid(ds)
        assert conforms(ds, "dataset")


def test_damaged_copies_get_the_same_verdict_as_jsonschema(datasets, validator):
    rng = random.Random(5)
    replacements = ["text", 7, 2.5, True, None, [], {}, -1]
    verdicts = {True: 0, False: 0}
    for trial in range(120):
        ds = copy.deepcopy(datasets[trial % len(datasets)])
        paths = list(_leaves(ds))
        for _ in range(rng.choice([1, 1, 2])):
            _set(ds, rng.choice(paths), rng.choice(replacements))
        expected = validator.is_valid(ds)
        assert conforms(ds, "dataset") == expected, trial
        verdicts[expected] += 1
    assert verdicts[True] > 5 and verdicts[False] > 5  # both kinds were tried


def test_non_finite_numbers_never_conform(datasets):
    ds = copy.deepcopy(datasets[0])
    path = next(p for p in _leaves(ds) if isinstance(_get(ds, p), float))
    _set(ds, path, float("nan"))
    assert not conforms(ds, "dataset")


def _get(node, path):
    for part in path:
        node = node[part]
    return node
