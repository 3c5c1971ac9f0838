// Colour for maps and charts, and the colour relief with hillshade.
//
// Palettes (published, perceptually uniform or designed for colour-vision deficiency, via npm
// d3-scale-chromatic):
// - values: "viridis" (van der Walt & Smith, matplotlib's default since 2.0, SciPy 2015: perceptually
//   uniform, monotonic in lightness, so it reads in greyscale and for the common colour-vision
//   deficiencies). The darkest fifth is left out so black contour lines stay visible on it.
// - residuals (signed): ColorBrewer "RdBu" (Brewer, colorbrewer2.org; listed there as colour-blind
//   safe), neutral at zero.
// Hillshade: Lambertian shading of the surface normal (Horn 1981 gradients) lit from azimuth 315°,
// altitude 45° (the usual cartographic illumination); it modulates lightness only, so it stays
// readable in greyscale.
import { interpolateRdBu, interpolateViridis } from "d3-scale-chromatic";
import { encode } from "fast-png";
import { Buffer } from "node:buffer";
import type { GridValues } from "../../types.ts";

export type Rgb = [number, number, number];

/** Part of viridis used for values (0 = darkest purple, 1 = yellow). */
const VIRIDIS_FROM = 0.2;

function parseColour(text: string): Rgb {
  const hex = /^#([0-9a-f]{2})([0-9a-f]{2})([0-9a-f]{2})$/i.exec(text);
  if (hex) return [parseInt(hex[1], 16), parseInt(hex[2], 16), parseInt(hex[3], 16)];
  const m = /rgb\((\d+),\s*(\d+),\s*(\d+)\)/.exec(text);
  if (!m) throw new Error(`unexpected colour ${text}`);
  return [Number(m[1]), Number(m[2]), Number(m[3])];
}

function table(f: (t: number) => string): Rgb[] {
  return Array.from({ length: 256 }, (_, i) => parseColour(f(i / 255)));
}

const VALUE_TABLE = table((t) => interpolateViridis(VIRIDIS_FROM + (1 - VIRIDIS_FROM) * t));
// Reversed so positive residuals (reading above the surface) are red, negative blue.
const RESIDUAL_TABLE = table((t) => interpolateRdBu(1 - t));

export type PaletteName = "values" | "residuals";
const TABLES: Record<PaletteName, Rgb[]> = { values: VALUE_TABLE, residuals: RESIDUAL_TABLE };

/** Colour at t in [0, 1] (clamped) of a palette. */
export function paletteRgb(palette: PaletteName, t: number): Rgb {
  const k = Math.round(255 * Math.min(1, Math.max(0, Number.isFinite(t) ? t : 0.5)));
  return TABLES[palette][k];
}

/**
 * Where a value falls on a colour scale, 0 to 1: linear in the value, or in its logarithm when `log`
 * (values fitted with the log transform and drawn with log-spaced contours: equal colour steps per
 * decade, so a plume's fringe of 1–10 is as visible as its core of 100–1,000). A log scale needs
 * lo > 0; otherwise the scale is linear.
 */
export function scalePosition(domain: [number, number], log = false): (v: number) => number {
  const [lo, hi] = domain;
  if (log && lo > 0 && hi > lo) {
    const a = Math.log(lo), span = Math.log(hi) - a;
    return (v) => (Math.log(v) - a) / span;
  }
  const span = hi > lo ? hi - lo : 1;
  return (v) => (v - lo) / span;
}

export function hex([r, g, b]: Rgb): string {
  return "#" + [r, g, b].map((c) => c.toString(16).padStart(2, "0")).join("");
}

/** Colour of t in [0, 1] as #rrggbb. */
export function paletteHex(palette: PaletteName, t: number): string {
  return hex(paletteRgb(palette, t));
}

/** Light from azimuth 315° (north-west, clockwise from grid north), altitude 45°. */
export const LIGHT = { azimuth: 315, altitude: 45 };

/**
 * Gradient (∂z/∂x east, ∂z/∂y north) at every cell by Horn's (1981) weighted 3 × 3 differences;
 * masked or missing neighbours are left out of the weights (0 when nothing is left).
 */
function gradients(grid: GridValues): { gx: Float64Array; gy: Float64Array } {
  const { cols, rows, cell } = grid.spec;
  const v = grid.values;
  const gx = new Float64Array(cols * rows), gy = new Float64Array(cols * rows);
  const at = (r: number, c: number) => (r < 0 || c < 0 || r >= rows || c >= cols ? NaN : v[r * cols + c]);
  for (let r = 0; r < rows; r++) {
    for (let c = 0; c < cols; c++) {
      if (Number.isNaN(v[r * cols + c])) continue;
      let sx = 0, wx = 0, sy = 0, wy = 0;
      for (const d of [-1, 0, 1]) {
        const w = d === 0 ? 2 : 1;
        const east = at(r + d, c + 1), west = at(r + d, c - 1);
        const centreRow = at(r + d, c);
        if (!Number.isNaN(east) && !Number.isNaN(west)) { sx += (w * (east - west)) / 2; wx += w; }
        else if (!Number.isNaN(east) && !Number.isNaN(centreRow)) { sx += w * (east - centreRow); wx += w; }
        else if (!Number.isNaN(west) && !Number.isNaN(centreRow)) { sx += w * (centreRow - west); wx += w; }
        // Rows run south, so north minus south is row r − 1 minus row r + 1.
        const north = at(r - 1, c + d), south = at(r + 1, c + d);
        const centreCol = at(r, c + d);
        if (!Number.isNaN(north) && !Number.isNaN(south)) { sy += (w * (north - south)) / 2; wy += w; }
        else if (!Number.isNaN(north) && !Number.isNaN(centreCol)) { sy += w * (north - centreCol); wy += w; }
        else if (!Number.isNaN(south) && !Number.isNaN(centreCol)) { sy += w * (centreCol - south); wy += w; }
      }
      gx[r * cols + c] = wx ? sx / wx / cell : 0;
      gy[r * cols + c] = wy ? sy / wy / cell : 0;
    }
  }
  return { gx, gy };
}

