// Standard error of the surface estimate, from the same linear algebra as the fit.
//
// View the fit as kriging with a generalised covariance b·φ, unknown trend coefficients (flat prior)
// and measurement noise of variance b·λ/ωᵢ (Wahba 1978, 1990 §5; Kimeldorf & Wahba 1970). The error
// variance of the estimate f̂(x) of the true surface is the universal-kriging variance with the noise
// as a nugget:
//     Var[f(x) − f̂(x)] = b · (φ(0) − sᵀ M⁻¹ s),  s = [k(x); p(x)],  M = [K + λΩ⁻¹, P; Pᵀ, 0]
// (Cressie 1993, §3.4; Rasmussen & Williams 2006, eq. 2.42 with a vague prior on the trend;
// for conditionally positive definite kernels this is the power function with the trend
// constraints, Wendland 2005 ch. 11, Fasshauer 2007 ch. 14). The scale b is estimated by maximum
// likelihood of the trend-free contrasts, b̂ = ỹᵀw̃/(N − m) (processScale in fit.ts; b̂·λ is Wahba's
// 1985 GML variance). It is the same formula for every λ, so it does not vanish when the fit
// interpolates (λ → 0), where the error is zero at the readings and grows between them.
// Assumptions: the kernel describes the surface's spatial correlation, errors are independent with
// the stated weights, and the model (kernel, shape, trend) is right. The figure is a model-based
// error of the surface, not a survey tolerance; a new reading at x would scatter by a further σ.
import { fitCore } from "../fit/core.ts";
import { borderedInverse, borderedQuadratic, processScale } from "../fit/influence.ts";
import { kernelOfSquared, trendRow, trendTerms } from "../fit/kernels.ts";
import { transformedValues } from "../fit/prepare.ts";
import type { GlobalModel, SurfaceModel } from "../model/model.ts";
import type { GridSpec, GridValues, TrendName } from "../types.ts";
import type { GridWindow } from "./grid.ts";
import { makeEvaluator } from "./evaluate.ts";
import { coordinateMapper, scaledCentres } from "./global.ts";
import { localErrorBuffers, localErrorEstimator, type PackedLocalErrors, packLocalErrors, type PlaceErrors } from "./local_stderr.ts";
import { choleskyFactorOf, choleskyQuadratic, choleskyQuadraticBlock, PLACE_BLOCK, type SystemOfFit } from "./null_space.ts";
import { runWorker, workersAvailable } from "../workers.ts";
import { exactPointLookup } from "../geometry.ts";

export interface ErrorEstimator {
  /** Standard error of the estimate at a map coordinate (value units; back-transformed for log fits). */
  at(x: number, y: number): number;
  /** The process scale b (scaled units), for reports (NaN for the local method, whose patches each have their own). */
  processScale: number;
  /** Multiply-adds of one estimate, for choosing the error grid's stride (default N², the global method's). */
  work?: number;
  /** The error grid's nodes come from the fit's own factors (PlaceErrors): computed in this thread, nothing to factorise. */
  fromFit?: boolean;
  /** at() at many places into `out` (the same numbers), where the estimator has a faster way than one at a time. */
  atMany?(x: Float64Array, y: Float64Array, out: Float64Array): void;
}

/** Standard errors at places (x, y) into `out`: at() one at a time, or the estimator's atMany. */
export function errorsAt(est: ErrorEstimator, x: Float64Array, y: Float64Array, out: Float64Array): void {
  if (est.atMany) est.atMany(x, y, out);
  else for (let i = 0; i < x.length; i++) out[i] = est.at(x[i], y[i]);
}

/**
 * The error estimator of a model, through the method that made it. A global model's system is
 * factorised once more at the model's own shape and λ by the Cholesky route (null_space.ts: about
 * N³/6 multiply-adds, then N²/2 per place); for a local model, `places` are the patch errors its fit
 * computed at the nodes of this run's error lattice (local_stderr.ts).
 */
export function makeErrorEstimator(model: SurfaceModel, places?: PlaceErrors): ErrorEstimator {
  switch (model.method) {
    case "global":
      return globalErrorEstimator(model);
    case "local":
      return localErrorEstimator(model, places);
  }
}

