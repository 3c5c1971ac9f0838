// Invented benchmark data from a seeded generator (never real data): the same numbers on every run.
import type { CleanPoints, GridValues } from "../src/mod.ts";
import { mulberry32 } from "../src/random.ts";

export const SEED = 424242;
/** Side of the square the points lie in, in map units (a 1 km site). */
export const SITE = 1000;

/** A smooth invented field: two waves and a bump, in map units. */
export function field(x: number, y: number): number {
  return 50 + 3 * Math.sin(x / 150) + 2 * Math.cos(y / 200) + 0.5 * Math.exp(-((x - 600) ** 2 + (y - 400) ** 2) / 2e4);
}

/** n points uniform on the site with the field plus Gaussian noise of sd 0.05 (the seed fixes them). */
export function noisyPoints(n: number): CleanPoints {
  const u = mulberry32(SEED);
  const x = new Float64Array(n), y = new Float64Array(n), z = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    x[i] = SITE * u();
    y[i] = SITE * u();
    const g = Math.sqrt(-2 * Math.log(1 - u())) * Math.cos(2 * Math.PI * u());
    z[i] = field(x[i], y[i]) + 0.05 * g;
  }
  return { x, y, z, lines: Array.from({ length: n }, (_, i) => i + 2), skipped: [], merged: [], rowsRead: n };
}

/** The same points in scaled coordinates, as the fit sees them: centred, about unit extent. */
export function scaledPoints(n: number): { u: Float64Array; v: Float64Array; y: Float64Array } {
  const p = noisyPoints(n);
  const u = p.x.map((x) => (x - SITE / 2) / SITE), v = p.y.map((y) => (y - SITE / 2) / SITE);
  const y = p.z.map((z) => z - 50);
  return { u, v, y };
}

/** The thin-plate kernel matrix φ(‖uᵢ − uⱼ‖²) = ½ρ log ρ of n scaled points (what the fit reduces). */
export function thinPlateMatrix(n: number): Float64Array {
  const { u, v } = scaledPoints(n);
  const a = new Float64Array(n * n);
  for (let i = 0; i < n; i++) {
    for (let j = 0; j < n; j++) {
      const rho = (u[i] - u[j]) ** 2 + (v[i] - v[j]) ** 2;
      a[i * n + j] = rho > 0 ? 0.5 * rho * Math.log(rho) : 0;
    }
  }
  return a;
}

/** Cell-centre coordinates of a side × side grid over the site, row 0 northern. */
export function cellCentres(side: number): { x: Float64Array; y: Float64Array } {
  const cell = SITE / side;
  const x = new Float64Array(side * side), y = new Float64Array(side * side);
  for (let r = 0; r < side; r++) {
    for (let c = 0; c < side; c++) {
      x[r * side + c] = (c + 0.5) * cell;
      y[r * side + c] = SITE - (r + 0.5) * cell;
    }
  }
  return { x, y };
}

/** The field sampled at the cell centres of a side × side grid over the site (no mask). */
export function fieldGrid(side: number): GridValues {
  const { x, y } = cellCentres(side);
  const values = x.map((xk, k) => field(xk, y[k]));
  return { spec: { xmin: 0, ymin: 0, xmax: SITE, ymax: SITE, cell: SITE / side, cols: side, rows: side }, values, crs: { label: "local site grid" } };
}

/** Write arrays one after another as little-endian float64 (the Python reference reads them). */
export async function writeF64(path: string, ...arrays: ArrayLike<number>[]): Promise<string> {
  const total = arrays.reduce((a, b) => a + b.length, 0);
  const out = new Float64Array(total);
  let k = 0;
  for (const a of arrays) {
    out.set(a, k);
    k += a.length;
  }
  await Deno.writeFile(path, new Uint8Array(out.buffer));
  return path;
}

/** Largest |a − b| over the entries, relative to the largest |b| (NaN when lengths differ). */
export function relativeDifference(a: ArrayLike<number>, b: ArrayLike<number>): number {
  if (a.length !== b.length) return NaN;
  let d = 0, s = 0;
  for (let i = 0; i < a.length; i++) {
    d = Math.max(d, Math.abs(a[i] - b[i]));
    s = Math.max(s, Math.abs(b[i]));
  }
  return s > 0 ? d / s : d;
}
