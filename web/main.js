// The page: one picture of the live flow, drawn from the server's frames, with the sketch and
// measurements over it, and the controls that steer the one simulation the server runs.
// The server owns the scenario and the flow; the page draws and sends intents.

import { DEFAULT_MAP, DIVERGING, MAPS, frameLookup, setMaps } from "./colourmaps.js";
import { drawColourBar } from "./colourbar.js";
import { Connection } from "./connection.js";
import { Histories, Pace, showClock, showLists, showProbes, showReadout, showStations } from "./figures.js";
import { fetchExport, safeName, setupFiles, showExportList, showScenarioList, syncScenarioPick, download } from "./files.js";
import { fillInitial, setupInitial } from "./initial.js";
import { decodeFrame } from "./frame.js";
import { designMessage, setupDialogs } from "./dialogs.js";
import { drawSeparation, engineMessage } from "./engine.js";
import { Placement } from "./geometry.js";
import { drawArrows, drawAxis, drawInitial, drawProbes, drawShape, drawSketch, drawSonicLine, drawStations, STATION_COLOUR } from "./overlays.js";
import { applyLimits, fillChoices, fillPanels, setupPanels } from "./panels.js";
import { drawPlot } from "./plotstrip.js";
import { SketchTools } from "./sketch.js";
import { Presenter } from "./presenter.js";
import { WaveDiagram } from "./xt_diagram.js";
import { Comparison } from "./compare.js";
import * as U from "./units.js";

const $ = (sel) => document.querySelector(sel);
const $$ = (sel) => Array.from(document.querySelectorAll(sel));

const TOOL_HINTS = {
  look: "Move over the picture to read the values there.",
  stroke: "Hold the button and draw. The band is the width.",
  segment: "Drag from one end to the other.",
  rectangle: "Drag from one corner to the opposite one.",
  polygon: "Click the corners; double-click, Enter or click the first corner to close. Esc drops it.",
  circle: "Drag from the centre outwards.",
  station: "Drag a line across the flow to measure mass flow and thrust through it.",
  probe: "Click a point to follow p, T, ρ and Mach there over time.",
};

const app = {
  conn: null,
  views: [],
  viewName: "pressure",
  mapName: "kiln",
  vocabulary: null,
  range: "auto",
  scenario: null,
  revision: -1,
  awaitingScenario: false, // a sketch_change was missed: the whole scenario is asked for and skipped changes wait
  state: "paused",
  status: null,
  frame: null,
  frameCanvas: document.createElement("canvas"),
  frameTimes: [],
  framesDrawn: 0,
  overlay: { sonic_line: [], arrows: [] },
  hover: null,
  lastInspectAt: 0,
  inspectTimer: null,
  tool: "look",
  paints: "wall",
  place: null,
  histories: new Histories(),
  pace: new Pace(),
  edited: false,
  origin: null,
  labelBoxes: [],
  profile: null,
  profileTimer: null,
  drawQueued: false,
  lastSize: "",
};

// ------------------------------------------------------------------ messages to the server

app.send = (type, fields = {}) => app.conn.send(type, fields);

/** A visible message; "note" fades after 4 s, "error" after 20 s, "lasting" stays until dismissed. */
app.showMessage = (text, kind = "error", field = null) => {
  const box = $("#messages");
  const div = document.createElement("div");
  div.className = `message ${kind === "error" ? "" : "note"}`;
  div.dataset.kind = kind;
  if (field) div.dataset.field = field;
  div.append(Object.assign(document.createElement("span"), { textContent: text }));
  const close = Object.assign(document.createElement("button"), { className: "close", textContent: "×", title: "dismiss" });
  close.addEventListener("click", () => div.remove());
  div.append(close);
  box.prepend(div);
  while (box.children.length > 4) box.lastChild.remove();
  if (kind !== "lasting") setTimeout(() => div.remove(), kind === "note" ? 4000 : 20000);
};

/**
 * A refusal from the server, as it sent it: the plain sentence first, then which field and request it
 * was about (field, value, rule and allowed stay on the message element for tests and styling).
 */
function showServerError(msg) {
  const where = [msg.request && msg.request !== "unknown" ? msg.request : "", msg.field].filter(Boolean).join(": ");
  const text = `${msg.message || `${msg.field} was refused.`}${where ? ` (${where})` : ""}`;
  // a harmless no-op (undo with nothing to undo, clearing an empty sketch ...) is a calm note, not a red error
  app.showMessage(text, msg.harmless ? "note" : "error", msg.harmless ? null : msg.field);
  const box = $("#messages").firstElementChild;
  if (box) {
    box.dataset.rule = msg.rule || "";
    box.dataset.allowed = msg.allowed || "";
  }
  if (msg.field && !msg.harmless) {
    const leaf = String(msg.field).split(".").pop();
    for (const el of $$(`[data-field="${msg.field}"], [data-field="${leaf}"]`)) el.classList.add("invalid");
  }
}

