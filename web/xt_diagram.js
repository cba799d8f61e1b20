// The wave (x-t) diagram: one field along a line, position across and flow time upwards, drawn from
// the rows the server samples every few steps (server/wave_history.py). A shock is a straight edge
// whose slope is its speed; a contact and a rarefaction fan show as they would on a wave diagram.

import { niceTicks, tickLabels } from "./colourbar.js";
import { DEFAULT_MAP, MAPS, frameLookup } from "./colourmaps.js";
import * as U from "./units.js";

const $ = (sel) => document.querySelector(sel);

/** How often the page asks for new rows while a line is set, ms. */
export const POLL_MS = 300;
const MARGIN = { left: 64, right: 26, top: 26, bottom: 40 };

/** The rows as float32 arrays from the base64 of a `wave_history` message. */
export function decodeRows(msg) {
  const bin = atob(msg.values_f32 || "");
  const bytes = new Uint8Array(bin.length);
  for (let k = 0; k < bin.length; k++) bytes[k] = bin.charCodeAt(k);
  const all = new Float32Array(bytes.buffer);
  const rows = [];
  for (let r = 0; r < msg.rows; r++) rows.push(all.subarray(r * msg.samples, (r + 1) * msg.samples));
  return rows;
}

export class WaveDiagram {
  constructor(app) {
    this.app = app;
    this.line = null; // the `wave_line` message's line, or null
    this.generation = -1;
    this.sMm = [];
    this.times = []; // s
    this.steps = [];
    this.rows = []; // Float32Array per row
    this.asked = null; // after_steps of the request in flight
    this.axes = null; // what the last drawing showed (for tests and the console)
    this.timer = null;
  }

  setup() {
    $("#wave-line").addEventListener("change", () => this.sendLine());
    $("#wave-field").addEventListener("change", () => this.sendLine());
    this.timer = setInterval(() => this.poll(), POLL_MS);
  }

  /** The line choices: off, along the domain (mid-height, or the axis), and each station. */
  fillChoices() {
    const app = this.app;
    const sel = $("#wave-line");
    const keep = sel.value;
    const sc = app.scenario;
    const opts = [["", "off"], ["domain", sc && sc.mode === "axisymmetric" ? "along the axis" : "along x, mid-height"]];
    for (const st of (sc && sc.stations) || []) opts.push([`station:${st.name}`, `along station ${st.name}`]);
    sel.replaceChildren(...opts.map(([v, t]) => new Option(t, v)));
    const want = this.line ? (this.line.station ? `station:${this.line.station}` : "domain") : keep;
    if (opts.some(([v]) => v === want)) sel.value = want;
    this.followScenario();
    const fields = (app.vocabulary && app.vocabulary.choices.wave_field) || [];
    const fsel = $("#wave-field");
    if (fsel.options.length !== fields.length) {
      const fkeep = fsel.value || "pressure";
      fsel.replaceChildren(...fields.map((c) => new Option(c.label, c.name)));
      if (fields.some((c) => c.name === fkeep)) fsel.value = fkeep;
    }
  }

  /** Where the line should be now: the domain's middle (or axis), or its station's; null when that is gone. */
  expectedLine() {
    const sc = this.app.scenario, line = this.line;
    if (!sc || !line) return null;
    if (line.station) {
      const st = (sc.stations || []).find((x) => x.name === line.station);
      return st ? [st.start_m, st.end_m] : null;
    }
    const d = sc.domain;
    const y = sc.mode === "axisymmetric" ? d.y_min_m : 0.5 * (d.y_min_m + d.y_max_m);
    return [[d.x_min_m, y], [d.x_max_m, y]];
  }

  /** A changed domain or a moved station moves the line with it; a removed station ends the diagram. */
  followScenario() {
    if (!this.line || this.asked === "moving") return;
    const want = this.expectedLine();
    const same = want && [0, 1].every((k) => want[0][k] === this.line.start_m[k] && want[1][k] === this.line.end_m[k]);
    if (same) return;
    this.asked = "moving"; // until the server's wave_line answers
    if (!want) this.app.send("set_wave_line", { off: true });
    else if (this.line.station) this.app.send("set_wave_line", { station: this.line.station, field: this.line.field });
    else this.app.send("set_wave_line", { start_m: want[0], end_m: want[1], field: this.line.field });
  }

