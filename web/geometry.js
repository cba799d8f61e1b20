// Where things are: the mapping between canvas pixels (CSS px) and metres of the domain, and the
// snapping of points to a grid in mm.
//
// In axisymmetric mode the page can show the reflection of the half plane below the axis (x is the
// axis, y the radius), so a nozzle looks whole; the flow itself is only computed above it.

export class Placement {
  /** domain {x_min_m, x_max_m, y_min_m, y_max_m}; widthPx, heightPx the canvas size in CSS px. */
  constructor(domain, widthPx, heightPx, mirrorBelowAxis = false) {
    this.domain = domain;
    this.widthPx = widthPx;
    this.heightPx = heightPx;
    this.mirrorBelowAxis = mirrorBelowAxis;
    this.x0 = domain.x_min_m;
    this.x1 = domain.x_max_m;
    this.y1 = domain.y_max_m;
    this.y0 = mirrorBelowAxis ? -domain.y_max_m : domain.y_min_m;
  }

  /** Shown height over shown width, for sizing the canvas. */
  static aspect(domain, mirrorBelowAxis) {
    const h = mirrorBelowAxis ? 2 * domain.y_max_m : domain.y_max_m - domain.y_min_m;
    return h / (domain.x_max_m - domain.x_min_m);
  }

  get metresPerPx() {
    return (this.x1 - this.x0) / this.widthPx;
  }

  toMetres(px, py) {
    return [
      this.x0 + (px / this.widthPx) * (this.x1 - this.x0),
      this.y1 - (py / this.heightPx) * (this.y1 - this.y0),
    ];
  }

  toPx(x, y) {
    return [
      ((x - this.x0) / (this.x1 - this.x0)) * this.widthPx,
      ((this.y1 - y) / (this.y1 - this.y0)) * this.heightPx,
    ];
  }

  /** Pixel rectangle {left, top, width, height} where the computed half (or all) of the flow sits. */
  flowRect() {
    const [left, top] = this.toPx(this.domain.x_min_m, this.domain.y_max_m);
    const [right, bottom] = this.toPx(this.domain.x_max_m, this.domain.y_min_m);
    return { left, top, width: right - left, height: bottom - top };
  }

  /** Whether a point in metres lies in the shown picture. */
  contains(x, y) {
    return x >= this.x0 && x <= this.x1 && y >= this.y0 && y <= this.y1;
  }

  /** The point where the flow is computed: reflected above the axis when shown mirrored. */
  flowPoint(x, y) {
    return this.mirrorBelowAxis && y < 0 ? [x, -y] : [x, y];
  }
}

/** Round a point in metres to a grid of `stepMm` millimetres (no snapping when stepMm <= 0). */
export function snap([x, y], stepMm) {
  if (!(stepMm > 0)) return [x, y];
  const step = stepMm / 1000;
  return [roundTo(Math.round(x / step) * step), roundTo(Math.round(y / step) * step)];
}

/** Trim float noise (0.1 + 0.2) so saved files read cleanly: 1 nm is far below any cell. */
export function roundTo(v) {
  return Math.round(v * 1e9) / 1e9;
}