function showDiverged(msg) {
  const box = $("#diverged");
  const where = msg.x_m != null ? ` at x ${U.length(msg.x_m)}, y ${U.length(msg.y_m)}` : "";
  $("#diverged-what").textContent =
    `${msg.message || "The solution blew up."} Step ${msg.step}, sim time ${U.simTime(msg.time_s || 0)}${where}` +
    (msg.variable ? `, in ${msg.variable}` : "") + ". The run is paused and the last good state kept.";
  const advice = msg.advice && msg.advice.length ? msg.advice :
    ["Lower the CFL number (0.2 is safe).", "Switch to first order.", "Soften the conditions: a smaller pressure ratio."];
  $("#diverged-advice").replaceChildren(...advice.map((a) => Object.assign(document.createElement("li"), { textContent: a })));
  box.hidden = false;
}

// ------------------------------------------------------------------ the picture

function domain() {
  return app.scenario ? app.scenario.domain : { x_min_m: 0, x_max_m: 1, y_min_m: 0, y_max_m: 0.5 };
}

function wholeShown() {
  return !!(app.scenario && app.scenario.mode === "axisymmetric" && $("#ov-whole").checked);
}

/** Size the canvas to the domain's shape within the space the stage gives it. */
function layoutCanvas() {
  const wrap = $("#canvas-wrap");
  const canvas = $("#view");
  const dom = domain();
  const whole = wholeShown();
  const aspect = Placement.aspect(dom, whole);
  const maxW = Math.max(200, wrap.clientWidth);
  const maxH = Math.max(160, window.innerHeight * (app.presenter && app.presenter.presenting ? 0.8 : 0.62));
  let w = maxW, h = w * aspect;
  if (h > maxH) { h = maxH; w = h / aspect; }
  w = Math.floor(w); h = Math.floor(h);
  const dpr = window.devicePixelRatio || 1;
  canvas.style.width = `${w}px`;
  const band = app.presenter ? app.presenter.bandPx(w) : 0; // room for the presenter's labels under the flow
  canvas.style.height = `${h + band}px`;
  canvas.width = Math.round(w * dpr);
  canvas.height = Math.round((h + band) * dpr);
  app.place = new Placement(dom, w, h, whole);
  $("#ov-whole-label").hidden = !(app.scenario && app.scenario.mode === "axisymmetric");
  const rect = app.place.flowRect();
  const size = `${Math.round(rect.width)}x${Math.round(rect.height)}`;
  if (size !== app.lastSize) {
    app.lastSize = size;
    sendView();
  }
  scheduleDraw();
}

function sendView() {
  if (!app.place) return;
  const rect = app.place.flowRect();
  app.send("set_view", {
    view: app.viewName,
    width: clampTo("view.width", Math.round(rect.width)),
    height: clampTo("view.height", Math.round(rect.height)),
    range: app.range,
    overlays: [["sonic_line", "#ov-sonic"], ["arrows", "#ov-arrows"]].filter(([, id]) => $(id).checked).map(([name]) => name),
  });
}

/** A number kept within the limits the server gave for `path` (hello.vocabulary.limits). */
function clampTo(path, value) {
  const lim = (app.vocabulary && app.vocabulary.limits[path]) || {};
  return Math.min(lim.max ?? value, Math.max(lim.min ?? value, value));
}

function viewInfo(index) {
  return app.views[index] || app.views.find((v) => v.name === app.viewName) || { name: app.viewName, label: app.viewName, unit: "" };
}

/** Views whose sign flips under reflection about the axis (omega_z = dv/dx - du/dy with v -> -v). */
const SIGN_ODD_VIEWS = new Set(["vorticity"]);

function paintInto(canvas, f, lut) {
  if (canvas.width !== f.width || canvas.height !== f.height) { canvas.width = f.width; canvas.height = f.height; }
  const ctx = canvas.getContext("2d");
  const img = ctx.createImageData(f.width, f.height);
  const words = new Uint32Array(img.data.buffer);
  const levels = f.levels;
  for (let k = 0; k < levels.length; k++) words[k] = lut[levels[k]];
  ctx.putImageData(img, 0, 0);
}

/** Paint the frame's levels into the off-screen image(s) with the chosen colour map. */
function paintFrame() {
  const f = app.frame;
  if (!f) return;
  paintInto(app.frameCanvas, f, frameLookup(app.mapName, f.min, f.max));
  const odd = SIGN_ODD_VIEWS.has(viewInfo(f.viewIndex).name);
  app.reflectedCanvas = null;
  if (odd && wholeShown()) {
    if (!app.negatedCanvas) app.negatedCanvas = document.createElement("canvas");
    paintInto(app.negatedCanvas, f, frameLookup(app.mapName, f.min, f.max, true));
    app.reflectedCanvas = app.negatedCanvas;
  }
}

