"""A named option the user picks: its scenario-file name, the words the page shows, and the kernel's id.

Each table of choices lives beside the thing it names (limiters and fluxes in `numerics.py`, paints and
edges in `kinds.py`, gas presets in `gas.py`, mirrors in `shapes.py`, modes and station roles in
`scenario.py`). The pydantic models, the protocol and the page all read those tables, so adding an
option is one line in one place.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Literal, Union


@dataclass(frozen=True)
class Choice:
    """name: as written in scenario files and messages; label: what the page shows;
    kernel_id: the small integer a numba kernel compares against (None where no kernel reads it)."""

    name: Union[str, int]
    label: str
    kernel_id: int | None = None

    def to_dict(self) -> dict:
        return {"name": self.name, "label": self.label}


def table(*choices: Choice) -> dict:
    """name -> Choice, in the order given (the order the page lists them)."""
    out = {c.name: c for c in choices}
    if len(out) != len(choices):
        raise ValueError("choice names must be unique")
    return out


def literal(choices: dict):
    """typing.Literal of the names of a table, for pydantic models."""
    return Literal[tuple(choices)]  # type: ignore[valid-type]
