// Live figures: the top-bar clock, station and probe tables (simulated beside 1D ideal), the
// readout under the cursor, the item lists of the settings column, and the probe histories kept
// for the plot strip.

import * as U from "./units.js";

const $ = (sel) => document.querySelector(sel);

function cell(text, cls) {
  const td = document.createElement("td");
  td.textContent = text;
  if (cls) td.className = cls;
  return td;
}

function percentOff(sim, ideal) {
  if (!(Number.isFinite(sim) && Number.isFinite(ideal)) || ideal === 0) return "";
  const d = (100 * (sim - ideal)) / ideal;
  return ` (${d >= 0 ? "+" : "−"}${Math.abs(d).toFixed(1)}%)`;
}

/**
 * Flow time gained per wall-clock second, measured from the statuses this tab received over the last
 * few seconds (null until two statuses of a running flow are in hand).
 */
export class Pace {
  constructor(windowMs = 3000) {
    this.windowMs = windowMs;
    this.samples = [];
  }

  add(status, nowMs) {
    if (status.state !== "running") { this.samples = []; return; }
    const last = this.samples[this.samples.length - 1];
    if (last && status.time_s < last[1]) this.samples = [];  // the flow started again
    this.samples.push([nowMs, status.time_s]);
    while (this.samples.length > 2 && nowMs - this.samples[0][0] > this.windowMs) this.samples.shift();
  }

  /** Seconds of flow per second of wall time, or null. */
  value() {
    if (this.samples.length < 2) return null;
    const [w0, t0] = this.samples[0], [w1, t1] = this.samples[this.samples.length - 1];
    return w1 > w0 ? (t1 - t0) / ((w1 - w0) / 1000) : null;
  }
}

/**
 * Whether the flow has settled, from the status's `flow` ("settling" or "steady", from the server's density
 * residual, solver/steady.py); the slot hides while the status has none (before the first step after a change).
 */
export function showSteady(status) {
  const box = $("#fig-steady-box");
  const flow = status.flow;
  box.hidden = flow !== "steady" && flow !== "settling";
  if (box.hidden) return;
  $("#fig-steady").textContent = flow;
  $("#fig-steady").dataset.steady = String(flow === "steady");
  if (Number.isFinite(status.residual)) {
    box.title = `whether the flow has stopped changing: ${status.residual.toPrecision(2)} of the mass changes ` +
      "per acoustic transit of the domain (steady below 0.001)";
  }
}

/** Top bar: flow time, pace, state, settled or not; the solver figures (behind a toggle) too. */
export function showClock(status, tabFps, pace = null) {
  $("#fig-time").textContent = U.simTime(status.time_s);
  $("#fig-pace").textContent = pace == null ? "–" : `${U.simTime(pace)}/s`;
  $("#fig-state").textContent = status.state;
  showSteady(status);
  $("#fig-steps").textContent = U.rate(status.steps_per_s || 0, "");
  $("#fig-cells").textContent = U.rate(status.cell_updates_per_s || 0, "");
  $("#fig-frames").textContent = `${U.num(tabFps, 3)} (server ${U.num(status.frames_per_s || 0, 3)})`;
  $("#fig-maxmach").textContent = U.num(status.max_mach, 3);
  if (status.dt_s != null) $("#fig-dt").textContent = U.simTime(status.dt_s);
  if (status.nx != null) $("#fig-grid").textContent = `${status.nx} × ${status.ny}`;
  if (status.undo_depth != null) {
    $("#undo").disabled = status.undo_depth === 0;
    $("#redo").disabled = status.redo_depth === 0;
    $("#undo").title = `undo (Ctrl+Z): ${status.undo_depth} change${status.undo_depth === 1 ? "" : "s"} to undo`;
  }
}

/** A table cell with the simulated figure and, under it, the 1D ideal one. */
function pairCell(simText, idealText, offText) {
  const td = document.createElement("td");
  td.append(Object.assign(document.createElement("div"), { textContent: simText + (offText || "") }));
  if (idealText) td.append(Object.assign(document.createElement("div"), { className: "ideal", textContent: `1D ${idealText}` }));
  return td;
}