function scheduleDraw() {
  if (app.drawQueued) return;
  app.drawQueued = true;
  requestAnimationFrame(() => {
    app.drawQueued = false;
    drawPicture();
  });
}

function drawPicture() {
  const canvas = $("#view");
  const place = app.place;
  if (!place) return;
  const dpr = window.devicePixelRatio || 1;
  const ctx = canvas.getContext("2d");
  ctx.setTransform(dpr, 0, 0, dpr, 0, 0);
  ctx.fillStyle = "#0b0e11";
  ctx.fillRect(0, 0, place.widthPx, canvas.height / dpr);
  const rect = place.flowRect();
  if (app.frame) {
    ctx.imageSmoothingEnabled = true;
    ctx.drawImage(app.frameCanvas, rect.left, rect.top, rect.width, rect.height);
    if (place.mirrorBelowAxis) {
      ctx.save();
      ctx.translate(0, 2 * (rect.top + rect.height));
      ctx.scale(1, -1);
      ctx.drawImage(app.reflectedCanvas || app.frameCanvas, rect.left, rect.top, rect.width, rect.height);
      ctx.restore();
    }
  }
  const sc = app.scenario;
  if (sc) {
    if (place.mirrorBelowAxis) drawAxis(ctx, place);
    if ($("#ov-sonic").checked) drawSonicLine(ctx, place, app.overlay.sonic_line);
    if ($("#ov-arrows").checked) drawArrows(ctx, place, app.overlay.arrows);
    if ($("#ov-outline").checked) {
      drawSketch(ctx, place, sc.sketch, sc.domain);
      drawInitial(ctx, place, sc.initial, sc.domain);
    }
    if ($("#ov-marks").checked) {
      app.labelBoxes = drawStations(ctx, place, sc.stations, []);
      drawProbes(ctx, place, sc.probes);
      drawSeparation(ctx, place, app.status && app.status.separation);
    } else app.labelBoxes = [];
  }
  if (app.presenter) app.presenter.drawOn(ctx, place, canvas.height / dpr);
  const draft = app.tools && app.tools.draft;
  if (draft) {
    if (draft.kind === "station") drawStations(ctx, place, [{ name: "new station", ...draft }]);
    else drawShape(ctx, place, draft, "draft");
  }
  app.framesDrawn++;
}

function updateColourBar() {
  const f = app.frame;
  const info = viewInfo(f ? f.viewIndex : -1);
  const { unit, scale } = U.displayUnit(info.unit);
  const lo = f ? f.min / scale : NaN, hi = f ? f.max / scale : NaN;
  drawColourBar($("#colour-bar"), app.mapName, lo, hi);
  const held = app.range !== "auto";
  $("#bar-caption").textContent = `${info.label}${unit ? `, ${unit}` : ""} — ${held ? "fixed range" : "auto range"}` +
    (f ? ` · ${U.simTime(f.timeS)}, step ${f.step}` : "");
  $("#range-unit").textContent = unit;
  if (!held && f) {
    for (const [id, v] of [["#range-min", lo], ["#range-max", hi]]) {
      if (document.activeElement !== $(id)) $(id).value = U.compact(v, 4);
    }
  }
}

function onFrame(buffer) {
  let f;
  try {
    f = decodeFrame(buffer);
  } catch (err) {
    console.warn(err.message);
    return;
  }
  if (app.presenter && !app.presenter.takeFrame(f)) return;
  app.frame = f;
  const now = performance.now();
  if (f.channel !== 3) app.frameTimes.push(now); // a held frame (PROTOCOL.md) is no new picture
  while (app.frameTimes.length && now - app.frameTimes[0] > 2000) app.frameTimes.shift();
  paintFrame();
  updateColourBar();
  scheduleDraw();
}

function tabFps() {
  const now = performance.now();
  const t = app.frameTimes.filter((x) => now - x <= 2000);
  if (t.length < 2) return 0;
  return t.length / (Math.max(now - t[0], 1000) / 1000);
}

// ------------------------------------------------------------------ view controls

/** The colour maps the server sent: fill the picker and start each view on its own map. */
function takeColourMaps(sent) {
  setMaps(sent || {});
  const mapSel = $("#map-select");
  mapSel.replaceChildren(...Array.from(MAPS.keys()).map((name) => new Option(name + (DIVERGING.has(name) ? " (diverging)" : ""), name)));
  if (!MAPS.has(app.mapName)) app.mapName = DEFAULT_MAP[app.viewName] || mapSel.options[0].value;
  mapSel.value = app.mapName;
}

