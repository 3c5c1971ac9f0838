// Standard error of the local method's surface: the blend of the patches' own standard errors.
//
// Inside patch j the global method's formula holds for fⱼ (stderr.ts: the fit read as kriging with
// generalised covariance bⱼ·φ, flat prior on the trend, noise bⱼ·λⱼ/ωᵢ):
//   seⱼ(x)² = zsⱼ² · b̂ⱼ · (φ(0) − sᵀ Mⱼ⁻¹ s),
// computed from patch j's own bordered inverse (borderedInverse) and process scale (processScale).
// The blended estimate is f = Σⱼ wⱼ fⱼ with weights that do not depend on the data, so its error is
// the weighted sum of the patch errors eⱼ, and by Minkowski's inequality
//   sd(Σⱼ wⱼ eⱼ) ≤ Σⱼ wⱼ sd(eⱼ)   (wⱼ ≥ 0):
// se(x) = Σⱼ wⱼ(x) seⱼ(x) is an upper bound (equality when the patch errors are perfectly
// correlated, which neighbouring patches sharing most of their points nearly are). Measured against
// the global method's standard error: see DEVELOPERS.md, "Local method".
//
// A patch's system is refactorised at its stored shape and λ when first needed (O(n³) for n points)
// and kept in a bounded least-recently-used cache, so a grid traversed row by row factorises each
// patch about once and memory stays bounded whatever the number of patches.
import { fitCore } from "../fit/core.ts";
import { type BorderedInverse, borderedInverse, borderedQuadratic, processScale } from "../fit/influence.ts";
import { kernelOfSquared, trendRow } from "../fit/kernels.ts";
import { transformedValues } from "../fit/prepare.ts";
import type { LocalModel } from "../model/model.ts";
import { makeEvaluator } from "./evaluate.ts";
import { makeBlender, packLocal } from "./local.ts";
import type { ErrorEstimator } from "./stderr.ts";

/** Bytes of bordered inverses kept at once (least recently used dropped first). */
const CACHE_BYTES = 256 * 2 ** 20;

interface PatchErrors {
  inv: BorderedInverse;
  /** Process scale b̂ⱼ (scaled units). */
  b: number;
  sqrtW?: Float64Array;
}

export function localErrorEstimator(model: LocalModel): ErrorEstimator {
  const packed = packLocal(model);
  const l = model.local;
  const { start, pu, pv, zc, zs, e2, m, cu, cv, radius } = packed;
  const values = transformedValues({ z: Float64Array.from(model.points.z), lines: model.points.line }, model.transform);
  const blender = makeBlender(packed);
  const cache = new Map<number, PatchErrors>();
  let cachedBytes = 0;
  const patchErrors = (j: number): PatchErrors => {
    const hit = cache.get(j);
    if (hit) {
      cache.delete(j);
      cache.set(j, hit);
      return hit;
    }
    const a = start[j], b = start[j + 1];
    const u = pu.slice(a, b), v = pv.slice(a, b);
    const y = new Float64Array(b - a);
    for (let k = a; k < b; k++) y[k - a] = (values[l.index[k]] - zc[j]) / zs[j];
    const sqrtW = l.memberWeights ? Float64Array.from(l.memberWeights.slice(a, b), Math.sqrt) : undefined;
    const fit = fitCore(u, v, y, zs[j], {
      kernel: model.kernel,
      trend: model.trend,
      epsilonScaled: l.epsilonScaled[j],
      smoothing: l.lambdaScaled[j],
      lambdaToUser: 1,
      sqrtWeights: sqrtW,
    });
    const entry: PatchErrors = { inv: borderedInverse(fit, u, v), b: processScale(fit.state), sqrtW };
    const bytes = 8 * ((b - a) * (b - a + m) + m * m);
    cache.set(j, entry);
    cachedBytes += bytes;
    for (const [key, old] of cache) {
      if (cachedBytes <= CACHE_BYTES || key === j) break;
      cache.delete(key);
      cachedBytes -= 8 * (old.inv.n * (old.inv.n + old.inv.m) + old.inv.m * old.inv.m);
    }
    return entry;
  };
  let longest = 0;
  for (let j = 0; j + 1 < start.length; j++) longest = Math.max(longest, start[j + 1] - start[j]);
  const kv = new Float64Array(longest);
  const row = new Float64Array(Math.max(m, 1));
  const phi = kernelOfSquared(model.kernel, 1);
  const uv = new Float64Array(2);
  const patchSe = (j: number, u: number, v: number): number => {
    const pe = patchErrors(j);
    const x = (u - cu[j]) / radius[j], y = (v - cv[j]) / radius[j];
    const a = start[j], n = start[j + 1] - a;
    // φ at ε²ρ with φ written for ε = 1 (the thin-plate spline's patches have ε = 1).
    const eps2 = e2[j];
    const k = kv.subarray(0, n);
    for (let t = 0; t < n; t++) {
      const du = x - pu[a + t], dv = y - pv[a + t];
      k[t] = phi(eps2 * (du * du + dv * dv)) * (pe.sqrtW ? pe.sqrtW[t] : 1);
    }
    trendRow(x, y, m, row);
    const q = borderedQuadratic(pe.inv, k, row);
    return zs[j] * Math.sqrt(Math.max(pe.b * (phi(0) - q), 0));
  };
  const estimate = model.transform === "log" ? makeEvaluator(model) : undefined;
  // Work of one estimate in multiply-adds: about (points covering a place) × n² per patch.
  let work = 0;
  const p = radius.length;
  for (let j = 0; j < p; j++) work += (start[j + 1] - start[j]) ** 3;
  work /= Math.max(model.points.x.length, 1);
  return {
    processScale: NaN,
    work,
    at(x, yy) {
      blender.map(x, yy, uv);
      const count = blender.cover(uv[0], uv[1]);
      let se = 0;
      for (let a = 0; a < count; a++) se += blender.weights[a] * patchSe(blender.ids[a], uv[0], uv[1]);
      if (count === 0) return NaN;
      if (!estimate) return se;
      // Lognormal back-transform, as for the global method (stderr.ts).
      return estimate.at(x, yy) * Math.sqrt(Math.expm1(se * se));
    },
  };
}
