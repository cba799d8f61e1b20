"""Pictures and the self-contained HTML report of a batch run.

Plots are drawn with matplotlib (Agg, no display needed) and embedded in the report as base64 PNG,
so report.html is one file that can be mailed or attached to a review. The page itself is rendered from
templates/report.html.j2 through solver.templating, the same path as the sweep report.
"""
from __future__ import annotations

import base64
import io
import math
from pathlib import Path
from typing import Any

import numpy as np

from .colourmaps import DIVERGING, matplotlib_map_for_view, view_map
from .fields import VIEWS, derived
from .simulation import Simulation
from .templating import number

CAUTION = ("Caution: inviscid, calorically perfect gas model; not for sizing pressure hardware or clearing a "
           "test; defer to local codes and licensed engineering review.")


def _pyplot():
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    return plt


def _nice_length_m(span_m: float) -> float:
    """A round scale-bar length of about a fifth of the span (1, 2 or 5 x 10^k metres)."""
    target = span_m / 5.0
    k = math.floor(math.log10(target))
    for step in (5.0, 2.0, 1.0):
        if step * 10 ** k <= target:
            return step * 10 ** k
    return 10 ** k


def _length_label(length_m: float) -> str:
    if length_m >= 1.0:
        return f"{length_m:g} m"
    if length_m >= 0.01:
        return f"{length_m * 100:g} cm" if length_m < 0.1 else f"{length_m * 1000:g} mm"
    return f"{length_m * 1000:g} mm"


def snapshot_figure(sim: Simulation, view: str = "mach"):
    """A matplotlib figure of one view: colour bar with unit, scale bar in metres, time stamp, walls grey."""
    plt = _pyplot()
    rho, u, v, p = sim.primitive()
    dom = sim.domain
    field = derived(view, sim.setup.gas, rho, u, v, p, dom.dx_m, sim.mask)
    label, unit = VIEWS[view]
    ny, nx = dom.shape
    extent = (dom.x_min_m, dom.x_max_m, dom.y_min_m, dom.y_min_m + ny * dom.dx_m)
    width = 8.0
    height = max(2.0, min(8.0, width * ny / nx + 1.0))
    fig, ax = plt.subplots(figsize=(width, height), dpi=110)
    cmap = matplotlib_map_for_view(view)  # the page's own map of this view (solver/colourmaps.py)
    finite = field[np.isfinite(field)]
    vmin, vmax = (float(finite.min()), float(finite.max())) if finite.size else (0.0, 1.0)
    if vmax <= vmin:
        vmax = vmin + 1.0
    if view_map(view) in DIVERGING and vmin < 0.0 < vmax:  # zero in the middle, as the page draws it
        vmax = max(-vmin, vmax)
        vmin = -vmax
    img = ax.imshow(np.ma.masked_invalid(field), origin="lower", extent=extent, cmap=cmap, vmin=vmin, vmax=vmax,
                    interpolation="nearest", aspect="equal")
    bar = fig.colorbar(img, ax=ax, shrink=0.85)
    bar.set_label(f"{label} [{unit}]")
    ax.set_xlabel("x [m]")
    ax.set_ylabel("r [m]" if sim.setup.mode == "axisymmetric" else "y [m]")
    span = extent[1] - extent[0]
    length = _nice_length_m(span)
    x0 = extent[0] + 0.04 * span
    y0 = extent[2] + 0.06 * (extent[3] - extent[2])
    ax.plot([x0, x0 + length], [y0, y0], color="white", lw=3, solid_capstyle="butt")
    ax.plot([x0, x0 + length], [y0, y0], color="black", lw=1, solid_capstyle="butt")
    ax.text(x0 + 0.5 * length, y0, _length_label(length), color="white", ha="center", va="bottom", fontsize=8,
            bbox={"facecolor": "black", "alpha": 0.4, "pad": 1, "edgecolor": "none"})
    ax.set_title(f"{label}, t = {sim.time_s * 1e3:.4g} ms ({sim.steps} steps)", fontsize=10)
    fig.tight_layout()
    return fig


def save_snapshot_png(path: str | Path, sim: Simulation, view: str = "mach") -> Path:
    plt = _pyplot()
    fig = snapshot_figure(sim, view)
    fig.savefig(path)
    plt.close(fig)
    return Path(path)