function setupViewControls() {
  const mapSel = $("#map-select");
  mapSel.addEventListener("change", () => {
    app.mapName = mapSel.value;
    paintFrame();
    updateColourBar();
    scheduleDraw();
  });
  $("#view-select").addEventListener("change", (ev) => {
    app.viewName = ev.target.value;
    app.mapName = DEFAULT_MAP[app.viewName] || app.mapName;
    mapSel.value = app.mapName;
    app.range = "auto";
    $("#range-hold").checked = false;
    setRangeInputs();
    sendView();
  });
  $("#range-hold").addEventListener("change", (ev) => {
    if (ev.target.checked) holdRange();
    else {
      app.range = "auto";
      sendView();
    }
    setRangeInputs();
  });
  for (const id of ["#range-min", "#range-max"]) $(id).addEventListener("change", () => holdRange());
  for (const id of ["#ov-outline", "#ov-marks"]) $(id).addEventListener("change", scheduleDraw);
  for (const id of ["#ov-sonic", "#ov-arrows"]) $(id).addEventListener("change", () => { sendView(); scheduleDraw(); });
  $("#ov-whole").addEventListener("change", () => { layoutCanvas(); paintFrame(); });
}

function setRangeInputs() {
  const held = app.range !== "auto";
  $("#range-min").disabled = !held;
  $("#range-max").disabled = !held;
}

function holdRange() {
  const info = viewInfo(app.frame ? app.frame.viewIndex : -1);
  const { scale } = U.displayUnit(info.unit);
  const lo = Number($("#range-min").value), hi = Number($("#range-max").value);
  if (!(Number.isFinite(lo) && Number.isFinite(hi) && hi > lo)) {
    app.showMessage(`The range needs two numbers with the upper above the lower (got ${$("#range-min").value} to ${$("#range-max").value}).`, "error", "range");
    return;
  }
  app.range = [lo * scale, hi * scale];
  sendView();
}

app.refreshUnits = () => {
  updateColourBar();
  if (app.status) {
    showStations(app.status, app.scenario && app.scenario.mode);
    showProbes(app.status);
  }
  drawStrip();
};

// ------------------------------------------------------------------ tools

function settings() {
  return {
    tool: app.tool,
    paints: app.paints,
    widthMm: Number($("#width-mm").value) || 1,
    snapMm: Number($("#snap-mm").value) || 0,
  };
}

function uniqueName(prefix, items) {
  const taken = new Set((items || []).map((it) => it.name));
  for (let n = 1; ; n++) if (!taken.has(`${prefix}${n}`)) return `${prefix}${n}`;
}

function setTool(tool) {
  app.tool = tool;
  for (const b of $$("#tools [data-tool]")) b.setAttribute("aria-checked", String(b.dataset.tool === tool));
  $("#view").dataset.tool = tool;
  $("#tool-hint").textContent = TOOL_HINTS[tool] || "";
  $("#station-role-field").hidden = tool !== "station";
  $("#paints-block").hidden = tool === "station" || tool === "probe" || tool === "look";
  if (app.tools) app.tools.cancel();
}

function setPaint(paint) {
  app.paints = paint;
  for (const b of $$("#paints [data-paint]")) b.setAttribute("aria-checked", String(b.dataset.paint === paint));
}

function requestInspect() {
  if (!app.hover) return;
  const wait = 70 - (performance.now() - app.lastInspectAt);
  if (wait > 0) {
    if (!app.inspectTimer) app.inspectTimer = setTimeout(() => { app.inspectTimer = null; requestInspect(); }, wait);
    return;
  }
  app.lastInspectAt = performance.now();
  app.send("inspect", { x_m: app.hover[0], y_m: app.hover[1] });
}

/** One button per paint the server offers (hello.vocabulary.choices.paint). */
function buildPaints() {
  const paints = (app.vocabulary && app.vocabulary.choices.paint) || [];
  $("#paints").replaceChildren(...paints.map((c) => {
    const b = document.createElement("button");
    b.dataset.paint = c.name;
    b.append(Object.assign(document.createElement("i"), { className: "swatch" }), c.label);
    b.addEventListener("click", () => setPaint(c.name));
    return b;
  }));
  setPaint(paints.some((c) => c.name === app.paints) ? app.paints : (paints[0] || { name: app.paints }).name);
}

