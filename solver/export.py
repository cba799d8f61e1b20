"""The one export layer: NumPy .npz, VTK XML image data (.vti) and CSV, written the same way for a batch run and
for a download from the page (server/exports.py calls these writers with a copy of the live flow).

Field arrays are cell-centred, shape (ny, nx), row j = y, column i = x, SI units; wall cells hold NaN.
The .vti writer is our own small implementation of the open VTK XML ImageData format (cell data,
base64-encoded little-endian binary with a UInt64 byte-count header), enough for general-purpose viewers.
README.md, "File formats", lists every array with its unit, shape and dtype; keep it true.
"""
from __future__ import annotations

import base64
import csv
import io
import math
from pathlib import Path
from typing import IO, Iterable, Sequence

import numpy as np

from .diagnostics import ProbeReading, StationReading
from .domain import Domain
from .fields import mach, temperature_k
from .gas import Gas
from .kinds import CellKind
from .simulation import Simulation

#: Arrays of a fields .npz file: name -> (meaning, unit, shape, dtype). Scalars are 0-d arrays.
NPZ_ARRAYS: dict[str, tuple[str, str, str, str]] = {
    "x_m": ("cell-centre x", "m", "(nx,)", "float64"),
    "y_m": ("cell-centre y (radius in axisymmetric mode)", "m", "(ny,)", "float64"),
    "rho_kg_m3": ("density, NaN on wall cells", "kg/m^3", "(ny, nx)", "float64"),
    "u_m_s": ("x velocity, NaN on wall cells", "m/s", "(ny, nx)", "float64"),
    "v_m_s": ("y velocity, NaN on wall cells", "m/s", "(ny, nx)", "float64"),
    "p_pa": ("static pressure, NaN on wall cells", "Pa", "(ny, nx)", "float64"),
    "t_k": ("static temperature, NaN on wall cells", "K", "(ny, nx)", "float64"),
    "mach": ("Mach number, NaN on wall cells", "-", "(ny, nx)", "float64"),
    "kind": ("cell kind: 0 fluid, 1 wall, 2 reservoir, 3 stream, 4 ambient", "-", "(ny, nx)", "uint8"),
    "time_s": ("simulated time", "s", "()", "float64"),
    "steps": ("steps taken", "-", "()", "int64"),
    "dx_m": ("cell size (cells are square)", "m", "()", "float64"),
    "gamma": ("ratio of specific heats", "-", "()", "float64"),
    "r_j_kg_k": ("specific gas constant", "J/(kg K)", "()", "float64"),
    "scenario_json": ("the scenario file that made the run (JSON text)", "-", "()", "unicode"),
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
#: Columns of a station profile CSV, in order (values along the station; wall cells are empty).
PROFILE_COLUMNS = ("s_m", "x_m", "y_m", "p_pa", "rho_kg_m3", "t_k", "u_m_s", "v_m_s", "mach")
#: Columns of a station CSV file: the station's name, then PROFILE_COLUMNS (one row per sample).
STATION_CSV_COLUMNS = ("station", *PROFILE_COLUMNS)


def fields_of(domain: Domain, gas: Gas, mask: np.ndarray, rho: np.ndarray, u: np.ndarray, v: np.ndarray,
              p: np.ndarray, time_s: float, steps: int, scenario_json: str) -> dict[str, np.ndarray]:
    """The documented arrays of NPZ_ARRAYS from primitive arrays (NaN on wall cells, fixed dtypes)."""
    wall = mask == CellKind.WALL

    def masked(q: np.ndarray) -> np.ndarray:
        return np.where(wall, np.nan, np.asarray(q, dtype=np.float64))

    return {
        "x_m": domain.x_centres_m().astype(np.float64), "y_m": domain.y_centres_m().astype(np.float64),
        "rho_kg_m3": masked(rho), "u_m_s": masked(u), "v_m_s": masked(v), "p_pa": masked(p),
        "t_k": masked(temperature_k(gas, rho, p)), "mach": masked(mach(gas, rho, u, v, p)),
        "kind": np.asarray(mask, dtype=np.uint8).copy(),
        "time_s": np.array(time_s, dtype=np.float64), "steps": np.array(steps, dtype=np.int64),
        "dx_m": np.array(domain.dx_m, dtype=np.float64),
        "gamma": np.array(gas.gamma, dtype=np.float64), "r_j_kg_k": np.array(gas.r_j_kg_k, dtype=np.float64),
        "scenario_json": np.array(scenario_json, dtype=np.str_),
    }


def field_arrays(sim: Simulation, scenario_json: str = "") -> dict[str, np.ndarray]:
    """The documented arrays of NPZ_ARRAYS for the current state of a simulation."""
    rho, u, v, p = sim.primitive()
    return fields_of(sim.domain, sim.setup.gas, sim.mask, rho, u, v, p, sim.time_s, sim.steps, scenario_json)


def write_npz(path_or_file, arrays: dict[str, np.ndarray]):
    """Compressed .npz with the arrays documented in NPZ_ARRAYS (from fields_of / field_arrays)."""
    missing = set(NPZ_ARRAYS) ^ set(arrays)
    if missing:
        raise ValueError(f"arrays {sorted(missing)} do not match the documented .npz layout (NPZ_ARRAYS)")
    np.savez_compressed(path_or_file, **{name: arrays[name] for name in NPZ_ARRAYS})
    return Path(path_or_file) if isinstance(path_or_file, (str, Path)) else path_or_file


# ----------------------------------------------------------------------------- VTK XML ImageData

def _vtk_binary(values: np.ndarray) -> str:
    """Inline binary DataArray payload: base64 of (UInt64 byte count + little-endian Float64 data)."""
    raw = np.ascontiguousarray(values, dtype="<f8").tobytes()
    return base64.b64encode(np.array([len(raw)], dtype="<u8").tobytes() + raw).decode("ascii")


def vti_text(arrays: dict[str, np.ndarray], domain: Domain) -> str:
    """The .vti document for the arrays of fields_of / field_arrays on their domain.

    The image has nx x ny cells (nx+1 x ny+1 points) and one layer of cells in z, so its WholeExtent
    is "0 nx 0 ny 0 0"; Origin is the lower-left corner (x_min, y_min, 0), Spacing (dx, dx, dx).
    Cell data run x fastest, then y, as VTK expects.
    """
    ny, nx = arrays["kind"].shape
    dx = float(arrays["dx_m"])
    time_s = float(arrays["time_s"])
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
        f'  <ImageData WholeExtent="{extent}" Origin="{domain.x_min_m!r} {domain.y_min_m!r} 0" '
        f'Spacing="{dx!r} {dx!r} {dx!r}">',
        f"    <FieldData>",
        f'      <DataArray type="Float64" Name="time_s" NumberOfTuples="1" format="ascii">{time_s!r}</DataArray>',
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


def write_vti(path: str | Path, arrays: dict[str, np.ndarray], domain: Domain) -> Path:
    path = Path(path)
    path.write_text(vti_text(arrays, domain), encoding="ascii")
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


def station_csv_text(profiles: Iterable[tuple[str, dict[str, np.ndarray]]]) -> str:
    """Station CSV (STATION_CSV_COLUMNS): one row per sample of each (name, station_profile) given, in order;
    numbers written in full (repr), wall cells empty. Header names carry the units."""
    buf = io.StringIO()
    out = csv.writer(buf, lineterminator="\n")
    out.writerow(STATION_CSV_COLUMNS)
    for name, profile in profiles:
        for k in range(len(profile["s_m"])):
            out.writerow([name, *(_number(profile[c][k]) for c in PROFILE_COLUMNS)])
    return buf.getvalue()


def write_station_csv(path: str | Path, profiles: Iterable[tuple[str, dict[str, np.ndarray]]]) -> Path:
    path = Path(path)
    path.write_text(station_csv_text(profiles), encoding="utf-8", newline="")
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
