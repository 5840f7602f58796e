"""Tests of service.svg: tick placement, series markup, robustness to bad values."""

from __future__ import annotations

import math
import xml.etree.ElementTree as ET

import numpy as np
import pytest
from numpy.testing import assert_allclose

from service import svg

SVG_NS = "{http://www.w3.org/2000/svg}"


def _parse(markup: str) -> ET.Element:
    return ET.fromstring(markup)


def _series_paths(root: ET.Element) -> list[ET.Element]:
    return [p for p in root.iter(f"{SVG_NS}path") if "series" in p.get("class", "").split()]


@pytest.mark.parametrize(
    "lo, hi, expected",
    [
        (0.0, 10.0, [0, 2, 4, 6, 8, 10]),
        (2.0, 12.0, [2, 4, 6, 8, 10, 12]),
        (-1.0, 1.0, [-1.0, -0.5, 0.0, 0.5, 1.0]),
        (3.05, 3.57, [3.1, 3.2, 3.3, 3.4, 3.5]),
    ],
)
def test_nice_ticks_are_round_and_cover_the_range(lo, hi, expected):
    # 1-2-2.5-5 steps: common practice for axis ticks, no source
    assert_allclose(svg.nice_ticks(lo, hi, 6), expected, rtol=0, atol=1e-12)


@pytest.mark.parametrize("lo, hi", [(1e-9, 1e-2), (0.5, 3.0), (2e-4, 9e-4), (1.0, 1e6)])
def test_log_ticks_lie_inside_the_range_and_are_1_2_5_or_decades(lo, hi):
    ticks = svg.log_ticks(lo, hi)
    assert ticks, "no ticks"
    for t in ticks:
        assert lo * (1 - 1e-9) <= t <= hi * (1 + 1e-9)
        mantissa = t / 10 ** math.floor(math.log10(t) + 1e-12)
        assert any(abs(mantissa - m) < 1e-9 for m in (1.0, 2.0, 5.0))
    assert len(ticks) <= 9


@pytest.mark.parametrize("bad", [(1.0, 1.0), (2.0, 1.0), (float("nan"), 1.0)])
def test_nice_ticks_reject_an_empty_range(bad):
    with pytest.raises(ValueError, match="lo < hi"):
        svg.nice_ticks(*bad)


def test_log_ticks_reject_non_positive_range():
    with pytest.raises(ValueError, match="0 < lo < hi"):
        svg.log_ticks(0.0, 1.0)


def test_each_series_is_one_series_path_and_the_count_is_declared():
    x = np.linspace(2, 12, 50)
    series = [
        svg.Series("fit 20 °C", x, 1e-6 * 10 ** (0.3 * x), "line", 0),
        svg.Series("measured 20 °C", [4, 7, 9], [1e-5, 1e-4, 1e-3], "points", 0),
        svg.Series("both", [4, 7, 9], [2e-5, 2e-4, 2e-3], "line+points", 1),
    ]
    band = svg.Band("95 % confidence band", x, 0.5e-6 * 10 ** (0.3 * x), 2e-6 * 10 ** (0.3 * x))
    markup = svg.plot(series, bands=[band], x_axis=svg.Axis("pH"),
                      y_axis=svg.Axis("k [1/d]", log=True), title="profile", plot_id="p1")
    root = _parse(markup)
    assert root.get("data-series") == "3"
    assert root.get("data-plot") == "p1"
    assert len(_series_paths(root)) == 3
    assert len([p for p in root.iter(f"{SVG_NS}path") if p.get("class") == "band"]) == 1
    labels = [t.text for t in root.iter(f"{SVG_NS}text")]
    assert "pH" in labels and "k [1/d]" in labels
    assert "95 % confidence band" in labels and "measured 20 °C" in labels