function setupTools() {
  for (const b of $$("#tools [data-tool]")) b.addEventListener("click", () => setTool(b.dataset.tool));
  setTool("look");
  app.tools = new SketchTools($("#view"), () => app.place, settings, {
    onShape: (shape) => app.send("add_shape", { shape }),
    onStation: (start_m, end_m) => {
      const role = $("#station-role").value;
      app.send("add_station", {
        name: uniqueName("S", app.scenario && app.scenario.stations), start_m, end_m, ...(role ? { role } : {}),
      });
    },
    onProbe: ([x_m, y_m]) => app.send("add_probe", { name: uniqueName("P", app.scenario && app.scenario.probes), x_m, y_m }),
    onHover: (point, shown) => {
      app.hover = point;
      app.hoverBelowAxis = !!(point && shown && shown[1] < 0);
      requestInspect();
    },
    onDraft: scheduleDraw,
  });
  $("#undo").addEventListener("click", () => app.send("undo"));
  $("#redo").addEventListener("click", () => app.send("redo"));
  $("#clear-sketch").addEventListener("click", () => app.send("clear_sketch"));
  $("#clear-all").addEventListener("click", () => app.send("clear_all"));
  $("#mirror").addEventListener("change", (ev) => app.send("set_mirror", { mirror: ev.target.value }));
}

/** Settle mode (the `settle` status field, set from any tab): the tick and the notice that the flow shown is
 * no time history. */
function showSettle(on, grid) {
  $("#settle-mode").checked = on;
  $("#settle-notice").hidden = !on;
  $("#settle-grid").textContent = on ? settleGridText(grid) : "";
}

/** Which grid level of settle mode's grid sequence the picture shows (the status's `settle_grid`). */
function settleGridText(grid) {
  if (!grid) return "";
  const yours = `your grid of ${grid.fine_nx} × ${grid.fine_ny} cells`;
  const note = grid.note ? ` (${grid.note})` : "";
  if (grid.levels == null) return `Grid sequencing starts with the next step: coarse grids first, then ${yours}.`;
  if (grid.levels === 1) return `Grid level 1 of 1: ${yours} (too few cells to start on a coarser one)${note}.`;
  if (grid.level < grid.levels) {
    return `Grid level ${grid.level} of ${grid.levels}: a coarse grid of ${grid.nx} × ${grid.ny} cells, ` +
      `started from the initial state; ${yours} follows once it has settled.`;
  }
  return `Grid level ${grid.level} of ${grid.levels}: ${yours}${note}.`;
}

function toggleRun() {
  app.send(app.state === "running" ? "pause" : "run");
}

function setupRunControls() {
  $("#run-toggle").addEventListener("click", toggleRun);
  $("#step-once").addEventListener("click", () => {
    const n = Math.round(Number($("#step-count").value));
    app.send("step", { count: Number.isFinite(n) ? n : 1 });
  });
  $("#reset-flow").addEventListener("click", () => app.send("reset_flow"));
  $("#settle-mode").addEventListener("change", (ev) => app.send("settle", { on: ev.target.checked }));
  $("#fix-halve-cfl").addEventListener("click", () => {
    const cfl = app.scenario ? app.scenario.numerics.cfl : 0.4;
    app.send("set_numerics", { cfl: Math.max(0.05, Math.round(cfl * 50) / 100) });
  });
  $("#fix-first-order").addEventListener("click", () => app.send("set_numerics", { order: 1 }));
  $("#fix-reset").addEventListener("click", () => { app.send("reset_flow"); $("#diverged").hidden = true; });
  $("#diverged-close").addEventListener("click", () => { $("#diverged").hidden = true; });

  document.addEventListener("keydown", (e) => {
    const t = e.target;
    const typing = t instanceof HTMLInputElement || t instanceof HTMLSelectElement || t instanceof HTMLTextAreaElement;
    if ((e.ctrlKey || e.metaKey) && (e.key === "z" || e.key === "Z")) {
      if (typing && t.type === "text") return;
      e.preventDefault();
      app.send(e.shiftKey ? "redo" : "undo");
    } else if ((e.ctrlKey || e.metaKey) && e.key === "y") {
      e.preventDefault();
      app.send("redo");
    } else if (e.key === " " && !typing) {
      e.preventDefault();
      toggleRun();
    } else if (e.key === "Escape") {
      app.tools.cancel();
    } else if (e.key === "Enter" && !typing && app.tool === "polygon") {
      app.tools.closePolygon();
    }
  });
}

function showRunState(state) {
  app.state = state;
  const b = $("#run-toggle");
  b.textContent = state === "running" ? "Pause" : "Run";
  b.dataset.running = String(state === "running");
  $("#fig-state").textContent = state;
}

// ------------------------------------------------------------------ plot strip

function setupStrip() {
  $("#plot-source").addEventListener("change", () => { fillQuantities(); app.profile = null; requestProfile(); drawStrip(); });
  $("#plot-quantity").addEventListener("change", drawStrip);
  app.profileTimer = setInterval(requestProfile, 1000);
}

