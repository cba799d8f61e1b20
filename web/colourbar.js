// The colour bar under the picture: the map, round-number ticks in the display unit, and a caption
// naming quantity, unit and whether the range follows the flow (auto) or is held (fixed).

import { cssAt, levelFraction, DATA_LEVELS } from "./colourmaps.js";
import { num } from "./units.js";

/** Round tick values covering [lo, hi], about `count` of them (1, 2, 2.5, 5 times a power of ten). */
export function niceTicks(lo, hi, count = 6) {
  if (!(hi > lo) || !Number.isFinite(lo) || !Number.isFinite(hi)) return [lo];
  const raw = (hi - lo) / Math.max(1, count);
  const power = Math.pow(10, Math.floor(Math.log10(raw)));
  // the round steps around the raw one, smallest first: 1, 2, 2.5, 5 times a power of ten
  const steps = [];
  for (const p of [power / 10, power, power * 10]) for (const m of [1, 2, 2.5, 5]) steps.push(m * p);
  let k = steps.findIndex((s) => s >= raw * (1 - 1e-12));
  for (; k >= 0; k--) {
    const step = steps[k];
    // a hair of tolerance, so that 0.7 / 0.1 = 6.999... still puts a tick on the end at 0.7
    const first = Math.ceil(lo / step - 1e-9), last = Math.floor(hi / step + 1e-9);
    // a span too small for the numbers' precision gives no usable steps: show the ends
    if (!(step > 0) || !(Math.max(Math.abs(first), Math.abs(last)) < 1e12) || last - first > 50) return [lo, hi];
    if (last - first < 1) continue;  // fewer than two ticks: take the next smaller round step
    const ticks = [];
    for (let n = first; n <= last; n++) ticks.push(n === 0 ? 0 : n * step);
    return ticks;
  }
  return [lo, hi];
}

/** Whether every label, read back as a number, is its tick to well within the step. */
function exact(ticks, labels, step) {
  return labels.every((text, n) => Math.abs(Number(text) - ticks[n]) <= 1e-6 * step);
}

/**
 * Tick labels with as many digits as the ticks need and no more: 0.25, 0.75, 1.25 for steps of 0.25
 * (never 0.3, 0.8, 1.3); large or tiny ones as 2.5e6. Minus signs are typographic (−).
 */
export function tickLabels(ticks) {
  if (ticks.length < 2) return ticks.map((t) => num(t, 4));
  const step = Math.abs(ticks[1] - ticks[0]);
  const top = Math.max(...ticks.map(Math.abs));
  const minus = (text) => text.replace(/-/g, "−");
  let labels = null;
  if (top >= 1e5 || (top > 0 && top < 1e-3)) {
    for (let digits = 1; digits <= 12 && !labels; digits++) {
      const out = ticks.map((t) => (t === 0 ? "0" : t.toExponential(digits - 1).replace("e+", "e")));
      if (exact(ticks, out, step)) labels = out;
    }
  } else {
    for (let decimals = 0; decimals <= 12 && !labels; decimals++) {
      const out = ticks.map((t) => t.toFixed(decimals));
      if (exact(ticks, out, step)) labels = out;
    }
  }
  return (labels || ticks.map((t) => String(t))).map((t) => minus(t === "-0" ? "0" : t));
}

/** Size a canvas's backing store to its CSS size times the pixel ratio; returns a cleared context in CSS pixels. */
export function fitCanvas(canvas) {
  const dpr = window.devicePixelRatio || 1;
  const w = canvas.clientWidth, h = canvas.clientHeight;
  if (canvas.width !== Math.round(w * dpr) || canvas.height !== Math.round(h * dpr)) {
    canvas.width = Math.round(w * dpr);
    canvas.height = Math.round(h * dpr);
  }
  const ctx = canvas.getContext("2d");
  ctx.setTransform(dpr, 0, 0, dpr, 0, 0);
  ctx.clearRect(0, 0, w, h);
  return { ctx, w, h };
}

/**
 * Draw the bar on `canvas` (CSS size read from the element) for a range [minShown, maxShown]
 * in display units.
 */
export function drawColourBar(canvas, mapName, minShown, maxShown) {
  const { ctx, w, h } = fitCanvas(canvas);
  const pad = 12, barH = 14;
  const barW = w - 2 * pad;
  for (let k = 0; k < barW; k++) {
    const level = (k / Math.max(1, barW - 1)) * (DATA_LEVELS - 1);
    ctx.fillStyle = cssAt(mapName, levelFraction(mapName, level, minShown, maxShown));
    ctx.fillRect(pad + k, 2, 1.5, barH);
  }
  ctx.strokeStyle = "rgba(255,255,255,0.35)";
  ctx.strokeRect(pad - 0.5, 1.5, barW + 1, barH + 1);
  if (!(Number.isFinite(minShown) && Number.isFinite(maxShown))) return;
  ctx.fillStyle = "#d8dde3";
  ctx.strokeStyle = "#d8dde3";
  ctx.font = "11px system-ui, sans-serif";
  ctx.textAlign = "center";
  const span = maxShown - minShown;
  const ticks = span > 0 ? niceTicks(minShown, maxShown, Math.max(2, Math.floor(barW / 70))) : [minShown];
  const labels = tickLabels(ticks);
  canvas.dataset.ticks = labels.join(" ");
  ticks.forEach((t, n) => {
    const x = pad + (span > 0 ? ((t - minShown) / span) * barW : barW / 2);
    ctx.beginPath();
    ctx.moveTo(x, barH + 2);
    ctx.lineTo(x, barH + 6);
    ctx.stroke();
    // keep the end labels inside the bar's canvas
    const half = ctx.measureText(labels[n]).width / 2;
    ctx.fillText(labels[n], Math.min(w - half - 1, Math.max(half + 1, x)), barH + 18);
  });
}
