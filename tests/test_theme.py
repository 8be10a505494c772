"""Our chart look: a palette that stays apart for the common colour-vision deficiencies, a
(colour, shape) pair per group that keeps 12+ groups apart, a grey reference group."""

from __future__ import annotations

import itertools
import math
import os

import pytest

from sitebuild.charts.theme import (
    CONFIG,
    PALETTE,
    REFERENCE_COLOUR,
    SHAPES,
    group_encoding,
    group_styles,
)

# Machado, Oliveira & Fernandes (2009), "A physiologically-based model for simulation of
# color vision deficiency", IEEE TVCG 15(6), 1291–1298: the severity-1.0 matrices of its
# table, applied to linear sRGB (the same matrices Chromium's and Firefox's developer tools
# use to emulate these deficiencies).
MACHADO_2009 = {
    "protanopia": (
        (0.152286, 1.052583, -0.204868),
        (0.114503, 0.786281, 0.099216),
        (-0.003882, -0.048116, 1.051998),
    ),
    "deuteranopia": (
        (0.367322, 0.860646, -0.227968),
        (0.280085, 0.672501, 0.047413),
        (-0.011820, 0.042940, 0.968881),
    ),
    "tritanopia": (
        (1.255528, -0.076749, -0.178779),
        (-0.078411, 0.930809, 0.147602),
        (0.004733, 0.691367, 0.303900),
    ),
}
# Smallest CIELAB (1976) distance we accept between two group colours (and the reference
# grey) as seen with each deficiency; about 10 units reads as a clearly different colour for
# marks of this size (common practice; 2.3 is a just-noticeable difference).
MIN_DELTA_E = 10.0


def _linear(channel: float) -> float:
    # sRGB transfer function (IEC 61966-2-1).
    return channel / 12.92 if channel <= 0.04045 else ((channel + 0.055) / 1.055) ** 2.4


def _lab(hex_colour: str, matrix=None) -> tuple[float, float, float]:
    rgb = [_linear(int(hex_colour[i : i + 2], 16) / 255) for i in (1, 3, 5)]
    if matrix is not None:
        rgb = [
            min(1.0, max(0.0, sum(m * c for m, c in zip(row, rgb, strict=True)))) for row in matrix
        ]
    r, g, b = rgb
    # sRGB (D65) to XYZ, then CIELAB with the D65 white.
    x = (0.4124 * r + 0.3576 * g + 0.1805 * b) / 0.95047
    y = 0.2126 * r + 0.7152 * g + 0.0722 * b
    z = (0.0193 * r + 0.1192 * g + 0.9505 * b) / 1.08883

    def f(t: float) -> float:
        return t ** (1 / 3) if t > 216 / 24389 else (24389 / 27 * t + 16) / 116

    return 116 * f(y) - 16, 500 * (f(x) - f(y)), 200 * (f(y) - f(z))


def test_the_lab_conversion_matches_a_published_value():
    # sRGB #ff0000 is L* 53.24, a* 80.09, b* 67.20 (CIE 1976, D65; from memory, as tabulated
    # by every colour converter); white is L* 100.
    red = _lab("#ff0000")
    assert red == pytest.approx((53.24, 80.09, 67.20), abs=0.1)
    assert _lab("#ffffff")[0] == pytest.approx(100, abs=0.01)


@pytest.mark.parametrize("deficiency", sorted(MACHADO_2009))
def test_group_colours_stay_apart_with_each_colour_vision_deficiency(deficiency):
    matrix = MACHADO_2009[deficiency]
    colours = [*PALETTE, REFERENCE_COLOUR]
    worst = min(
        (math.dist(_lab(a, matrix), _lab(b, matrix)), a, b)
        for a, b in itertools.combinations(colours, 2)
    )
    assert worst[0] >= MIN_DELTA_E, f"{worst[1]} and {worst[2]} too close: {worst[0]:.1f}"


def test_the_simulation_does_merge_what_it_should():
    # The check can fail: pure red and pure green are told apart with normal vision but are
    # close to one colour with deuteranopia.
    normal = math.dist(_lab("#d62728"), _lab("#2ca02c"))
    deutan = math.dist(
        _lab("#d62728", MACHADO_2009["deuteranopia"]), _lab("#2ca02c", MACHADO_2009["deuteranopia"])
    )
    assert normal > 60 and deutan < MIN_DELTA_E


