"""Writers for results in formats other tools read: NumPy .npz, VTK XML image data (.vti) and CSV.

Field arrays are cell-centred, shape (ny, nx), row j = y, column i = x, SI units; wall cells hold NaN.
The .vti writer is our own small implementation of the open VTK XML ImageData format (cell data,
base64-encoded little-endian binary with a UInt64 byte-count header), enough for general-purpose viewers.
"""
from __future__ import annotations

import base64
import csv
import math
from pathlib import Path
from typing import IO, Iterable, Sequence

import numpy as np

from .diagnostics import ProbeReading, StationReading
from .fields import mach, temperature_k
from .kinds import CellKind
from .simulation import Simulation

#: Arrays of a fields .npz file: name -> (meaning, unit). Scalars are 0-d arrays.
NPZ_ARRAYS: dict[str, tuple[str, str]] = {
    "x_m": ("cell-centre x, length nx", "m"),
    "y_m": ("cell-centre y (radius in axisymmetric mode), length ny", "m"),
    "rho_kg_m3": ("density", "kg/m^3"),
    "u_m_s": ("x velocity", "m/s"),
    "v_m_s": ("y velocity", "m/s"),
    "p_pa": ("static pressure", "Pa"),
    "t_k": ("static temperature", "K"),
    "mach": ("Mach number", "-"),
    "kind": ("cell kind: 0 fluid, 1 wall, 2 reservoir, 3 stream, 4 ambient", "-"),
    "time_s": ("simulated time", "s"),
    "dx_m": ("cell size (cells are square)", "m"),
    "gamma": ("ratio of specific heats", "-"),
    "r_j_kg_k": ("specific gas constant", "J/(kg K)"),
}

#: Cell-data arrays of a .vti file: name -> (components, unit).
VTI_ARRAYS: dict[str, tuple[int, str]] = {
    "density_kg_m3": (1, "kg/m^3"),
    "pressure_pa": (1, "Pa"),
    "temperature_k": (1, "K"),
    "mach": (1, "-"),
    "velocity_m_s": (3, "m/s"),
    "kind": (1, "-"),
}

#: Quantities written per station and per probe in history.csv (the column is "<name>:<quantity>").
STATION_COLUMNS = ("mass_flow_kg_s", "thrust_n", "mean_mach", "mean_pressure_pa", "area_m2")
PROBE_COLUMNS = ("p_pa", "rho_kg_m3", "t_k", "u_m_s", "v_m_s", "mach")
#: Columns of a station profile CSV, in order.
PROFILE_COLUMNS = ("s_m", "x_m", "y_m", "p_pa", "rho_kg_m3", "t_k", "u_m_s", "v_m_s", "mach")


def field_arrays(sim: Simulation) -> dict[str, np.ndarray]:
    """The documented arrays of NPZ_ARRAYS for the current state (NaN on wall cells)."""
    rho, u, v, p = sim.primitive()
    gas = sim.setup.gas
    wall = sim.mask == CellKind.WALL

    def masked(q: np.ndarray) -> np.ndarray:
        return np.where(wall, np.nan, q)

    dom = sim.domain
    return {
        "x_m": dom.x_centres_m(), "y_m": dom.y_centres_m(),
        "rho_kg_m3": masked(rho), "u_m_s": masked(u), "v_m_s": masked(v), "p_pa": masked(p),
        "t_k": masked(temperature_k(gas, rho, p)), "mach": masked(mach(gas, rho, u, v, p)),
        "kind": sim.mask.copy(),
        "time_s": np.array(sim.time_s), "dx_m": np.array(dom.dx_m),
        "gamma": np.array(gas.gamma), "r_j_kg_k": np.array(gas.r_j_kg_k),
    }


def write_npz(path: str | Path, sim: Simulation) -> Path:
    """Compressed .npz with the arrays documented in NPZ_ARRAYS."""
    path = Path(path)
    np.savez_compressed(path, **field_arrays(sim))
    return path


# ----------------------------------------------------------------------------- VTK XML ImageData

def _vtk_binary(values: np.ndarray) -> str:
    """Inline binary DataArray payload: base64 of (UInt64 byte count + little-endian Float64 data)."""
    raw = np.ascontiguousarray(values, dtype="<f8").tobytes()
    return base64.b64encode(np.array([len(raw)], dtype="<u8").tobytes() + raw).decode("ascii")


