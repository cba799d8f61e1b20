"""Shapes of a sketch: validation, normalisation, bounds, reflection and the plain-dict form.

Expected bounds and reflections below are exact geometry (no source needed).
"""
from __future__ import annotations

import json
import math

import pytest

from shockslate.solver.shapes import (
    Circle,
    Polygon,
    Rectangle,
    Segment,
    Sketch,
    Stroke,
    shape_from_dict,
    shape_to_dict,
    sketch_from_dict,
    sketch_to_dict,
)

ONE_OF_EACH = [
    Stroke(((0.0, 0.0), (0.1, 0.05), (0.2, -0.03)), 0.004, "wall"),
    Segment((0.0, 0.0), (0.5, 0.25), 0.01, "reservoir"),
    Rectangle((0.3, 0.2), (-0.1, 0.05), "stream"),
    Polygon(((0.0, 0.0), (1.0, 0.0), (0.5, 0.8)), "ambient"),
    Circle((0.25, -0.125), 0.1, "fluid"),
]


@pytest.mark.parametrize("shape", ONE_OF_EACH, ids=lambda s: s.kind)
def test_shape_dict_round_trip_through_json(shape):
    d = shape_to_dict(shape)
    assert d["kind"] == shape.kind
    again = shape_from_dict(json.loads(json.dumps(d)))
    assert again == shape
    assert type(again) is type(shape)


def test_segment_dict_has_the_documented_layout():
    d = shape_to_dict(Segment((1, 2), (3.5, 4), 0.25, "wall"))
    assert d == {"kind": "segment", "start_m": [1.0, 2.0], "end_m": [3.5, 4.0], "width_m": 0.25, "paints": "wall"}


def test_sketch_dict_round_trip_keeps_order_and_mirror():
    sketch = Sketch(tuple(ONE_OF_EACH), mirror="midline")
    d = sketch_to_dict(sketch)
    assert [s["kind"] for s in d["shapes"]] == ["stroke", "segment", "rectangle", "polygon", "circle"]
    assert d["mirror"] == "midline"
    assert sketch_from_dict(json.loads(json.dumps(d))) == sketch


def test_sketch_mirror_defaults_to_none_and_empty_sketch_is_valid():
    assert sketch_from_dict({"shapes": []}) == Sketch((), "none")


def test_constructors_normalise_lists_to_float_tuples_and_are_hashable():
    s = Stroke([[0, 0], [1, 2]], 1, "wall")
    assert s.points_m == ((0.0, 0.0), (1.0, 2.0))
    assert isinstance(s.width_m, float)
    assert hash(s) == hash(Stroke(((0.0, 0.0), (1.0, 2.0)), 1.0, "wall"))
    sk = Sketch([s])
    assert sk.shapes == (s,)


def test_kind_names():
    assert [s.kind for s in ONE_OF_EACH] == ["stroke", "segment", "rectangle", "polygon", "circle"]


def test_bounds_include_half_width_and_accept_corners_in_any_order():
    assert Segment((0.0, 1.0), (2.0, -1.0), 0.5, "wall").bounds_m() == (-0.25, -1.25, 2.25, 1.25)
    assert Stroke(((0.0, 0.0), (1.0, 3.0), (-2.0, 1.0)), 0.2, "wall").bounds_m() == pytest.approx((-2.1, -0.1, 1.1, 3.1))
    assert Rectangle((3.0, 4.0), (1.0, -2.0), "wall").bounds_m() == (1.0, -2.0, 3.0, 4.0)
    assert Polygon(((0.0, 0.0), (2.0, 1.0), (-1.0, 5.0)), "wall").bounds_m() == (-1.0, 0.0, 2.0, 5.0)
    assert Circle((1.0, 2.0), 0.5, "wall").bounds_m() == (0.5, 1.5, 1.5, 2.5)


def test_mirrored_about_y_reflects_every_point():
    line = 0.25
    seg = Segment((0.0, 1.0), (2.0, -1.0), 0.5, "wall").mirrored_about_y(line)
    assert seg.start_m == (0.0, -0.5) and seg.end_m == (2.0, 1.5) and seg.width_m == 0.5
    circ = Circle((1.0, 0.0), 0.2, "stream").mirrored_about_y(line)
    assert circ.centre_m == (1.0, 0.5) and circ.paints == "stream"
    rect = Rectangle((0.0, 0.0), (1.0, 1.0), "wall").mirrored_about_y(line)
    assert rect.bounds_m() == (0.0, -0.5, 1.0, 0.5)
    poly = Polygon(((0.0, 0.0), (1.0, 0.0), (0.0, 2.0)), "wall").mirrored_about_y(0.0)
    assert poly.points_m == ((0.0, 0.0), (1.0, 0.0), (0.0, -2.0))
    stroke = Stroke(((0.0, 0.3), (1.0, 0.4)), 0.1, "wall").mirrored_about_y(0.0)
    assert stroke.points_m == ((0.0, -0.3), (1.0, -0.4))


# ----------------------------------------------------------------------------- errors

GOOD = {
    "stroke": {"kind": "stroke", "points_m": [[0, 0], [1, 1]], "width_m": 0.1, "paints": "wall"},
    "segment": {"kind": "segment", "start_m": [0, 0], "end_m": [1, 1], "width_m": 0.1, "paints": "wall"},
    "rectangle": {"kind": "rectangle", "corner_a_m": [0, 0], "corner_b_m": [1, 1], "paints": "wall"},
    "polygon": {"kind": "polygon", "points_m": [[0, 0], [1, 0], [0, 1]], "paints": "wall"},
    "circle": {"kind": "circle", "centre_m": [0, 0], "radius_m": 0.5, "paints": "wall"},
}