/** The global model's system as fitted: scaled centres, scaled values, weights, shape and λ. */
function systemOfModel(model: GlobalModel): SystemOfFit & { zs: number; trend: TrendName } {
  const { zc, zs } = model.global.scaling;
  const { u, v } = scaledCentres(model);
  const values = transformedValues({ z: Float64Array.from(model.points.z), lines: model.points.line }, model.transform);
  const y = Float64Array.from(values, (z) => (z - zc) / zs);
  const sqrtW = model.points.weight ? Float64Array.from(model.points.weight, Math.sqrt) : undefined;
  const { epsilonScaled, lambdaScaled: lambda } = model.global.internal;
  return { kernel: model.kernel, epsilonScaled, u, v, sqrtW, y, lambda, m: trendTerms(model.trend), zs, trend: model.trend };
}

/**
 * φ(0) − sᵀM⁻¹s at a scaled place (k and p filled by the caller) and b̂: by the Cholesky route, or
 * where B + λI is not numerically positive definite by the bordered inverse of a refit at the
 * model's λ (fit/influence.ts; O(N³) with a larger constant, N² per place).
 */
function globalQuadratic(sys: SystemOfFit & { zs: number; trend: TrendName }): {
  quadratic: (k: Float64Array, p: Float64Array) => number;
  block?: (k: Float64Array, p: Float64Array, q: Float64Array) => void;
  b: number;
} {
  const f = choleskyFactorOf(sys);
  if (f) {
    const a1 = new Float64Array(Math.max(sys.m, 1) * PLACE_BLOCK), z = new Float64Array(f.nb * PLACE_BLOCK);
    return {
      quadratic: (k, p) => choleskyQuadratic(f, k, p, a1, z),
      block: (k, p, q) => choleskyQuadraticBlock(f, k, p, q, a1, z),
      b: f.b,
    };
  }
  const fit = fitCore(sys.u, sys.v, sys.y, sys.zs, {
    kernel: sys.kernel,
    trend: sys.trend,
    epsilonScaled: sys.epsilonScaled,
    smoothing: sys.lambda,
    lambdaToUser: 1,
    sqrtWeights: sys.sqrtW,
  });
  const inv = borderedInverse(fit, sys.u, sys.v);
  return { quadratic: (k, p) => borderedQuadratic(inv, k, p), b: processScale(fit.state) };
}

function globalErrorEstimator(model: GlobalModel): ErrorEstimator {
  const sys = systemOfModel(model);
  const { zs, u, v, sqrtW, m } = sys;
  const n = u.length;
  const { quadratic, block, b } = globalQuadratic(sys);
  const phi = kernelOfSquared(model.kernel, sys.epsilonScaled);
  const phi0 = phi(0);
  const map = coordinateMapper({ scaling: model.global.scaling, stretch: model.stretch });
  const uv = new Float64Array(2);
  const mm = Math.max(m, 1);
  const k = new Float64Array(n * PLACE_BLOCK);
  const p = new Float64Array(mm * PLACE_BLOCK);
  const q = new Float64Array(PLACE_BLOCK);
  const estimate = model.transform === "log" ? makeEvaluator(model) : undefined;
  /** s = [D k(x); p(x)] of the place (x, y) into slot `slot` of k and p. */
  const fill = (x: number, yy: number, slot: number) => {
    map(x, yy, uv);
    const o = slot * n;
    for (let i = 0; i < n; i++) {
      const du = uv[0] - u[i], dv = uv[1] - v[i];
      k[o + i] = phi(du * du + dv * dv) * (sqrtW ? sqrtW[i] : 1);
    }
    trendRow(uv[0], uv[1], m, p.subarray(slot * mm, slot * mm + mm));
  };
  // At a reading, the error the fit stored there (GlobalPart.pointStdErrors), when the model has them.
  const stored = model.global.pointStdErrors;
  const pointAt = stored ? exactPointLookup(model.points.x, model.points.y) : () => -1;
  const errorOf = (x: number, yy: number, quad: number): number => backTransform(x, yy, zs * Math.sqrt(Math.max(b * (phi0 - quad), 0)));
  const backTransform = (x: number, yy: number, se: number): number => {
    if (!estimate) return se;
    // Lognormal: the back-transformed estimate is ẑ = exp(f̂ + σ²/2); a log-scale error se makes it
    // lognormal with relative standard deviation √(exp(se²) − 1) (Aitchison & Brown 1957, moments of
    // the lognormal), so its standard error is ẑ·√(exp(se²) − 1) — positive, in value units.
    return estimate.at(x, yy) * Math.sqrt(Math.expm1(se * se));
  };
  const at = (x: number, yy: number): number => {
    const i = pointAt(x, yy);
    if (i >= 0) return backTransform(x, yy, stored![i]);
    fill(x, yy, 0);
    return errorOf(x, yy, quadratic(k.subarray(0, n), p.subarray(0, mm)));
  };
  // Places PLACE_BLOCK at a time (choleskyQuadraticBlock: the same numbers as at()); readings and
  // places whose coordinates are not finite one at a time after the blocks (at() uses the first slot).
  const atMany = block
    ? (xs: Float64Array, ys: Float64Array, out: Float64Array): void => {
      const slots = new Int32Array(PLACE_BLOCK);
      let used = 0;
      const flush = () => {
        for (let s = used; s < PLACE_BLOCK; s++) {
          k.fill(0, s * n, s * n + n);
          p.fill(0, s * mm, s * mm + mm);
        }
        block(k, p, q);
        for (let s = 0; s < used; s++) out[slots[s]] = errorOf(xs[slots[s]], ys[slots[s]], q[s]);
        used = 0;
      };
      const skipped: number[] = [];
      for (let i = 0; i < xs.length; i++) {
        if (!(Number.isFinite(xs[i]) && Number.isFinite(ys[i])) || pointAt(xs[i], ys[i]) >= 0) {
          skipped.push(i);
          continue;
        }
        fill(xs[i], ys[i], used);
        slots[used++] = i;
        if (used === PLACE_BLOCK) flush();
      }
      if (used > 0) flush();
      for (const i of skipped) out[i] = at(xs[i], ys[i]);
    }
    : undefined;
  return { at, atMany, processScale: b };
}