export function showStations(status, mode) {
  const body = $("#station-table tbody");
  body.replaceChildren();
  // one unit for the whole area column, chosen by the largest area
  const areaUnit = U.areaUnit((status.stations || []).map((st) => st.area_m2));
  for (const st of status.stations || []) {
    const tr = document.createElement("tr");
    const ideal = st.ideal || null;
    const has = (k) => ideal && ideal[k] != null;
    tr.append(
      cell(st.role && st.role !== st.name ? `${st.name} (${st.role})` : st.name),
      pairCell(U.massFlow(st.mass_flow_kg_s), has("choked_mass_flow_kg_s") && U.massFlow(ideal.choked_mass_flow_kg_s),
        has("choked_mass_flow_kg_s") && percentOff(st.mass_flow_kg_s, ideal.choked_mass_flow_kg_s)),
      pairCell(U.force(st.thrust_n), has("ideal_thrust_n") && U.force(ideal.ideal_thrust_n),
        has("ideal_thrust_n") && percentOff(st.thrust_n, ideal.ideal_thrust_n)),
      pairCell(U.num(st.mean_mach, 3), has("ideal_exit_mach") && U.num(ideal.ideal_exit_mach, 3)),
      cell(U.pressure(st.mean_pressure_pa)),
      pairCell(U.area(st.area_m2, areaUnit), has("area_ratio") && `A/A* ${U.num(ideal.area_ratio, 3)}`),
    );
    tr.dataset.station = st.name;
    body.append(tr);
  }
  if (!(status.stations || []).length) {
    const tr = document.createElement("tr");
    const td = cell("no stations: pick the station tool and drag a line across the flow");
    td.colSpan = 6;
    tr.append(td);
    body.append(tr);
  }
  $("#depth-note").textContent =
    mode === "axisymmetric" ? "figures for the full revolution; grey: ideal 1D for the area ratio"
      : "planar: figures per metre of depth; grey: ideal 1D for the area ratio";
}

export function showProbes(status) {
  const body = $("#probe-table tbody");
  body.replaceChildren();
  for (const pr of status.probes || []) {
    const tr = document.createElement("tr");
    tr.dataset.probe = pr.name;
    tr.append(
      cell(pr.name),
      cell(`${U.num(pr.x_m * 1e3, 3)}, ${U.num(pr.y_m * 1e3, 3)} mm`),
      cell(U.pressure(pr.p_pa)),
      cell(U.temperature(pr.t_k)),
      cell(U.density(pr.rho_kg_m3)),
      cell(U.num(pr.mach, 3)),
    );
    body.append(tr);
  }
  const warn = $("#warnings");
  warn.replaceChildren(...(status.warnings || []).map((w) => Object.assign(document.createElement("li"), { textContent: w })));
}

/** The values under the cursor, from an `inspect` reply. */
export function showReadout(reply) {
  const dl = $("#readout-values");
  const rows = [
    ["x", U.length(reply.x_m)],
    ["y", U.length(reply.y_m)],
    ["cell", reply.kind || "–"],
    ["p", U.pressure(reply.p_pa)],
    ["T", U.temperature(reply.t_k)],
    ["ρ", U.density(reply.rho_kg_m3)],
    ["u", U.speed(reply.u_m_s)],
    ["v", U.speed(reply.v_m_s)],
    ["speed", reply.u_m_s == null ? "–" : U.speed(Math.hypot(reply.u_m_s, reply.v_m_s))],
    ["Mach", U.num(reply.mach, 3)],
  ];
  dl.replaceChildren(
    ...rows.map(([k, v]) => {
      const div = document.createElement("div");
      div.append(Object.assign(document.createElement("dt"), { textContent: k }),
        Object.assign(document.createElement("dd"), { textContent: v }));
      div.dataset.key = k;
      return div;
    }),
  );
}

function listItem(text, onRemove, title) {
  const li = document.createElement("li");
  li.append(Object.assign(document.createElement("span"), { textContent: text }));
  const b = Object.assign(document.createElement("button"), { textContent: "remove", title });
  b.addEventListener("click", onRemove);
  li.append(b);
  return li;
}

function describeShape(sh) {
  const mm = (v) => U.num(v * 1e3, 3);
  switch (sh.kind) {
    case "stroke": return `${sh.paints} stroke, ${sh.points_m.length} points, ${mm(sh.width_m)} mm wide`;
    case "segment": return `${sh.paints} segment, ${mm(sh.width_m)} mm wide`;
    case "rectangle": return `${sh.paints} rectangle ${mm(Math.abs(sh.corner_b_m[0] - sh.corner_a_m[0]))} × ${mm(Math.abs(sh.corner_b_m[1] - sh.corner_a_m[1]))} mm`;
    case "polygon": return `${sh.paints} polygon, ${sh.points_m.length} corners`;
    case "circle": return `${sh.paints} circle r ${mm(sh.radius_m)} mm`;
    default: return sh.kind;
  }
}

