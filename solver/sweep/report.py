"""sweep_report.html: the plan, every case's status, and plots of each summary figure against each varied value;
for a reservoir-fed nozzle, thrust coefficient and mass flow beside the ideal 1D curves of solver.nozzle (the same
function behind summary.json and the page) over the same range. Rendered from the package's Jinja2 template
(solver/templates/sweep_report.html.j2), like report.html; plots are base64 PNG, so the file stands alone.
"""
from __future__ import annotations

import base64
import io
import math
from pathlib import Path
from typing import Any, Optional

import numpy as np

from .. import nozzle
from ..gas import Gas
from ..report import CAUTION
from ..templating import render
from .plan import Case
from .tables import FAILED, LEAD_COLUMNS, NOT_RUN, TAIL_COLUMNS, SweepResult

#: A figure whose spread across the finished cases is within this fraction of its size is listed, not plotted.
CONSTANT_RTOL = 1e-6
#: Varied paths along which the ideal 1D nozzle figures can be drawn as a continuous curve.
IDEAL_CURVE_PATHS = ("conditions.ambient.p_pa", "conditions.reservoir.p0_pa", "conditions.reservoir.t0_k",
                     "gas.gamma", "gas.molar_mass_kg_kmol")


def _number(value: Any) -> Optional[float]:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return None
    return float(value) if math.isfinite(value) else None


def _column(rows: list[dict], col: str) -> list[float]:
    """A column as floats, NaN where a case has no finite value (matplotlib leaves a gap)."""
    return [v if (v := _number(r.get(col))) is not None else math.nan for r in rows]


def _png(fig) -> str:
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=90, bbox_inches="tight")
    return base64.b64encode(buf.getvalue()).decode("ascii")


def _x_axis(values: list[Any]) -> tuple[list[float], Optional[list[str]]]:
    """Numeric x for numeric values; positions and tick labels for words."""
    if all(_number(v) is not None for v in values):
        return [float(v) for v in values], None
    labels = list(dict.fromkeys(str(v) for v in values))
    return [float(labels.index(str(v))) for v in values], labels


def _series(rows: list[dict], path: str, varied: list[str]) -> dict[str, list[dict]]:
    """Rows grouped by the values of the other varied paths (one line per group), sorted along path."""
    others = [p for p in varied if p != path]
    groups: dict[str, list[dict]] = {}
    for row in rows:
        label = ", ".join(f"{p} = {row[p]!r}" for p in others)
        groups.setdefault(label, []).append(row)
    for items in groups.values():
        items.sort(key=lambda r: (_number(r[path]) if _number(r[path]) is not None else 0.0, str(r[path])))
    return groups


def _figure_groups(columns: list[str]) -> dict[str, list[str]]:
    groups: dict[str, list[str]] = {}
    for col in columns:
        if col.startswith(("stations.", "probes.")):
            group = ".".join(col.split(".")[:2])
        elif col.startswith("nozzle."):
            group = "nozzle"
        else:
            group = "run"
        groups.setdefault(group, []).append(col)
    return groups


def ideal_nozzle_figures(p0_pa: float, t0_k: float, p_amb_pa: float, gamma: float, r_j_kg_k: float,
                         throat_area_m2: float, area_ratio: float, divergence_factor: float) -> dict[str, float]:
    """Ideal 1D C_F (with and without the divergence factor), choked mass flow and exit pressure for a point of
    a report curve: solver.nozzle.ideal_figures, the same function behind summary.json and the page."""
    fig = nozzle.ideal_figures(p0_pa, t0_k, p_amb_pa, gamma, r_j_kg_k, throat_area_m2, area_ratio,
                               divergence_factor)
    return {"cf": fig.ideal_thrust_coefficient, "cf_div": fig.ideal_thrust_coefficient_with_divergence,
            "mdot": fig.choked_mass_flow_kg_s, "pe_pa": fig.ideal_exit_pressure_pa}


def _case_gas(case: Case) -> tuple[float, float]:
    gas = Gas(case.scenario["gas"]["gamma"], case.scenario["gas"]["molar_mass_kg_kmol"])
    return gas.gamma, gas.r_j_kg_k