function fillSources() {
  const sel = $("#plot-source");
  const keep = sel.value;
  const sc = app.scenario;
  const opts = [];
  for (const pr of sc.probes || []) opts.push([`probe:${pr.name}`, `probe ${pr.name} over time`]);
  for (const st of sc.stations || []) opts.push([`station:${st.name}`, `along station ${st.name}`]);
  for (const st of sc.stations || []) opts.push([`stationt:${st.name}`, `station ${st.name} over time`]);
  opts.push(["axis", sc.mode === "axisymmetric" ? "along the axis" : "along y = 0"]);
  sel.replaceChildren(...opts.map(([v, t]) => new Option(t, v)));
  if (opts.some(([v]) => v === keep)) sel.value = keep;
  fillQuantities();
}

function fillQuantities() {
  const sel = $("#plot-quantity");
  const keep = sel.value;
  const src = $("#plot-source").value || "";
  const opts = src.startsWith("probe:")
    ? [["p_pa", "pressure"], ["t_k", "temperature"], ["rho_kg_m3", "density"], ["mach", "Mach number"], ["speed", "speed"]]
    : src.startsWith("stationt:")
      ? [["mass_flow_kg_s", "mass flow"], ["thrust_n", "thrust"], ["mean_mach", "mean Mach number"], ["mean_pressure_pa", "mean pressure"]]
      : [["mach", "Mach number"], ["p_pa", "pressure"]];
  sel.replaceChildren(...opts.map(([v, t]) => new Option(t, v)));
  if (opts.some(([v]) => v === keep)) sel.value = keep;
}

function requestProfile() {
  const src = $("#plot-source").value || "";
  if (src.startsWith("station:")) app.send("profile", { station: src.slice(8) });
  else if (src === "axis") app.send("profile", { axis: true });
}

function quantityLabel(q) {
  return {
    p_pa: `pressure, ${U.getPressureUnit()}`, t_k: "temperature, K", rho_kg_m3: "density, kg/m³",
    mach: "Mach number", speed: "speed, m/s", mass_flow_kg_s: "mass flow, kg/s", thrust_n: "thrust, N",
    mean_mach: "mean Mach number", mean_pressure_pa: `mean pressure, ${U.getPressureUnit()}`,
  }[q];
}

function quantityScale(q) {
  return q === "p_pa" || q === "mean_pressure_pa" ? U.PRESSURE_UNITS[U.getPressureUnit()] : 1;
}

/** Isentropic static pressure for a Mach number from the reservoir's p0 and the gas's gamma. */
function isentropicP(mach) {
  const g = app.scenario.gas.gamma;
  const p0 = app.scenario.conditions.reservoir.p0_pa;
  return p0 * Math.pow(1 + 0.5 * (g - 1) * mach * mach, -g / (g - 1));
}

function drawStrip() {
  const canvas = $("#plot");
  const src = $("#plot-source").value || "";
  const q = $("#plot-quantity").value || "mach";
  const scale = quantityScale(q);
  if (src.startsWith("probe:")) {
    const h = app.histories.byName.get(src.slice(6));
    const series = h ? [{ name: src.slice(6), xs: h.t.map((t) => t * 1e3), ys: h[q].map((v) => v / scale) }] : [];
    drawPlot(canvas, series, { xLabel: "flow time, ms", yLabel: quantityLabel(q) }, "no history yet: run the flow");
    return;
  }
  if (src.startsWith("stationt:")) {
    const h = app.histories.stations.get(src.slice(9));
    const series = h && h[q] ? [{ name: src.slice(9), xs: h.t.map((t) => t * 1e3), ys: h[q].map((v) => v / scale), colour: STATION_COLOUR }] : [];
    drawPlot(canvas, series, { xLabel: "flow time, ms", yLabel: quantityLabel(q) }, "no history yet: run the flow");
    return;
  }
  const pr = app.profile;
  const want = src === "axis" ? "axis" : src.slice(8);
  if (!pr || (pr.station || "axis") !== want || !pr.s_m) {
    drawPlot(canvas, [], {}, "waiting for the distribution…");
    return;
  }
  const xs = pr.s_m.map((s) => s * 1e3);
  const series = [{ name: "simulated", xs, ys: (pr[q] || []).map((v) => v / scale), colour: STATION_COLOUR }];
  if (pr.ideal_mach) {
    const ideal = q === "mach" ? pr.ideal_mach : pr.ideal_mach.map((m) => (m == null ? NaN : isentropicP(m) / scale));
    series.push({ name: "isentropic 1D", xs, ys: ideal.map((v) => (v == null ? NaN : v)), dashed: true, colour: "#c9d1d9" });
  }
  const axisLabel = app.scenario.mode === "axisymmetric" ? "x along the axis, mm" : "x along y = 0, mm";
  drawPlot(canvas, series, { xLabel: src === "axis" ? axisLabel : "distance along the station, mm", yLabel: quantityLabel(q) });
}

// ------------------------------------------------------------------ picture export

