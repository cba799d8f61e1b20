// Design dialogs: a chamber and nozzle from its numbers, and the chamber gas from a propellant pair.
//
// The page only collects the numbers (in the user's units), converts them to SI and sends one intent
// (`build_nozzle`, `propellant_gas`); the server builds the shapes or computes the gas with the solver's own
// design code and answers with the new scenario, or with an error naming the field, the value and what is
// allowed, which is shown inside the dialog beside the field in the units the user typed.

import { PRESSURE_UNITS, getPressureUnit, num } from "./units.js";

const $ = (sel, root = document) => root.querySelector(sel);
const $$ = (sel, root = document) => Array.from(root.querySelectorAll(sel));

/** Lengths the dialog offers: name -> metres per unit. */
export const LENGTH_UNITS = { mm: 1e-3, cm: 1e-2, m: 1, in: 0.0254 };

/** What the design answers are waiting for: request id -> "nozzle" | "gas". */
const waiting = new Map();

function lengthScale() {
  return LENGTH_UNITS[$("#nz-length-unit").value] || 1e-3;
}

/** Each nozzle input: message field, label, how its number becomes SI (null: a plain number). */
function nozzleInputs() {
  return $$("#nozzle-dialog [data-nz]").map((input) => ({
    input,
    field: input.dataset.nz,
    label: input.dataset.label,
    required: input.hasAttribute("required"),
    scale: input.dataset.length !== undefined ? lengthScale() : 1,
    unit: input.dataset.length !== undefined ? $("#nz-length-unit").value : input.dataset.unit || "",
  }));
}

function dialogError(dialog, text, field) {
  const box = $(".dialog-error", dialog);
  box.textContent = text;
  box.hidden = !text;
  for (const el of $$(".invalid", dialog)) el.classList.remove("invalid");
  if (field) for (const el of $$(`[data-nz="${field}"], [data-pg="${field}"]`, dialog)) el.classList.add("invalid");
}

/** A number as the user would type it back: up to 6 significant figures, no trailing zeros, a true minus. */
const typed = (v) => String(Number(v.toPrecision(6))).replace("-", "\u2212");

/** The value of a refusal in the unit of the dialog field it names ("−5 mm" for −0.005 m). */
function valueInUnits(dialog, msg) {
  const input = $(`[data-nz="${msg.field}"], [data-pg="${msg.field}"]`, dialog);
  if (msg.value === null || msg.value === undefined) return "nothing";
  if (typeof msg.value !== "number" || !input) return JSON.stringify(msg.value);
  if (input.dataset.length !== undefined) return `${typed(msg.value / lengthScale())} ${$("#nz-length-unit").value}`;
  if (input.dataset.pg === "p0_pa") return `${typed(msg.value / PRESSURE_UNITS[getPressureUnit()])} ${getPressureUnit()}`;
  return `${typed(msg.value)}${input.dataset.unit ? ` ${input.dataset.unit}` : ""}`;
}

function labelOf(dialog, field) {
  const input = $(`[data-nz="${field}"], [data-pg="${field}"]`, dialog);
  return input ? input.dataset.label : field.replace(/_/g, " ");
}

function showShapeChoice() {
  const shape = $("#nz-shape").value;
  for (const el of $$("#nozzle-dialog [data-for-shape]")) el.hidden = !el.dataset.forShape.split(" ").includes(shape);
}

function buildNozzle(app) {
  const dialog = $("#nozzle-dialog");
  const fields = { mode: $("#nz-mode").value, shape: $("#nz-shape").value };
  for (const { input, field, label, required, scale, unit } of nozzleInputs()) {
    if (input.closest("[hidden]")) continue;
    const text = input.value.trim();
    if (text === "") {
      if (required) {
        dialogError(dialog, `${label} is missing: give a number${unit ? ` in ${unit}` : ""}.`, field);
        return;
      }
      continue;
    }
    const value = Number(text);
    if (!Number.isFinite(value)) {
      dialogError(dialog, `${label} “${text}” is not a number${unit ? ` of ${unit}` : ""}.`, field);
      return;
    }
    fields[field] = field === "cells_per_throat_radius" ? Math.round(value) : value * scale;
  }
  dialogError(dialog, "", null);
  waiting.set(app.send("build_nozzle", fields), "nozzle");
  $("#nz-build").disabled = true;
}

function computeGas(app) {
  const box = $("#propellant-block");
  const read = (sel, label, unit) => {
    const text = $(sel).value.trim();
    const value = Number(text);
    if (text === "" || !Number.isFinite(value)) {
      dialogError(box, `${label} ${text === "" ? "is missing" : `“${text}” is not a number`}: give a number${unit ? ` in ${unit}` : ""}.`,
        $(sel).dataset.pg);
      return null;
    }
    return value;
  };
  const mr = read("#pg-mixture", "Mixture ratio", "");
  if (mr === null) return;
  const p = read("#pg-p0", "Chamber pressure", getPressureUnit());
  if (p === null) return;
  dialogError(box, "", null);
  waiting.set(app.send("propellant_gas", {
    fuel: $("#pg-fuel").value, oxidiser: $("#pg-oxidiser").value, mixture_ratio: mr,
    p0_pa: p * PRESSURE_UNITS[getPressureUnit()], reactant_state: $("#pg-state").value,
  }), "gas");
  $("#pg-compute").disabled = true;
  $("#pg-result").textContent = "computing the equilibrium …";
}

