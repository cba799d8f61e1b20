"""Exports: .npz arrays, VTK XML image data (.vti), station and history CSV, one layout for page and batch.

The .vti layout is checked against the VTK file-format documentation (VTK User's Guide, "VTK File Formats",
XML ImageData: WholeExtent in point indices, Origin, Spacing, cell data x fastest; from memory).
"""
from __future__ import annotations

import base64
import csv
import xml.etree.ElementTree as ET

import numpy as np
import pytest

from shockslate.solver import export
from shockslate.solver.diagnostics import read_probe, read_station, station_profile
from shockslate.solver.kinds import CellKind
from shockslate.solver.scenario import (build_simulation, load_builtin, parse_scenario, scenario_to_dict,
                                        scenario_to_json, to_stations)


@pytest.fixture(scope="module")
def sim():
    doc = {
        "name": "export box",
        "gas": {"preset": "air", "gamma": 1.4, "molar_mass_kg_kmol": 28.965},
        "mode": "planar",
        "domain": {"x_min_m": -0.2, "x_max_m": 0.6, "y_min_m": 0.1, "y_max_m": 0.4, "nx": 40},
        "edges": {"left": "wall", "right": "open", "bottom": "wall", "top": "wall"},
        "sketch": {"shapes": [{"kind": "circle", "centre_m": [0.3, 0.25], "radius_m": 0.04, "paints": "wall"}]},
        "conditions": {"reservoir": {"p0_pa": 500000.0, "t0_k": 400.0}},
        "initial": {"kind": "reservoir_upstream_of_x", "x_m": 0.0},
        "stations": [{"name": "mid", "start_m": [0.3, 0.1], "end_m": [0.3, 0.4]}],
        "probes": [{"name": "p", "x_m": 0.1, "y_m": 0.2}],
        "end_time_s": 1e-3,
    }
    s = parse_scenario(doc)
    sim = build_simulation(s)
    sim.advance(20)
    sim.scenario = s
    return sim


def test_npz_holds_the_documented_arrays(sim, tmp_path):
    path = export.write_npz(tmp_path / "f.npz", export.field_arrays(sim, "{}"))
    with np.load(path) as data:
        assert data.files == list(export.NPZ_ARRAYS)
        for name, (_meaning, _unit, shape, dtype) in export.NPZ_ARRAYS.items():
            assert str(data[name].shape) == shape.replace("ny", "15").replace("nx", "40"), name
            assert data[name].dtype.kind == "U" if dtype == "unicode" else data[name].dtype == np.dtype(dtype), name
        ny, nx = sim.domain.shape
        assert (ny, nx) == (15, 40)
        for name in ("rho_kg_m3", "u_m_s", "v_m_s", "p_pa", "t_k", "mach", "kind"):
            assert data[name].shape == (ny, nx), name
        assert data["x_m"].shape == (nx,) and data["y_m"].shape == (ny,)
        assert float(data["time_s"]) == pytest.approx(sim.time_s)
        assert float(data["dx_m"]) == pytest.approx(0.02)
        rho, u, v, p = sim.primitive()
        fluid = data["kind"] == CellKind.FLUID
        assert np.array_equal(data["p_pa"][fluid], p[fluid])
        wall = data["kind"] == CellKind.WALL
        assert wall.any() and np.isnan(data["p_pa"][wall]).all()
        # ideal-gas law and Mach definition tie the arrays together
        r = float(data["r_j_kg_k"])
        assert np.allclose(data["t_k"][fluid], p[fluid] / (rho[fluid] * r))
        a = np.sqrt(1.4 * p[fluid] / rho[fluid])
        assert np.allclose(data["mach"][fluid], np.hypot(u[fluid], v[fluid]) / a)


def test_vti_parses_with_right_extent_spacing_and_data(sim, tmp_path):
    path = export.write_vti(tmp_path / "f.vti", export.field_arrays(sim), sim.domain)
    root = ET.parse(path).getroot()
    assert root.tag == "VTKFile" and root.get("type") == "ImageData"
    assert root.get("byte_order") == "LittleEndian" and root.get("header_type") == "UInt64"
    image = root.find("ImageData")
    ny, nx = sim.domain.shape
    assert image.get("WholeExtent").split() == ["0", str(nx), "0", str(ny), "0", "0"]
    origin = [float(v) for v in image.get("Origin").split()]
    spacing = [float(v) for v in image.get("Spacing").split()]
    assert origin == pytest.approx([-0.2, 0.1, 0.0])
    assert spacing == pytest.approx([0.02, 0.02, 0.02])
    piece = image.find("Piece")
    assert piece.get("Extent") == image.get("WholeExtent")
    arrays = {a.get("Name"): a for a in piece.find("CellData").findall("DataArray")}
    assert set(arrays) == set(export.VTI_ARRAYS)
    for name, (components, _unit) in export.VTI_ARRAYS.items():
        blob = base64.b64decode(arrays[name].text.strip())
        count = int(np.frombuffer(blob[:8], "<u8")[0])
        assert count == nx * ny * components * 8, name
        assert int(arrays[name].get("NumberOfComponents")) == components
    # cell data runs x fastest: value k is cell (j, i) = divmod(k, nx)
    pressure = export.read_vti_array(path.read_text(), "pressure_pa").reshape(ny, nx)
    rho, u, v, p = sim.primitive()
    fluid = sim.mask != CellKind.WALL
    assert np.array_equal(pressure[fluid], p[fluid])
    velocity = export.read_vti_array(path.read_text(), "velocity_m_s").reshape(ny, nx, 3)
    assert np.array_equal(velocity[..., 0][fluid], u[fluid])


