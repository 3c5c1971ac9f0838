// Standard error of the local method's surface: the blend of the patches' own standard errors.
//
// Inside patch j the global method's formula holds for fⱼ (stderr.ts: the fit read as kriging with
// generalised covariance bⱼ·φ, flat prior on the trend, noise bⱼ·λⱼ/ωᵢ):
//   seⱼ(x)² = zsⱼ² · b̂ⱼ · (φ(0) − sᵀ Mⱼ⁻¹ s),  s = [D k(x); p(x)],  Mⱼ = [DKD + λI, DP; (DP)ᵀ, 0].
// The blended estimate is f = Σⱼ wⱼ fⱼ with weights that do not depend on the data, so its error is
// the weighted sum of the patch errors eⱼ, and by Minkowski's inequality
//   sd(Σⱼ wⱼ eⱼ) ≤ Σⱼ wⱼ sd(eⱼ)   (wⱼ ≥ 0):
// se(x) = Σⱼ wⱼ(x) seⱼ(x) is an upper bound (equality when the patch errors are perfectly
// correlated, which neighbouring patches sharing most of their points nearly are). Measured against
// the global method's standard error: see DEVELOPERS.md, "Local method".
//
// Each patch's quadratic form sᵀMⱼ⁻¹s comes from one Cholesky factor by the null-space method
// (null_space.ts, shared with the global method's errors): (n − m)³/6 multiply-adds per patch (the
// fit's tridiagonal reduction and explicit inverse took about 5n³) and (n − m)²/2 per patch and place
// (the explicit inverse took n²). Where the Cholesky factorisation fails (B not numerically positive
// definite) the patch is refitted and its bordered inverse formed (fitCore, borderedInverse).
//
// At a data point xᵢ the patch quantity is known from the fit itself: φ(0) − sᵀMⱼ⁻¹s = λⱼ Aᵢᵢ⁽ʲ⁾/ωᵢ
// (Aᵢᵢ the hat diagonal, as for the leave-one-out residuals), so the fit stores the blended error at
// every data point (local.pointStdErrors) and the estimator returns it there without refactorising.
//
// A patch is factorised when first needed and kept in a bounded least-recently-used cache, so a
// grid traversed row by row factorises each patch about once and memory stays bounded whatever the
// number of patches. The estimator is built from packed typed arrays (packLocalErrors), which worker
// threads receive (stderr_worker.ts): every value is computed by the same code on the same numbers,
// whichever thread computes it.
import { fitCore } from "../fit/core.ts";
import { type BorderedInverse, borderedInverse, borderedQuadratic, processScale } from "../fit/influence.ts";
import { kernelOfSquared, trendRow } from "../fit/kernels.ts";
import { transformedValues } from "../fit/prepare.ts";
import { exactPointLookup } from "../geometry.ts";
import type { LocalModel } from "../model/model.ts";
import type { TrendName } from "../types.ts";
import { localBuffers, localEvaluator, makeBlender, nearestLine, type PackedLocal, packLocal, subsetPatches, taper } from "./local.ts";
import { type CholeskyFactor, choleskyFactorOf, choleskyQuadratic } from "./null_space.ts";
import type { ErrorEstimator } from "./stderr.ts";

/** Bytes of patch factors kept at once per thread (least recently used dropped first; job/memory.ts counts it). */
export const CACHE_BYTES = 256 * 2 ** 20;

/** The local model packed for its error estimator: the surface's own arrays and what refactorising needs. */
export interface PackedLocalErrors {
  surface: PackedLocal;
  trend: TrendName;
  /** Number of data points. */
  points: number;
  /** Per patch member: its value centred and scaled by the patch ((z − zcⱼ)/zsⱼ, after the transform). */
  y: Float64Array;
  /** Per patch member: √ω as the patch fitted it; empty when every weight is 1. */
  sqrtW: Float64Array;
  /** Per patch: λ in its own scaled units. */
  lambda: Float64Array;
  /** Per data point, the blended standard error there (log units for log fits), from the fit; empty when the model has none. */
  pointSe: Float64Array;
  /** Data points' map coordinates (to recognise a data point), empty with pointSe. */
  px: Float64Array;
  py: Float64Array;
  /**
   * With 3-D breaklines, the noise σ of the fit (log units for log fits), else 0: the fits take a
   * line's levels as exact, so the standard error within δ of a line is raised to σ·β(d/δ) (the
   * on-line correction's taper, evaluate/local.ts): on a line the surface is as good as a shot.
   */
  lineSigma: number;
}

