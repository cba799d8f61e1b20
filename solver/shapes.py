"""The shapes a user draws, in metres, and their plain-dict (JSON) form.

A sketch is kept in metres, never in cells, so changing the resolution re-rasterises the same
drawing. Every shape is a frozen dataclass that validates and normalises its own fields (lists
become tuples of floats), so a constructed shape is always safe to rasterise and to hash.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Union

from shockslate.solver.kinds import PAINTABLE

Point = tuple[float, float]

#: Coordinates and sizes are limited to this magnitude, in metres, so that squared distances
#: stay far from overflow; a sandbox domain is metres across, not kilometres.
MAX_COORD_M = 1.0e6

#: Mirror choices of a sketch: none, about the line y = 0 (the axis), or about the domain's mid-height.
MIRRORS = ("none", "axis", "midline")


# ----------------------------------------------------------------------------- validation helpers

def _show(value: Any, limit: int = 80) -> str:
    """repr() of a value, shortened so that an error about a 5000-point stroke stays readable."""
    text = repr(value)
    return text if len(text) <= limit else text[: limit - 3] + "..."


def _bad(field: str, value: Any, allowed: str) -> ValueError:
    return ValueError(f"{field} = {_show(value)} is not allowed: {allowed}")


def _number(field: str, value: Any) -> float:
    """A finite real number within +-MAX_COORD_M (bools and strings are refused)."""
    allowed = f"must be a finite number in metres between -{MAX_COORD_M:g} and {MAX_COORD_M:g}"
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise _bad(field, value, allowed)
    number = float(value)
    if not math.isfinite(number) or abs(number) > MAX_COORD_M:
        raise _bad(field, value, allowed)
    return number


def _positive(field: str, value: Any) -> float:
    number = _number(field, value)
    if not number > 0.0:
        raise _bad(field, value, f"must be a finite number greater than 0 (metres, at most {MAX_COORD_M:g})")
    return number


def _point(field: str, value: Any) -> Point:
    if isinstance(value, (str, bytes)) or not hasattr(value, "__len__") or len(value) != 2:
        raise _bad(field, value, "must be an [x, y] pair of finite numbers in metres")
    return (_number(f"{field}[0]", value[0]), _number(f"{field}[1]", value[1]))


def _points(field: str, value: Any, at_least: int) -> tuple[Point, ...]:
    if isinstance(value, (str, bytes, dict)) or not hasattr(value, "__len__"):
        raise _bad(field, value, f"must be a list of at least {at_least} [x, y] points in metres")
    if len(value) < at_least:
        raise _bad(field, value, f"needs at least {at_least} [x, y] points, got {len(value)}")
    return tuple(_point(f"{field}[{n}]", p) for n, p in enumerate(value))


def _paints(field: str, value: Any) -> str:
    if not isinstance(value, str) or value not in PAINTABLE:
        raise _bad(field, value, "must be one of " + ", ".join(PAINTABLE))
    return value


def _set(obj: object, name: str, value: Any) -> None:
    """Store a normalised field on a frozen dataclass."""
    object.__setattr__(obj, name, value)


def _reflect(point: Point, y_line_m: float) -> Point:
    return (point[0], 2.0 * y_line_m - point[1])


def _points_bounds(points: tuple[Point, ...], pad_m: float = 0.0) -> tuple[float, float, float, float]:
    xs = [p[0] for p in points]
    ys = [p[1] for p in points]
    return (min(xs) - pad_m, min(ys) - pad_m, max(xs) + pad_m, max(ys) + pad_m)


# ----------------------------------------------------------------------------- shapes

@dataclass(frozen=True)
class Stroke:
    """A freehand path with a width: the capsules around each of its pieces, joined round."""

    points_m: tuple[Point, ...]
    width_m: float
    paints: str

    def __post_init__(self) -> None:
        _set(self, "points_m", _points("stroke.points_m", self.points_m, 2))
        _set(self, "width_m", _positive("stroke.width_m", self.width_m))
        _set(self, "paints", _paints("stroke.paints", self.paints))

    @property
    def kind(self) -> str:
        return "stroke"

    def bounds_m(self) -> tuple[float, float, float, float]:
        """(x0, y0, x1, y1) of the path grown by half the width."""
        return _points_bounds(self.points_m, 0.5 * self.width_m)

    def mirrored_about_y(self, y_line_m: float) -> "Stroke":
        return Stroke(tuple(_reflect(p, y_line_m) for p in self.points_m), self.width_m, self.paints)


@dataclass(frozen=True)
class Segment:
    """A straight line with a width (a capsule: round ends)."""

    start_m: Point
    end_m: Point
    width_m: float
    paints: str

    def __post_init__(self) -> None:
        _set(self, "start_m", _point("segment.start_m", self.start_m))
        _set(self, "end_m", _point("segment.end_m", self.end_m))
        _set(self, "width_m", _positive("segment.width_m", self.width_m))
        _set(self, "paints", _paints("segment.paints", self.paints))

    @property
    def kind(self) -> str:
        return "segment"

    def bounds_m(self) -> tuple[float, float, float, float]:
        """(x0, y0, x1, y1) of the line grown by half the width."""
        return _points_bounds((self.start_m, self.end_m), 0.5 * self.width_m)

    def mirrored_about_y(self, y_line_m: float) -> "Segment":
        return Segment(_reflect(self.start_m, y_line_m), _reflect(self.end_m, y_line_m), self.width_m, self.paints)


@dataclass(frozen=True)
class Rectangle:
    """An axis-aligned rectangle given by two opposite corners, in either order."""

    corner_a_m: Point
    corner_b_m: Point
    paints: str

    def __post_init__(self) -> None:
        _set(self, "corner_a_m", _point("rectangle.corner_a_m", self.corner_a_m))
        _set(self, "corner_b_m", _point("rectangle.corner_b_m", self.corner_b_m))
        _set(self, "paints", _paints("rectangle.paints", self.paints))

    @property
    def kind(self) -> str:
        return "rectangle"

    def bounds_m(self) -> tuple[float, float, float, float]:
        return _points_bounds((self.corner_a_m, self.corner_b_m))

    def mirrored_about_y(self, y_line_m: float) -> "Rectangle":
        return Rectangle(_reflect(self.corner_a_m, y_line_m), _reflect(self.corner_b_m, y_line_m), self.paints)


@dataclass(frozen=True)
class Polygon:
    """A closed polygon (last vertex joins the first), filled by the even-odd rule."""

    points_m: tuple[Point, ...]
    paints: str

    def __post_init__(self) -> None:
        _set(self, "points_m", _points("polygon.points_m", self.points_m, 3))
        _set(self, "paints", _paints("polygon.paints", self.paints))

    @property
    def kind(self) -> str:
        return "polygon"

    def bounds_m(self) -> tuple[float, float, float, float]:
        return _points_bounds(self.points_m)

    def mirrored_about_y(self, y_line_m: float) -> "Polygon":
        return Polygon(tuple(_reflect(p, y_line_m) for p in self.points_m), self.paints)


@dataclass(frozen=True)
class Circle:
    """A filled disc."""

    centre_m: Point
    radius_m: float
    paints: str

    def __post_init__(self) -> None:
        _set(self, "centre_m", _point("circle.centre_m", self.centre_m))
        _set(self, "radius_m", _positive("circle.radius_m", self.radius_m))
        _set(self, "paints", _paints("circle.paints", self.paints))

    @property
    def kind(self) -> str:
        return "circle"

    def bounds_m(self) -> tuple[float, float, float, float]:
        return _points_bounds((self.centre_m,), self.radius_m)

    def mirrored_about_y(self, y_line_m: float) -> "Circle":
        return Circle(_reflect(self.centre_m, y_line_m), self.radius_m, self.paints)


Shape = Union[Stroke, Segment, Rectangle, Polygon, Circle]

SHAPE_TYPES: dict[str, type] = {
    "stroke": Stroke,
    "segment": Segment,
    "rectangle": Rectangle,
    "polygon": Polygon,
    "circle": Circle,
}


@dataclass(frozen=True)
class Sketch:
    """What the user drew: shapes in order, later ones painting over earlier ones.

    mirror "axis" also paints each shape reflected about y = 0, "midline" about the domain's
    mid-height; the reflection is painted right after its shape.
    """

    shapes: tuple[Shape, ...] = ()
    mirror: str = "none"

    def __post_init__(self) -> None:
        if isinstance(self.shapes, (str, bytes, dict)) or not hasattr(self.shapes, "__iter__"):
            raise _bad("sketch.shapes", self.shapes, "must be a list of shapes")
        shapes = tuple(self.shapes)
        for n, shape in enumerate(shapes):
            if not isinstance(shape, tuple(SHAPE_TYPES.values())):
                raise _bad(f"sketch.shapes[{n}]", shape, "must be one of the shapes " + ", ".join(SHAPE_TYPES))
        _set(self, "shapes", shapes)
        if not isinstance(self.mirror, str) or self.mirror not in MIRRORS:
            raise _bad("sketch.mirror", self.mirror, "must be one of " + ", ".join(MIRRORS))


# ----------------------------------------------------------------------------- plain dicts

#: Field names of each shape's dict, besides "kind"; points are [x, y] lists.
_DICT_FIELDS: dict[str, tuple[str, ...]] = {
    "stroke": ("points_m", "width_m", "paints"),
    "segment": ("start_m", "end_m", "width_m", "paints"),
    "rectangle": ("corner_a_m", "corner_b_m", "paints"),
    "polygon": ("points_m", "paints"),
    "circle": ("centre_m", "radius_m", "paints"),
}


def _plain(value: Any) -> Any:
    """Tuples (points, point lists) become lists so the dict is JSON-shaped."""
    if isinstance(value, tuple):
        return [_plain(v) for v in value]
    return value


def shape_to_dict(shape: Shape) -> dict[str, Any]:
    """A JSON-able dict: {"kind": ..., <fields>...}, points as [x, y] lists."""
    if not isinstance(shape, tuple(SHAPE_TYPES.values())):
        raise _bad("shape", shape, "must be one of the shapes " + ", ".join(SHAPE_TYPES))
    out: dict[str, Any] = {"kind": shape.kind}
    for name in _DICT_FIELDS[shape.kind]:
        out[name] = _plain(getattr(shape, name))
    return out


def shape_from_dict(d: Any, where: str | None = None) -> Shape:
    """Build a shape from its dict; errors name the field, the value and what is allowed.

    Fields are named "<kind>.<field>", or "<where>.<field>" when `where` locates the dict
    (e.g. "sketch.shapes[3]").
    """
    if not isinstance(d, dict):
        raise _bad(where or "shape", d, "must be an object with a 'kind' field")
    if "kind" not in d:
        raise ValueError(f"{where or 'shape'}.kind is missing: must be one of " + ", ".join(SHAPE_TYPES))
    kind = d["kind"]
    if not isinstance(kind, str) or kind not in SHAPE_TYPES:
        raise _bad(f"{where or 'shape'}.kind", kind, "must be one of " + ", ".join(SHAPE_TYPES))
    prefix = where or kind
    fields = _DICT_FIELDS[kind]
    for name in d:
        if name != "kind" and name not in fields:
            raise ValueError(
                f"{prefix}.{name} = {_show(d[name])} is not allowed: a {kind} has only the fields "
                + ", ".join(("kind",) + fields)
            )
    for name in fields:
        if name not in d:
            raise ValueError(f"{prefix}.{name} is missing: a {kind} needs the fields " + ", ".join(fields))
    try:
        return SHAPE_TYPES[kind](**{name: d[name] for name in fields})
    except ValueError as err:
        # The constructor names fields as "<kind>.<field>"; re-aim them at the dict's location.
        message = str(err)
        if where is not None and message.startswith(kind + "."):
            message = where + message[len(kind):]
        raise ValueError(message) from None


def sketch_to_dict(sketch: Sketch) -> dict[str, Any]:
    """{"shapes": [shape dicts...], "mirror": "none" | "axis" | "midline"}."""
    if not isinstance(sketch, Sketch):
        raise _bad("sketch", sketch, "must be a Sketch")
    return {"shapes": [shape_to_dict(s) for s in sketch.shapes], "mirror": sketch.mirror}


def sketch_from_dict(d: Any) -> Sketch:
    """Build a sketch from its dict; "mirror" may be left out (means "none")."""
    if not isinstance(d, dict):
        raise _bad("sketch", d, "must be an object with the fields shapes, mirror")
    for name in d:
        if name not in ("shapes", "mirror"):
            raise ValueError(f"sketch.{name} = {_show(d[name])} is not allowed: a sketch has only the fields shapes, mirror")
    if "shapes" not in d:
        raise ValueError("sketch.shapes is missing: a sketch needs a list of shapes (may be empty)")
    shapes = d["shapes"]
    if not isinstance(shapes, list):
        raise _bad("sketch.shapes", shapes, "must be a list of shapes")
    built = tuple(shape_from_dict(s, where=f"sketch.shapes[{n}]") for n, s in enumerate(shapes))
    return Sketch(built, d.get("mirror", "none"))
