// The drawing tools: pointer gestures on the canvas become shape dicts in metres (the form of
// solver/shapes.py), stations and probes. The server owns the sketch; this only proposes shapes.

import { roundTo, snap } from "./geometry.js";
import { reflectShape } from "./overlays.js";

export const TOOLS = ["look", "stroke", "segment", "rectangle", "polygon", "circle", "station", "probe"];
export const PAINTS = ["wall", "reservoir", "stream", "ambient", "fluid"];

/** Smallest drag (CSS px) that counts as a shape rather than a stray click. */
const MIN_DRAG_PX = 3;
/** A freehand stroke keeps a point when the pointer has moved this far (CSS px). */
const STROKE_STEP_PX = 2.5;

function shapePoints(shape) {
  switch (shape.kind) {
    case "stroke":
    case "polygon":
      return shape.points_m;
    case "segment":
      return [shape.start_m, shape.end_m];
    case "rectangle":
      return [shape.corner_a_m, shape.corner_b_m];
    case "circle":
      return [shape.centre_m];
    default:
      return [];
  }
}

export class SketchTools {
  /**
   * canvas: the element pointer events come from; getPlace(): the current Placement;
   * settings(): {tool, paints, widthMm, snapMm}; handlers: onShape, onStation, onProbe,
   * onHover(pointMetres|null), onDraft() (redraw the preview).
   */
  constructor(canvas, getPlace, settings, handlers) {
    this.canvas = canvas;
    this.getPlace = getPlace;
    this.settings = settings;
    this.h = handlers;
    this.draft = null; // shape dict or {kind: "station", ...} being drawn
    this.pressed = null; // {startPx, points}
    this.polygon = null; // vertices in metres while a polygon is open
    canvas.addEventListener("pointerdown", (e) => this.down(e));
    canvas.addEventListener("pointermove", (e) => this.move(e));
    canvas.addEventListener("pointerup", (e) => this.up(e));
    canvas.addEventListener("pointerleave", () => this.h.onHover(null));
    canvas.addEventListener("dblclick", (e) => {
      if (this.settings().tool === "polygon") {
        e.preventDefault();
        this.closePolygon();
      }
    });
  }

  localPx(e) {
    const r = this.canvas.getBoundingClientRect();
    return [e.clientX - r.left, e.clientY - r.top];
  }

  metres(pxy, snapped = true) {
    const m = this.getPlace().toMetres(pxy[0], pxy[1]);
    const s = this.settings();
    return snapped ? snap(m, s.snapMm) : [roundTo(m[0]), roundTo(m[1])];
  }

  /** Cancel whatever is half drawn (Escape). */
  cancel() {
    this.draft = null;
    this.pressed = null;
    this.polygon = null;
    this.h.onDraft();
  }

  down(e) {
    if (e.button !== 0 || !this.getPlace()) return;
    const s = this.settings();
    const p = this.localPx(e);
    if (s.tool === "look") return;
    if (s.tool === "probe") {
      this.h.onProbe(this.toFlow(this.metres(p)));
      return;
    }
    if (s.tool === "polygon") {
      const m = this.metres(p);
      if (!this.polygon) this.polygon = [];
      const last = this.polygon[this.polygon.length - 1];
      const first = this.polygon[0];
      const place = this.getPlace();
      const near = (q) => q && Math.hypot(...place.toPx(...q).map((v, k) => v - place.toPx(...m)[k])) < 6;
      if (this.polygon.length >= 3 && near(first)) {
        this.closePolygon();
        return;
      }
      if (!near(last)) this.polygon.push(m);
      this.draft = { kind: "polygon", points_m: [...this.polygon, m], paints: s.paints };
      this.h.onDraft();
      return;
    }
    this.canvas.setPointerCapture(e.pointerId);
    this.pressed = { startPx: p, lastPx: p, start: this.metres(p, s.tool !== "stroke"), points: [this.metres(p, false)] };
    this.updateDraft(p);
  }