export function packLocalErrors(model: LocalModel): PackedLocalErrors {
  const l = model.local;
  const surface = packLocal(model);
  const b = l.breaklines;
  // The 3-D lines' points (patch point numbers n, n + 1, …) follow the data points.
  const z = b ? [...model.points.z, ...b.points.z] : model.points.z;
  const values = transformedValues({ z: Float64Array.from(z), lines: b ? [...model.points.line, ...b.points.z.map(() => 0)] : model.points.line }, model.transform);
  const y = new Float64Array(l.index.length);
  for (let j = 0; j + 1 < l.start.length; j++) {
    for (let k = l.start[j]; k < l.start[j + 1]; k++) y[k] = (values[l.index[k]] - l.zc[j]) / l.zs[j];
  }
  const withPoints = Array.isArray(l.pointStdErrors) && l.pointStdErrors.length === model.points.x.length;
  return {
    surface,
    trend: model.trend,
    points: model.points.x.length,
    y,
    sqrtW: l.memberWeights ? Float64Array.from(l.memberWeights, Math.sqrt) : new Float64Array(0),
    lambda: Float64Array.from(l.lambdaScaled),
    pointSe: withPoints ? Float64Array.from(l.pointStdErrors!) : new Float64Array(0),
    px: withPoints ? Float64Array.from(model.points.x) : new Float64Array(0),
    py: withPoints ? Float64Array.from(model.points.y) : new Float64Array(0),
    lineSigma: b && b.lines.some((line) => line.z) ? model.diagnostics.sigma : 0,
  };
}

/** The transferable buffers of packed local errors (postMessage). */
export function localErrorBuffers(p: PackedLocalErrors): ArrayBuffer[] {
  return [...localBuffers(p.surface), ...[p.y, p.sqrtW, p.lambda, p.pointSe, p.px, p.py].map((a) => a.buffer as ArrayBuffer)];
}

/** One patch's factors: from the Cholesky route, or (fallback) the bordered inverse. */
type PatchFactor = CholeskyFactor | { kind: "bordered"; inv: BorderedInverse; b: number; bytes: number };

/** k = D k(x) at patch-frame (x, y) for members a … a + n − 1 of pu, pv (kernel φ at ε²ρ², weights √ω or none). */
export function placeKernel(phi: (r2: number) => number, eps2: number, pu: Float64Array, pv: Float64Array, sw: Float64Array | undefined, a: number, x: number, y: number, k: Float64Array): void {
  for (let t = 0; t < k.length; t++) {
    const du = x - pu[a + t], dv = y - pv[a + t];
    k[t] = phi(eps2 * (du * du + dv * dv)) * (sw ? sw[a + t] : 1);
  }
}

/**
 * Patch standard errors √(b̂ⱼ·(φ(0) − sᵀMⱼ⁻¹s)) (scaled units, before zsⱼ) at the nodes of a standard-error lattice, which
 * the local fit computed from each patch's own factors while it had them (fit/local/local.ts,
 * FitOptions.errorPlaces), so that the error grid needs no patch factorised again. `x` holds the
 * map x of the lattice's columns and `y` the map y of its rows (the numbers errorsAtNodes asks at);
 * node k = row·x.length + column has entries start[k] … start[k + 1] − 1: a patch and its error there.
 */
export interface PlaceErrors {
  x: Float64Array;
  y: Float64Array;
  start: Int32Array;
  patch: Int32Array;
  se: Float64Array;
}

export function localErrorEstimator(model: LocalModel, places?: PlaceErrors): ErrorEstimator {
  return localErrorEstimatorPacked(packLocalErrors(model), places);
}

/**
 * The error estimator of packed local errors (the same code in the main thread and in workers);
 * where `places` holds a patch's error at the place asked, that is used instead of factorising the patch.
 */