app.exportPicture = () => {
  const view = $("#view");
  const bar = $("#colour-bar");
  const dpr = window.devicePixelRatio || 1;
  const out = document.createElement("canvas");
  const captionH = Math.round(26 * dpr);
  out.width = view.width;
  out.height = view.height + bar.height + captionH;
  const ctx = out.getContext("2d");
  ctx.fillStyle = "#111519";
  ctx.fillRect(0, 0, out.width, out.height);
  ctx.drawImage(view, 0, 0);
  ctx.drawImage(bar, 0, view.height, out.width, bar.height * (out.width / bar.width));
  ctx.fillStyle = "#e6e2d6";
  ctx.font = `${Math.round(12 * dpr)}px system-ui, sans-serif`;
  const name = app.scenario ? app.scenario.name : "";
  ctx.fillText(`${name} · ${$("#bar-caption").textContent} · shockslate (inviscid perfect-gas model)`, 8 * dpr, out.height - 8 * dpr);
  out.toBlob((blob) => {
    if (blob) download(blob, `${safeName(name)}-${app.viewName}.png`);
  }, "image/png");
};

// ------------------------------------------------------------------ incoming messages

function takeScenario(scenario, revision, edited, origin) {
  const before = app.scenario;
  app.scenario = scenario;
  if (revision !== undefined) app.revision = revision;
  app.edited = !!edited;
  app.origin = origin || scenario.name;
  // the scenario on screen: its name, whether it was changed since loading, and its description
  $("#scenario-name").textContent = scenario.name;
  $("#scenario-name").title = scenario.description || "the scenario on screen";
  $("#current-name").textContent = scenario.name;
  $("#current-description").textContent = scenario.description || "(no description)";
  for (const id of ["#scenario-edited", "#current-edited"]) $(id).hidden = !app.edited;
  $("#save-name").placeholder = scenario.name;
  // point the open list at the scenario on screen when that changes (not at every edit: a pick stays)
  const shown = `${scenario.name}\n${app.origin}`;
  if (shown !== app.pickSynced) {
    app.pickSynced = shown;
    syncScenarioPick({ name: scenario.name, origin: app.origin });
  }
  fillPanels(app);
  fillInitial(app);
  showLists(app);
  fillSources();
  if (app.waves) app.waves.fillChoices();
  if (app.compare) app.compare.fillChoices();
  const d0 = before && before.domain, d1 = scenario.domain;
  const reshaped = !before || before.mode !== scenario.mode ||
    ["x_min_m", "x_max_m", "y_min_m", "y_max_m"].some((k) => d0[k] !== d1[k]);
  if (reshaped) {
    app.lastSize = "";
    layoutCanvas();
  } else scheduleDraw();
}

/** One shape inserted or removed (server/PROTOCOL.md `sketch_change`): applied to this tab's copy when that is
 * the revision it starts from; a tab that missed a change asks for the whole scenario and waits for it. */
function takeSketchChange(msg) {
  if (!app.scenario || msg.revision <= app.revision || app.awaitingScenario) return; // held already, or coming whole
  if (msg.base_revision !== app.revision) {
    app.awaitingScenario = true;
    app.send("get_scenario");
    return;
  }
  const shapes = app.scenario.sketch.shapes.slice();
  if (msg.insert) shapes.splice(msg.insert.index, 0, msg.insert.shape);
  else shapes.splice(msg.remove.index, 1);
  const scenario = { ...app.scenario, name: msg.name, description: msg.description,
    sketch: { ...app.scenario.sketch, shapes } };
  takeScenario(scenario, msg.revision, msg.edited, msg.origin);
}

