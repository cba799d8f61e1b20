// A small line plot for the strip under the picture: probe histories against sim time, or a
// distribution along a station or the axis with the isentropic 1D curve beside it.

import { fitCanvas, niceTicks, tickLabels } from "./colourbar.js";

export const SERIES_COLOURS = ["#ffd447", "#52d0f0", "#ff6b8b", "#8fe07e", "#c9b6ff", "#ff9f43"];

/**
 * series: [{name, xs, ys, dashed?, colour?}], axes: {xLabel, yLabel}. Draws onto `canvas` at its
 * CSS size; an empty plot says `emptyText`.
 */
export function drawPlot(canvas, series, axes, emptyText = "nothing to plot yet") {
  const { ctx, w, h } = fitCanvas(canvas);
  canvas.dataset.xlabel = (axes && axes.xLabel) || "";
  ctx.font = "11px system-ui, sans-serif";
  const left = 58, right = 10, top = 10, bottom = 30;
  const pw = w - left - right, ph = h - top - bottom;
  let xmin = Infinity, xmax = -Infinity, ymin = Infinity, ymax = -Infinity;
  for (const s of series) {
    for (let k = 0; k < s.xs.length; k++) {
      const x = s.xs[k], y = s.ys[k];
      if (!Number.isFinite(x) || !Number.isFinite(y)) continue;
      xmin = Math.min(xmin, x); xmax = Math.max(xmax, x);
      ymin = Math.min(ymin, y); ymax = Math.max(ymax, y);
    }
  }
  ctx.fillStyle = "#9aa6b2";
  if (!(xmax >= xmin) || pw < 20 || ph < 20) {
    ctx.fillText(emptyText, 12, h / 2);
    return;
  }
  if (xmax === xmin) { xmin -= 0.5; xmax += 0.5; }
  // a flat line (or one flat to round-off) gets a visible band around it
  if (ymax - ymin <= 1e-9 * Math.max(Math.abs(ymin), Math.abs(ymax))) { const d = Math.abs(ymin) * 0.05 || 0.5; ymin -= d; ymax += d; }
  const padY = 0.05 * (ymax - ymin);
  ymin -= padY; ymax += padY;
  const X = (x) => left + ((x - xmin) / (xmax - xmin)) * pw;
  const Y = (y) => top + (1 - (y - ymin) / (ymax - ymin)) * ph;
  // frame and ticks
  ctx.strokeStyle = "rgba(255,255,255,0.18)";
  ctx.strokeRect(left, top, pw, ph);
  ctx.textAlign = "right";
  const yt = niceTicks(ymin, ymax, 4);
  tickLabels(yt).forEach((text, n) => {
    ctx.beginPath(); ctx.moveTo(left, Y(yt[n])); ctx.lineTo(left + pw, Y(yt[n])); ctx.stroke();
    ctx.fillText(text, left - 4, Y(yt[n]) + 4);
  });
  ctx.textAlign = "center";
  const xt = niceTicks(xmin, xmax, Math.max(2, Math.floor(pw / 80)));
  tickLabels(xt).forEach((text, n) => ctx.fillText(text, X(xt[n]), top + ph + 13));
  ctx.fillText(axes.xLabel || "", left + pw / 2, h - 3);
  ctx.save();
  ctx.translate(11, top + ph / 2);
  ctx.rotate(-Math.PI / 2);
  ctx.fillText(axes.yLabel || "", 0, 0);
  ctx.restore();
  // lines
  series.forEach((s, n) => {
    ctx.save();
    ctx.strokeStyle = s.colour || SERIES_COLOURS[n % SERIES_COLOURS.length];
    ctx.lineWidth = 1.6;
    if (s.dashed) ctx.setLineDash([5, 4]);
    ctx.beginPath();
    let open = false;
    for (let k = 0; k < s.xs.length; k++) {
      const x = s.xs[k], y = s.ys[k];
      if (!Number.isFinite(x) || !Number.isFinite(y)) { open = false; continue; }
      if (!open) { ctx.moveTo(X(x), Y(y)); open = true; } else ctx.lineTo(X(x), Y(y));
    }
    ctx.stroke();
    ctx.restore();
  });
  // legend
  ctx.textAlign = "left";
  let lx = left + 8;
  series.forEach((s, n) => {
    const c = s.colour || SERIES_COLOURS[n % SERIES_COLOURS.length];
    ctx.fillStyle = c;
    ctx.fillRect(lx, top + 6, 12, s.dashed ? 2 : 3);
    ctx.fillStyle = "#d8dde3";
    ctx.fillText(s.name, lx + 16, top + 11);
    lx += 24 + ctx.measureText(s.name).width;
  });
}
