"""Shapes of a sketch: validation of the dict form (once, by the shape models), normalisation, bounds,
reflection and the plain-dict form.

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
    MIRRORS,
    sketch_from_dict,
    sketch_to_dict,
)
from shockslate.solver.validation import Refused

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


NAN, INF = float("nan"), float("inf")

BAD_SHAPE_DICTS = [
    # (dict, field, value, rule, words of the plain sentence)
    ({"kind": "triangle"}, "shape.kind", "triangle", "one_of", ["stroke", "circle", '"triangle"']),
    ({"start_m": [0, 0]}, "shape.kind", None, "required", ["kind", "missing"]),
    (_with("segment", width_m=-0.5), "segment.width_m", -0.5, "above", ["Segment width must be above 0 m", "-0.5 m"]),
    (_with("segment", width_m=0), "segment.width_m", 0, "above", ["above 0 m", "you gave 0 m"]),
    (_with("circle", radius_m=NAN), "circle.radius_m", NAN, "finite", ["finite", "nan"]),
    (_with("circle", centre_m=[0.0, INF]), "circle.centre_m[1]", INF, "finite", ["finite", "inf"]),
    (_with("circle", radius_m="2"), "circle.radius_m", "2", "type", ["a number in m", '"2"']),
    (_with("circle", radius_m=True), "circle.radius_m", True, "type", ["a number in m", "true"]),
    (_with("segment", start_m=[1, 2, 3]), "segment.start_m", [1, 2, 3], "pair", ["[x, y] pair", "[1, 2, 3]"]),
    (_with("segment", end_m=[2e7, 0]), "segment.end_m[0]", 2e7, "at_most", ["at most 1e+06 m", "2e+07 m"]),
    (_with("stroke", points_m=[[0, 0]]), "stroke.points_m", [[0, 0]], "length", ["at least 2"]),
    (_with("polygon", points_m=[[0, 0], [1, 1]]), "polygon.points_m", [[0, 0], [1, 1]], "length", ["at least 3"]),
    (_with("polygon", points_m=[[0, 0], [1, 1], ["a", 2]]), "polygon.points_m[2][0]", "a", "type", ["number"]),
    (_with("polygon", points_m="abc"), "polygon.points_m", "abc", "type", ["a list"]),
    (_with("rectangle", paints="water"), "rectangle.paints", "water", "one_of",
     ["wall", "reservoir", "stream", "ambient", "fluid", '"water"']),
    ({k: v for k, v in GOOD["circle"].items() if k != "radius_m"}, "circle.radius_m", None, "required", ["missing"]),
    (_with("circle", widht_m=1.0), "circle.widht_m", 1.0, "unknown_field", ["centre_m", "radius_m"]),
    ([1, 2], "shape", [1, 2], "type", ["an object"]),
]


def _same(a, b):
    return a == b or (isinstance(a, float) and isinstance(b, float) and math.isnan(a) and math.isnan(b))


@pytest.mark.parametrize("bad,field,value,rule,words", BAD_SHAPE_DICTS)
def test_bad_shape_dicts_are_refused_with_field_value_rule_and_a_sentence(bad, field, value, rule, words):
    with pytest.raises(Refused) as err:
        shape_from_dict(bad)
    first = err.value.first
    assert (first.field, first.rule) == (field, rule), first
    assert _same(first.value, value), first
    assert first.message[0].isupper() and first.message.endswith("."), first
    for word in words:
        assert word in first.message, (word, first.message)


def test_unknown_field_names_the_fields_of_that_shape_only():
    with pytest.raises(Refused) as err:
        shape_from_dict(_with("circle", widht_m=1.0))
    assert "width_m" not in err.value.first.message.replace("widht_m", "")


def test_errors_inside_a_sketch_name_the_shape_position():
    d = {"shapes": [GOOD["circle"], _with("segment", width_m=-2.0)], "mirror": "none"}
    with pytest.raises(Refused) as err:
        sketch_from_dict(d)
    assert (err.value.first.field, err.value.first.value) == ("sketch.shapes[1].width_m", -2.0)
    d = {"shapes": [GOOD["circle"], _with("polygon", points_m=[[0, 0], [1, 0], [1, "x"]])]}
    with pytest.raises(Refused) as err:
        sketch_from_dict(d)
    assert (err.value.first.field, err.value.first.value) == ("sketch.shapes[1].points_m[2][1]", "x")
    with pytest.raises(Refused) as err:
        shape_from_dict(_with("segment", width_m=-2.0), where="shape")
    assert err.value.first.field == "shape.width_m"


@pytest.mark.parametrize(
    "bad,field,rule",
    [
        ({"shapes": [], "mirror": "diagonal"}, "sketch.mirror", "one_of"),
        ({"shapes": {"a": 1}}, "sketch.shapes", "type"),
        ({"shapes": [], "colour": "red"}, "sketch.colour", "unknown_field"),
        ("sketch", "sketch", "type"),
    ],
)
def test_bad_sketch_dicts(bad, field, rule):
    with pytest.raises(Refused) as err:
        sketch_from_dict(bad)
    assert (err.value.first.field, err.value.first.rule) == (field, rule)


def test_mirror_choices_come_from_the_one_table():
    for name in MIRRORS:
        assert sketch_from_dict({"shapes": [], "mirror": name}).mirror == name
    with pytest.raises(Refused) as err:
        sketch_from_dict({"shapes": [], "mirror": "x"})
    assert all(name in err.value.first.allowed for name in MIRRORS)


def test_long_values_are_shortened_in_messages():
    points = [[float(k), 0.0] for k in range(2000)] + [[math.nan, 0.0]]
    with pytest.raises(Refused) as err:
        shape_from_dict({"kind": "stroke", "points_m": points, "width_m": 0.1, "paints": "wall"})
    assert err.value.first.field == "stroke.points_m[2000][0]"
    assert len(str(err.value)) < 300
