"""Files made for download: the fields as .npz, station distributions as CSV, the scenario as JSON.

Each export is written under a fresh random name in the user data folder's exports/ and served by
GET /exports/<name>; only names of that form are ever served, and only the newest few are kept.
"""
from __future__ import annotations

import csv
import io
import re
import secrets
from pathlib import Path

import numpy as np

from shockslate.solver import scenario as scn
from shockslate.solver.diagnostics import Station, station_profile
from shockslate.solver.fields import VIEWS
from shockslate.solver.simulation import Simulation

from .frames import view_field
from .persistence import write_atomically
from .session import FlowSnapshot

EXPORT_NAME = re.compile(r"[a-z0-9_]{1,40}-[A-Za-z0-9_-]{16,40}\.(npz|csv|json)")
KEEP = 20
KINDS = {"npz": "npz", "csv": "csv", "scenario": "json"}


class Exports:
    def __init__(self, folder: Path, keep: int = KEEP):
        self.folder = Path(folder)
        self.keep = keep

    def _new_path(self, scenario: scn.Scenario, ext: str) -> Path:
        stem = re.sub(r"[^a-z0-9_]+", "_", scenario.name.lower()).strip("_")[:40] or "scenario"
        self.folder.mkdir(parents=True, exist_ok=True)
        return self.folder / f"{stem}-{secrets.token_urlsafe(12)}.{ext}"

    def _prune(self) -> None:
        files = sorted((p for p in self.folder.glob("*") if EXPORT_NAME.fullmatch(p.name)),
                       key=lambda p: p.stat().st_mtime)
        for old in files[: -self.keep]:
            old.unlink(missing_ok=True)

    def write_npz(self, snap: FlowSnapshot, scenario: scn.Scenario) -> Path:
        """rho, u, v, p, mask and every view on the cell grid, with x, y centres and the scenario JSON."""
        path = self._new_path(scenario, "npz")
        views = {f"view_{name}": view_field(name, snap.gas, snap.rho, snap.u, snap.v, snap.p, snap.domain.dx_m,
                                            snap.mask) for name in VIEWS}
        with open(path, "wb") as f:
            np.savez_compressed(f, rho_kg_m3=snap.rho, u_m_s=snap.u, v_m_s=snap.v, p_pa=snap.p, mask=snap.mask,
                                x_centres_m=snap.x_centres_m, y_centres_m=snap.y_centres_m,
                                time_s=np.float64(snap.time_s), steps=np.int64(snap.steps),
                                scenario_json=np.array(scn.scenario_to_json(scenario)), **views)
        self._prune()
        return path

    def write_csv(self, sim: Simulation, scenario: scn.Scenario) -> Path:
        """One row per sample of every station: station, s_m, x_m, y_m, p_pa, rho_kg_m3, t_k, u_m_s, v_m_s, mach."""
        buf = io.StringIO()
        writer = csv.writer(buf)
        columns = ["s_m", "x_m", "y_m", "p_pa", "rho_kg_m3", "t_k", "u_m_s", "v_m_s", "mach"]
        writer.writerow(["station", *columns])
        for st in scenario.stations:
            prof = station_profile(sim, Station(tuple(st.start_m), tuple(st.end_m), st.name))
            for k in range(len(prof["s_m"])):
                writer.writerow([st.name, *(f"{float(prof[c][k]):.9g}" for c in columns)])
        path = self._new_path(scenario, "csv")
        write_atomically(path, buf.getvalue())
        self._prune()
        return path

    def write_scenario(self, scenario: scn.Scenario) -> Path:
        path = self._new_path(scenario, "json")
        write_atomically(path, scn.scenario_to_json(scenario))
        self._prune()
        return path

    def find(self, name: str) -> Path | None:
        """The export file of that name, or None (never any other file)."""
        if not EXPORT_NAME.fullmatch(name):
            return None
        path = (self.folder / name).resolve()
        if path.parent != self.folder.resolve() or not path.is_file():
            return None
        return path
