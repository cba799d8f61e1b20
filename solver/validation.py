"""Refusals that stay structured: which field, what value, which rule, and a plain sentence.

pydantic reports each problem as data (location, input, error type, limits). `problems()` turns
those records into `Problem`s without going through prose: the field is the JSON path, the value is
the input, the rule a short code (above, at_least, one_of, ...), `allowed` says what is allowed in a
few words, and `message` is one sentence in the user's terms, built from the field's title and the
unit its name carries ("Ambient pressure must be above 0 Pa; you gave -5000 Pa.").

Our own validators raise `Invalid` (a ValueError, so pydantic keeps it in the error's context),
which already is a Problem.
"""
from __future__ import annotations

import math
import types
import typing
from dataclasses import dataclass
from typing import Any

from pydantic import BaseModel, ValidationError

from .suggest import did_you_mean

#: Units named by the end of a field's name (SI inside; see DEVELOPERS.md).
UNIT_SUFFIXES: tuple[tuple[str, str], ...] = (
    ("_kg_kmol", "kg/kmol"), ("_kg_m3", "kg/m³"), ("_pa", "Pa"), ("_k", "K"), ("_m", "m"), ("_s", "s"),
    ("_deg", "°"),
)


def unit_of(name: str) -> str:
    """The unit a field name carries (p0_pa -> Pa), or "" for a plain number."""
    for suffix, unit in UNIT_SUFFIXES:
        if name.endswith(suffix):
            return unit
    return ""


@dataclass(frozen=True)
class Problem:
    """One refusal: field path, the value given, the rule broken, what is allowed, and a plain sentence."""

    field: str
    value: Any
    rule: str
    allowed: str
    message: str

    def at(self, field: str) -> "Problem":
        return Problem(field, self.value, self.rule, self.allowed, self.message)

    def __str__(self) -> str:
        return f"{self.field}: {self.message}" if self.field else self.message


class Invalid(ValueError):
    """A refusal raised by our own checks; carries its Problem (pydantic keeps it in ctx['error'])."""

    def __init__(self, field: str, value: Any, rule: str, allowed: str, message: str):
        self.problem = Problem(field, value, rule, allowed, message)
        super().__init__(str(self.problem))


class Refused(ValueError):
    """A document or dict was refused; `problems` holds every Problem, the first being the one to show."""

    def __init__(self, problems: "list[Problem] | str"):
        if isinstance(problems, str):  # a refusal that is only a sentence (kept for callers that have no field)
            problems = [Problem("", None, "refused", problems, problems)]
        self.problems = list(problems)
        super().__init__("; ".join(str(p) for p in self.problems))

    @property
    def first(self) -> Problem:
        return self.problems[0]


# ----------------------------------------------------------------------------- words

def show_value(value: Any, unit: str = "", limit: int = 60) -> str:
    """A value as a user reads it: numbers plainly with their unit, text quoted, long things shortened."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, (int, float)):
        text = f"{value:g}" if isinstance(value, float) and math.isfinite(value) else str(value)
        return f"{text} {unit}".strip()
    if value is None:
        return "nothing"
    text = f'"{value}"' if isinstance(value, str) else repr(value)
    return text if len(text) <= limit else text[: limit - 3] + "..."


def sentence_case(text: str) -> str:
    return text[:1].upper() + text[1:]


# ----------------------------------------------------------------------------- fields of models

def _models_in(annotation: Any) -> list[type[BaseModel]]:
    """The pydantic models an annotation holds (through Optional, list, tuple, Annotated, Union)."""
    if isinstance(annotation, type) and issubclass(annotation, BaseModel):
        return [annotation]
    out: list[type[BaseModel]] = []
    origin = typing.get_origin(annotation)
    if origin is typing.Annotated:
        return _models_in(typing.get_args(annotation)[0])
    if origin is not None or isinstance(annotation, types.UnionType):
        for arg in typing.get_args(annotation):
            out.extend(_models_in(arg))
    return out


def _tag_of(model: type[BaseModel]) -> Any:
    """The literal value of a model's discriminator field (`kind` or `type`), if it has one."""
    for name in ("kind", "type"):
        info = model.model_fields.get(name)
        if info is not None and typing.get_origin(info.annotation) is typing.Literal:
            return typing.get_args(info.annotation)[0]
    return None


