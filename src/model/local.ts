// The local (partition-of-unity) method's own part of a saved model, and its check.
//
// The surface at (x, y): with u the mapped coordinates (the stretch, then ((x − cx)/s, (y − cy)/s)),
//   f = Σⱼ ψⱼ fⱼ / Σⱼ ψⱼ over the patches with ψⱼ = ψ(‖u − cⱼ‖/ρⱼ) > 0 (Wendland's C² function),
//   fⱼ = zcⱼ + zsⱼ·(Σₖ wₖ φ(‖ũ − ũₖ‖²) + Σₗ cₗ pₗ(ũ)),  ũ = (u − cⱼ)/ρⱼ,
// the sum over patch j's points k (index[start[j] … start[j+1]), their scaled positions ũₖ computed
// the same way), φ with epsilonScaled[j]. Where no patch is nearer than `coverage` of its radius
// (only beyond the data's bounding box) all discs are enlarged alike (evaluate/local.ts). Arrays are packed: one entry per patch, or per patch
// member in patch order (index, weights), or m trend coefficients per patch.
import { trendTerms } from "../fit/kernels.ts";
import type { TrendName } from "../types.ts";

export interface LocalPart {
  /** Global frame: u = (x − cx)/s after the stretch (one isotropic scale). */
  scaling: { cx: number; cy: number; s: number };
  /**
   * Every place of the data's bounding box lies within this fraction of some patch's radius
   * (1/overlap); beyond it the evaluator enlarges all discs alike (evaluate/local.ts).
   */
  coverage: number;
  /** Patch discs in the global frame: centres and radii. */
  cu: number[];
  cv: number[];
  radius: number[];
  /** Value centring and scale of each patch. */
  zc: number[];
  zs: number[];
  /** Shape ε and λ of each patch in its own scaled units. */
  epsilonScaled: number[];
  lambdaScaled: number[];
  /** Compressed rows: patch j's points are index[start[j] … start[j+1]) (0-based point numbers, ascending). */
  start: number[];
  index: number[];
  /** RBF weight of each patch member, aligned with index. */
  weights: number[];
  /**
   * Observation weight ω of each patch member as its patch fitted it (the user's weights normalised
   * to mean 1 over all points, times the patch's own robustness weights when robust), aligned with
   * index; null when every weight is 1. The standard errors refactorise each patch with these.
   */
  memberWeights: number[] | null;
  /** m trend coefficients per patch (patch j's at j·m … j·m + m − 1). */
  trendCoefficients: number[];
  /**
   * Standard error of the surface at each data point, from the fit (evaluate/local_stderr.ts):
   * Σⱼ wⱼ(xᵢ) zsⱼ √(b̂ⱼ λⱼ Aᵢᵢ⁽ʲ⁾ / ωᵢ), in value units (log units for log fits, before the
   * back-transform). Optional (added within version 2; absent in earlier local models).
   */
  pointStdErrors?: number[];
  /**
   * Breaklines (optional, added within version 2; absent in models fitted without them): the lines,
   * and which side of which disc each patch is. With them, patch j is side `side[j]` of the disc
   * (cu[j], cv[j], radius[j]), and at a place only the patches whose side holds the place blend
   * (fit/local/sides.ts). Patch point numbers from n on are the 3-D lines' points (`points`).
   */
  breaklines?: BreaklinePart;
}

/** The breaklines of a local model and the sides its patches are (fit/local/sides.ts). */
export interface BreaklinePart {
  /** The lines in map coordinates (the points' CRS); z null for a 2-D barrier line. */
  lines: { name: string; x: number[]; y: number[]; z: number[] | null }[];
  /** Side-raster cell size in the global scaled frame (the side maps are rebuilt from it). */
  cellTarget: number;
  /** The data's bounding box in the global scaled frame [umin, vmin, umax, vmax]: sides are found within it. */
  domain: number[];
  /** Vertical faces kept apart: coincident vertices of two 3-D lines with different levels (fit/local/sides.ts, separateFaces). */
  faces: number;
  /** Points along the 3-D lines (point n + k of the patches), map coordinates and levels. */
  points: { x: number[]; y: number[]; z: number[] };
  /** Their observation weight ω (the data points' mean is 1). */
  lineWeight: number;
  /** Per patch: the disc it is a side of (patches of one disc share centre and radius), and which side. */
  parent: number[];
  side: number[];
  /**
   * Sides whose points could not carry the model (too few for the trend), fitted as their weighted
   * mean level, with that level's standard error (the spread of the side's values; null for one point).
   */
  constant: { patch: number; se: number | null }[];
}

