// Two runs side by side: the server runs the main scenario a second time with one setting changed
// (server/comparison.py) and sends its frames on channel 2; they are drawn under the main picture, in
// the main picture's colour range, labelled "comparison" with the setting that differs.

import { frameLookup } from "./colourmaps.js";
import { drawSketch } from "./overlays.js";
import * as U from "./units.js";

const $ = (sel) => document.querySelector(sel);

export const COMPARISON = 2;

/** A setting's value for display: pressures in the page's pressure unit, the rest in SI. */
function shown(unit) {
  if (unit === "Pa") return { unit: U.getPressureUnit(), scale: U.PRESSURE_UNITS[U.getPressureUnit()] };
  return { unit: unit === "-" ? "" : unit, scale: 1 };
}

function valueAt(doc, path) {
  return path.split(".").reduce((node, key) => (node == null ? undefined : node[key]), doc);
}

export class Comparison {
  constructor(app) {
    this.app = app;
    this.state = null; // the last `comparison` message while one runs
    this.frame = null; // the newest comparison frame
    this.image = document.createElement("canvas");
    this.figures = null; // status.comparison
  }

  setup() {
    $("#compare-setting").addEventListener("change", () => this.prefill());
    $("#compare-start").addEventListener("click", () => this.start());
    $("#compare-stop").addEventListener("click", () => this.app.send("set_comparison", { off: true }));
  }

  /** The settings the server offers (hello vocabulary), once. */
  fillChoices() {
    const sel = $("#compare-setting");
    const settings = (this.app.vocabulary && this.app.vocabulary.choices.compare_setting) || [];
    if (sel.options.length !== settings.length) {
      sel.replaceChildren(...settings.map((c) => new Option(c.label, c.name)));
      this.prefill();
    }
  }

  setting() {
    const settings = (this.app.vocabulary && this.app.vocabulary.choices.compare_setting) || [];
    return settings.find((c) => c.name === $("#compare-setting").value);
  }

  /** The value box starts at the main run's value of the chosen setting, in the display unit. */
  prefill() {
    const c = this.setting();
    if (!c || !this.app.scenario) return;
    const { unit, scale } = shown(c.unit);
    const v = valueAt(this.app.scenario, c.name);
    $("#compare-value").value = Number.isFinite(v) ? U.plain(v / scale, 6) : "";
    $("#compare-unit").textContent = unit;
  }

  start() {
    const c = this.setting();
    const typed = Number($("#compare-value").value);
    if (!c) return;
    if (!Number.isFinite(typed) || $("#compare-value").value.trim() === "") {
      this.app.showMessage(`The comparison's ${c.label} needs a number (got “${$("#compare-value").value}”).`, "error", "value");
      return;
    }
    this.app.send("set_comparison", { setting: c.name, value: typed * shown(c.unit).scale });
  }

  /** The server's `comparison` message. */
  takeMessage(msg) {
    if (!msg.active) {
      this.state = null;
      this.frame = null;
      this.figures = null;
      $("#compare-wrap").hidden = true;
      $("#compare-stop").disabled = true;
      if (msg.note) this.app.showMessage(msg.note, "note");
      return;
    }
    this.state = msg;
    $("#compare-wrap").hidden = false;
    $("#compare-stop").disabled = false;
    if (msg.note) this.app.showMessage(`Comparison: ${msg.note}.`, "note");
    this.showLabel();
    this.draw();
  }

  takeStatus(status) {
    this.figures = status.comparison || null;
    if (this.state) this.showLabel();
  }

  /** A channel-2 frame: kept and drawn under the main picture. */
  takeFrame(f) {
    if (!this.state) return;
    this.frame = f;
    this.showLabel();
    this.draw();
  }

  label() {
    const s = this.state;
    if (!s) return "";
    const { unit, scale } = shown(s.unit);
    const u = unit ? ` ${unit}` : "";
    let text = `comparison — ${s.label} ${U.num(s.value / scale, 4)}${u} (main run: ${U.num(s.main_value / scale, 4)}${u})`;
    const f = this.frame;
    if (f) text += ` · t = ${U.num(f.timeS * 1e3, 4)} ms`;
    const fig = this.figures;
    if (fig && fig.diverged) text += " · diverged and stopped";
    else if (fig && fig.behind_s > 1e-9) text += ` · ${U.num(fig.behind_s * 1e3, 3)} ms behind the main run`;
    return text;
  }

  showLabel() {
    $("#compare-label").textContent = this.label();
  }

  draw() {
    const place = this.app.place;
    const canvas = $("#compare-view");
    if (!place || !canvas || !this.state) return;
    const dpr = window.devicePixelRatio || 1;
    const w = place.widthPx, h = place.heightPx;
    if (canvas.style.width !== `${w}px`) canvas.style.width = `${w}px`;
    if (canvas.style.height !== `${h}px`) canvas.style.height = `${h}px`;
    if (canvas.width !== Math.round(w * dpr)) canvas.width = Math.round(w * dpr);
    if (canvas.height !== Math.round(h * dpr)) canvas.height = Math.round(h * dpr);
    const ctx = canvas.getContext("2d");
    ctx.setTransform(dpr, 0, 0, dpr, 0, 0);
    ctx.fillStyle = "#0b0e11";
    ctx.fillRect(0, 0, w, h);
    const f = this.frame;
    const rect = place.flowRect();
    if (f) {
      if (this.image.width !== f.width || this.image.height !== f.height) {
        this.image.width = f.width;
        this.image.height = f.height;
      }
      const ictx = this.image.getContext("2d");
      const img = ictx.createImageData(f.width, f.height);
      const words = new Uint32Array(img.data.buffer);
      const lut = frameLookup(this.app.mapName, f.min, f.max);
      for (let k = 0; k < f.levels.length; k++) words[k] = lut[f.levels[k]];
      ictx.putImageData(img, 0, 0);
      ctx.imageSmoothingEnabled = true;
      ctx.drawImage(this.image, rect.left, rect.top, rect.width, rect.height);
      if (place.mirrorBelowAxis) {
        ctx.save();
        ctx.translate(0, 2 * (rect.top + rect.height));
        ctx.scale(1, -1);
        ctx.drawImage(this.image, rect.left, rect.top, rect.width, rect.height);
        ctx.restore();
      }
    }
    const sc = this.app.scenario;
    if (sc && $("#ov-outline").checked) drawSketch(ctx, place, sc.sketch, sc.domain);
  }
}