def _walk(model: type[BaseModel], loc: tuple) -> tuple[Any, str, list[type[BaseModel]]]:
    """(FieldInfo or None, its name, the models inside it) at a pydantic location.

    Indices of lists and the tags pydantic inserts for discriminated unions are stepped over.
    """
    current: list[type[BaseModel]] = [model]
    found: Any = None
    name = ""
    for item in loc:
        if isinstance(item, int):
            continue
        tagged = [m for m in current if _tag_of(m) == item]
        if tagged:
            current = tagged
            continue
        owner = next((m for m in current if item in m.model_fields), None)
        if owner is None:
            return None, str(item), []
        found, name = owner.model_fields[item], item
        current = _models_in(found.annotation)
    return found, name, current


def field_at(model: type[BaseModel], loc: tuple) -> tuple[Any, str] | None:
    """(FieldInfo, name) of the leaf a pydantic location points at, or None."""
    info, name, _ = _walk(model, loc)
    return (info, name) if info is not None else None


def label_of(model: type[BaseModel], loc: tuple) -> tuple[str, str]:
    """(label, unit) of a location: the field's title (else its name in words) and its unit."""
    hit = field_at(model, loc)
    names = [p for p in loc if isinstance(p, str)]
    name = hit[1] if hit else (names[-1] if names else "value")
    title = hit[0].title if hit and hit[0].title else name.replace("_", " ")
    return title, unit_of(name)


def path_of(loc: tuple, tags: tuple = ()) -> str:
    """JSON path of a pydantic location ("sketch.shapes[3].width_m"), without union tags."""
    parts: list[str] = []
    prev: Any = None
    for item in loc:
        if isinstance(item, int):
            parts.append(f"[{item}]")
        elif isinstance(prev, int) and item in tags:
            pass
        else:
            parts.append(("." if parts else "") + str(item))
        prev = item
    return "".join(parts)


def join(*parts: str) -> str:
    """Join JSON path pieces: "a" + "b" -> "a.b", "a" + "[2]" -> "a[2]"; empty pieces dropped."""
    out = ""
    for part in parts:
        if not part:
            continue
        out = part if not out else out + (part if part.startswith("[") else "." + part)
    return out


# ----------------------------------------------------------------------------- pydantic records -> Problems

_BOUNDS = {
    "greater_than": ("gt", "above", "must be above"),
    "greater_than_equal": ("ge", "at_least", "must be at least"),
    "less_than": ("lt", "below", "must be below"),
    "less_than_equal": ("le", "at_most", "must be at most"),
}


def _suggestion(word: Any, choices: list[str]) -> str:
    """' Did you mean 'x'?' for a near miss (solver/suggest.py), else ''."""
    hint = did_you_mean(str(word), choices) if isinstance(word, str) else ""
    return " D" + hint[3:] if hint else ""


def _one_of(expected: str) -> list[str]:
    """pydantic's "'a', 'b' or 'c'" as ['a', 'b', 'c']."""
    text = expected.replace(" or ", ", ")
    return [t.strip().strip("'") for t in text.split(",") if t.strip()]