def _nozzle_plots(plt, result: SweepResult, finished: list[dict]) -> list[dict]:
    """Per varied path: simulated C_F and throat mass flow beside the ideal 1D values over the same range."""
    varied = [v.path for v in result.plan.varies]
    by_index = {c.index: c for c in result.plan.cases}
    parts: list[dict] = []
    for path in varied:
        groups = _series(finished, path, varied)
        fig, (ax_cf, ax_m) = plt.subplots(1, 2, figsize=(11.0, 3.8))
        for n, (label, rows) in enumerate(groups.items()):
            colour = f"C{n % 10}"
            xs, ticks = _x_axis([r[path] for r in rows])
            tag = f" ({label})" if label else ""
            ax_cf.plot(xs, _column(rows, "nozzle.thrust_coefficient"), "o", color=colour,
                       label="simulated" + tag)
            ax_m.plot(xs, _column(rows, "nozzle.mass_flow_throat_kg_s"), "o", color=colour,
                      label="simulated, throat" + tag)
            first = by_index[rows[0]["case"]]
            dense = path in IDEAL_CURVE_PATHS and ticks is None and len(xs) > 1
            if dense:
                grid = np.linspace(min(xs), max(xs), 200)
                g, r = _case_gas(first)
                base = {"p0_pa": rows[0]["nozzle.p0_pa"], "t0_k": rows[0]["nozzle.t0_k"],
                        "p_amb_pa": rows[0]["nozzle.p_amb_pa"], "gamma": g, "r_j_kg_k": r}
                key = {"conditions.ambient.p_pa": "p_amb_pa", "conditions.reservoir.p0_pa": "p0_pa",
                       "conditions.reservoir.t0_k": "t0_k", "gas.gamma": "gamma"}.get(path)
                curves = []
                for x in grid:
                    args = dict(base)
                    if key is not None:
                        args[key] = float(x)
                    else:  # molar mass
                        args["r_j_kg_k"] = Gas(g, float(x)).r_j_kg_k
                    curves.append(ideal_nozzle_figures(
                        throat_area_m2=rows[0]["nozzle.throat_area_m2"], area_ratio=rows[0]["nozzle.area_ratio"],
                        divergence_factor=rows[0]["nozzle.divergence_factor"], **args))
                ax_cf.plot(grid, [c["cf"] for c in curves], "-", color=colour, label="ideal 1D" + tag)
                ax_cf.plot(grid, [c["cf_div"] for c in curves], "--", color=colour,
                           label="ideal 1D x divergence factor" + tag)
                ax_m.plot(grid, [c["mdot"] for c in curves], "-", color=colour, label="ideal 1D, choked" + tag)
                if path == "conditions.ambient.p_pa" and n == 0:
                    pe = curves[0]["pe_pa"]
                    if min(xs) <= pe <= max(xs):
                        ax_cf.axvline(pe, color="0.5", lw=0.8, ls=":")
                        ax_cf.annotate("pa = pe (design)", (pe, ax_cf.get_ylim()[0]), fontsize=8, rotation=90,
                                       va="bottom", ha="right", color="0.4")
            else:
                ax_cf.plot(xs, _column(rows, "nozzle.ideal_thrust_coefficient"), "-", color=colour,
                           label="ideal 1D at each case" + tag)
                ax_cf.plot(xs, _column(rows, "nozzle.ideal_thrust_coefficient_with_divergence"), "--",
                           color=colour, label="ideal 1D x divergence factor" + tag)
                ax_m.plot(xs, _column(rows, "nozzle.choked_mass_flow_kg_s"), "-", color=colour,
                          label="ideal 1D, choked, at each case" + tag)
            if ticks is not None:
                for ax in (ax_cf, ax_m):
                    ax.set_xticks(range(len(ticks)), ticks)
        ax_cf.set_ylabel("thrust coefficient C_F [-]")
        ax_m.set_ylabel("mass flow [kg/s]")
        for ax in (ax_cf, ax_m):
            ax.set_xlabel(path)
            ax.grid(alpha=0.3)
            ax.legend(fontsize=7)
        fig.tight_layout()
        parts.append({"heading": f"against {path}", "alt": f"nozzle figures against {path}", "png": _png(fig)})
        plt.close(fig)
    return parts