/** Work (cells × the estimator's work per cell, N² for the global method) above which the error grid is computed on a coarser lattice and interpolated. */
export const STDERR_FULL_WORK = 4e9;

/** Every `stride`-th cell in each direction of a grid, with its last row and column: where errors are computed. */
export interface Lattice {
  stride: number;
  /** Grid rows and columns of the lattice nodes. */
  rows: Int32Array;
  cols: Int32Array;
}

/** The lattice of a grid for an estimator: stride from the work of all cells (STDERR_FULL_WORK). */
export function errorLattice(spec: GridSpec, est: Pick<ErrorEstimator, "work">, points: number): Lattice {
  const cells = spec.cols * spec.rows;
  const stride = Math.max(1, Math.ceil(Math.sqrt((cells * (est.work ?? points * points)) / STDERR_FULL_WORK)));
  const along = (count: number) => Int32Array.from({ length: Math.ceil((count - 1) / stride) + 1 }, (_, i) => Math.min(i * stride, count - 1));
  return { stride, rows: along(spec.rows), cols: along(spec.cols) };
}

/**
 * Standard errors at the lattice nodes of rows [from, to) of the lattice, row by row into `out`.
 * With stride 1 the nodes are the cells, and masked cells (`masked`, for those rows) are left NaN;
 * with a coarser lattice every node is computed (the fill needs the corners around unmasked cells).
 * Shared by the main thread and the worker threads (stderr_worker.ts), so the values never depend
 * on which thread computes them.
 */
export function errorsAtNodes(
  est: ErrorEstimator,
  spec: GridSpec,
  lattice: Lattice,
  from: number,
  to: number,
  masked: Uint8Array | null,
  out: Float64Array,
  onRow?: (row: number) => void,
): void {
  const { cols, stride } = lattice;
  const at = latticePlaces(spec, lattice);
  const xs = new Float64Array(cols.length), ys = new Float64Array(cols.length), se = new Float64Array(cols.length);
  const index = new Int32Array(cols.length);
  for (let i = from; i < to; i++) {
    // The row's nodes to compute (with stride 1, its unmasked cells), all at once (errorsAt).
    let count = 0;
    for (let j = 0; j < cols.length; j++) {
      const k = (i - from) * cols.length + j;
      out[k] = NaN;
      if (stride === 1 && masked && masked[k]) continue;
      xs[count] = at.x[j], ys[count] = at.y[i], index[count++] = k;
    }
    errorsAt(est, xs.subarray(0, count), ys.subarray(0, count), se);
    for (let c = 0; c < count; c++) out[index[c]] = se[c];
    onRow?.(i);
  }
}

/** The map x of a lattice's columns and y of its rows: the cell centres where errors are computed. */
export function latticePlaces(spec: GridSpec, lattice: Lattice): { x: Float64Array; y: Float64Array } {
  return {
    x: Float64Array.from(lattice.cols, (c) => spec.xmin + (c + 0.5) * spec.cell),
    y: Float64Array.from(lattice.rows, (r) => spec.ymax - (r + 0.5) * spec.cell),
  };
}