def vti_text(sim: Simulation) -> str:
    """The .vti document for the current state.

    The image has nx x ny cells (nx+1 x ny+1 points) and one layer of cells in z, so its WholeExtent
    is "0 nx 0 ny 0 0"; Origin is the lower-left corner (x_min, y_min, 0), Spacing (dx, dx, dx).
    Cell data run x fastest, then y, as VTK expects.
    """
    arrays = field_arrays(sim)
    dom = sim.domain
    ny, nx = dom.shape
    dx = dom.dx_m
    data = {
        "density_kg_m3": arrays["rho_kg_m3"],
        "pressure_pa": arrays["p_pa"],
        "temperature_k": arrays["t_k"],
        "mach": arrays["mach"],
        "velocity_m_s": np.stack([arrays["u_m_s"], arrays["v_m_s"], np.where(np.isnan(arrays["u_m_s"]), np.nan, 0.0)],
                                 axis=-1),
        "kind": arrays["kind"].astype(float),
    }
    extent = f"0 {nx} 0 {ny} 0 0"
    lines = [
        '<?xml version="1.0"?>',
        '<VTKFile type="ImageData" version="1.0" byte_order="LittleEndian" header_type="UInt64">',
        f'  <ImageData WholeExtent="{extent}" Origin="{dom.x_min_m!r} {dom.y_min_m!r} 0" '
        f'Spacing="{dx!r} {dx!r} {dx!r}">',
        f"    <FieldData>",
        f'      <DataArray type="Float64" Name="time_s" NumberOfTuples="1" format="ascii">{sim.time_s!r}</DataArray>',
        f"    </FieldData>",
        f'    <Piece Extent="{extent}">',
        '      <CellData Scalars="mach">',
    ]
    for name, (components, _unit) in VTI_ARRAYS.items():
        values = data[name].reshape(ny * nx * components)
        lines.append(f'        <DataArray type="Float64" Name="{name}" NumberOfComponents="{components}" '
                     f'format="binary">{_vtk_binary(values)}</DataArray>')
    lines += ["      </CellData>", "    </Piece>", "  </ImageData>", "</VTKFile>", ""]
    return "\n".join(lines)


def write_vti(path: str | Path, sim: Simulation) -> Path:
    path = Path(path)
    path.write_text(vti_text(sim), encoding="ascii")
    return path


def read_vti_array(text: str, name: str) -> np.ndarray:
    """Decode one binary cell-data array of a .vti document written by `vti_text` (for checks and tools)."""
    import xml.etree.ElementTree as ET

    root = ET.fromstring(text)
    for arr in root.iter("DataArray"):
        if arr.get("Name") == name and arr.get("format") == "binary":
            blob = base64.b64decode(arr.text.strip())
            count = int(np.frombuffer(blob[:8], dtype="<u8")[0])
            return np.frombuffer(blob[8:8 + count], dtype="<f8").copy()
    raise KeyError(f"no binary DataArray named {name!r}")


# ----------------------------------------------------------------------------- CSV

def _number(value: float) -> str:
    return "" if value is None or (isinstance(value, float) and math.isnan(value)) else repr(float(value))


def write_profile_csv(path: str | Path, profile: dict[str, np.ndarray]) -> Path:
    """A station profile (solver.diagnostics.station_profile) as CSV; header names carry the units."""
    path = Path(path)
    with path.open("w", newline="", encoding="utf-8") as fh:
        out = csv.writer(fh)
        out.writerow(PROFILE_COLUMNS)
        n = len(profile["s_m"])
        for k in range(n):
            out.writerow([_number(profile[c][k]) for c in PROFILE_COLUMNS])
    return path


def history_header(station_names: Sequence[str], probe_names: Sequence[str]) -> list[str]:
    """Columns of history.csv: time_s, step, then "<station>:<quantity>" and "<probe>:<quantity>", and last the
    residual (solver.steady: the fraction of the mass changing per transit; empty where unknown)."""
    cols = ["time_s", "step"]
    for name in station_names:
        cols += [f"{name}:{q}" for q in STATION_COLUMNS]
    for name in probe_names:
        cols += [f"{name}:{q}" for q in PROBE_COLUMNS]
    return cols + ["residual"]


class HistoryWriter:
    """Appends one row per sample to history.csv and flushes it, so an interrupted run keeps its rows."""

    def __init__(self, path: str | Path, station_names: Sequence[str], probe_names: Sequence[str]):
        self.path = Path(path)
        self.columns = history_header(station_names, probe_names)
        self._fh: IO[str] = self.path.open("w", newline="", encoding="utf-8")
        self._csv = csv.writer(self._fh)
        self._csv.writerow(self.columns)
        self._fh.flush()
        self.rows = 0

    def write(self, time_s: float, step: int, stations: Iterable[StationReading], probes: Iterable[ProbeReading],
              residual: float | None = None) -> None:
        row = [repr(float(time_s)), str(int(step))]
        for r in stations:
            row += [_number(getattr(r, q)) for q in STATION_COLUMNS]
        for r in probes:
            row += [_number(getattr(r, q)) for q in PROBE_COLUMNS]
        row.append(_number(residual))
        self._csv.writerow(row)
        self._fh.flush()
        self.rows += 1

    def close(self) -> None:
        if not self._fh.closed:
            self._fh.close()


def read_history(path: str | Path) -> dict[str, np.ndarray]:
    """history.csv back as column name -> float array (empty cells are NaN)."""
    with Path(path).open(newline="", encoding="utf-8") as fh:
        rows = list(csv.reader(fh))
    header, body = rows[0], rows[1:]
    return {name: np.array([float(r[k]) if r[k] != "" else np.nan for r in body]) for k, name in enumerate(header)}
