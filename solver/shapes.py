"""The shapes a user draws, in metres, and their plain-dict (JSON) form.

A sketch is kept in metres, never in cells, so changing the resolution re-rasterises the same
drawing. Every shape is a frozen dataclass that normalises its fields (lists become tuples of
floats) so it can be hashed. A shape's dict form is checked once, by the pydantic models below
(which are also the scenario file's shape models and its JSON Schema); code that builds shapes
directly is trusted to pass sane numbers.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Annotated, Any, Literal, Union

from pydantic import BaseModel, ConfigDict, Field, ValidationError

from shockslate.solver.choices import Choice, literal, table
from shockslate.solver.kinds import PAINTS
from shockslate.solver.validation import Refused, join, path_of, problem_from_record, problems

Point = tuple[float, float]

#: Coordinates and sizes are limited to this magnitude, in metres, so that squared distances
#: stay far from overflow; a sandbox domain is metres across, not kilometres.
MAX_COORD_M = 1.0e6

#: Mirror choices of a sketch: none, about the line y = 0 (the axis), or about the domain's mid-height.
MIRRORS: dict[str, Choice] = table(Choice("none", "none"), Choice("axis", "about the axis (y = 0)"),
                                   Choice("midline", "about the mid-height"))


# ----------------------------------------------------------------------------- helpers

def _float_points(value: Any) -> tuple[Point, ...]:
    return tuple((float(p[0]), float(p[1])) for p in value)


def _float_point(value: Any) -> Point:
    return (float(value[0]), float(value[1]))


def _set(obj: object, name: str, value: Any) -> None:
    """Store a normalised field on a frozen dataclass."""
    object.__setattr__(obj, name, value)


def _reflect(point: Point, y_line_m: float) -> Point:
    return (point[0], 2.0 * y_line_m - point[1])


def _remembered_bounds(shape: object, compute) -> tuple[float, float, float, float]:
    """The bounds of a frozen shape, computed once and kept on it (its fields never change)."""
    bounds = shape.__dict__.get("_bounds_m")
    if bounds is None:
        bounds = compute()
        object.__setattr__(shape, "_bounds_m", bounds)
    return bounds


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
        _set(self, "points_m", _float_points(self.points_m))
        _set(self, "width_m", float(self.width_m))

    @property
    def kind(self) -> str:
        return "stroke"

    def bounds_m(self) -> tuple[float, float, float, float]:
        """(x0, y0, x1, y1) of the path grown by half the width (remembered: a long path is read often)."""
        return _remembered_bounds(self, lambda: _points_bounds(self.points_m, 0.5 * self.width_m))

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
        _set(self, "start_m", _float_point(self.start_m))
        _set(self, "end_m", _float_point(self.end_m))
        _set(self, "width_m", float(self.width_m))

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
        _set(self, "corner_a_m", _float_point(self.corner_a_m))
        _set(self, "corner_b_m", _float_point(self.corner_b_m))

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
        _set(self, "points_m", _float_points(self.points_m))

    @property
    def kind(self) -> str:
        return "polygon"

    def bounds_m(self) -> tuple[float, float, float, float]:
        return _remembered_bounds(self, lambda: _points_bounds(self.points_m))

    def mirrored_about_y(self, y_line_m: float) -> "Polygon":
        return Polygon(tuple(_reflect(p, y_line_m) for p in self.points_m), self.paints)


@dataclass(frozen=True)
class Circle:
    """A filled disc."""

    centre_m: Point
    radius_m: float
    paints: str

    def __post_init__(self) -> None:
        _set(self, "centre_m", _float_point(self.centre_m))
        _set(self, "radius_m", float(self.radius_m))

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
        _set(self, "shapes", tuple(self.shapes))


# ----------------------------------------------------------------------------- the dict form and its one validation

Metres = Annotated[float, Field(strict=True, allow_inf_nan=False, ge=-MAX_COORD_M, le=MAX_COORD_M)]
PositiveMetres = Annotated[float, Field(strict=True, allow_inf_nan=False, gt=0.0, le=MAX_COORD_M)]
PointModel = tuple[Metres, Metres]
Paint = literal(PAINTS)
Mirror = literal(MIRRORS)
MAX_POINTS = 20000
MAX_SHAPES = 2000


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)


class StrokeModel(_Strict):
    """Freehand path with a width (metres)."""

    kind: Literal["stroke"]
    points_m: list[PointModel] = Field(min_length=2, max_length=MAX_POINTS, title="stroke points")
    width_m: PositiveMetres = Field(title="stroke width")
    paints: Paint = Field(title="what the stroke paints")

    def to_shape(self) -> Stroke:
        return Stroke(tuple(self.points_m), self.width_m, self.paints)


class SegmentModel(_Strict):
    """Straight line with a width (metres), round ends."""

    kind: Literal["segment"]
    start_m: PointModel = Field(title="segment start")
    end_m: PointModel = Field(title="segment end")
    width_m: PositiveMetres = Field(title="segment width")
    paints: Paint = Field(title="what the segment paints")

    def to_shape(self) -> Segment:
        return Segment(self.start_m, self.end_m, self.width_m, self.paints)


class RectangleModel(_Strict):
    """Axis-aligned rectangle from two opposite corners (metres)."""

    kind: Literal["rectangle"]
    corner_a_m: PointModel = Field(title="rectangle corner")
    corner_b_m: PointModel = Field(title="rectangle opposite corner")
    paints: Paint = Field(title="what the rectangle paints")

    def to_shape(self) -> Rectangle:
        return Rectangle(self.corner_a_m, self.corner_b_m, self.paints)


class PolygonModel(_Strict):
    """Closed polygon, filled by the even-odd rule (metres)."""

    kind: Literal["polygon"]
    points_m: list[PointModel] = Field(min_length=3, max_length=MAX_POINTS, title="polygon corners")
    paints: Paint = Field(title="what the polygon paints")

    def to_shape(self) -> Polygon:
        return Polygon(tuple(self.points_m), self.paints)


class CircleModel(_Strict):
    """Filled disc (metres)."""

    kind: Literal["circle"]
    centre_m: PointModel = Field(title="circle centre")
    radius_m: PositiveMetres = Field(title="circle radius")
    paints: Paint = Field(title="what the circle paints")

    def to_shape(self) -> Circle:
        return Circle(self.centre_m, self.radius_m, self.paints)


ShapeModel = Annotated[Union[StrokeModel, SegmentModel, RectangleModel, PolygonModel, CircleModel],
                       Field(discriminator="kind")]


class SketchModel(_Strict):
    """What is drawn: shapes in order, later ones painting over earlier ones; optional mirror."""

    mirror: Mirror = Field("none", title="mirror")
    shapes: list[ShapeModel] = Field(default_factory=list, max_length=MAX_SHAPES, title="shapes")

    def to_sketch(self) -> Sketch:
        return Sketch(tuple(s.to_shape() for s in self.shapes), self.mirror)


class _OneShape(_Strict):
    shape: ShapeModel


def _refused(model: type[BaseModel], err: ValidationError, prefix: str, drop: int) -> Refused:
    """Problems of a wrapper model, the wrapper's own part of each path dropped."""
    out = []
    for record in err.errors(include_url=False):
        loc = tuple(record["loc"])
        problem = problem_from_record(model, record, tags=SHAPE_KINDS)
        path = path_of(loc[drop:], SHAPE_KINDS) if drop < len(loc) else ""
        if record["type"] in ("union_tag_invalid", "union_tag_not_found"):
            path = join(path, "kind")  # the problem's own field ends in .kind; re-aimed, it must too
        out.append(problem.at(join(prefix, path)))
    return Refused(out)