/** Are the places a fit computed errors at (PlaceErrors) exactly this grid's error lattice for `est`? */
export function placesMatch(places: { x: Float64Array; y: Float64Array }, spec: GridSpec, est: Pick<ErrorEstimator, "work">, points: number): boolean {
  const at = latticePlaces(spec, errorLattice(spec, est, points));
  const same = (a: Float64Array, b: Float64Array) => a.length === b.length && a.every((v, i) => v === b[i]);
  return same(places.x, at.x) && same(places.y, at.y);
}

/** The grid's standard errors from those at the lattice nodes: copied (stride 1) or filled bilinearly between them. */
export function fillFromLattice(surface: GridValues, lattice: Lattice, nodes: Float64Array): GridValues {
  const { spec } = surface;
  const values = fillWindow(surface.values, { r0: 0, r1: spec.rows, c0: 0, c1: spec.cols }, lattice, nodes, 0, 0, lattice.cols.length);
  return { spec, values, crs: surface.crs };
}

/**
 * fillFromLattice for a window of the grid (a tile): `surface` and the result over the window only,
 * `nodes` the lattice rows from i0 and columns from j0 that the window needs (row-major, `nodeCols`
 * to a row; for stride 1 the window's own cells). The same
 * arithmetic as for the whole grid, from the whole lattice's positions.
 */
export function fillWindow(
  surface: Float64Array,
  w: GridWindow,
  lattice: Lattice,
  nodes: Float64Array,
  i0: number,
  j0: number,
  nodeCols: number,
): Float64Array {
  const { stride, rows: cr, cols: cc } = lattice;
  const width = w.c1 - w.c0;
  const values = new Float64Array(width * (w.r1 - w.r0)).fill(NaN);
  for (let r = w.r0; r < w.r1; r++) {
    const i = Math.max(0, Math.min(Math.floor(r / stride), cr.length - 2));
    const ti = cr.length > 1 ? (r - cr[i]) / (cr[i + 1] - cr[i]) : 0;
    for (let c = w.c0; c < w.c1; c++) {
      const k = (r - w.r0) * width + c - w.c0;
      if (Number.isNaN(surface[k])) continue;
      if (stride === 1) {
        values[k] = nodes[k];
        continue;
      }
      const j = Math.max(0, Math.min(Math.floor(c / stride), cc.length - 2));
      const tj = cc.length > 1 ? (c - cc[j]) / (cc[j + 1] - cc[j]) : 0;
      const i1 = Math.min(i + 1, cr.length - 1), j1 = Math.min(j + 1, cc.length - 1);
      const at = (a: number, b: number) => nodes[(a - i0) * nodeCols + b - j0];
      const a = at(i, j), b = at(i, j1), d = at(i1, j), e = at(i1, j1);
      values[k] = (1 - ti) * ((1 - tj) * a + tj * b) + ti * ((1 - tj) * d + tj * e);
    }
  }
  return values;
}

/** The lattice nodes a window's cells need: rows [i0, i1] and columns [j0, j1] of the lattice (for stride 1, the window's own cells). */
export function windowNodes(lattice: Lattice, w: GridWindow): Lattice & { i0: number; j0: number } {
  const { stride, rows, cols } = lattice;
  if (stride === 1) return { stride, rows: rows.slice(w.r0, w.r1), cols: cols.slice(w.c0, w.c1), i0: w.r0, j0: w.c0 };
  const first = (x: number, count: number) => Math.max(0, Math.min(Math.floor(x / stride), count - 2));
  const i0 = first(w.r0, rows.length), i1 = Math.min(first(w.r1 - 1, rows.length) + 1, rows.length - 1);
  const j0 = first(w.c0, cols.length), j1 = Math.min(first(w.c1 - 1, cols.length) + 1, cols.length - 1);
  return { stride, rows: rows.slice(i0, i1 + 1), cols: cols.slice(j0, j1 + 1), i0, j0 };
}

/** Which cells of lattice rows [from, to) are masked (stride 1 only; null otherwise). */
export function maskedNodes(surface: GridValues, lattice: Lattice, from: number, to: number): Uint8Array | null {
  if (lattice.stride !== 1) return null;
  const { cols } = surface.spec;
  const masked = new Uint8Array((to - from) * cols);
  for (let k = 0; k < masked.length; k++) masked[k] = Number.isNaN(surface.values[from * cols + k]) ? 1 : 0;
  return masked;
}

/**
 * Standard-error grid on the same cells and mask as a surface grid. When cells × the estimator's
 * work per cell (N² for the global method) exceeds STDERR_FULL_WORK, errors are computed every
 * `stride` cells in each direction and filled in bilinearly (the error surface is smooth away from
 * data points; the stride is reported).
 */