/** Shapes, stations and probes with remove buttons. */
export function showLists(app) {
  const sc = app.scenario;
  const shapes = (sc.sketch && sc.sketch.shapes) || [];
  $("#shape-list").replaceChildren(
    ...shapes.map((sh, n) => listItem(describeShape(sh), () => app.send("remove_shape", { index: n }), "remove this shape")),
  );
  $("#station-list").replaceChildren(
    ...(sc.stations || []).map((st) => listItem(st.role && st.role !== st.name ? `${st.name} (${st.role})` : st.name,
      () => app.send("remove_station", { name: st.name }), "remove this station")),
  );
  $("#probe-list").replaceChildren(
    ...(sc.probes || []).map((pr) => listItem(`${pr.name} at ${U.num(pr.x_m * 1e3, 4)}, ${U.num(pr.y_m * 1e3, 4)} mm`,
      () => app.send("remove_probe", { name: pr.name }), "remove this probe")),
  );
}

const val = (v) => (v == null ? NaN : v);
const STATION_KEYS = ["mass_flow_kg_s", "thrust_n", "mean_mach", "mean_pressure_pa"];

/**
 * Probe and station time histories for the plot strip: seeded from the server's `history` when the tab
 * joins (so a tab opened later sees what happened before), then one sample per status; cleared when
 * time runs backwards (reset flow).
 */
export class Histories {
  constructor(limit = 3000) {
    this.limit = limit;
    this.byName = new Map();
    this.stations = new Map();
    this.lastTime = -Infinity;
  }

  /** Take the server's `history` message (columns per probe and station). */
  seed(msg) {
    this.byName.clear();
    this.stations.clear();
    this.lastTime = -Infinity;
    for (const [name, c] of Object.entries(msg.probes || {})) {
      this.byName.set(name, {
        t: c.time_s.slice(), p_pa: c.p_pa.map(val), t_k: c.t_k.map(val), rho_kg_m3: c.rho_kg_m3.map(val),
        mach: c.mach.map(val), speed: c.u_m_s.map((u, k) => (u == null || c.v_m_s[k] == null ? NaN : Math.hypot(u, c.v_m_s[k]))),
      });
      this.lastTime = Math.max(this.lastTime, c.time_s[c.time_s.length - 1] ?? -Infinity);
    }
    for (const [name, c] of Object.entries(msg.stations || {})) {
      const h = { t: c.time_s.slice() };
      for (const k of STATION_KEYS) h[k] = c[k].map(val);
      this.stations.set(name, h);
      this.lastTime = Math.max(this.lastTime, c.time_s[c.time_s.length - 1] ?? -Infinity);
    }
  }

  trim(h) {
    if (h.t.length > this.limit) for (const k in h) h[k].splice(0, h[k].length - this.limit);
  }

  add(status) {
    if (status.time_s < this.lastTime) { this.byName.clear(); this.stations.clear(); }
    if (status.time_s === this.lastTime) return;
    this.lastTime = status.time_s;
    for (const pr of status.probes || []) {
      if (!this.byName.has(pr.name)) this.byName.set(pr.name, { t: [], p_pa: [], t_k: [], rho_kg_m3: [], mach: [], speed: [] });
      const h = this.byName.get(pr.name);
      h.t.push(status.time_s);
      h.p_pa.push(val(pr.p_pa));
      h.t_k.push(val(pr.t_k));
      h.rho_kg_m3.push(val(pr.rho_kg_m3));
      h.mach.push(val(pr.mach));
      h.speed.push(pr.u_m_s == null ? NaN : Math.hypot(pr.u_m_s, pr.v_m_s));
      this.trim(h);
    }
    for (const st of status.stations || []) {
      if (!this.stations.has(st.name)) this.stations.set(st.name, Object.fromEntries([["t", []], ...STATION_KEYS.map((k) => [k, []])]));
      const h = this.stations.get(st.name);
      h.t.push(status.time_s);
      for (const k of STATION_KEYS) h[k].push(val(st[k]));
      this.trim(h);
    }
  }
}
