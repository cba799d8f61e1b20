"""Cell kinds on the mask and the conditions a domain edge can carry.

The mask is a small-integer array; the numba kernels compare against these values,
so they are plain ints (IntEnum) rather than strings.
"""
from __future__ import annotations

from enum import IntEnum


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


#: The kinds a sketch shape may paint, by their scenario-file names.
PAINTABLE: dict[str, CellKind] = {
    "fluid": CellKind.FLUID,
    "wall": CellKind.WALL,
    "reservoir": CellKind.RESERVOIR,
    "stream": CellKind.STREAM,
    "ambient": CellKind.AMBIENT,
}

#: Kinds whose state is reset to a held value after every stage.
HELD_KINDS = (CellKind.RESERVOIR, CellKind.STREAM, CellKind.AMBIENT)

#: Conditions a domain edge may carry, and the ghost-cell kind each becomes.
#: A symmetry axis is a slip wall for the Euler equations (mirror state), so it
#: shares the wall's ghost kind; the mode check keeps it to the bottom edge of
#: an axisymmetric domain.
EDGE_GHOST_KIND: dict[str, CellKind] = {
    "wall": CellKind.WALL,
    "open": CellKind.OPEN,
    "ambient": CellKind.AMBIENT,
    "stream": CellKind.STREAM,
    "axis": CellKind.WALL,
}
