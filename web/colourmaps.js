// Colour maps: the server's own tables (solver/colourmaps.py), so the page and the report images
// draw a view with the same colours. The hello message carries every map as 255 colours spaced
// evenly in OKLab, which maps diverge, the map each view starts with, and the wall colour.

/** Map name -> { table: [[r, g, b], ...] (levels 0..254), diverging }; filled by setMaps(hello.colour_maps). */
export const MAPS = new Map();
/** Which map each view starts with; the user may pick another. */
export const DEFAULT_MAP = {};
/** Maps whose middle is meant to sit on zero. */
export const DIVERGING = new Set();

/** Levels 0..254 are data; 255 marks a wall or no gas. */
export const DATA_LEVELS = 255;
export const WALL_LEVEL = 255;
/** Wall colour (from the server). */
export let WALL_RGB = [58, 64, 72];

function hexToRgb(hex) {
  const n = parseInt(hex.slice(1), 16);
  return [(n >> 16) & 255, (n >> 8) & 255, n & 255];
}

/** Take the maps the server sent: {maps: [{name, diverging, colours: ["#rrggbb", ...]}], views, wall}. */
export function setMaps(sent) {
  MAPS.clear();
  DIVERGING.clear();
  cache.clear();
  for (const m of sent.maps || []) {
    MAPS.set(m.name, { table: m.colours.map(hexToRgb), diverging: !!m.diverging });
    if (m.diverging) DIVERGING.add(m.name);
  }
  for (const k of Object.keys(DEFAULT_MAP)) delete DEFAULT_MAP[k];
  Object.assign(DEFAULT_MAP, sent.views || {});
  if (sent.wall) WALL_RGB = hexToRgb(sent.wall);
}

/** A grey ramp, used only until the server's maps have arrived. */
function fallbackTable() {
  return Array.from({ length: DATA_LEVELS }, (_, n) => { const v = Math.round((n * 255) / (DATA_LEVELS - 1)); return [v, v, v]; });
}

const cache = new Map();

/**
 * A 256-entry lookup of packed RGBA words (for a Uint32Array view of ImageData, which is
 * little-endian on every browser platform): levels 0..254 from the map, 255 the wall colour.
 */
export function packedLookup(name) {
  if (cache.has(name)) return cache.get(name);
  const map = MAPS.get(name);
  if (!map && MAPS.size) throw new Error(`colour map ${name} is not one of: ${Array.from(MAPS.keys()).join(", ")}`);
  const table = map ? map.table : fallbackTable();
  const packed = new Uint32Array(256);
  for (let n = 0; n < DATA_LEVELS; n++) {
    const [r, g, b] = table[n];
    packed[n] = (255 << 24) | (b << 16) | (g << 8) | r;
  }
  const [wr, wg, wb] = WALL_RGB;
  packed[WALL_LEVEL] = (255 << 24) | (wb << 16) | (wg << 8) | wr;
  const entry = { table, packed };
  if (map) cache.set(name, entry);
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