  sendLine() {
    const choice = $("#wave-line").value;
    const field = $("#wave-field").value || "pressure";
    if (!choice) {
      this.app.send("set_wave_line", { off: true });
      return;
    }
    if (choice.startsWith("station:")) {
      this.app.send("set_wave_line", { station: choice.slice(8), field });
      return;
    }
    const d = this.app.scenario.domain;
    const y = this.app.scenario.mode === "axisymmetric" ? d.y_min_m : 0.5 * (d.y_min_m + d.y_max_m);
    this.app.send("set_wave_line", { start_m: [d.x_min_m, y], end_m: [d.x_max_m, y], field });
  }

  /** The server's `wave_line` message (also sent when a tab joins). */
  takeLine(msg) {
    this.line = msg.line;
    this.generation = msg.generation;
    this.everySteps = msg.every_steps;
    this.maxRows = msg.max_rows || 1500;
    this.clear();
    $("#xt-block").hidden = !this.line;
    if (this.line) $("#wave-field").value = this.line.field;
    this.fillChoices();
    this.poll();
    this.draw();
  }

  clear() {
    this.rows = [];
    this.times = [];
    this.steps = [];
    this.asked = null;
  }

  poll() {
    if (!this.line || this.asked !== null) return;
    this.asked = this.steps.length ? this.steps[this.steps.length - 1] : -1;
    this.app.send("wave_history", { after_steps: this.asked });
  }

  /** The server's `wave_history` reply: new rows of this generation, or the whole of a new one. */
  takeHistory(msg) {
    const asked = this.asked;
    this.asked = null;
    if (msg.generation !== this.generation) {
      this.generation = msg.generation;
      this.clear();
      if (asked !== -1) { this.poll(); return; }
    }
    this.sMm = msg.s_m.map((s) => s * 1e3);
    const rows = decodeRows(msg);
    for (let r = 0; r < rows.length; r++) {
      this.rows.push(rows[r]);
      this.times.push(msg.time_s[r]);
      this.steps.push(msg.steps[r]);
    }
    const limit = this.maxRows || 1500;
    if (this.rows.length > limit) {
      const cut = this.rows.length - limit;
      this.rows.splice(0, cut); this.times.splice(0, cut); this.steps.splice(0, cut);
    }
    if (rows.length) this.draw();
  }