function checkBreaklinePart(b: unknown, p: number, bad: (what: string) => Error): BreaklinePart {
  const o = b as Partial<BreaklinePart>;
  if (typeof o !== "object" || o === null) throw bad("breaklines not a record");
  if (!Array.isArray(o.lines) || !o.lines.every((l) =>
    l && typeof l.name === "string" && finiteArray(l.x, l.x?.length) && l.x.length >= 2 && finiteArray(l.y, l.x.length) &&
    (l.z === null || finiteArray(l.z, l.x.length))
  )) throw bad("breaklines are not lines of numbers");
  if (!finiteArray(o.domain, 4) || !(o.domain[0] <= o.domain[2] && o.domain[1] <= o.domain[3]) || !(Number.isInteger(o.faces) && o.faces! >= 0)) throw bad("breakline domain missing");
  if (!(finite(o.cellTarget) && o.cellTarget > 0) || !(finite(o.lineWeight) && o.lineWeight > 0)) throw bad("breakline settings missing");
  const q = Array.isArray(o.points?.x) ? o.points!.x.length : -1;
  if (!(q >= 0 && finiteArray(o.points!.x, q) && finiteArray(o.points!.y, q) && finiteArray(o.points!.z, q))) throw bad("breakline points are not numbers");
  if (!finiteArray(o.parent, p) || !finiteArray(o.side, p) || !o.parent.every((j, k) => Number.isInteger(j) && j >= 0 && (k === 0 || j >= o.parent![k - 1])) || !o.side.every((x) => Number.isInteger(x) && x >= 0)) {
    throw bad("breakline sides do not match the patches");
  }
  if (!Array.isArray(o.constant) || !o.constant.every((c) => c && Number.isInteger(c.patch) && c.patch >= 0 && c.patch < p && (c.se === null || (finite(c.se) && c.se >= 0)))) {
    throw bad("breakline constant sides not a list of patches");
  }
  return o as BreaklinePart;
}

const finite = (v: unknown): v is number => typeof v === "number" && Number.isFinite(v);
const finiteArray = (v: unknown, n: number): v is number[] => Array.isArray(v) && v.length === n && v.every(finite);
/** Magnitudes a fit can produce; anything larger is damage, not data. */
const sane = (v: number[]) => v.every((x) => Math.abs(x) < 1e200);

/** Check the local part of a model of `n` points with trend `trend`; `bad` makes the error to throw. */
export function checkLocalPart(part: unknown, n: number, trend: TrendName, bad: (what: string) => Error): LocalPart {
  if (typeof part !== "object" || part === null) throw bad("the local method's part is missing");
  const l = part as Partial<LocalPart>;
  const sc = l.scaling;
  if (!sc || ![sc.cx, sc.cy].every((v) => finite(v) && Math.abs(v) <= 1e38) || !(finite(sc.s) && sc.s > 1e-300 && sc.s <= 1e16)) {
    throw bad("local scaling missing, zero or not numbers");
  }
  if (!(finite(l.coverage) && l.coverage > 0 && l.coverage < 1)) throw bad("patch coverage missing or not between 0 and 1");
  const p = Array.isArray(l.radius) ? l.radius.length : 0;
  if (!(p > 0)) throw bad("no patches");
  for (const key of ["cu", "cv", "radius", "zc", "zs", "epsilonScaled", "lambdaScaled"] as const) {
    if (!finiteArray(l[key], p) || !sane(l[key]!)) throw bad(`patch ${key} do not match the patches`);
  }
  if (!l.radius!.every((r) => r > 0) || !l.zs!.every((z) => z > 0) || !l.epsilonScaled!.every((e) => e > 0) || !l.lambdaScaled!.every((x) => x >= 0)) {
    throw bad("patch radii, scales, shapes or smoothing out of range");
  }
  const start = l.start;
  if (!finiteArray(start, p + 1) || start[0] !== 0 || !start.every((s, j) => Number.isInteger(s) && (j === 0 || s >= start[j - 1]))) {
    throw bad("patch offsets missing or not increasing");
  }
  const total = start[p];
  const lines = l.breaklines === undefined ? undefined : checkBreaklinePart(l.breaklines, p, bad);
  const all = n + (lines ? lines.points.x.length : 0);
  if (!finiteArray(l.index, total) || !l.index.every((i) => Number.isInteger(i) && i >= 0 && i < all)) throw bad("patch point numbers missing or out of range");
  if (!finiteArray(l.weights, total) || !sane(l.weights)) throw bad("patch weights do not match the patch points");
  if (l.memberWeights !== null && !(finiteArray(l.memberWeights, total) && l.memberWeights.every((w) => w > 0 && w < 1e200))) {
    throw bad("patch observation weights are not positive numbers");
  }
  if (!finiteArray(l.trendCoefficients, p * trendTerms(trend)) || !sane(l.trendCoefficients)) throw bad("patch trend coefficients missing or not numbers");
  if (l.pointStdErrors !== undefined && !(finiteArray(l.pointStdErrors, n) && l.pointStdErrors.every((e) => e >= 0 && e < 1e200))) {
    throw bad("standard errors at the points are not one number ≥ 0 per point");
  }
  return l as LocalPart;
}
