// Engine figures, separation marks and the kernels' warm-up progress.
//
// The server computes every number (status.engine from solver/nozzle_report.py, status.separation from
// solver/separation.py, the same modules as the report); this module only lays them out with their units
// and draws the marks where the wall pressure falls below the separation criterion.

import { num, pressure } from "./units.js";

const $ = (sel, root = document) => root.querySelector(sel);

/** Rows of the engine table: label, simulated key, ideal key, ratio key, unit, digits. */
const ROWS = [
  ["thrust coefficient C_F", "thrust_coefficient", "ideal_thrust_coefficient", "thrust_coefficient_ratio", "", 4],
  ["C_F, ideal with divergence factor", "thrust_coefficient", "ideal_thrust_coefficient_with_divergence",
    "thrust_coefficient_ratio_with_divergence", "", 4],
  ["characteristic velocity c*", "c_star_sim_m_s", "c_star_m_s", "c_star_ratio", "m/s", 4],
  ["specific impulse I_sp", "specific_impulse_s", "ideal_specific_impulse_s", "specific_impulse_ratio", "s", 4],
];

function withUnit(value, unit, digits) {
  const text = num(value, digits);
  return text === "–" || !unit ? text : `${text} ${unit}`;
}

/** The engine block under the stations: simulated beside ideal, with units; hidden when there is no engine. */
export function showEngine(status) {
  const block = $("#engine-block");
  const eng = status && status.engine;
  block.hidden = !eng;
  if (eng) {
    const body = $("#engine-table tbody");
    body.replaceChildren(...ROWS.map(([label, sim, ideal, ratio, unit, digits]) => {
      const tr = document.createElement("tr");
      tr.dataset.figure = sim;
      for (const [text, key] of [[label, ""], [withUnit(eng[sim], unit, digits), sim],
        [withUnit(eng[ideal], unit, digits), ideal], [num(eng[ratio], 3), ratio]]) {
        const td = document.createElement("td");
        td.textContent = text;
        if (key) td.dataset.key = key;
        tr.append(td);
      }
      return tr;
    }));
    $("#engine-note").textContent = `ideal: isentropic 1D, fully expanded to ${pressure(eng.p_amb_pa)}, ` +
      `drawn area ratio ${num(eng.area_ratio, 4)}; 1D regime: ${eng.regime}`;
  }
  const sep = status && status.separation;
  const caution = $("#separation-caution");
  caution.hidden = !(sep && sep.separates);
  if (sep && sep.separates) {
    caution.textContent = `Separation expected from x = ${num(sep.first_x_m * 1e3, 4)} mm (marked ×): ${sep.caution}`;
  }
}

/** Crosses on the wall where its pressure is below the criterion (and their mirror images below the axis). */
export function drawSeparation(ctx, place, sep) {
  if (!sep || !sep.separates || !sep.marks_m.length) return;
  ctx.save();
  ctx.strokeStyle = "#ff5a5a";
  ctx.lineWidth = 2;
  const size = 4;
  const every = Math.max(1, Math.round(sep.marks_m.length / 40));
  const cross = (x, y) => {
    ctx.moveTo(x - size, y - size); ctx.lineTo(x + size, y + size);
    ctx.moveTo(x - size, y + size); ctx.lineTo(x + size, y - size);
  };
  ctx.beginPath();
  sep.marks_m.forEach(([x, y], k) => {
    if (k % every !== 0 && k !== sep.marks_m.length - 1) return;
    const [px, py] = place.toPx(x, y);
    cross(px, py);
    if (place.mirrorBelowAxis) {
      const [qx, qy] = place.toPx(x, -y);
      cross(qx, qy);
    }
  });
  ctx.stroke();
  ctx.restore();
}

/** The warm-up bar: which kernels compile now, as a stage of all; hidden when nothing compiles. */
export function showWarming(stage) {
  const box = $("#warming");
  box.hidden = !stage;
  if (!stage) return;
  const bar = $("#warming-bar");
  bar.max = stage.total;
  bar.value = stage.done;
  $("#warming-stage").textContent = `Compiling the solver kernels: ${stage.label} (stage ${stage.done + 1} of ${stage.total})`;
  box.dataset.stage = stage.stage;
}

/** Every server message passes here first (main.js): status, warm-up notices, hello. */
export function engineMessage(app, msg) {
  if (msg.type === "status") showEngine(msg);
  else if (msg.type === "hello") showWarming(msg.warming ? msg.warming_stage || { stage: "start", done: 0, total: 1, label: "starting" } : null);
  else if (msg.type === "notice" && msg.kind === "warming") {
    showWarming(msg);
    console.info(`shockslate: ${msg.message}`);
  } else if (msg.type === "notice" && msg.kind === "ready") {
    showWarming(null);
    console.info(`shockslate: ${msg.message}`);
  }
}
