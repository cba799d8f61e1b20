"""The rows of a sweep: one per case (its varied values, the figures of its summary.json with units in the
column names, status, error, folder), and the tables written from them: sweep.csv and sweep.json.
"""
from __future__ import annotations

import csv
import json
import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from ..report import CAUTION
from .plan import Case, SweepPlan

#: Outcomes that a re-run would only repeat: such a case is kept when the sweep is run again.
DONE_STATUSES = ("finished", "diverged", "stalled")
#: Status of a case that raised (kept as error.json in its folder; it is run again on the next sweep) and of a
#: case that never ran because the sweep was stopped.
FAILED, NOT_RUN = "failed", "not run"
#: Leading columns and trailing columns of sweep.csv; the varied paths and the figures go between.
LEAD_COLUMNS = ("case",)
TAIL_COLUMNS = ("status", "error", "folder")
#: Run figures of summary.json copied into the table (resolution.* flattened to nx, ny, dx_m).
RUN_FIGURES = ("sim_time_s", "steps", "wall_s", "cell_updates_per_s", "nx", "ny", "dx_m", "floors_total")


def summary_row(summary: dict) -> dict[str, Any]:
    """The summary figures of one case as flat columns with units in their names."""
    row: dict[str, Any] = {}
    res = summary.get("resolution") or {}
    for name in RUN_FIGURES:
        row[name] = res.get(name) if name in ("nx", "ny", "dx_m") else summary.get(name)
    for group in ("stations", "probes"):
        for item, readings in (summary.get(group) or {}).items():
            for key, value in readings.items():
                if key != "kind":
                    row[f"{group}.{item}.{key}"] = value
    for key, value in (summary.get("nozzle") or {}).items():
        row[f"nozzle.{key}"] = value
    return row


def case_row(case: Case, status: str, error: str, summary: dict | None) -> dict[str, Any]:
    row: dict[str, Any] = {"case": case.index}
    row.update(case.values)
    if summary is not None:
        row.update(summary_row(summary))
    row.update({"status": status, "error": error, "folder": case.folder})
    return row


def columns_of(rows: list[dict], varied: list[str]) -> list[str]:
    figures: list[str] = []
    seen = set(LEAD_COLUMNS) | set(varied) | set(TAIL_COLUMNS)
    for row in rows:
        for key in row:
            if key not in seen:
                seen.add(key)
                figures.append(key)
    return [*LEAD_COLUMNS, *varied, *figures, *TAIL_COLUMNS]



@dataclass
class SweepResult:
    """What a sweep produced: rows in case order, which cases ran now, which were kept, and where it ran."""

    out_dir: Path
    plan: SweepPlan
    rows: list[dict]
    columns: list[str]
    ran: list[int] = field(default_factory=list)
    reused: list[int] = field(default_factory=list)
    where: str = ""
    interrupted: bool = False

    def count(self, *statuses: str) -> int:
        return sum(1 for r in self.rows if r["status"] in statuses)

    @property
    def all_finished(self) -> bool:
        return self.count("finished") == len(self.rows)


# ----------------------------------------------------------------------------- tables

def _csv_cell(value: Any) -> str:
    if value is None:
        return ""
    if isinstance(value, float):
        return repr(value) if math.isfinite(value) else ""
    return str(value)


def write_tables(result: SweepResult) -> None:
    """sweep.csv (one row per case) and sweep.json (the plan, where it ran, the same rows)."""
    out = result.out_dir
    with (out / "sweep.csv").open("w", newline="", encoding="utf-8") as fh:
        writer = csv.writer(fh)
        writer.writerow(result.columns)
        for row in result.rows:
            writer.writerow([_csv_cell(row.get(c)) for c in result.columns])
    doc = {
        **result.plan.as_dict(),
        "where": result.where,
        "interrupted": result.interrupted,
        "counts": {"cases": len(result.rows), "finished": result.count("finished"),
                   "diverged": result.count("diverged"), "stalled": result.count("stalled"),
                   "failed": result.count(FAILED), "not_run": result.count(NOT_RUN),
                   "ran_now": len(result.ran), "kept_from_before": len(result.reused)},
        "columns": result.columns,
        "rows": [{c: (_json_value(row.get(c))) for c in result.columns} for row in result.rows],
        "caution": CAUTION,
    }
    (out / "sweep.json").write_text(json.dumps(doc, indent=2) + "\n", encoding="utf-8")


def _json_value(value: Any) -> Any:
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


