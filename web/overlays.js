// What is drawn over the flow picture: the sketch outline, stations, probes, the sonic line, the
// velocity arrows and the shape being drawn. All inputs are in metres; `place` maps to pixels.

/** Outline colour of each paint kind (chalk on slate). */
export const PAINT_COLOURS = {
  wall: "#f4f1e6",
  reservoir: "#ff9f43",
  stream: "#52d0f0",
  ambient: "#8fe07e",
  fluid: "#c9b6ff",
};

function px(place, p) {
  return place.toPx(p[0], p[1]);
}

function tracePath(ctx, place, points, close) {
  ctx.beginPath();
  points.forEach((p, n) => {
    const [x, y] = px(place, p);
    if (n === 0) ctx.moveTo(x, y);
    else ctx.lineTo(x, y);
  });
  if (close) ctx.closePath();
}

/** Reflect a shape dict about the line y = yLine. */
export function reflectShape(shape, yLine) {
  const r = (p) => [p[0], 2 * yLine - p[1]];
  switch (shape.kind) {
    case "stroke":
    case "polygon":
      return { ...shape, points_m: shape.points_m.map(r) };
    case "segment":
      return { ...shape, start_m: r(shape.start_m), end_m: r(shape.end_m) };
    case "rectangle":
      return { ...shape, corner_a_m: r(shape.corner_a_m), corner_b_m: r(shape.corner_b_m) };
    case "circle":
      return { ...shape, centre_m: r(shape.centre_m) };
    default:
      return shape;
  }
}

/** Draw one shape's outline; `style` "solid" | "echo" (a mirror image) | "draft" (being drawn). */
export function drawShape(ctx, place, shape, style = "solid") {
  const colour = PAINT_COLOURS[shape.paints] || "#ffffff";
  ctx.save();
  ctx.strokeStyle = colour;
  ctx.fillStyle = colour;
  ctx.lineJoin = "round";
  ctx.lineCap = "round";
  ctx.lineWidth = style === "draft" ? 2 : 1.5;
  if (style !== "solid") ctx.setLineDash(style === "draft" ? [6, 4] : [3, 4]);
  if (shape.paints === "fluid") ctx.setLineDash([2, 3]);
  const band = (points) => {
    // the painted band of a stroke or segment, then its centre line
    const widthPx = shape.width_m / place.metresPerPx;
    ctx.save();
    ctx.globalAlpha = style === "draft" ? 0.45 : 0.28;
    ctx.setLineDash([]);
    ctx.lineWidth = Math.max(1, widthPx);
    tracePath(ctx, place, points, false);
    ctx.stroke();
    ctx.restore();
    tracePath(ctx, place, points, false);
    ctx.stroke();
  };
  switch (shape.kind) {
    case "stroke":
      band(shape.points_m);
      break;
    case "segment":
      band([shape.start_m, shape.end_m]);
      break;
    case "rectangle": {
      const a = px(place, shape.corner_a_m), b = px(place, shape.corner_b_m);
      ctx.strokeRect(Math.min(a[0], b[0]), Math.min(a[1], b[1]), Math.abs(b[0] - a[0]), Math.abs(b[1] - a[1]));
      break;
    }
    case "polygon":
      tracePath(ctx, place, shape.points_m, true);
      ctx.stroke();
      break;
    case "circle": {
      const c = px(place, shape.centre_m);
      ctx.beginPath();
      ctx.arc(c[0], c[1], shape.radius_m / place.metresPerPx, 0, 2 * Math.PI);
      ctx.stroke();
      break;
    }
    default:
      break;
  }
  ctx.restore();
}

/** The whole sketch with its mirror images; in a mirrored axisymmetric picture, also below the axis. */
export function drawSketch(ctx, place, sketch, domain) {
  if (!sketch) return;
  const mirrorLine =
    sketch.mirror === "axis" ? 0 : sketch.mirror === "midline" ? 0.5 * (domain.y_min_m + domain.y_max_m) : null;
  for (const shape of sketch.shapes) {
    drawShape(ctx, place, shape, "solid");
    if (mirrorLine !== null) drawShape(ctx, place, reflectShape(shape, mirrorLine), "echo");
    if (place.mirrorBelowAxis && mirrorLine !== 0) drawShape(ctx, place, reflectShape(shape, 0), "echo");
  }
}