def _with(kind, **changes):
    d = dict(GOOD[kind])
    d.update(changes)
    return d


@pytest.mark.parametrize("kind", sorted(GOOD))
def test_good_dicts_build(kind):
    assert shape_from_dict(GOOD[kind]).kind == kind


BAD_SHAPE_DICTS = [
    # (dict, words the message must contain: field, value, what is allowed)
    ({"kind": "triangle"}, ["kind", "'triangle'", "stroke", "circle"]),
    ({"start_m": [0, 0]}, ["kind", "missing"]),
    (_with("segment", width_m=-0.5), ["width_m", "-0.5", "greater than 0"]),
    (_with("segment", width_m=0), ["width_m", "= 0", "greater than 0"]),
    (_with("circle", radius_m=float("nan")), ["radius_m", "nan", "finite"]),
    (_with("circle", centre_m=[0.0, float("inf")]), ["centre_m[1]", "inf", "finite"]),
    (_with("circle", radius_m="2"), ["radius_m", "'2'", "number"]),
    (_with("circle", radius_m=True), ["radius_m", "True", "number"]),
    (_with("segment", start_m=[1, 2, 3]), ["start_m", "[1, 2, 3]", "[x, y] pair"]),
    (_with("segment", end_m=[2e7, 0]), ["end_m[0]", "20000000", "1e+06"]),
    (_with("stroke", points_m=[[0, 0]]), ["points_m", "[[0, 0]]", "at least 2"]),
    (_with("polygon", points_m=[[0, 0], [1, 1]]), ["points_m", "[[0, 0], [1, 1]]", "at least 3"]),
    (_with("polygon", points_m=[[0, 0], [1, 1], ["a", 2]]), ["points_m[2][0]", "'a'", "number"]),
    (_with("polygon", points_m="abc"), ["points_m", "'abc'", "list"]),
    (_with("rectangle", paints="water"), ["paints", "'water'", "wall", "reservoir", "stream", "ambient", "fluid"]),
    ({k: v for k, v in GOOD["circle"].items() if k != "radius_m"}, ["circle.radius_m", "missing", "centre_m"]),
    (_with("circle", widht_m=1.0), ["circle.widht_m", "1.0", "radius_m"]),
    ([1, 2], ["shape", "[1, 2]", "kind"]),
]


@pytest.mark.parametrize("bad,words", BAD_SHAPE_DICTS)
def test_bad_shape_dicts_name_field_value_and_allowed(bad, words):
    with pytest.raises(ValueError) as err:
        shape_from_dict(bad)
    for word in words:
        assert word in str(err.value), (word, str(err.value))


def test_errors_inside_a_sketch_name_the_shape_position():
    d = {"shapes": [GOOD["circle"], _with("segment", width_m=-2.0)], "mirror": "none"}
    with pytest.raises(ValueError, match=r"sketch\.shapes\[1\]\.width_m = -2\.0"):
        sketch_from_dict(d)
    d = {"shapes": [GOOD["circle"], _with("polygon", points_m=[[0, 0], [1, 0], [1, "x"]])]}
    with pytest.raises(ValueError, match=r"sketch\.shapes\[1\]\.points_m\[2\]\[1\] = 'x'"):
        sketch_from_dict(d)


@pytest.mark.parametrize(
    "bad,words",
    [
        ({"shapes": [], "mirror": "diagonal"}, ["mirror", "'diagonal'", "none", "axis", "midline"]),
        ({"mirror": "axis"}, ["shapes", "missing"]),
        ({"shapes": {"a": 1}}, ["shapes", "{'a': 1}", "list"]),
        ({"shapes": [], "colour": "red"}, ["colour", "'red'", "shapes, mirror"]),
        ("sketch", ["sketch", "'sketch'"]),
    ],
)
def test_bad_sketch_dicts(bad, words):
    with pytest.raises(ValueError) as err:
        sketch_from_dict(bad)
    for word in words:
        assert word in str(err.value), (word, str(err.value))


def test_constructors_validate_too():
    with pytest.raises(ValueError, match=r"segment\.width_m = -1\.0 .*greater than 0"):
        Segment((0, 0), (1, 1), -1.0, "wall")
    with pytest.raises(ValueError, match=r"circle\.paints = 'solid' .*wall"):
        Circle((0, 0), 1.0, "solid")
    with pytest.raises(ValueError, match=r"stroke\.points_m = .*at least 2"):
        Stroke(((0.0, 0.0),), 1.0, "wall")
    with pytest.raises(ValueError, match=r"sketch\.mirror = 'x'"):
        Sketch((), "x")
    with pytest.raises(ValueError, match=r"sketch\.shapes\[0\] = \{'kind': 'circle'"):
        Sketch(({"kind": "circle"},))


def test_long_values_are_shortened_in_messages():
    points = [[float(k), 0.0] for k in range(2000)] + [[math.nan, 0.0]]
    with pytest.raises(ValueError) as err:
        Stroke(points, 0.1, "wall")
    assert "points_m[2000][0] = nan" in str(err.value)
    assert len(str(err.value)) < 300
