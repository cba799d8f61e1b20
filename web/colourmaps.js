// Colour maps of our own, built so that equal steps in level look like equal steps in colour.
//
// Each map is a few anchor colours. They are converted to OKLab (Ottosson 2020, a perceptual
// colour space with a simple closed form), joined by straight lines in that space, and the
// resulting path is resampled at equal arc length, so neighbouring entries of the 255-entry
// table are the same perceptual distance apart. Sequential maps have anchors of rising
// lightness; the diverging map falls to a light neutral in the middle and rises again in the
// other hue.

/** Anchor colours (sRGB hex) of each map, dark to light for the sequential ones. */
export const MAP_ANCHORS = {
  // warm clay: slate-black, dark umber, oxblood, terracotta, ochre, cream
  kiln: ["#14161f", "#3b2330", "#7d3535", "#c2603a", "#e3a25a", "#f4e3b5"],
  // cool: night, deep blue, sea blue, teal, green, pale lime
  lagoon: ["#0c1424", "#16365e", "#1f6f8b", "#3aa39a", "#8fd18a", "#eef5c2"],
  // moss to gold: near-black green, pine, moss, olive, gold, pale straw; for Mach number and speed
  meadow: ["#0f1a14", "#1f3d2b", "#3f6b3a", "#8a9a3f", "#d8c35a", "#f7f0c8"],
  // a grey with a faint blue cast, for numerical schlieren (1 = still gas is light)
  slate: ["#0f1317", "#f1f3f4"],
  // diverging: blue, neutral, brick; the middle level is zero for vorticity
  seesaw: ["#1f4e8c", "#7da6d6", "#f1eee8", "#e09a73", "#9c3620"],
};

/** Which map each view starts with; the user may pick another. */
export const DEFAULT_MAP = {
  density: "lagoon",
  pressure: "kiln",
  temperature: "kiln",
  mach: "meadow",
  speed: "meadow",
  schlieren: "slate",
  vorticity: "seesaw",
};

/** Maps whose middle is meant to sit on zero. */
export const DIVERGING = new Set(["seesaw"]);

/** Levels 0..254 are data; 255 marks a wall or no gas. */
export const DATA_LEVELS = 255;
export const WALL_LEVEL = 255;
/** Wall colour: a flat dark blue-grey, distinct from every map's dark end. */
export const WALL_RGB = [58, 64, 72];

// ------------------------------------------------------------------ sRGB <-> OKLab

function srgbToLinear(c) {
  return c <= 0.04045 ? c / 12.92 : Math.pow((c + 0.055) / 1.055, 2.4);
}

function linearToSrgb(c) {
  const v = c <= 0.0031308 ? 12.92 * c : 1.055 * Math.pow(c, 1 / 2.4) - 0.055;
  return Math.min(1, Math.max(0, v));
}

/** [r, g, b] in 0..1 (sRGB) -> [L, a, b] OKLab. */
export function srgbToOklab([r, g, b]) {
  const lr = srgbToLinear(r), lg = srgbToLinear(g), lb = srgbToLinear(b);
  const l = Math.cbrt(0.4122214708 * lr + 0.5363325363 * lg + 0.0514459929 * lb);
  const m = Math.cbrt(0.2119034982 * lr + 0.6806995451 * lg + 0.1073969566 * lb);
  const s = Math.cbrt(0.0883024619 * lr + 0.2817188376 * lg + 0.6299787005 * lb);
  return [
    0.2104542553 * l + 0.793617785 * m - 0.0040720468 * s,
    1.9779984951 * l - 2.428592205 * m + 0.4505937099 * s,
    0.0259040371 * l + 0.7827717662 * m - 0.808675766 * s,
  ];
}

/** [L, a, b] OKLab -> [r, g, b] in 0..1 (sRGB, clamped to the gamut). */
export function oklabToSrgb([L, a, b]) {
  const l = Math.pow(L + 0.3963377774 * a + 0.2158037573 * b, 3);
  const m = Math.pow(L - 0.1055613458 * a - 0.0638541728 * b, 3);
  const s = Math.pow(L - 0.0894841775 * a - 1.291485548 * b, 3);
  return [
    linearToSrgb(4.0767416621 * l - 3.3077115913 * m + 0.2309699292 * s),
    linearToSrgb(-1.2684380046 * l + 2.6097574011 * m - 0.3413193965 * s),
    linearToSrgb(-0.0041960863 * l - 0.7034186147 * m + 1.707614701 * s),
  ];
}