function onMessage(msg) {
  designMessage(app, msg);
  engineMessage(app, msg);
  switch (msg.type) {
    case "hello": {
      app.hello = msg;
      app.awaitingScenario = false;
      app.views = msg.views || [];
      app.vocabulary = msg.vocabulary || { choices: {}, limits: {} };
      fillChoices(app);
      applyLimits(app);
      buildPaints();
      const sel = $("#view-select");
      sel.replaceChildren(...app.views.map((v) => new Option(v.label, v.name)));
      if (!app.views.some((v) => v.name === app.viewName) && app.views.length) app.viewName = app.views[0].name;
      sel.value = app.viewName;
      takeColourMaps(msg.colour_maps);
      showRunState(msg.state || "paused");
      app.lastSize = "";
      takeScenario(msg.scenario, msg.revision, msg.edited, msg.origin);
      app.send("list_scenarios");
      app.send("list_exports");
      for (const text of msg.notices || []) app.showMessage(text, "lasting");
      if (msg.warming) {
        app.showMessage("Loading the solver kernels: a first start compiles them, which takes one to three minutes. " +
          "The picture starts moving when they are ready.", "lasting", "warming");
      }
      break;
    }
    case "notice":
      if (msg.kind === "ready") for (const el of $$('#messages [data-field="warming"]')) el.remove();
      if (msg.message && msg.kind !== "warming") app.showMessage(msg.message, "note"); // warming: the bar says it
      break;
    case "history":
      app.histories.seed(msg);
      drawStrip();
      break;
    case "scenario":
      app.awaitingScenario = false;
      takeScenario(msg.scenario, msg.revision, msg.edited, msg.origin);
      for (const el of $$(".invalid")) el.classList.remove("invalid");
      break;
    case "sketch_change":
      takeSketchChange(msg);
      for (const el of $$(".invalid")) el.classList.remove("invalid");
      break;
    case "status":
      app.status = msg;
      if (msg.state !== app.state) showRunState(msg.state);
      app.pace.add(msg, performance.now());
      showClock(msg, tabFps(), app.pace.value());
      showSettle(Boolean(msg.settle), msg.settle_grid);
      showStations(msg, app.scenario && app.scenario.mode);
      showProbes(msg);
      app.histories.add(msg);
      if (app.compare) app.compare.takeStatus(msg);
      if (/^(probe|stationt):/.test($("#plot-source").value || "")) drawStrip();
      if (app.hover && app.state === "running") requestInspect();
      break;
    case "overlay":
      app.overlay = { sonic_line: msg.sonic_line || [], arrows: msg.arrows || [] };
      scheduleDraw();
      break;
    case "inspect":
      // a point in the reflected half reads the gas above the axis, mirrored back
      showReadout(app.hoverBelowAxis ? { ...msg, y_m: -msg.y_m, v_m_s: -msg.v_m_s } : msg);
      break;
    case "profile":
      app.profile = msg;
      drawStrip();
      break;
    case "frame_ring":
      app.presenter.takeRing(msg);
      break;
    case "wave_line":
      app.waves.takeLine(msg);
      break;
    case "wave_history":
      app.waves.takeHistory(msg);
      break;
    case "comparison":
      app.compare.takeMessage(msg);
      break;
    case "error":
      showServerError(msg);
      break;
    case "diverged":
      showRunState("diverged");
      showDiverged(msg);
      break;
    case "scenario_list":
      showScenarioList(msg, { name: app.scenario && app.scenario.name, origin: app.origin });
      break;
    case "export_list":
      showExportList(app, msg);
      break;
    case "saved":
      app.showMessage(`Kept as “${msg.name}”.`, "note");
      app.send("list_scenarios");
      break;
    case "export_ready":
      fetchExport(msg);
      app.send("list_exports");
      break;
    default:
      break;
  }
}

function onLinkState(state, detail) {
  const el = $("#link-state");
  el.dataset.state = state;
  el.textContent = state === "open" ? "live" : state === "closed" ? `no link (${detail}), retrying` : "connecting";
}

// ------------------------------------------------------------------ start

/** The solver figures in the top bar, shown on request (remembered in this browser). */
function setupExpert() {
  const box = $("#show-expert");
  const show = (on) => { for (const el of $$(".clock .expert")) el.hidden = !on; };
  box.checked = localStorage.getItem("shockslate.expert") === "true";
  show(box.checked);
  box.addEventListener("change", () => {
    localStorage.setItem("shockslate.expert", String(box.checked));
    show(box.checked);
  });
}

/** Presenter tools (presenter.js) and the wave diagram (xt_diagram.js), with the few hooks they use. */
function setupPresenting() {
  app.layoutCanvas = layoutCanvas;
  app.scheduleDraw = scheduleDraw;
  app.viewInfo = viewInfo;
  app.showFrame = (f) => {
    app.frame = f;
    paintFrame();
    updateColourBar();
    scheduleDraw();
  };
  app.presenter = new Presenter(app);
  app.presenter.setup();
  app.waves = new WaveDiagram(app);
  app.waves.setup();
  app.compare = new Comparison(app);
  app.compare.setup();
}

function start() {
  setupExpert();
  setupInitial(app);
  showReadout({});
  setupViewControls();
  setupTools();
  setupRunControls();
  setupPanels(app);
  setupFiles(app);
  setupDialogs(app);
  setupStrip();
  setupPresenting();
  app.conn = new Connection({ onMessage, onFrame, onState: onLinkState });
  app.conn.open();
  let resizeTimer = null;
  window.addEventListener("resize", () => {
    clearTimeout(resizeTimer);
    resizeTimer = setTimeout(() => { layoutCanvas(); updateColourBar(); drawStrip(); if (app.waves) app.waves.draw(); }, 150);
  });
  setInterval(() => { if (app.status) $("#fig-frames").textContent = `${U.num(tabFps(), 3)} (server ${U.num(app.status.frames_per_s || 0, 3)})`; }, 1000);
  // A handle for tests and the console; `receive` takes a server message as if it had arrived.
  app.receive = onMessage;
  window.shockslate = app;
}

start();