def test_series_differ_in_dash_and_marker_not_only_colour():
    x = [0.0, 1.0, 2.0]
    series = [svg.Series(f"s{i}", x, [i, i + 1, i + 2], "line+points", i)
              for i in range(svg.STYLE_COUNT)]
    root = _parse(svg.plot(series, x_axis=svg.Axis("x"), y_axis=svg.Axis("y")))
    lines = [p for p in root.iter(f"{SVG_NS}path") if p.get("class") == "series"]
    dashes = [p.get("stroke-dasharray", "") for p in lines]
    assert len(set(dashes)) == svg.STYLE_COUNT
    markers = [p.get("d") for p in root.iter(f"{SVG_NS}path") if p.get("class") == "markers"]
    # marker outlines differ in shape: compare the path commands without coordinates
    shapes = {"".join(ch for ch in d if ch.isalpha()) for d in markers}
    assert len(shapes) >= 5


def test_non_finite_and_non_positive_values_never_reach_the_markup():
    series = [svg.Series("gappy", [0, 1, 2, 3, 4], [1.0, float("nan"), 2.0, -1.0, math.inf],
                         "line+points", 0)]
    markup = svg.plot(series, x_axis=svg.Axis("x"), y_axis=svg.Axis("y", log=True))
    assert "nan" not in markup.lower() and "inf" not in markup.lower()
    root = _parse(markup)
    (line,) = _series_paths(root)
    # the line is broken at the bad points: two separate sub-paths (each starts with M)
    assert line.get("d").count("M") == 2


def test_empty_series_still_give_a_valid_picture():
    root = _parse(svg.plot([svg.Series("none", [], [], "points", 0)],
                           x_axis=svg.Axis("x"), y_axis=svg.Axis("y", log=True)))
    assert len(_series_paths(root)) == 1


def test_text_is_escaped():
    markup = svg.plot([svg.Series("<b>&", [0, 1], [0, 1])], x_axis=svg.Axis("a<b"),
                      y_axis=svg.Axis("c&d"), title='"quoted"')
    root = _parse(markup)  # would fail on unescaped markup
    assert "a<b" in [t.text for t in root.iter(f"{SVG_NS}text")]


def test_bottom_legend_grows_the_picture_below_the_frame():
    s = [svg.Series("a long legend label number one", [0, 1], [0, 1]),
         svg.Series("another long legend label", [0, 1], [1, 0], "points", 1)]
    right = _parse(svg.plot(s, x_axis=svg.Axis("x"), y_axis=svg.Axis("y"), width=400,
                            height=300))
    bottom = _parse(svg.plot(s, x_axis=svg.Axis("x"), y_axis=svg.Axis("y"), width=400,
                             height=300, legend_position="bottom"))
    assert float(right.get("height")) == 300
    assert float(bottom.get("height")) > 300


@pytest.mark.parametrize("kwargs, match", [
    ({"kind": "bars"}, "unknown series kind"),
    ({"x": [1, 2], "y": [1]}, "x has 2 values"),
])
def test_bad_series_are_refused(kwargs, match):
    base = {"label": "s", "x": [1.0], "y": [1.0]}
    with pytest.raises(ValueError, match=match):
        svg.Series(**{**base, **kwargs})


def test_unknown_legend_position_is_refused():
    with pytest.raises(ValueError, match="legend position"):
        svg.plot([svg.Series("s", [0, 1], [0, 1])], x_axis=svg.Axis("x"), y_axis=svg.Axis("y"),
                 legend_position="left")


def test_fixed_limits_map_data_to_the_frame_edges():
    markup = svg.plot([svg.Series("s", [0.0, 10.0], [0.0, 100.0])],
                      x_axis=svg.Axis("x", limits=(0.0, 10.0)),
                      y_axis=svg.Axis("y", limits=(0.0, 100.0)), legend=False,
                      width=400, height=300)
    root = _parse(markup)
    frame = next(r for r in root.iter(f"{SVG_NS}rect") if r.get("class") == "frame-bg")
    left, top = float(frame.get("x")), float(frame.get("y"))
    w, h = float(frame.get("width")), float(frame.get("height"))
    (line,) = _series_paths(root)
    pts = [tuple(map(float, p.split(","))) for p in line.get("d")[1:].split("L")]
    assert_allclose(pts, [(left, top + h), (left + w, top)], rtol=0, atol=0.01)
