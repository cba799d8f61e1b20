"""Files made for download: the fields as .npz, station distributions as CSV, the scenario as JSON.

The .npz and the CSV are written by solver.export, the same writers a batch run uses, so a download and a
batch file of the same state have the same layout (array names, dtypes, shapes; CSV columns).

Each export is written under a fresh random name in the user data folder's exports/ and served by
GET /exports/<name>; only names of that form are ever served, and only the newest few are kept.
"""
from __future__ import annotations

import re
import secrets
from pathlib import Path

from shockslate.solver import export
from shockslate.solver import scenario as scn
from shockslate.solver.diagnostics import Station, station_profile
from shockslate.solver.simulation import Simulation

from .persistence import write_atomically
from .session import FlowSnapshot

EXPORT_NAME = re.compile(r"[a-z0-9_]{1,40}-[A-Za-z0-9_-]{16,40}\.(npz|vti|csv|json)")
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
        """The fields of a snapshot in the documented .npz layout (solver.export.NPZ_ARRAYS)."""
        path = self._new_path(scenario, "npz")
        arrays = export.fields_of(snap.domain, snap.gas, snap.mask, snap.rho, snap.u, snap.v, snap.p, snap.time_s,
                                  snap.steps, scn.scenario_to_json(scenario))
        with open(path, "wb") as f:
            export.write_npz(f, arrays)
        self._prune()
        return path

    def write_vti(self, snap: FlowSnapshot, scenario: scn.Scenario) -> Path:
        """The fields of a snapshot as VTK XML image data, the batch run's .vti layout (solver.export.VTI_ARRAYS).
        Ready for a "vti" export request; the protocol does not offer it yet."""
        path = self._new_path(scenario, "vti")
        arrays = export.fields_of(snap.domain, snap.gas, snap.mask, snap.rho, snap.u, snap.v, snap.p, snap.time_s,
                                  snap.steps, "")
        write_atomically(path, export.vti_text(arrays, snap.domain))
        self._prune()
        return path

    def write_csv(self, sim: Simulation, scenario: scn.Scenario) -> Path:
        """Every station's distribution in the documented station CSV layout (solver.export.STATION_CSV_COLUMNS)."""
        profiles = [(st.name, station_profile(sim, Station(tuple(st.start_m), tuple(st.end_m), st.name)))
                    for st in scenario.stations]
        path = self._new_path(scenario, "csv")
        write_atomically(path, export.station_csv_text(profiles))
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