def _png_base64(fig) -> str:
    plt = _pyplot()
    buf = io.BytesIO()
    fig.savefig(buf, format="png")
    plt.close(fig)
    return base64.b64encode(buf.getvalue()).decode("ascii")


def history_figure(history: dict[str, np.ndarray], quantity: str, ylabel: str):
    """Every column ending in ':<quantity>' against time in ms."""
    plt = _pyplot()
    fig, ax = plt.subplots(figsize=(7, 3.2), dpi=100)
    t_ms = history["time_s"] * 1e3
    drew = False
    for name, values in history.items():
        if name.endswith(":" + quantity):
            ax.plot(t_ms, values, label=name.rsplit(":", 1)[0])
            drew = True
    ax.set_xlabel("time [ms]")
    ax.set_ylabel(ylabel)
    ax.grid(alpha=0.3)
    if drew:
        ax.legend(fontsize=8)
    fig.tight_layout()
    return fig if drew else (plt.close(fig) or None)


def axis_figure(axis: dict[str, np.ndarray], throat_x_m: float):
    """Mach and p/p0 along the axis, simulated against the isentropic 1D curve."""
    plt = _pyplot()
    fig, (a1, a2) = plt.subplots(1, 2, figsize=(9, 3.4), dpi=100)
    x_mm = axis["x_m"] * 1e3
    a1.plot(x_mm, axis["mach_sim"], label="simulated (axis)")
    a1.plot(x_mm, axis["mach_1d"], "--", label="isentropic 1D")
    a1.set_ylabel("Mach number [-]")
    a2.semilogy(x_mm, axis["p_p0_sim"], label="simulated (axis)")
    a2.semilogy(x_mm, axis["p_p0_1d"], "--", label="isentropic 1D")
    a2.set_ylabel("p / p0 [-]")
    for a in (a1, a2):
        a.axvline(throat_x_m * 1e3, color="grey", lw=0.8)
        a.set_xlabel("x [mm] (grey: throat)")
        a.grid(alpha=0.3)
        a.legend(fontsize=8)
    fig.tight_layout()
    return fig


NOZZLE_ROWS = [
    ("flow regime (1D limits)", "regime", ""),
    ("throat area A* (drawn)", "throat_area_m2", "m^2"),
    ("throat position (drawn)", "throat_x_m", "m"),
    ("exit area (drawn, exit station line)", "exit_area_m2", "m^2"),
    ("area ratio Ae/A* (drawn)", "area_ratio", "-"),
    ("throat area (resolved on the cells, for comparison)", "throat_area_resolved_m2", "m^2"),
    ("exit area (resolved on the cells, for comparison)", "exit_area_resolved_m2", "m^2"),
    ("area ratio (resolved on the cells, for comparison)", "area_ratio_resolved", "-"),
    ("divergence half angle (drawn wall, near exit)", "divergence_half_angle_deg", "deg"),
    ("divergence factor lambda", "divergence_factor", "-"),
    ("choked mass flow (theory)", "choked_mass_flow_kg_s", "kg/s"),
    ("mass flow at throat (simulated)", "mass_flow_throat_kg_s", "kg/s"),
    ("mass flow ratio", "mass_flow_ratio", "-"),
    ("ideal exit Mach (area-Mach)", "ideal_exit_mach", "-"),
    ("mean exit Mach (simulated)", "exit_mach", "-"),
    ("ideal exit pressure", "ideal_exit_pressure_pa", "Pa"),
    ("mean exit pressure (simulated)", "exit_pressure_pa", "Pa"),
    ("ideal C_F", "ideal_thrust_coefficient", "-"),
    ("ideal C_F with divergence factor", "ideal_thrust_coefficient_with_divergence", "-"),
    ("C_F (simulated)", "thrust_coefficient", "-"),
    ("C_F ratio to ideal", "thrust_coefficient_ratio", "-"),
    ("C_F ratio to ideal with divergence", "thrust_coefficient_ratio_with_divergence", "-"),
    ("c* (theory)", "c_star_m_s", "m/s"),
    ("c* (simulated)", "c_star_sim_m_s", "m/s"),
    ("c* ratio", "c_star_ratio", "-"),
    ("Isp (ideal)", "ideal_specific_impulse_s", "s"),
    ("Isp (simulated)", "specific_impulse_s", "s"),
    ("Isp ratio", "specific_impulse_ratio", "-"),
    ("thrust (simulated, exit station)", "thrust_n", "N"),
]

