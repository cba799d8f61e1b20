"""Pictures and the self-contained HTML report of a batch run.

Plots are drawn with matplotlib (Agg, no display needed) and embedded in the report as base64 PNG,
so report.html is one file that can be mailed or attached to a review.
"""
from __future__ import annotations

import base64
import html
import io
import math
from pathlib import Path
from typing import Any

import numpy as np

from .fields import VIEWS, derived
from .simulation import Simulation

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
    cmap = plt.get_cmap("gray" if view == "schlieren" else "viridis").with_extremes(bad="#8a8a8a")
    finite = field[np.isfinite(field)]
    vmin, vmax = (float(finite.min()), float(finite.max())) if finite.size else (0.0, 1.0)
    if vmax <= vmin:
        vmax = vmin + 1.0
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


def _fmt(value: Any) -> str:
    if value is None:
        return "-"
    if isinstance(value, float):
        return "-" if math.isnan(value) else f"{value:.5g}"
    return html.escape(str(value))


def _table(rows: list[tuple[str, Any]]) -> str:
    body = "".join(f"<tr><th>{html.escape(k)}</th><td>{_fmt(v)}</td></tr>" for k, v in rows)
    return f"<table>{body}</table>"


NOZZLE_ROWS = [
    ("flow regime (1D limits)", "regime", ""),
    ("throat area (mask)", "throat_area_m2", "m^2"),
    ("exit area (mask)", "exit_area_m2", "m^2"),
    ("area ratio Ae/A*", "area_ratio", "-"),
    ("divergence half angle (mask, near exit)", "divergence_half_angle_deg", "deg"),
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

_STYLE = """
body { font-family: sans-serif; max-width: 60em; margin: 1em auto; color: #222; }
table { border-collapse: collapse; margin: 0.5em 0 1em; }
th, td { border: 1px solid #ccc; padding: 0.2em 0.6em; text-align: left; font-size: 0.9em; }
th { background: #f2f2f2; font-weight: normal; }
.caution { border-left: 4px solid #b35900; background: #fff4e5; padding: 0.6em 1em; }
img { max-width: 100%; }
"""


def _steady_parts(st: dict | None) -> list[str]:
    """Station readings averaged over the window, with their unsteadiness (+- half the range), and the residual."""
    if not st or not st.get("window") or not st["window"].get("samples"):
        return []
    w = st["window"]
    parts = [f"<h2>Stations averaged from t = {_fmt(w['from_s'])} s to {_fmt(w['to_s'])} s ({w['samples']} samples)"
             "</h2><table><tr><th>station</th><th>mass flow [kg/s]</th><th>thrust [N]</th><th>mean Mach [-]</th>"
             "<th>mean pressure [Pa]</th></tr>"]
    for name, q in w["stations"].items():
        cells = "".join(f"<td>{_fmt(q[k]['mean'])} &plusmn; {_fmt(q[k]['plus_minus'])}</td>"
                        for k in ("mass_flow_kg_s", "thrust_n", "mean_mach", "mean_pressure_pa"))
        parts.append(f"<tr><td>{html.escape(name)}</td>{cells}</tr>")
    parts.append("</table>")
    settled = "settled" if st["settled"] else ("not settled" if st["until"] == "steady" else "run to a set time")
    parts.append(f"<p>Steady state: {settled}; density residual {_fmt(st['residual'])} (fraction of the mass "
                 f"changing per acoustic transit of {_fmt(st['transit_s'])} s; tolerance {_fmt(st['tolerance'])}); "
                 f"station mass-flow imbalance {_fmt(st['mass_imbalance'])}.</p>")
    return parts


def write_report(path: str | Path, summary: dict, description: str, sim: Simulation, view: str,
                 history: dict[str, np.ndarray] | None, axis: dict[str, np.ndarray] | None = None) -> Path:
    """report.html: run figures, the last snapshot, history plots and, for a nozzle, theory beside simulation."""
    parts = [f"<!DOCTYPE html><html><head><meta charset='utf-8'><title>{html.escape(summary['scenario'])} "
             f"- shockslate run</title><style>{_STYLE}</style></head><body>",
             f"<h1>{html.escape(summary['scenario'])}</h1>",
             f"<p class='caution'>{html.escape(CAUTION)}</p>",
             f"<p>{html.escape(description)}</p>",
             "<h2>Run</h2>",
             _table([("status", summary["status"]), ("simulated time [s]", summary["sim_time_s"]),
                     ("steps", summary["steps"]), ("wall time [s]", summary["wall_s"]),
                     ("cell updates per second", summary["cell_updates_per_s"]),
                     ("resolution nx x ny", f"{summary['resolution']['nx']} x {summary['resolution']['ny']}"),
                     ("cell size [m]", summary["resolution"]["dx_m"]), ("mode", summary["mode"])]),
             f"<h2>Field: {html.escape(VIEWS[view][0])}</h2>",
             f"<img alt='snapshot' src='data:image/png;base64,{_png_base64(snapshot_figure(sim, view))}'>"]
    if summary.get("stations"):
        parts.append("<h2>Stations (end of run)</h2><table><tr><th>station</th><th>mass flow [kg/s]</th>"
                     "<th>thrust [N]</th><th>mean Mach [-]</th><th>mean pressure [Pa]</th><th>area [m^2]</th></tr>")
        for name, s in summary["stations"].items():
            parts.append(f"<tr><td>{html.escape(name)}</td>" + "".join(
                f"<td>{_fmt(s[k])}</td>" for k in ("mass_flow_kg_s", "thrust_n", "mean_mach", "mean_pressure_pa",
                                                  "area_m2")) + "</tr>")
        parts.append("</table>")
        if summary["mode"] == "planar":
            parts.append("<p>Planar mode: mass flow, thrust and areas are per metre of depth.</p>")
        parts.extend(_steady_parts(summary.get("steady")))
    nozzle = summary.get("nozzle")
    if nozzle:
        parts.append("<h2>Nozzle performance against ideal 1D theory</h2>")
        parts.append(_table([(f"{label} [{unit}]" if unit else label, nozzle[key]) for label, key, unit in NOZZLE_ROWS]))
        parts.append("<p>Ideal figures: G. P. Sutton and O. Biblarz, Rocket Propulsion Elements, ch. 3 (choked mass "
                     "flow, c*, C_F at the ideal exit pressure and the actual ambient pressure); divergence factor "
                     "(1 + cos a)/2 for a cone (Malina 1940, quoted there) or sin(a)/a for a planar nozzle; area-Mach "
                     "relation and regime limits: J. D. Anderson, Modern Compressible Flow, ch. 5. Areas are those "
                     "of the rasterised cells. Thrust is integrated over the exit station; C_F and c* use the "
                     "reservoir p0 and the mask's throat area.</p>")
        if axis is not None:
            parts.append(f"<img alt='axis distributions' src='data:image/png;base64,"
                         f"{_png_base64(axis_figure(axis, nozzle['throat_x_m']))}'>")
    if history is not None and len(history.get("time_s", [])) > 1:
        parts.append("<h2>Histories</h2>")
        for quantity, ylabel in (("mass_flow_kg_s", "mass flow [kg/s]"), ("thrust_n", "thrust [N]"),
                                 ("p_pa", "probe pressure [Pa]"), ("mach", "probe Mach [-]")):
            fig = history_figure(history, quantity, ylabel)
            if fig is not None:
                parts.append(f"<img alt='{quantity}' src='data:image/png;base64,{_png_base64(fig)}'>")
    parts.append(f"<p class='caution'>{html.escape(CAUTION)}</p></body></html>\n")
    path = Path(path)
    path.write_text("".join(parts), encoding="utf-8")
    return path