def problem_from_record(model: type[BaseModel], record: dict, prefix: str = "", tags: tuple = ()) -> Problem:
    """One pydantic error record as a Problem (our own Invalid passes through, re-aimed under prefix)."""
    loc = tuple(record["loc"])
    ctx = record.get("ctx") or {}
    inner = ctx.get("error")
    if isinstance(inner, Invalid):  # raised by a model's own validator: its field is relative to that model
        return inner.problem.at(join(prefix, path_of(loc, tags), inner.problem.field))
    field = join(prefix, path_of(loc, tags))
    label, unit = label_of(model, loc)
    Label = sentence_case(label)
    value = record.get("input")
    kind = record["type"]
    if kind in ("union_tag_invalid", "union_tag_not_found"):
        tag = str(ctx.get("discriminator", "kind")).strip("'")
        field = join(field, tag)
        if kind == "union_tag_not_found":
            return Problem(field, None, "required", f"a {tag} field", f"The {tag} field is missing; it is required.")
        names = _one_of(str(ctx.get("expected_tags", "")))
        return Problem(field, ctx.get("tag"), "one_of", "one of: " + ", ".join(names),
                       f"The {tag} must be one of {', '.join(names)}; you gave {show_value(ctx.get('tag'))}.")
    if kind == "missing":
        return Problem(field, None, "required", "a value (it is required)", f"{Label} is missing; it is required.")
    if kind == "extra_forbidden":
        known: list[str] = []
        for m in _walk(model, loc[:-1])[2]:
            known.extend(n for n in m.model_fields if n not in known)
        allowed = "one of the fields " + ", ".join(known) if known else "no other field"
        return Problem(field, value, "unknown_field", allowed,
                       f"There is no field {loc[-1]} here; the fields are: {', '.join(known)}."
                       + _suggestion(loc[-1], known))
    if kind in _BOUNDS:
        key, rule, words = _BOUNDS[kind]
        bound = ctx.get(key)
        allowed = f"{words[len('must be '):]} {show_value(bound, unit)}"
        return Problem(field, value, rule, allowed, f"{Label} {words} {show_value(bound, unit)}; "
                                                    f"you gave {show_value(value, unit)}.")
    if kind in ("literal_error", "enum"):
        names = _one_of(str(ctx.get("expected", "")))
        allowed = "one of: " + ", ".join(names)
        return Problem(field, value, "one_of", allowed,
                       f"{Label} must be one of {', '.join(names)}; you gave {show_value(value)}."
                       + _suggestion(value, names))
    if kind == "finite_number":
        return Problem(field, value, "finite", "a finite number",
                       f"{Label} must be a finite number; you gave {show_value(value)}.")
    hit = field_at(model, loc)
    if kind in ("too_short", "too_long") and hit and typing.get_origin(hit[0].annotation) is tuple:
        n = len(typing.get_args(hit[0].annotation))
        return Problem(field, value, "pair", f"an [x, y] pair of numbers in {unit or 'metres'}",
                       f"{Label} must be an [x, y] pair of numbers in {unit or 'metres'}; you gave {show_value(value)}."
                       if n == 2 else f"{Label} must have {n} items; you gave {show_value(value)}.")
    if kind in ("too_short", "too_long"):
        n = ctx.get("min_length" if kind == "too_short" else "max_length")
        words = "at least" if kind == "too_short" else "at most"
        what = "characters" if isinstance(value, str) else "items"
        given = ctx.get("actual_length", len(value) if hasattr(value, "__len__") else "?")
        return Problem(field, value, "length", f"{words} {n} {what}",
                       f"{Label} needs {words} {n} {what}; you gave {given}.")
    if kind.startswith(("float", "int", "bool", "string", "list", "tuple", "dict", "model", "union", "is_instance")) \
            or kind.endswith("_type"):
        want = {"float": "a number", "int": "a whole number", "bool": "true or false", "string": "text",
                "list": "a list", "tuple": "a list", "dict": "an object", "model": "an object"}
        allowed = next((w for k, w in want.items() if kind.startswith(k)), record["msg"].lower())
        if unit and allowed in ("a number", "a whole number"):
            allowed += f" in {unit}"
        return Problem(field, value, "type", allowed, f"{Label} must be {allowed}; you gave {show_value(value)}.")
    msg = record["msg"]
    return Problem(field, value, kind, msg[:1].lower() + msg[1:], f"{Label}: {msg[:1].lower() + msg[1:]}.")


def problems(model: type[BaseModel], err: ValidationError, prefix: str = "", tags: tuple = ()) -> list[Problem]:
    """Every problem of a ValidationError raised by `model`, as Problems."""
    return [problem_from_record(model, r, prefix, tags) for r in err.errors(include_url=False)]


def numeric_limits(model: type[BaseModel], prefix: str = "") -> dict[str, dict]:
    """{path: {label, unit, min?, max?, min_exclusive, max_exclusive, integer}} of every numeric leaf.

    Read from the models' own constraints, so the page's limits are the ones validation applies.
    """
    out: dict[str, dict] = {}
    for name, info in model.model_fields.items():
        path = f"{prefix}{name}"
        subs = _models_in(info.annotation)
        if subs:
            if len(subs) == 1:
                out.update(numeric_limits(subs[0], path + "."))
            continue
        base = info.annotation
        if typing.get_origin(base) in (typing.Union, types.UnionType):
            args = [a for a in typing.get_args(base) if a is not type(None)]
            base = args[0] if len(args) == 1 else base
        if base not in (int, float):
            continue
        entry: dict[str, Any] = {"label": info.title or name.replace("_", " "), "unit": unit_of(name),
                                 "integer": base is int}
        for meta in info.metadata:
            for attr, key, exclusive in (("ge", "min", False), ("gt", "min", True), ("le", "max", False),
                                         ("lt", "max", True)):
                bound = getattr(meta, attr, None)
                if bound is not None:
                    entry[key] = bound
                    entry[f"{key}_exclusive"] = exclusive
        out[path] = entry
    return out