STATION_FIGURES = ("mass_flow_kg_s", "thrust_n", "mean_mach", "mean_pressure_pa", "area_m2")


def _plot(fig, alt: str) -> dict[str, str]:
    return {"alt": alt, "png": _png_base64(fig)}


def _missing(value: Any) -> Any:
    """None (a figure summary.json could not give) shown as NaN, i.e. "-"."""
    return float("nan") if value is None else value


def _steady_block(st: dict | None) -> dict | None:
    """Station readings averaged over the window with their unsteadiness (+- half the range), and the residual,
    for the report template; None when the run kept no window."""
    if not st or not st.get("window") or not st["window"].get("samples"):
        return None
    w = st["window"]
    rows = [[name, *(f"{number(_missing(q[k]['mean']))} \u00b1 {number(_missing(q[k]['plus_minus']))}"
                     for k in ("mass_flow_kg_s", "thrust_n", "mean_mach", "mean_pressure_pa"))]
            for name, q in w["stations"].items()]
    settled = "settled" if st["settled"] else ("not settled" if st["until"] == "steady" else "run to a set time")
    return {"from_s": w["from_s"], "to_s": w["to_s"], "samples": w["samples"], "rows": rows, "settled": settled,
            "residual": _missing(st.get("residual")), "transit_s": _missing(st.get("transit_s")),
            "tolerance": _missing(st.get("tolerance")), "mass_imbalance": _missing(st.get("mass_imbalance"))}


def write_report(path: str | Path, summary: dict, description: str, sim: Simulation, view: str,
                 history: dict[str, np.ndarray] | None, axis: dict[str, np.ndarray] | None = None) -> Path:
    """report.html (templates/report.html.j2): run figures, the last snapshot, history plots and, for a nozzle,
    theory beside simulation."""
    from .templating import render

    res = summary["resolution"]
    run_rows = [("status", summary["status"]), ("simulated time [s]", _missing(summary["sim_time_s"])),
                ("steps", summary["steps"]), ("wall time [s]", _missing(summary["wall_s"])),
                ("cell updates per second", _missing(summary["cell_updates_per_s"])),
                ("resolution nx x ny", f"{res['nx']} x {res['ny']}"), ("cell size [m]", res["dx_m"]),
                ("mode", summary["mode"])]
    stations = [[name, *(_missing(s[k]) for k in STATION_FIGURES)] for name, s in (summary.get("stations") or {}).items()]
    nozzle = summary.get("nozzle")
    nozzle_rows, axis_plot = [], None
    if nozzle:
        nozzle_rows = [(f"{label} [{unit}]" if unit else label, _missing(nozzle.get(key)))
                       for label, key, unit in NOZZLE_ROWS]
        if axis is not None:
            axis_plot = _plot(axis_figure(axis, nozzle["throat_x_m"]), "axis distributions")
    history_plots = []
    if history is not None and len(history.get("time_s", [])) > 1:
        for quantity, ylabel in (("mass_flow_kg_s", "mass flow [kg/s]"), ("thrust_n", "thrust [N]"),
                                 ("p_pa", "probe pressure [Pa]"), ("mach", "probe Mach [-]")):
            fig = history_figure(history, quantity, ylabel)
            if fig is not None:
                history_plots.append(_plot(fig, quantity))
    text = render("report.html.j2", summary=summary, description=description, caution=CAUTION,
                  run_rows=run_rows, view_label=VIEWS[view][0], snapshot=_plot(snapshot_figure(sim, view), "snapshot"),
                  stations=stations, nozzle_rows=nozzle_rows, axis_plot=axis_plot, history_plots=history_plots,
                  separation=(nozzle or {}).get("wall_separation"), steady=_steady_block(summary.get("steady")))
    path = Path(path)
    path.write_text(text, encoding="utf-8")
    return path
