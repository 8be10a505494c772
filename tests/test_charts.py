"""Chart specs: layers with nothing to draw are dropped, and an empty chart is marked."""

from __future__ import annotations

import math

from sitebuild.charts.theme import drawable, themed


def layered(points, band):
    return {
        "data": {"values": points},
        "encoding": {"y": {"field": "g", "type": "nominal"}},
        "layer": [
            {
                "mark": "point",
                "encoding": {"x": {"field": "mean", "type": "quantitative"}},
            },
            {
                "data": {"values": band},
                "mark": "rule",
                "encoding": {
                    "x": {"field": "low", "type": "quantitative"},
                    "x2": {"field": "high"},
                },
            },
        ],
    }


def test_a_layer_without_finite_values_is_dropped():
    spec = themed(layered([{"g": "A", "mean": 1.5}], [{"g": "A", "low": None, "high": None}]))
    assert [layer["mark"] for layer in spec["layer"]] == ["point"]
    assert drawable(spec)


def test_non_finite_and_boolean_values_do_not_count():
    band = [{"g": "A", "low": math.nan, "high": 2.0}, {"g": "B", "low": True, "high": 1.0}]
    spec = themed(layered([{"g": "A", "mean": 1.5}], band))
    assert len(spec["layer"]) == 1


def test_nothing_left_marks_the_chart_undrawable():
    spec = themed(layered([], []))
    assert spec["layer"] == [] and not drawable(spec)


def test_named_datasets_are_looked_up():
    spec = themed(
        {
            "datasets": {"curve": [{"x": 1.0, "fit": None}]},
            "layer": [
                {
                    "data": {"name": "curve"},
                    "mark": "line",
                    "encoding": {
                        "x": {"field": "x", "type": "quantitative"},
                        "y": {"field": "fit", "type": "quantitative"},
                    },
                }
            ],
        }
    )
    assert not drawable(spec)


def test_a_good_chart_is_left_whole():
    spec = layered([{"g": "A", "mean": 1.5}], [{"g": "A", "low": 1.0, "high": 2.0}])
    assert len(themed(spec)["layer"]) == 2 and drawable(themed(spec))
    assert len(spec["layer"]) == 2  # the input is not changed