def test_station_csv_columns_and_units(sim, tmp_path):
    st = to_stations(sim.scenario)[0]
    prof = station_profile(sim, st)
    path = export.write_station_csv(tmp_path / "s.csv", [(st.name, prof)])
    with path.open() as fh:
        rows = list(csv.reader(fh))
    assert tuple(rows[0]) == export.STATION_CSV_COLUMNS == ("station", *export.PROFILE_COLUMNS)
    assert all(c.endswith(("_m", "_pa", "_kg_m3", "_k", "_m_s")) or c in ("mach", "station") for c in rows[0])
    assert len(rows) - 1 == len(prof["s_m"])
    assert {r[0] for r in rows[1:]} == {"mid"}
    assert float(rows[1][rows[0].index("x_m")]) == pytest.approx(0.3)
    walls = [r for r in rows[1:] if r[rows[0].index("p_pa")] == ""]
    assert walls, "the station crosses the circle, whose cells are written empty"


def test_history_csv_round_trip(sim, tmp_path):
    st = to_stations(sim.scenario)
    w = export.HistoryWriter(tmp_path / "h.csv", [s.name for s in st], ["p"])
    for _ in range(3):
        w.write(sim.time_s, sim.steps, [read_station(sim, s) for s in st], [read_probe(sim, 0.1, 0.2)])
    w.close()
    hist = export.read_history(tmp_path / "h.csv")
    assert list(hist) == export.history_header(["mid"], ["p"])
    assert list(hist)[:4] == ["time_s", "step", "mid:mass_flow_kg_s", "mid:thrust_n"]
    assert len(hist["time_s"]) == 3
    assert hist["p:p_pa"][0] == pytest.approx(read_probe(sim, 0.1, 0.2).p_pa)
    assert hist["mid:area_m2"][0] == pytest.approx(read_station(sim, st[0]).area_m2)


# ----------------------------------------------------------------------------- one layout for page and batch

def test_page_download_and_batch_files_have_one_layout(tmp_path):
    """The same state exported the page's way (server.exports from a session snapshot) and the batch way
    (solver.export from the simulation, as solver.batch calls it): same array names, dtypes, shapes and
    values, the same station CSV text; and a real batch run's files have that layout too."""
    from shockslate.server.exports import Exports
    from shockslate.server.session import Session
    from shockslate.solver import batch
    doc = scenario_to_dict(load_builtin("nozzle_sea_level"))
    doc["domain"]["nx"] = 48
    session = Session(parse_scenario(doc))
    session.step(3)
    page = Exports(tmp_path / "exports")
    page_npz = page.write_npz(session.snapshot(), session.scenario)
    page_csv = page.write_csv(session.sim, session.scenario)
    batch_npz = export.write_npz(tmp_path / "batch.npz",
                                 export.field_arrays(session.sim, scenario_to_json(session.scenario)))
    stations = [(st.name, station_profile(session.sim, st)) for st in to_stations(session.scenario)]
    batch_csv = export.write_station_csv(tmp_path / "batch.csv", stations)

    run = batch.run_scenario(session.scenario, tmp_path / "run", steps=3, progress=None, write_pictures=False)
    run_npz = tmp_path / "run" / run["snapshots"][-1]["npz"]
    with np.load(page_npz) as a, np.load(batch_npz) as b, np.load(run_npz) as c:
        assert a.files == b.files == c.files == list(export.NPZ_ARRAYS)
        for name in a.files:
            assert a[name].dtype == b[name].dtype == c[name].dtype, name
            assert a[name].shape == b[name].shape == c[name].shape, name
            assert np.array_equal(a[name], b[name], equal_nan=a[name].dtype.kind == "f"), name
        wall = a["kind"] == CellKind.WALL
        assert wall.any() and np.isnan(a["p_pa"][wall]).all()  # walls are NaN on the page too
    assert page_csv.read_text() == batch_csv.read_text()
    page_vti = page.write_vti(session.snapshot(), session.scenario)
    assert page_vti.read_text() == export.vti_text(export.field_arrays(session.sim), session.sim.domain)
    assert page.find(page_vti.name) == page_vti.resolve()
    with (tmp_path / "run" / "station_exit.csv").open() as fh:
        assert tuple(next(csv.reader(fh))) == export.STATION_CSV_COLUMNS
    assert page_csv.read_text().splitlines()[0] == ",".join(export.STATION_CSV_COLUMNS)


def test_readme_file_formats_lists_every_array_with_unit_shape_and_dtype():
    """README.md, "File formats", is the user's reference for the layout: it must match NPZ_ARRAYS row by row."""
    from pathlib import Path

    text = (Path(__file__).resolve().parent.parent / "README.md").read_text(encoding="utf-8")
    section = text.split("## File formats", 1)[1].split("\n## ", 1)[0]
    for name, (meaning, unit, shape, dtype) in export.NPZ_ARRAYS.items():
        assert f"| `{name}` | {meaning} | {unit} | {shape} | {dtype} |" in section, name
    for name in export.VTI_ARRAYS:
        assert f"`{name}`" in section, name
    for column in export.STATION_CSV_COLUMNS:
        assert f"`{column}`" in section, column
