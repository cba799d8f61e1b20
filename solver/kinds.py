"""Cell kinds on the mask and the conditions a domain edge can carry.

The mask is a small-integer array; the numba kernels compare against these values,
so they are plain ints (IntEnum) rather than strings.
"""
from __future__ import annotations

from enum import IntEnum

from .choices import Choice, table


class CellKind(IntEnum):
    """What a cell of the mask is. Values are stored as uint8 in the mask."""

    FLUID = 0      # free gas, updated by the scheme
    WALL = 1       # solid, slip (inviscid) reflecting
    RESERVOIR = 2  # gas held at rest at p0, T0 (chamber feed)
    STREAM = 3     # gas held moving at a Mach number and direction, static p and T
    AMBIENT = 4    # still surroundings held at p_amb, T_amb
    OPEN = 5       # ghost cells only: zero-gradient (extrapolating) outflow

    @classmethod
    def from_name(cls, name: str) -> "CellKind":
        try:
            return PAINTABLE[name]
        except KeyError:
            allowed = ", ".join(PAINTABLE)
            raise ValueError(f"paint kind {name!r} is not one of: {allowed}") from None


#: What a sketch shape may paint, by scenario-file name; the kernel id is the mask value.
PAINTS: dict[str, Choice] = table(
    Choice("wall", "wall", CellKind.WALL),
    Choice("reservoir", "reservoir", CellKind.RESERVOIR),
    Choice("stream", "stream", CellKind.STREAM),
    Choice("ambient", "ambient", CellKind.AMBIENT),
    Choice("fluid", "fluid (erase)", CellKind.FLUID),
)
#: The kinds a sketch shape may paint, by their scenario-file names.
PAINTABLE: dict[str, CellKind] = {c.name: CellKind(c.kernel_id) for c in PAINTS.values()}

#: Kinds whose state is reset to a held value after every stage.
HELD_KINDS = (CellKind.RESERVOIR, CellKind.STREAM, CellKind.AMBIENT)

#: Conditions a domain edge may carry; the kernel id is the ghost-cell kind each becomes.
#: A symmetry axis is a slip wall for the Euler equations (mirror state), so it
#: shares the wall's ghost kind; the mode check keeps it to the bottom edge of
#: an axisymmetric domain.
EDGES: dict[str, Choice] = table(
    Choice("wall", "wall", CellKind.WALL),
    Choice("open", "open (outflow)", CellKind.OPEN),
    Choice("ambient", "ambient", CellKind.AMBIENT),
    Choice("stream", "stream", CellKind.STREAM),
    Choice("axis", "axis (symmetry)", CellKind.WALL),
)
EDGE_GHOST_KIND: dict[str, CellKind] = {c.name: CellKind(c.kernel_id) for c in EDGES.values()}