export function localErrorEstimatorPacked(pe: PackedLocalErrors, places?: PlaceErrors): ErrorEstimator {
  const packed = pe.surface;
  const { start, pu, pv, zs, e2, m, cu, cv, radius } = packed;
  const blender = makeBlender(packed);
  const phi = kernelOfSquared(packed.kernel, 1);
  const phi0 = phi(0);
  const cache = new Map<number, PatchFactor>();
  let cachedBytes = 0;

  /** Patch j by the Cholesky route (see the top of this file); undefined when B is not positive definite. */
  const choleskyFactor = (j: number): PatchFactor | undefined => {
    const a = start[j], n = start[j + 1] - a;
    // φ at ε²ρ with φ written for ε = 1 (the thin-plate spline's patches have ε = 1).
    return choleskyFactorOf({
      kernel: packed.kernel,
      epsilonScaled: Math.sqrt(e2[j]),
      u: pu.subarray(a, a + n),
      v: pv.subarray(a, a + n),
      sqrtW: pe.sqrtW.length ? pe.sqrtW.subarray(a, a + n) : undefined,
      y: pe.y.subarray(a, a + n),
      lambda: pe.lambda[j],
      m,
    });
  };

  /** Patch j refitted at its own shape and λ, with its bordered inverse (the fit's own route). */
  const borderedFactor = (j: number): PatchFactor => {
    const a = start[j], b = start[j + 1];
    const u = pu.slice(a, b), v = pv.slice(a, b);
    const sw = pe.sqrtW.length ? pe.sqrtW.slice(a, b) : undefined;
    const fit = fitCore(u, v, pe.y.slice(a, b), zs[j], {
      kernel: packed.kernel,
      trend: pe.trend,
      epsilonScaled: Math.sqrt(e2[j]),
      smoothing: pe.lambda[j],
      lambdaToUser: 1,
      sqrtWeights: sw,
    });
    const inv = borderedInverse(fit, u, v);
    return { kind: "bordered", inv, b: processScale(fit.state), bytes: 8 * (inv.n * (inv.n + inv.m) + inv.m * inv.m) };
  };

  const factorOf = (j: number): PatchFactor => {
    const hit = cache.get(j);
    if (hit) {
      cache.delete(j);
      cache.set(j, hit);
      return hit;
    }
    const entry = choleskyFactor(j) ?? borderedFactor(j);
    cache.set(j, entry);
    cachedBytes += entry.bytes;
    for (const [key, old] of cache) {
      if (cachedBytes <= CACHE_BYTES || key === j) break;
      cache.delete(key);
      cachedBytes -= old.bytes;
    }
    return entry;
  };

  let longest = 0;
  for (let j = 0; j + 1 < start.length; j++) longest = Math.max(longest, start[j + 1] - start[j]);
  const kv = new Float64Array(longest);
  const zv = new Float64Array(longest);
  const tr = new Float64Array(Math.max(m, 1));
  const a1 = new Float64Array(Math.max(m, 1));
  const uv = new Float64Array(2);

  /** φ(0) − sᵀMⱼ⁻¹s for patch j at global scaled (u, v). */
  const patchVariance = (j: number, u: number, v: number): { rest: number; b: number } => {
    const f = factorOf(j);
    const x = (u - cu[j]) / radius[j], y = (v - cv[j]) / radius[j];
    const a = start[j], n = start[j + 1] - a;
    const k = kv.subarray(0, n);
    placeKernel(phi, e2[j], pu, pv, pe.sqrtW.length ? pe.sqrtW : undefined, a, x, y, k);
    trendRow(x, y, m, tr);
    if (f.kind === "bordered") return { rest: phi0 - borderedQuadratic(f.inv, k, tr), b: f.b };
    return { rest: phi0 - choleskyQuadratic(f, k, tr, a1, zv), b: f.b };
  };

  // Data points by their map coordinates, for the errors the fit stored there.
  const pointAt = exactPointLookup(pe.px, pe.py);
  const atPoint = (x: number, y: number): number => {
    const i = pointAt(x, y);
    return i >= 0 ? pe.pointSe[i] : NaN;
  };

  const colOf = new Map<number, number>(), rowOf = new Map<number, number>();
  if (places) {
    places.x.forEach((x, j) => colOf.set(x, j));
    places.y.forEach((y, i) => rowOf.set(y, i));
  }
  /** The node of `places` at map (x, y), or −1. */
  const nodeAt = (x: number, y: number): number => {
    const j = colOf.get(x), i = rowOf.get(y);
    return j === undefined || i === undefined ? -1 : i * places!.x.length + j;
  };
  /** Patch j's error at node k as the fit computed it, or NaN. */
  const knownAt = (k: number, j: number): number => {
    if (k < 0) return NaN;
    for (let e = places!.start[k]; e < places!.start[k + 1]; e++) if (places!.patch[e] === j) return places!.se[e];
    return NaN;
  };

  const estimate = packed.logBias ? localEvaluator(packed) : undefined;
  const near = pe.lineSigma > 0 && packed.sides?.seg3.length ? nearestLine(packed.sides) : null;
  const work = localErrorWork(pe);
  return {
    processScale: NaN,
    work,
    fromFit: places !== undefined,
    at(x, yy) {
      let se = atPoint(x, yy);
      if (Number.isNaN(se)) {
        blender.map(x, yy, uv);
        const count = blender.cover(uv[0], uv[1]);
        if (count === 0) return NaN;
        se = 0;
        const node = places ? nodeAt(x, yy) : -1;
        for (let c = 0; c < count; c++) {
          const j = blender.ids[c];
          const known = knownAt(node, j);
          if (!Number.isNaN(known)) {
            se += blender.weights[c] * zs[j] * known;
            continue;
          }
          // A side fitted as a constant level: the spread of its values (fit/local/patch_fit.ts, constantPatch).
          if (packed.sides?.constant[j]) {
            se += blender.weights[c] * packed.sides.constantSe[j];
            continue;
          }
          const { rest, b } = patchVariance(j, uv[0], uv[1]);
          se += blender.weights[c] * zs[j] * Math.sqrt(Math.max(b * rest, 0));
        }
      }
      if (near) {
        blender.map(x, yy, uv);
        const hit = near(uv[0], uv[1]);
        if (hit) se = Math.max(se, pe.lineSigma * taper(hit.d / hit.delta));
      }
      if (!estimate) return se;
      // Lognormal back-transform, as for the global method (stderr.ts).
      return estimate.at(x, yy) * Math.sqrt(Math.expm1(se * se));
    },
  };
}