/** What this server can do about propellants (hello.thermochemistry): fill the lists, or say it is missing. */
function takeThermochemistry(info) {
  const box = $("#propellant-block");
  if (!info) return;
  const fill = (sel, items) => {
    const el = $(sel);
    const keep = el.value;
    el.replaceChildren(...items.map((it) => new Option(`${it.label} (${it.name})`, it.name)));
    if (items.some((it) => it.name === keep)) el.value = keep;
  };
  fill("#pg-fuel", info.fuels || []);
  fill("#pg-oxidiser", info.oxidisers || []);
  $("#pg-note").textContent = `Gamma applied is the ${info.gamma_note}; the solver then treats the products as one calorically perfect gas.`;
  const missing = $("#pg-unavailable");
  box.dataset.available = String(Boolean(info.available));
  missing.hidden = Boolean(info.available);
  missing.textContent = info.available ? "" : `Not available on this server: ${info.reason}. ${info.how_to_add}`;
  $("#pg-compute").disabled = !info.available;
}

function showChamberGas(msg) {
  const p = msg.p0_pa / PRESSURE_UNITS[getPressureUnit()];
  $("#pg-result").textContent =
    `${msg.fuel}/${msg.oxidiser} at O/F ${num(msg.mixture_ratio, 3)}, ${num(p, 4)} ${getPressureUnit()}: ` +
    `T0 ${num(msg.t0_k, 4)} K, frozen gamma ${num(msg.gamma, 4)}, molar mass ${num(msg.molar_mass_kg_kmol, 4)} kg/kmol ` +
    `(applied to the gas and the reservoir, undo takes it back).`;
}

/**
 * Every server message passes here first (main.js): the answers to the design intents are picked out by
 * their request id; hello tells what the server offers.
 */
export function designMessage(app, msg) {
  if (msg.type === "hello") {
    takeThermochemistry(msg.thermochemistry);
    // the chamber pressure box starts at the reservoir's p0, in the page's pressure unit, until the user types
    const box = $("#pg-p0");
    const p0 = msg.scenario && msg.scenario.conditions && msg.scenario.conditions.reservoir.p0_pa;
    if (!box.dataset.typed && Number.isFinite(p0)) box.value = String(Number((p0 / PRESSURE_UNITS[getPressureUnit()]).toPrecision(6)));
    return;
  }
  if (msg.type === "chamber_gas") {
    showChamberGas(msg);
    return;
  }
  const kind = msg.id !== undefined ? waiting.get(msg.id) : undefined;
  if (!kind) return;
  if (msg.type === "scenario") {
    waiting.delete(msg.id);
    if (kind === "nozzle") {
      $("#nz-build").disabled = false;
      $("#nozzle-dialog").close();
      app.showMessage("Nozzle built from the numbers and loaded; undo takes it back.", "note");
    } else {
      $("#pg-compute").disabled = false;
    }
  } else if (msg.type === "error") {
    waiting.delete(msg.id);
    const where = kind === "nozzle" ? $("#nozzle-dialog") : $("#propellant-block");
    if (kind === "nozzle") $("#nz-build").disabled = false;
    else {
      $("#pg-compute").disabled = where.dataset.available !== "true";
      $("#pg-result").textContent = "";
    }
    const text = msg.rule === "unavailable" ? msg.message
      : `${labelOf(where, msg.field)}: ${valueInUnits(where, msg)} is not allowed; allowed: ${msg.allowed}.`;
    dialogError(where, text, msg.field);
  }
}

export function setupDialogs(app) {
  const dialog = $("#nozzle-dialog");
  // display units of the dialog's lengths (the page's own, like the pressure units)
  $("#nz-length-unit").replaceChildren(...Object.keys(LENGTH_UNITS).map((u) => new Option(u, u)));
  $("#open-nozzle-dialog").addEventListener("click", () => {
    dialogError(dialog, "", null);
    const sc = app.scenario;
    if (sc && !dialog.open) $("#nz-mode").value = sc.mode;
    showShapeChoice();
    dialog.showModal();
  });
  $("#nz-shape").addEventListener("change", showShapeChoice);
  $("#nz-cancel").addEventListener("click", () => dialog.close());
  $("#nz-build").addEventListener("click", (ev) => {
    ev.preventDefault();
    buildNozzle(app);
  });
  $("#nz-length-unit").addEventListener("change", (ev) => {
    // keep the lengths: convert the numbers in the boxes to the new unit
    const before = Number(ev.target.dataset.was ? LENGTH_UNITS[ev.target.dataset.was] : 1e-3);
    const after = lengthScale();
    for (const input of $$("#nozzle-dialog [data-length]")) {
      const v = Number(input.value);
      if (input.value.trim() !== "" && Number.isFinite(v)) input.value = String(Number((v * before / after).toPrecision(6)));
    }
    for (const el of $$("#nozzle-dialog .nz-unit")) el.textContent = ev.target.value;
    ev.target.dataset.was = ev.target.value;
  });
  $("#nz-length-unit").dataset.was = $("#nz-length-unit").value;
  $("#pg-compute").addEventListener("click", () => computeGas(app));
  $("#pg-p0").addEventListener("input", () => { $("#pg-p0").dataset.typed = "yes"; });
  // the chamber pressure box keeps its pressure when the page's pressure unit changes (panels.js switches it)
  let unitWas = getPressureUnit();
  $("#pressure-unit").addEventListener("change", () => {
    const v = Number($("#pg-p0").value);
    if ($("#pg-p0").value.trim() !== "" && Number.isFinite(v)) {
      $("#pg-p0").value = String(Number((v * PRESSURE_UNITS[unitWas] / PRESSURE_UNITS[getPressureUnit()]).toPrecision(6)));
    }
    unitWas = getPressureUnit();
  });
  showShapeChoice();
}