/**
 * Vertical exaggeration for the hillshade: the surface's values need not be in map units (a pH or a
 * concentration), so slopes are scaled until the 90th percentile gradient shows as a 35° slope.
 */
function exaggeration(gx: Float64Array, gy: Float64Array, valid: (k: number) => boolean): number {
  const mags: number[] = [];
  for (let k = 0; k < gx.length; k++) if (valid(k)) mags.push(Math.hypot(gx[k], gy[k]));
  if (mags.length === 0) return 1;
  mags.sort((a, b) => a - b);
  const p90 = mags[Math.floor(0.9 * (mags.length - 1))];
  return p90 > 0 ? Math.tan((35 * Math.PI) / 180) / p90 : 1;
}

export interface ReliefOptions {
  /** Image size in pixels covering the grid's outer cell edges. */
  width: number;
  height: number;
  /** Value range mapped onto the palette. */
  domain: [number, number];
  /** Map the logarithm of the value onto the palette (scalePosition). */
  log?: boolean;
  palette: PaletteName;
  shade: boolean;
}

/**
 * The colour relief as a PNG (RGB; masked cells white): values interpolated bilinearly between cell
 * centres (the lattice the contours are drawn on, so colours and lines agree), coloured, and shaded.
 */
export function reliefPng(grid: GridValues, o: ReliefOptions): Uint8Array {
  const { cols, rows } = grid.spec;
  const v = grid.values;
  const { gx, gy } = o.shade ? gradients(grid) : { gx: new Float64Array(cols * rows), gy: new Float64Array(cols * rows) };
  const z = o.shade ? exaggeration(gx, gy, (k) => !Number.isNaN(v[k])) : 1;
  const az = (LIGHT.azimuth * Math.PI) / 180, alt = (LIGHT.altitude * Math.PI) / 180;
  const lx = Math.sin(az) * Math.cos(alt), ly = Math.cos(az) * Math.cos(alt), lz = Math.sin(alt);
  const position = scalePosition(o.domain, o.log);
  const data = new Uint8Array(o.width * o.height * 3);
  // Bilinear weights over the four nearest cell centres, renormalised over the unmasked ones.
  const sample = (u: number, w: number, field: Float64Array): number => {
    const c0 = Math.max(0, Math.min(cols - 1, Math.floor(u))), r0 = Math.max(0, Math.min(rows - 1, Math.floor(w)));
    const c1 = Math.min(cols - 1, c0 + 1), r1 = Math.min(rows - 1, r0 + 1);
    const fu = Math.max(0, Math.min(1, u - c0)), fw = Math.max(0, Math.min(1, w - r0));
    let s = 0, sw = 0;
    const add = (r: number, c: number, weight: number) => {
      const k = r * cols + c;
      if (weight > 0 && !Number.isNaN(v[k])) { s += weight * field[k]; sw += weight; }
    };
    add(r0, c0, (1 - fu) * (1 - fw));
    add(r0, c1, fu * (1 - fw));
    add(r1, c0, (1 - fu) * fw);
    add(r1, c1, fu * fw);
    return sw > 0 ? s / sw : NaN;
  };
  for (let j = 0; j < o.height; j++) {
    // Position in cell units from the north-west corner, then relative to cell centres.
    const yCells = ((j + 0.5) / o.height) * rows;
    const row = Math.min(rows - 1, Math.floor(yCells));
    for (let i = 0; i < o.width; i++) {
      const xCells = ((i + 0.5) / o.width) * cols;
      const col = Math.min(cols - 1, Math.floor(xCells));
      const p = 3 * (j * o.width + i);
      if (Number.isNaN(v[row * cols + col])) {
        data[p] = data[p + 1] = data[p + 2] = 255;
        continue;
      }
      const value = sample(xCells - 0.5, yCells - 0.5, v);
      const rgb = paletteRgb(o.palette, position(value));
      let factor = 1;
      if (o.shade) {
        const px = z * sample(xCells - 0.5, yCells - 0.5, gx), py = z * sample(xCells - 0.5, yCells - 0.5, gy);
        // Unit normal (−p, −q, 1)/√(1 + p² + q²) dotted with the light; flat ground keeps its colour.
        const lit = Math.max(0, (-px * lx - py * ly + lz) / Math.sqrt(1 + px * px + py * py));
        factor = 1 + 0.6 * (lit - lz);
      }
      data[p] = Math.min(255, Math.round(rgb[0] * factor));
      data[p + 1] = Math.min(255, Math.round(rgb[1] * factor));
      data[p + 2] = Math.min(255, Math.round(rgb[2] * factor));
    }
  }
  return encode({ width: o.width, height: o.height, data, channels: 3, depth: 8 });
}

/** A data: URI for PNG bytes. */
export function pngDataUri(png: Uint8Array): string {
  return "data:image/png;base64," + Buffer.from(png).toString("base64");
}