def test_palette_and_shapes_are_in_an_order_of_our_own():
    # Not the most common plotting library's first colours, nor the usual shape sequence.
    assert [c.lower() for c in PALETTE[:3]] != ["#1f77b4", "#ff7f0e", "#2ca02c"]
    assert [c.lower() for c in PALETTE[:3]] != ["#4c78a8", "#f58518", "#e45756"]
    assert list(SHAPES[:5]) != ["circle", "square", "triangle", "cross", "diamond"]
    assert SHAPES[0] != "circle"


def test_twelve_groups_get_twelve_different_colour_and_shape_pairs():
    groups = [f"Line {c}" for c in "ABCDEFGHIJKL"]
    styles = group_styles(groups)
    assert len(set(styles)) == 12
    # Neighbours in the order never share a colour or a shape.
    for (c1, s1), (c2, s2) in itertools.pairwise(styles):
        assert c1 != c2 and s1 != s2


def test_up_to_24_groups_stay_distinct_and_a_group_keeps_its_style():
    groups = [f"G{i}" for i in range(24)]
    assert len(set(group_styles(groups))) == 24
    assert group_styles(groups)[:5] == group_styles(groups[:5])


def test_the_reference_group_is_neutral_grey_and_the_others_keep_the_palette_order():
    styles = group_styles(["ctrl", "A", "B"], reference="ctrl")
    assert styles[0][0] == REFERENCE_COLOUR
    assert [c for c, _ in styles[1:]] == list(PALETTE[:2])


def test_the_legend_is_titled_with_the_group_column():
    enc = group_encoding(["a", "b"], "filling line")
    assert enc["color"]["title"] == "filling line" == enc["shape"]["title"]
    assert enc["color"]["scale"]["domain"] == ["a", "b"]


def test_markers_are_outlined_and_larger_than_the_default():
    assert CONFIG["point"]["filled"] is False
    assert CONFIG["point"]["size"] >= 60 and CONFIG["point"]["strokeWidth"] >= 1.5


def test_a_build_never_imports_altair(tmp_path):
    # Charts are plain Vega-Lite dicts: a build (reading, analysis, every chart, every page)
    # must not pay altair's import (about 0.65 s of CPU); altair is the tests' schema check.
    import subprocess
    import sys

    from conftest import write_project

    rows = "\n".join(f"{'ABC'[i % 3]},{i % 7 + 0.5 * (i % 3)},{i % 11}" for i in range(90))
    root = write_project(
        tmp_path / "p",
        '[[datasets]]\nname = "D"\nfile = "d.csv"\ngroup = "g"\nmeasures = ["v"]\nx = "x"\n',
        {"d.csv": "g,v,x\n" + rows + "\n"},
    )
    code = (
        "import sys\n"
        "from sitebuild.pipeline import build\n"
        f"build({str(root)!r}, out={str(tmp_path / 'site')!r}, quiet=True)\n"
        "print('altair' in sys.modules)\n"
    )
    env = {k: v for k, v in os.environ.items() if k != "SITEBUILD_CHECK_CHARTS"}
    done = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, check=True, env=env
    )
    assert (tmp_path / "site" / "index.html").exists()
    assert done.stdout.strip().splitlines()[-1] == "False"


def test_charts_are_checked_against_the_schema_in_the_tests(monkeypatch):
    from sitebuild.charts.theme import channel, to_spec, view

    good = {"layer": [view("point", {"x": channel("x")}, data={"values": [{"x": 1}]})]}
    bad = {"layer": [view("point", {"x": channel("x", "nope")}, data={"values": [{"x": 1}]})]}
    monkeypatch.setenv("SITEBUILD_CHECK_CHARTS", "1")
    assert to_spec(good)["layer"][0]["mark"] == {"type": "point"}
    with pytest.raises(ValueError, match="nope"):
        to_spec(bad)
    monkeypatch.setenv("SITEBUILD_CHECK_CHARTS", "0")
    assert to_spec(bad)["layer"][0]["encoding"]["x"]["type"] == "nope"  # builds skip the check