  draw() {
    const canvas = $("#xt");
    if (!canvas || !this.line) return;
    const cssW = canvas.clientWidth || 600, cssH = canvas.clientHeight || 320;
    const dpr = window.devicePixelRatio || 1;
    if (canvas.width !== Math.round(cssW * dpr)) canvas.width = Math.round(cssW * dpr);
    if (canvas.height !== Math.round(cssH * dpr)) canvas.height = Math.round(cssH * dpr);
    const ctx = canvas.getContext("2d");
    ctx.setTransform(1, 0, 0, 1, 0, 0);
    ctx.fillStyle = "#111519";
    ctx.fillRect(0, 0, canvas.width, canvas.height);
    ctx.setTransform(dpr, 0, 0, dpr, 0, 0);
    const plot = { x: MARGIN.left, y: MARGIN.top, w: cssW - MARGIN.left - MARGIN.right, h: cssH - MARGIN.top - MARGIN.bottom };
    const line = this.line;
    const { unit, scale } = U.displayUnit(line.unit);
    const horizontal = Math.abs(line.end_m[1] - line.start_m[1]) < 1e-12;
    const xLabel = horizontal ? "x, mm" : "distance along the line, mm";
    const yLabel = "flow time, ms";
    ctx.font = `${document.body.classList.contains("presenting") ? 16 : 12}px system-ui, sans-serif`;
    ctx.fillStyle = "#9aa6b2";
    if (this.rows.length < 2 || plot.w < 20 || plot.h < 20) {
      ctx.fillText("waiting for rows: run or step the flow", plot.x, plot.y + 20);
      this.axes = { xLabel, yLabel, rows: this.rows.length };
      return;
    }
    // position of each sample, mm: x when the line runs along x (a tube's axis), else distance along it
    const x0 = horizontal ? Math.min(line.start_m[0], line.end_m[0]) * 1e3 : 0;
    const flip = horizontal && line.end_m[0] < line.start_m[0];
    const pos = this.sMm.map((s) => (flip ? x0 + line.length_m * 1e3 - s : x0 + s));
    const xLo = x0, xHi = x0 + line.length_m * 1e3;
    const tLo = this.times[0] * 1e3, tHi = this.times[this.times.length - 1] * 1e3;
    let lo = Infinity, hi = -Infinity;
    for (const row of this.rows) for (const v of row) if (Number.isFinite(v)) { if (v < lo) lo = v; if (v > hi) hi = v; }
    if (!(hi > lo)) { const m = Number.isFinite(lo) ? lo : 0; lo = m - Math.abs(m) * 0.01 - 1e-12; hi = m + Math.abs(m) * 0.01 + 1e-12; }
    const mapName = DEFAULT_MAP[line.field] && MAPS.has(DEFAULT_MAP[line.field]) ? DEFAULT_MAP[line.field] : this.app.mapName;
    const lut = frameLookup(mapName, lo, hi);
    // the image: each pixel row shows the newest sampled row at or before its time
    const iw = Math.max(1, Math.round(plot.w * dpr)), ih = Math.max(1, Math.round(plot.h * dpr));
    const img = ctx.createImageData(iw, ih);
    const words = new Uint32Array(img.data.buffer);
    const n = this.sMm.length;
    const col = new Int32Array(iw);
    for (let c = 0; c < iw; c++) {
      const x = xLo + ((c + 0.5) / iw) * (xHi - xLo);
      const k = Math.min(n - 1, Math.max(0, Math.floor(((flip ? xHi - x : x - xLo) / (xHi - xLo)) * n)));
      col[c] = k;
    }
    let r = 0;
    const k255 = 254 / (hi - lo);
    for (let py = ih - 1; py >= 0; py--) {
      const t = tLo + ((ih - 1 - py + 0.5) / ih) * (tHi - tLo);
      while (r + 1 < this.times.length && this.times[r + 1] * 1e3 <= t) r++;
      const row = this.rows[r];
      const base = py * iw;
      for (let c = 0; c < iw; c++) {
        const v = row[col[c]];
        words[base + c] = Number.isFinite(v) ? lut[Math.max(0, Math.min(254, Math.round((v - lo) * k255)))] : lut[255];
      }
    }
    ctx.setTransform(1, 0, 0, 1, 0, 0);
    ctx.putImageData(img, Math.round(plot.x * dpr), Math.round(plot.y * dpr));
    ctx.setTransform(dpr, 0, 0, dpr, 0, 0);
    // axes and ticks
    ctx.strokeStyle = "#9aa6b2";
    ctx.strokeRect(plot.x - 0.5, plot.y - 0.5, plot.w + 1, plot.h + 1);
    ctx.fillStyle = "#e6e2d6";
    ctx.textAlign = "center";
    const xt = niceTicks(xLo, xHi, 6), xl = tickLabels(xt);
    xt.forEach((v, k) => {
      const px = plot.x + ((v - xLo) / (xHi - xLo)) * plot.w;
      ctx.fillRect(px, plot.y + plot.h, 1, 4);
      ctx.fillText(xl[k], px, plot.y + plot.h + 16);
    });
    ctx.fillText(xLabel, plot.x + plot.w / 2, plot.y + plot.h + 33);
    ctx.textAlign = "right";
    const tt = niceTicks(tLo, tHi, 5), tl = tickLabels(tt);
    tt.forEach((v, k) => {
      const py = plot.y + plot.h - ((v - tLo) / (tHi - tLo)) * plot.h;
      ctx.fillRect(plot.x - 4, py, 4, 1);
      ctx.fillText(tl[k], plot.x - 6, py + 4);
    });
    ctx.save();
    ctx.translate(14, plot.y + plot.h / 2);
    ctx.rotate(-Math.PI / 2);
    ctx.textAlign = "center";
    ctx.fillText(yLabel, 0, 0);
    ctx.restore();
    ctx.textAlign = "left";
    const legend = `${line.label}${unit ? `, ${unit}` : ""}: ${U.num(lo / scale, 4)} to ${U.num(hi / scale, 4)}` +
      ` · ${this.rows.length} rows, one every ${this.everySteps || "few"} steps`;
    ctx.fillText(legend, plot.x, plot.y - 9);
    this.axes = { xLabel, yLabel, xMm: [xLo, xHi], tMs: [tLo, tHi], range: [lo, hi], unit: line.unit, rows: this.rows.length, legend };
  }
}