function label(ctx, text, x, y, colour) {
  ctx.save();
  ctx.font = "12px system-ui, sans-serif";
  ctx.lineWidth = 3;
  ctx.strokeStyle = "rgba(10, 14, 20, 0.85)";
  ctx.strokeText(text, x, y);
  ctx.fillStyle = colour;
  ctx.fillText(text, x, y);
  ctx.restore();
}

export const STATION_COLOUR = "#ffd447";
export const PROBE_COLOUR = "#ff6b8b";

const LABEL_FONT = "12px system-ui, sans-serif";
const LABEL_H = 15;

/**
 * Where a label goes: near (x, y) (its baseline), kept inside the picture and moved down, row by row,
 * off the labels already placed. `placed` collects the boxes {x, y, w, h, text} (top-left corner).
 */
export function placeLabel(ctx, place, text, x, y, placed) {
  ctx.save();
  ctx.font = LABEL_FONT;
  const w = ctx.measureText(text).width + 2;
  ctx.restore();
  const maxX = Math.max(2, place.widthPx - w - 2);
  let bx = Math.min(Math.max(2, x), maxX);
  let top = Math.min(Math.max(2, y - 12), place.heightPx - LABEL_H);
  const hits = (t) => placed.some((b) => bx < b.x + b.w && b.x < bx + w && t < b.y + b.h && b.y < t + LABEL_H);
  for (let n = 0; n < 40 && hits(top); n++) {
    top += LABEL_H;
    if (top > place.heightPx - LABEL_H) { top = 2; bx = Math.min(bx + 12, maxX); }
  }
  const box = { x: bx, y: top, w, h: LABEL_H, text };
  placed.push(box);
  return box;
}

export function drawStations(ctx, place, stations, placed = []) {
  for (const st of stations || []) {
    const a = px(place, st.start_m), b = px(place, st.end_m);
    ctx.save();
    ctx.strokeStyle = STATION_COLOUR;
    ctx.lineWidth = 2;
    ctx.beginPath();
    ctx.moveTo(a[0], a[1]);
    ctx.lineTo(b[0], b[1]);
    ctx.stroke();
    // short ticks across each end
    const dx = b[0] - a[0], dy = b[1] - a[1];
    const len = Math.hypot(dx, dy) || 1;
    const nx = (-dy / len) * 5, ny = (dx / len) * 5;
    for (const e of [a, b]) {
      ctx.beginPath();
      ctx.moveTo(e[0] - nx, e[1] - ny);
      ctx.lineTo(e[0] + nx, e[1] + ny);
      ctx.stroke();
    }
    ctx.restore();
    const top = a[1] < b[1] ? a : b;
    const text = st.role && st.role !== st.name ? `${st.name} (${st.role})` : st.name;
    const box = placeLabel(ctx, place, text, top[0] + 4, top[1] - 5, placed);
    label(ctx, text, box.x, box.y + 12, STATION_COLOUR);
  }
  return placed;
}

/** The starting gas region of the scenario (`initial`), dashed, so the fill the flow starts from is seen. */
export function drawInitial(ctx, place, initial, domain) {
  if (!initial || (initial.kind !== "reservoir_upstream_of_x" && initial.kind !== "reservoir_in_circle")) return;
  ctx.save();
  ctx.strokeStyle = PAINT_COLOURS.reservoir;
  ctx.fillStyle = PAINT_COLOURS.reservoir;
  ctx.lineWidth = 1.5;
  ctx.setLineDash([8, 5]);
  let lx, ly;
  if (initial.kind === "reservoir_upstream_of_x") {
    const [x, yTop] = place.toPx(initial.x_m, domain.y_max_m);
    const [, yBottom] = place.toPx(initial.x_m, place.mirrorBelowAxis ? -domain.y_max_m : domain.y_min_m);
    ctx.beginPath();
    ctx.moveTo(x, yTop);
    ctx.lineTo(x, yBottom);
    ctx.stroke();
    [lx, ly] = [x - 4, yTop + 14];
    ctx.textAlign = "right";
  } else {
    const [cx, cy] = place.toPx(initial.centre_m[0], initial.centre_m[1]);
    ctx.beginPath();
    ctx.arc(cx, cy, initial.radius_m / place.metresPerPx, 0, 2 * Math.PI);
    ctx.stroke();
    [lx, ly] = [cx, cy - initial.radius_m / place.metresPerPx - 4];
    ctx.textAlign = "center";
  }
  ctx.font = LABEL_FONT;
  ctx.setLineDash([]);
  ctx.lineWidth = 3;
  ctx.strokeStyle = "rgba(10, 14, 20, 0.85)";
  const text = "starting reservoir gas";
  ly = Math.max(12, ly);
  ctx.strokeText(text, lx, ly);
  ctx.fillText(text, lx, ly);
  ctx.restore();
}

