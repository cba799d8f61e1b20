// Turning SI numbers into readable text, always with the unit, and back from what a user types.

/** The user's choice of pressure unit for inputs and readouts. */
export const PRESSURE_UNITS = {
  kPa: 1e3,
  bar: 1e5,
  MPa: 1e6,
  Pa: 1,
};

let pressureUnit = "kPa";

export function setPressureUnit(name) {
  if (!(name in PRESSURE_UNITS)) throw new Error(`pressure unit ${name} is not one of ${Object.keys(PRESSURE_UNITS).join(", ")}`);
  pressureUnit = name;
}

export function getPressureUnit() {
  return pressureUnit;
}

/** A number to `digits` significant figures without exponent for everyday magnitudes. */
export function num(value, digits = 4) {
  if (value === null || value === undefined || Number.isNaN(value)) return "–";
  if (!Number.isFinite(value)) return value > 0 ? "∞" : "−∞";
  const mag = Math.abs(value);
  // round-off residue (a speed of 1e-13 m/s in still gas) reads as zero
  if (mag < 1e-9) return "0";
  if (mag >= 1e7 || mag < 1e-4) return value.toExponential(digits - 1).replace("e+", "e").replace(/-/g, "−");
  const decimals = Math.max(0, digits - 1 - Math.floor(Math.log10(mag)));
  return value.toFixed(Math.min(decimals, 8)).replace("-", "−");
}

/** A number for an input box: at most `digits` significant figures, plain JavaScript notation. */
export function plain(value, digits = 7) {
  if (!Number.isFinite(value)) return "";
  return String(Number(value.toPrecision(digits)));
}

/**
 * A number for a range box, whole in a few characters: 4 significant figures, exponent form
 * (4.739e9, valid in a number input) for large and small magnitudes, so the box never cuts it off.
 */
export function compact(value, digits = 4) {
  if (!Number.isFinite(value)) return "";
  const r = Number(value.toPrecision(digits));
  const a = Math.abs(r);
  if (a !== 0 && (a >= 1e5 || a < 1e-3)) return r.toExponential().replace("e+", "e");
  return String(r);
}

/** Display conversion of a view's SI unit: {unit, scale} so that shown = si / scale. */
export function displayUnit(siUnit) {
  switch (siUnit) {
    case "Pa":
      return { unit: pressureUnit, scale: PRESSURE_UNITS[pressureUnit] };
    case "kg/m^3":
      return { unit: "kg/m³", scale: 1 };
    case "-":
    case "":
      return { unit: "", scale: 1 };
    default:
      return { unit: siUnit, scale: 1 };
  }
}

const missing = (v) => v === null || v === undefined || Number.isNaN(v);

/** "123.4 kPa" for a value in Pa ("–" when there is no value, e.g. on a wall). */
export function pressure(pa, digits = 4) {
  if (missing(pa)) return "–";
  return `${num(pa / PRESSURE_UNITS[pressureUnit], digits)} ${pressureUnit}`;
}

export function temperature(k) {
  if (missing(k)) return "–";
  return `${num(k, 4)} K`;
}

export function density(kgm3) {
  if (missing(kgm3)) return "–";
  return `${num(kgm3, 4)} kg/m³`;
}

export function speed(ms) {
  if (missing(ms)) return "–";
  return `${num(ms, 4)} m/s`;
}

export function mach(m) {
  if (missing(m)) return "–";
  return `M ${num(m, 3)}`;
}

/** Lengths in mm (the unit of drawing on this scale). */
export function length(m, digits = 4) {
  if (missing(m)) return "–";
  return `${num(m * 1e3, digits)} mm`;
}

/** The one area unit for a set of areas (a table column): m² when the largest is 0.01 m² or more, else mm². */
export function areaUnit(values) {
  const top = Math.max(0, ...values.filter((v) => !missing(v)).map(Math.abs));
  return top >= 1e-2 ? "m²" : "mm²";
}

export function area(m2, unit = areaUnit([m2])) {
  if (missing(m2)) return "–";
  return unit === "m²" ? `${num(m2, 4)} m²` : `${num(m2 * 1e6, 4)} mm²`;
}

/** Sim time: µs, ms or s, whichever reads best. */
export function simTime(s) {
  if (s < 1e-3) return `${num(s * 1e6, 4)} µs`;
  if (s < 1) return `${num(s * 1e3, 4)} ms`;
  return `${num(s, 4)} s`;
}

export function massFlow(kgs) {
  if (missing(kgs)) return "–";
  return `${num(kgs, 4)} kg/s`;
}

export function force(n) {
  if (missing(n)) return "–";
  if (Math.abs(n) >= 1e4) return `${num(n / 1e3, 4)} kN`;
  return `${num(n, 4)} N`;
}

/** Rates such as steps/s or cell updates/s: 12.3 k, 4.5 M. */
export function rate(x, unit) {
  if (x >= 1e6) return `${num(x / 1e6, 3)} M${unit}`;
  if (x >= 1e4) return `${num(x / 1e3, 3)} k${unit}`;
  return `${num(x, 3)} ${unit}`;
}

/** A view value in its display unit, with the unit. */
export function viewValue(si, siUnit) {
  if (missing(si)) return "–";
  const { unit, scale } = displayUnit(siUnit);
  return unit ? `${num(si / scale, 4)} ${unit}` : num(si / scale, 4);
}