export function gridStandardError(
  model: SurfaceModel,
  surface: GridValues,
  progress?: (m: string) => void,
  est: ErrorEstimator = makeErrorEstimator(model),
): { grid: GridValues; stride: number } {
  const { spec } = surface;
  const lattice = errorLattice(spec, est, model.points.x.length);
  const nodes = new Float64Array(lattice.rows.length * lattice.cols.length);
  let last = Date.now();
  errorsAtNodes(est, spec, lattice, 0, lattice.rows.length, maskedNodes(surface, lattice, 0, lattice.rows.length), nodes, (i) => {
    if (progress && Date.now() - last > 1000) {
      last = Date.now();
      progress(`standard errors: row ${i + 1} of ${lattice.rows.length}${lattice.stride > 1 ? ` (every ${lattice.stride} cells)` : ""}`);
    }
  });
  return { grid: fillFromLattice(surface, lattice, nodes), stride: lattice.stride };
}

/** Lattice nodes × the estimator's work below which one thread is faster than starting workers. */
const PARALLEL_WORK = 2e8;

/**
 * gridStandardError with the lattice rows split over worker threads (local models; a global model's
 * Cholesky factor is N²/2 numbers, which each worker would copy, so it stays in this thread). Each
 * worker takes one contiguous range of lattice rows and factorises the patches its rows meet;
 * every node is computed by the same code as in gridStandardError, so the grid is identical
 * whatever the number of threads.
 */
export async function gridStandardErrorParallel(
  model: SurfaceModel,
  surface: GridValues,
  progress?: (m: string) => void,
  est: ErrorEstimator = makeErrorEstimator(model),
  threads = navigator.hardwareConcurrency || 1,
): Promise<{ grid: GridValues; stride: number }> {
  const { spec } = surface;
  const lattice = errorLattice(spec, est, model.points.x.length);
  const work = lattice.rows.length * lattice.cols.length * (est.work ?? 0);
  if (est.fromFit) progress?.(`standard errors at ${(lattice.rows.length * lattice.cols.length).toLocaleString("en")} places from the patch fits`);
  if (model.method !== "local" || est.fromFit || !workersAvailable(threads) || lattice.rows.length < 2 || work < PARALLEL_WORK) {
    return gridStandardError(model, surface, progress, est);
  }
  try {
    const nodes = await nodesInWorkers(() => packLocalErrors(model), spec, lattice, (from, to) => maskedNodes(surface, lattice, from, to), threads, progress);
    return { grid: fillFromLattice(surface, lattice, nodes), stride: lattice.stride };
  } catch (e) {
    progress?.(`worker threads unavailable (${(e as Error).message}); standard errors in one thread`);
    return gridStandardError(model, surface, progress, est);
  }
}

/**
 * Standard errors at every node of `lattice` (row-major), its rows split into one contiguous block
 * per thread; `pack` makes the packed model each worker receives, `masked` the masked cells of a
 * block of rows (stride 1).
 */
export async function nodesInWorkers(
  pack: () => PackedLocalErrors,
  spec: GridSpec,
  lattice: Lattice,
  masked: (from: number, to: number) => Uint8Array | null,
  threads: number,
  progress?: (m: string) => void,
): Promise<Float64Array> {
  const nodeRows = lattice.rows.length, nodeCols = lattice.cols.length;
  const blocks = Math.max(1, Math.min(threads, nodeRows));
  const per = Math.ceil(nodeRows / blocks);
  const nodes = new Float64Array(nodeRows * nodeCols);
  progress?.(`standard errors at ${(nodeRows * nodeCols).toLocaleString("en")} places${lattice.stride > 1 ? ` (every ${lattice.stride} cells)` : ""} on ${blocks} threads`);
  const url = new URL("./stderr_worker.ts", import.meta.url);
  await Promise.all(Array.from({ length: blocks }, (_, b) => {
    const from = b * per, to = Math.min(nodeRows, from + per);
    if (from >= to) return Promise.resolve();
    const packed = pack();
    const m = masked(from, to);
    const job: ErrorJob = { packed, spec, lattice, from, to, masked: m };
    const transfer = [...localErrorBuffers(packed), ...(m ? [m.buffer as ArrayBuffer] : [])];
    return runWorker<Float64Array>(url, job, transfer).then((block) => nodes.set(block, from * nodeCols));
  }));
  return nodes;
}

/** What a standard-error worker receives (stderr_worker.ts). */
export interface ErrorJob {
  packed: PackedLocalErrors;
  spec: GridSpec;
  lattice: Lattice;
  from: number;
  to: number;
  masked: Uint8Array | null;
}