function hexToRgb01(hex) {
  const n = parseInt(hex.slice(1), 16);
  return [((n >> 16) & 255) / 255, ((n >> 8) & 255) / 255, (n & 255) / 255];
}

function distance(p, q) {
  return Math.hypot(p[0] - q[0], p[1] - q[1], p[2] - q[2]);
}

// ------------------------------------------------------------------ tables

/**
 * The map as `count` [r, g, b] (0..255) entries spaced at equal OKLab distance along the
 * anchors' path.
 */
export function buildTable(anchors, count = DATA_LEVELS) {
  const labs = anchors.map((h) => srgbToOklab(hexToRgb01(h)));
  const cumulative = [0];
  for (let k = 1; k < labs.length; k++) cumulative.push(cumulative[k - 1] + distance(labs[k - 1], labs[k]));
  const total = cumulative[cumulative.length - 1];
  const table = [];
  let seg = 1;
  for (let n = 0; n < count; n++) {
    const target = (total * n) / (count - 1);
    while (seg < labs.length - 1 && cumulative[seg] < target) seg++;
    const span = cumulative[seg] - cumulative[seg - 1] || 1;
    const t = Math.min(1, Math.max(0, (target - cumulative[seg - 1]) / span));
    const p = labs[seg - 1], q = labs[seg];
    const lab = [p[0] + t * (q[0] - p[0]), p[1] + t * (q[1] - p[1]), p[2] + t * (q[2] - p[2])];
    table.push(oklabToSrgb(lab).map((c) => Math.round(c * 255)));
  }
  return table;
}

const cache = new Map();

/**
 * A 256-entry lookup of packed RGBA words (for a Uint32Array view of ImageData, which is
 * little-endian on every browser platform): levels 0..254 from the map, 255 the wall colour.
 */
export function packedLookup(name) {
  if (cache.has(name)) return cache.get(name);
  const anchors = MAP_ANCHORS[name];
  if (!anchors) throw new Error(`colour map ${name} is not one of: ${Object.keys(MAP_ANCHORS).join(", ")}`);
  const table = buildTable(anchors);
  const packed = new Uint32Array(256);
  for (let n = 0; n < DATA_LEVELS; n++) {
    const [r, g, b] = table[n];
    packed[n] = (255 << 24) | (b << 16) | (g << 8) | r;
  }
  const [wr, wg, wb] = WALL_RGB;
  packed[WALL_LEVEL] = (255 << 24) | (wb << 16) | (wg << 8) | wr;
  const entry = { table, packed };
  cache.set(name, entry);
  return entry;
}

/** CSS colour of the map at fraction f in 0..1 (for the colour bar and plots). */
export function cssAt(name, f) {
  const { table } = packedLookup(name);
  const k = Math.round(Math.min(1, Math.max(0, f)) * (table.length - 1));
  const [r, g, b] = table[k];
  return `rgb(${r}, ${g}, ${b})`;
}

/**
 * Where a value falls on the map, 0..1, for a frame spanning [min, max]. A diverging map keeps
 * zero at its middle when the range straddles zero (vorticity), whatever the range's asymmetry;
 * every other map spreads [min, max] evenly.
 */
export function valueFraction(name, value, min, max) {
  let f;
  if (DIVERGING.has(name) && min < 0 && max > 0) f = 0.5 + value / (2 * Math.max(-min, max));
  else f = max > min ? (value - min) / (max - min) : 0.5;
  return Math.min(1, Math.max(0, f));
}

/** Where level k (0..254) of a frame spanning [min, max] falls on the map, 0..1. */
export function levelFraction(name, k, min, max) {
  return valueFraction(name, min + (k / (DATA_LEVELS - 1)) * (max - min), min, max);
}

/**
 * The packed lookup of `name` for one frame's range; level 255 is the wall. With `negate`, each
 * level shows the colour of minus its value: the picture of a sign-odd quantity (vorticity)
 * reflected below the axis.
 */
export function frameLookup(name, min, max, negate = false) {
  const { table, packed } = packedLookup(name);
  if (!negate && !(DIVERGING.has(name) && min < 0 && max > 0)) return packed;
  const out = new Uint32Array(256);
  for (let k = 0; k < DATA_LEVELS; k++) {
    const value = min + (k / (DATA_LEVELS - 1)) * (max - min);
    const f = valueFraction(name, negate ? -value : value, min, max);
    const [r, g, b] = table[Math.round(f * (table.length - 1))];
    out[k] = (255 << 24) | (b << 16) | (g << 8) | r;
  }
  out[WALL_LEVEL] = packed[WALL_LEVEL];
  return out;
}