/**
 * Multiply-adds of one estimate: (patches covering a place, about members / points) × the mean
 * per-patch cost ((n − m)²/2 for the solve, 2mn for the reflectors and the border).
 */
export function localErrorWork(pe: PackedLocalErrors): number {
  return patchErrorWork(pe.surface.start, pe.surface.m, pe.points);
}

/** localErrorWork from the patch layout (member offsets `start`), trend terms m and the number of points. */
export function patchErrorWork(start: ArrayLike<number>, m: number, points: number): number {
  const p = start.length - 1;
  let perPatch = 0;
  for (let j = 0; j < p; j++) {
    const n = start[j + 1] - start[j];
    perPatch += ((n - m) * (n - m)) / 2 + 2 * m * n;
  }
  return (start[p] / Math.max(points, 1)) * (perPatch / Math.max(p, 1));
}

/**
 * Packed local errors cut down to some patches (ascending; subsetPatches for the surface) and to the
 * data points inside `box` (map units), whose stored errors are all a window inside it can meet.
 */
export function subsetLocalErrors(pe: PackedLocalErrors, patches: Int32Array, box: { xmin: number; ymin: number; xmax: number; ymax: number }): PackedLocalErrors {
  // With breaklines the whole model is kept (subsetPatches).
  if (pe.surface.sides) return pe;
  const s = pe.surface;
  const members = patches.reduce((t, j) => t + s.start[j + 1] - s.start[j], 0);
  const y = new Float64Array(members), sqrtW = new Float64Array(pe.sqrtW.length ? members : 0);
  let o = 0;
  for (const j of patches) {
    const from = s.start[j], to = s.start[j + 1];
    y.set(pe.y.subarray(from, to), o);
    if (sqrtW.length) sqrtW.set(pe.sqrtW.subarray(from, to), o);
    o += to - from;
  }
  const inside: number[] = [];
  for (let i = 0; i < pe.px.length; i++) if (pe.px[i] >= box.xmin && pe.px[i] <= box.xmax && pe.py[i] >= box.ymin && pe.py[i] <= box.ymax) inside.push(i);
  return {
    surface: subsetPatches(s, patches),
    trend: pe.trend,
    points: pe.points,
    y,
    sqrtW,
    lambda: Float64Array.from(patches, (j) => pe.lambda[j]),
    pointSe: Float64Array.from(inside, (i) => pe.pointSe[i]),
    px: Float64Array.from(inside, (i) => pe.px[i]),
    py: Float64Array.from(inside, (i) => pe.py[i]),
    lineSigma: pe.lineSigma,
  };
}