  move(e) {
    const p = this.localPx(e);
    const place = this.getPlace();
    if (!place) return;
    const here = place.toMetres(p[0], p[1]);
    this.h.onHover(place.contains(here[0], here[1]) ? place.flowPoint(here[0], here[1]) : null, here);
    const s = this.settings();
    if (s.tool === "polygon" && this.polygon) {
      this.draft = { kind: "polygon", points_m: [...this.polygon, this.metres(p)], paints: s.paints };
      this.h.onDraft();
      return;
    }
    if (!this.pressed) return;
    if (s.tool === "stroke") {
      const [lx, ly] = this.pressed.lastPx;
      if (Math.hypot(p[0] - lx, p[1] - ly) >= STROKE_STEP_PX) {
        this.pressed.points.push(this.metres(p, false));
        this.pressed.lastPx = p;
      }
    }
    this.updateDraft(p);
  }

  up(e) {
    if (!this.pressed) return;
    const p = this.localPx(e);
    const s = this.settings();
    if (s.tool === "stroke") this.pressed.points.push(this.metres(p, false));
    this.updateDraft(p);
    const dragged = Math.hypot(p[0] - this.pressed.startPx[0], p[1] - this.pressed.startPx[1]) >= MIN_DRAG_PX;
    const draft = this.draft;
    this.pressed = null;
    this.draft = null;
    this.h.onDraft();
    if (!draft) return;
    if (draft.kind === "station") {
      if (dragged) this.h.onStation(this.toFlow(draft.start_m), this.toFlow(draft.end_m));
      return;
    }
    if (!dragged && draft.kind !== "stroke") return;
    this.h.onShape(this.shapeToFlow(draft));
  }

  updateDraft(p) {
    const s = this.settings();
    const a = this.pressed.start;
    const b = this.metres(p, s.tool !== "stroke");
    const width_m = Math.max(1e-6, s.widthMm / 1000);
    switch (s.tool) {
      case "stroke": {
        const pts = this.pressed.points.length >= 2 ? this.pressed.points : [a, a];
        this.draft = { kind: "stroke", points_m: pts.slice(), width_m, paints: s.paints };
        break;
      }
      case "segment":
        this.draft = { kind: "segment", start_m: a, end_m: b, width_m, paints: s.paints };
        break;
      case "rectangle":
        this.draft = { kind: "rectangle", corner_a_m: a, corner_b_m: b, paints: s.paints };
        break;
      case "circle": {
        const step = s.snapMm > 0 ? s.snapMm / 1000 : 0;
        let r = Math.hypot(b[0] - a[0], b[1] - a[1]);
        if (step) r = Math.max(step, Math.round(r / step) * step);
        this.draft = { kind: "circle", centre_m: a, radius_m: roundTo(Math.max(r, 1e-6)), paints: s.paints };
        break;
      }
      case "station":
        this.draft = { kind: "station", start_m: a, end_m: b };
        break;
      default:
        this.draft = null;
    }
    this.h.onDraft();
  }

  closePolygon() {
    const s = this.settings();
    const pts = this.polygon || [];
    this.polygon = null;
    this.draft = null;
    this.h.onDraft();
    if (pts.length >= 3) this.h.onShape(this.shapeToFlow({ kind: "polygon", points_m: pts, paints: s.paints }));
  }

  /** A point drawn in the reflected half of an axisymmetric picture belongs above the axis. */
  toFlow(m) {
    return this.getPlace().flowPoint(m[0], m[1]);
  }

  /** A shape drawn wholly below the axis of a mirrored picture is reflected above it. */
  shapeToFlow(shape) {
    const place = this.getPlace();
    if (!place.mirrorBelowAxis) return shape;
    const pts = shapePoints(shape);
    const reach = shape.kind === "circle" ? shape.radius_m : 0;
    if (pts.length && pts.every((q) => q[1] + reach <= 0)) return reflectShape(shape, 0);
    return shape;
  }
}