#: Shape kinds, as in the dicts' "kind" field.
SHAPE_KINDS = tuple(SHAPE_TYPES)


def _plain(value: Any) -> Any:
    """Tuples (points, point lists) become lists so the dict is JSON-shaped."""
    if isinstance(value, tuple):
        return [_plain(v) for v in value]
    return value


def shape_to_dict(shape: Shape) -> dict[str, Any]:
    """A JSON-able dict: {"kind": ..., <fields>...}, points as [x, y] lists."""
    out: dict[str, Any] = {"kind": shape.kind}
    for name in (f for f in SHAPE_MODELS[shape.kind].model_fields if f != "kind"):
        out[name] = _plain(getattr(shape, name))
    return out


def shape_from_dict(d: Any, where: str | None = None) -> Shape:
    """Build a shape from its dict, validated by the shape models (the one check of a shape).

    A refusal is a `Refused` (a ValueError) whose problems name the field as "<kind>.<field>", or
    "<where>.<field>" when `where` locates the dict (e.g. "sketch.shapes[3]"), the value, the rule
    and a plain sentence.
    """
    try:
        return _OneShape.model_validate({"shape": d}).shape.to_shape()
    except ValidationError as err:
        if where is None:  # keep the kind as the first part of the path: "circle.radius_m"
            raise _refused(_OneShape, err, "shape" if not isinstance(d, dict) or d.get("kind") not in SHAPE_TYPES
                           else "", 1) from None
        raise _refused(_OneShape, err, where, 2) from None


def sketch_to_dict(sketch: Sketch) -> dict[str, Any]:
    """{"shapes": [shape dicts...], "mirror": "none" | "axis" | "midline"}."""
    return {"shapes": [shape_to_dict(s) for s in sketch.shapes], "mirror": sketch.mirror}


def sketch_from_dict(d: Any) -> Sketch:
    """Build a sketch from its dict ("mirror" may be left out: "none"); refusals as in shape_from_dict."""
    try:
        return SketchModel.model_validate(d).to_sketch()
    except ValidationError as err:
        raise Refused([p.at(join("sketch", p.field)) for p in problems(SketchModel, err, tags=SHAPE_KINDS)]) from None


SHAPE_MODELS: dict[str, type[_Strict]] = {"stroke": StrokeModel, "segment": SegmentModel, "rectangle": RectangleModel,
                                           "polygon": PolygonModel, "circle": CircleModel}