export function drawProbes(ctx, place, probes) {
  for (const pr of probes || []) {
    const [x, y] = place.toPx(pr.x_m, pr.y_m);
    ctx.save();
    ctx.strokeStyle = PROBE_COLOUR;
    ctx.lineWidth = 2;
    ctx.beginPath();
    ctx.arc(x, y, 5, 0, 2 * Math.PI);
    ctx.moveTo(x - 8, y);
    ctx.lineTo(x + 8, y);
    ctx.moveTo(x, y - 8);
    ctx.lineTo(x, y + 8);
    ctx.stroke();
    ctx.restore();
    label(ctx, pr.name, x + 8, y - 8, PROBE_COLOUR);
  }
}

/** Sonic line pieces [[x1, y1, x2, y2], ...] in metres (also mirrored when the picture is). */
export function drawSonicLine(ctx, place, pieces) {
  if (!pieces || !pieces.length) return;
  const passes = place.mirrorBelowAxis ? [1, -1] : [1];
  ctx.save();
  for (const [width, colour] of [[4, "rgba(10, 10, 10, 0.6)"], [1.6, "#ffffff"]]) {
    ctx.lineWidth = width;
    ctx.strokeStyle = colour;
    ctx.beginPath();
    for (const s of passes) {
      for (const [x1, y1, x2, y2] of pieces) {
        const a = place.toPx(x1, s * y1), b = place.toPx(x2, s * y2);
        ctx.moveTo(a[0], a[1]);
        ctx.lineTo(b[0], b[1]);
      }
    }
    ctx.stroke();
  }
  ctx.restore();
}

/** Velocity arrows [[x, y, u, v], ...]: the fastest is drawn `longestPx` long. */
export function drawArrows(ctx, place, arrows, longestPx = 18) {
  if (!arrows || !arrows.length) return;
  let top = 0;
  for (const a of arrows) top = Math.max(top, Math.hypot(a[2], a[3]));
  if (!(top > 0)) return;
  const passes = place.mirrorBelowAxis ? [1, -1] : [1];
  ctx.save();
  for (const [width, colour] of [[3, "rgba(10, 10, 10, 0.55)"], [1.2, "#f8f8f8"]]) {
    ctx.lineWidth = width;
    ctx.strokeStyle = colour;
    ctx.beginPath();
    for (const s of passes) {
      for (const [x, y, u, v] of arrows) {
        const len = (Math.hypot(u, v) / top) * longestPx;
        if (len < 1.5) continue;
        const [bx, by] = place.toPx(x, s * y);
        const ang = Math.atan2(-s * v, u);
        const tx = bx + len * Math.cos(ang), ty = by + len * Math.sin(ang);
        ctx.moveTo(bx, by);
        ctx.lineTo(tx, ty);
        const head = Math.min(5, 0.4 * len);
        ctx.moveTo(tx, ty);
        ctx.lineTo(tx - head * Math.cos(ang - 0.45), ty - head * Math.sin(ang - 0.45));
        ctx.moveTo(tx, ty);
        ctx.lineTo(tx - head * Math.cos(ang + 0.45), ty - head * Math.sin(ang + 0.45));
      }
    }
    ctx.stroke();
  }
  ctx.restore();
}

/** The axis of an axisymmetric picture: a thin dash-dot line at y = 0. */
export function drawAxis(ctx, place) {
  const [x0, y] = place.toPx(place.x0, 0);
  const [x1] = place.toPx(place.x1, 0);
  ctx.save();
  ctx.strokeStyle = "rgba(255, 255, 255, 0.55)";
  ctx.setLineDash([14, 4, 2, 4]);
  ctx.lineWidth = 1;
  ctx.beginPath();
  ctx.moveTo(x0, y);
  ctx.lineTo(x1, y);
  ctx.stroke();
  ctx.restore();
}