def _figure_plots(plt, result: SweepResult, finished: list[dict]) -> tuple[list[dict], list[tuple[str, Any]]]:
    """Small multiples of every summary figure that changes across the sweep; the constant ones as a list."""
    varied = [v.path for v in result.plan.varies]
    figure_cols = [c for c in result.columns if c not in varied and c not in LEAD_COLUMNS + TAIL_COLUMNS]
    numeric = [c for c in figure_cols if any(_number(r.get(c)) is not None for r in finished)]
    changing, constant = [], []
    for col in numeric:
        vals = [_number(r.get(col)) for r in finished if _number(r.get(col)) is not None]
        spread = max(vals) - min(vals)
        (changing if spread > CONSTANT_RTOL * max(abs(v) for v in vals) else constant).append(col)
    const_rows = [(c, finished[0].get(c)) for c in constant]
    parts: list[dict] = []
    for path in varied:
        groups = _series(finished, path, varied)
        for group, cols in _figure_groups(changing).items():
            ncols = min(4, len(cols))
            nrows = math.ceil(len(cols) / ncols)
            fig, axes = plt.subplots(nrows, ncols, figsize=(3.1 * ncols, 2.4 * nrows), squeeze=False)
            for ax, col in zip(axes.flat, cols):
                for n, (label, rows) in enumerate(groups.items()):
                    xs, ticks = _x_axis([r[path] for r in rows])
                    ax.plot(xs, _column(rows, col), "o-", ms=3, color=f"C{n % 10}", label=label or None)
                    if ticks is not None:
                        ax.set_xticks(range(len(ticks)), ticks)
                ax.set_title(col.split(".")[-1] if group != "run" else col, fontsize=8)
                ax.tick_params(labelsize=7)
                ax.grid(alpha=0.3)
            for ax in list(axes.flat)[len(cols):]:
                ax.axis("off")
            if len(groups) > 1:
                axes.flat[0].legend(fontsize=6)
            fig.suptitle(f"{group} against {path}", fontsize=9)
            fig.tight_layout()
            parts.append({"heading": f"{group} against {path}", "alt": f"{group} against {path}", "png": _png(fig)})
            plt.close(fig)
    return parts, const_rows


def write_sweep_report(path: Path, result: SweepResult) -> Path:
    """Self-contained HTML (templates/sweep_report.html.j2): the plan, every case's status, and base64 PNG plots
    drawn with matplotlib."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    plan = result.plan
    varied = [v.path for v in plan.varies]
    finished = [r for r in result.rows if r["status"] == "finished"]
    plan_rows = [
        *[(f"vary {v.path}", ", ".join(repr(x) for x in v.values)) for v in plan.varies],
        ("combined as", "pairs (zip)" if plan.zip else "every combination (Cartesian product)"),
        ("resolution nx", plan.nx if plan.nx is not None else "the scenario's"),
        ("until [s]", plan.until_s if plan.until_s is not None else "the scenario's end time"),
        ("ran on", result.where),
        ("cases", f"{len(result.rows)}: {result.count('finished')} finished, "
                  f"{result.count('diverged', 'stalled', FAILED)} failed, {result.count(NOT_RUN)} not run; "
                  f"{len(result.ran)} ran now, {len(result.reused)} kept from before"),
    ]
    case_rows = [[r["case"], *[r[p] for p in varied], r["status"], r["error"], r["folder"]] for r in result.rows]
    nozzle_plots: list[dict] = []
    figure_plots: list[dict] = []
    constant: list[tuple[str, Any]] = []
    if finished:
        if any(r.get("nozzle.thrust_coefficient") is not None for r in finished):
            nozzle_plots = _nozzle_plots(plt, result, finished)
        figure_plots, constant = _figure_plots(plt, result, finished)
    text = render("sweep_report.html.j2", plan=plan, caution=CAUTION, plan_rows=plan_rows,
                  case_header=["case", *varied, "status", "error", "folder"], case_rows=case_rows,
                  finished=bool(finished), nozzle_plots=nozzle_plots, figure_plots=figure_plots,
                  constant=constant, constant_rtol=CONSTANT_RTOL)
    path.write_text(text, encoding="utf-8")
    return path
