// The settings column: gas, held conditions, numerics, domain and edges. Each input shows the
// scenario the server holds and sends a small intent when the user changes it; the server answers
// with the new scenario (or an error that names the field). Option lists and limits come from the
// server (hello.vocabulary), so the page offers exactly what the server accepts.

import { PRESSURE_UNITS, getPressureUnit, num, plain, setPressureUnit } from "./units.js";

const $ = (sel, root = document) => root.querySelector(sel);
const $$ = (sel, root = document) => Array.from(root.querySelectorAll(sel));

function get(obj, path) {
  return path.split(".").reduce((o, k) => (o == null ? undefined : o[k]), obj);
}

/** Set an input's shown value unless the user is typing in it. */
function show(input, value) {
  if (document.activeElement === input) return;
  input.value = value;
  input.classList.remove("invalid");
}

/** A number typed by the user, or null (and the input marked) when it is not a number. */
function readNumber(input) {
  const text = input.value.trim();
  const value = Number(text);
  if (text === "" || !Number.isFinite(value)) {
    input.classList.add("invalid");
    return null;
  }
  input.classList.remove("invalid");
  return value;
}

function pressureScale() {
  return PRESSURE_UNITS[getPressureUnit()];
}

export function setupPanels(app) {
  for (const select of $$("[data-edge]")) {
    select.addEventListener("change", () => app.send("set_edges", { [select.dataset.edge]: select.value }));
  }

  // gas
  $("#gas-preset").addEventListener("change", (ev) => {
    if (ev.target.value) app.send("set_gas", { preset: ev.target.value });
  });
  for (const id of ["#gas-gamma", "#gas-molar"]) {
    $(id).addEventListener("change", () => {
      const gamma = readNumber($("#gas-gamma"));
      const molar = readNumber($("#gas-molar"));
      if (gamma === null || molar === null) return;
      $("#gas-preset").value = "";
      app.send("set_gas", { gamma, molar_mass_kg_kmol: molar });
    });
  }

  // held conditions: one partial message per edited field
  for (const input of $$("[data-cond]")) {
    input.addEventListener("change", () => {
      let value = readNumber(input);
      if (value === null) return;
      if (input.dataset.quantity === "pressure") value *= pressureScale();
      const [group, field] = input.dataset.cond.split(".");
      app.send("set_conditions", { [group]: { [field]: value } });
    });
  }
  $("#pressure-unit").addEventListener("change", (ev) => {
    setPressureUnit(ev.target.value);
    localStorage.setItem("shockslate.pressureUnit", ev.target.value);
    for (const s of $$(".p-unit")) s.textContent = ev.target.value;
    applyLimits(app);
    fillPanels(app, true);
    app.refreshUnits();
  });
  const savedUnit = localStorage.getItem("shockslate.pressureUnit");
  if (savedUnit && savedUnit in PRESSURE_UNITS) {
    setPressureUnit(savedUnit);
    $("#pressure-unit").value = savedUnit;
    for (const s of $$(".p-unit")) s.textContent = savedUnit;
  }

  // numerics
  for (const el of $$("[data-num]")) {
    el.addEventListener("change", () => {
      const key = el.dataset.num;
      let value = el.value;
      if (key === "order") value = Number(value);
      if (key === "cfl") {
        value = readNumber(el);
        if (value === null) return;
      }
      app.send("set_numerics", { [key]: value });
    });
  }
  $("#resolution").addEventListener("change", (ev) => {
    const nx = readNumber(ev.target);
    if (nx !== null) app.send("set_resolution", { nx: Math.round(nx) });
  });

  // domain and mode
  $("#mode").addEventListener("change", (ev) => app.send("set_mode", { mode: ev.target.value }));
  $("#apply-domain").addEventListener("click", () => {
    const out = {};
    for (const input of $$("[data-dom]")) {
      const mm = readNumber(input);
      if (mm === null) return;
      out[input.dataset.dom] = mm / 1000;
    }
    app.send("set_domain", out);
  });
}

/**
 * Fill every `select[data-choices]` from the server's choice tables (name as value, label as text).
 * `data-none` adds an empty choice with that text (first, or last with `data-none-last`).
 */
export function fillChoices(app) {
  const choices = (app.vocabulary && app.vocabulary.choices) || {};
  for (const select of $$("select[data-choices]")) {
    const items = choices[select.dataset.choices] || [];
    const options = items.map((c) => new Option(c.label, String(c.name)));
    if (select.dataset.none !== undefined) {
      const none = new Option(select.dataset.none, "");
      if (select.dataset.noneLast !== undefined) options.push(none);
      else options.unshift(none);
    }
    const keep = select.value;
    select.replaceChildren(...options);
    if (options.some((o) => o.value === keep)) select.value = keep;
  }
}

/** Number in the unit an input shows: pressures in the chosen unit, lengths by data-scale (mm: 0.001). */
function inputScale(input) {
  if (input.dataset.quantity === "pressure") return pressureScale();
  return Number(input.dataset.scale || 1);
}

/** Set min, max and a tooltip on every `[data-limit]` input from the limits the server validates with. */
export function applyLimits(app) {
  const limits = (app.vocabulary && app.vocabulary.limits) || {};
  for (const input of $$("[data-limit]")) {
    const lim = limits[input.dataset.limit];
    if (!lim) continue;
    const scale = inputScale(input);
    const unit = input.dataset.quantity === "pressure" ? getPressureUnit() : input.dataset.scale ? "mm" : lim.unit;
    const words = [];
    if (lim.min !== undefined) {
      input.min = String(lim.min / scale);
      words.push(`${lim.min_exclusive ? "above" : "at least"} ${plain(lim.min / scale)}${unit ? " " + unit : ""}`);
    }
    if (lim.max !== undefined) {
      input.max = String(lim.max / scale);
      words.push(`${lim.max_exclusive ? "below" : "at most"} ${plain(lim.max / scale)}${unit ? " " + unit : ""}`);
    }
    input.title = `${lim.label}: ${words.join(", ")}`;
  }
}

/** Show the scenario in every input (force: also the focused one, after a unit change). */
export function fillPanels(app, force = false) {
  const sc = app.scenario;
  if (!sc) return;
  const put = force ? (input, v) => { input.value = v; } : show;
  const gas = sc.gas || {};
  put($("#gas-preset"), gas.preset || "");
  put($("#gas-gamma"), gas.gamma);
  put($("#gas-molar"), gas.molar_mass_kg_kmol);
  for (const input of $$("[data-cond]")) {
    const v = get(sc.conditions, input.dataset.cond);
    if (v === undefined) continue;
    put(input, input.dataset.quantity === "pressure" ? plain(v / pressureScale()) : v);
  }
  const nm = sc.numerics || {};
  for (const el of $$("[data-num]")) {
    const v = nm[el.dataset.num];
    if (v !== undefined) put(el, String(v));
  }
  const dom = sc.domain;
  put($("#resolution"), dom.nx);
  const dx = (dom.x_max_m - dom.x_min_m) / dom.nx;
  const ny = Math.max(1, Math.round((dom.y_max_m - dom.y_min_m) / dx));
  $("#cell-size").textContent = `cells ${num(dx * 1e3, 3)} mm square; ${dom.nx} × ${ny} = ${(dom.nx * ny).toLocaleString("en")} cells`;
  for (const input of $$("[data-dom]")) put(input, plain(dom[input.dataset.dom] * 1e3));
  put($("#mode"), sc.mode);
  for (const select of $$("[data-edge]")) put(select, sc.edges[select.dataset.edge]);
  put($("#mirror"), (sc.sketch && sc.sketch.mirror) || "none");
}
