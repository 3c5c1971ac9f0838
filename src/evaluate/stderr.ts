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
import { fitCore, type GlobalFactors } from "../fit/core.ts";
import { borderedInverse, borderedQuadratic, processScale } from "../fit/influence.ts";
import { kernelOfSquared, trendRow, trendTerms } from "../fit/kernels.ts";
import { transformedValues } from "../fit/prepare.ts";
import type { GlobalModel, SurfaceModel } from "../model/model.ts";
import type { GridValues } from "../types.ts";
import { makeEvaluator } from "./evaluate.ts";
import { coordinateMapper, scaledCentres } from "./global.ts";
import { localErrorEstimator } from "./local_stderr.ts";

export interface ErrorEstimator {
  /** Standard error of the estimate at a map coordinate (value units; back-transformed for log fits). */
  at(x: number, y: number): number;
  /** The process scale b (scaled units), for reports (NaN for the local method, whose patches each have their own). */
  processScale: number;
  /** Multiply-adds of one estimate, for choosing the error grid's stride (default N², the global method's). */
  work?: number;
}

/**
 * The error estimator of a model, through the method that made it. `factors` are those the fit of
 * this run already has (fitSurfaceWithFactors); without them (a model read from a file) the system
 * is factorised once more at the model's own λ (O(N³), no search).
 */
export function makeErrorEstimator(model: SurfaceModel, factors?: GlobalFactors): ErrorEstimator {
  switch (model.method) {
    case "global":
      return globalErrorEstimator(model, factors);
    case "local":
      return localErrorEstimator(model);
  }
}

/** The global fit's factors, recomputed from a model file at the model's own shape and λ. */
function refactorise(model: GlobalModel): GlobalFactors {
  const { zc, zs } = model.global.scaling;
  const { u, v } = scaledCentres(model);
  const values = transformedValues({ z: Float64Array.from(model.points.z), lines: model.points.line }, model.transform);
  const y = Float64Array.from(values, (z) => (z - zc) / zs);
  const sqrtW = model.points.weight ? Float64Array.from(model.points.weight, Math.sqrt) : undefined;
  const fit = fitCore(u, v, y, zs, {
    kernel: model.kernel,
    trend: model.trend,
    epsilonScaled: model.global.internal.epsilonScaled,
    smoothing: model.global.internal.lambdaScaled,
    lambdaToUser: 1,
    sqrtWeights: sqrtW,
  });
  return { fit, u, v };
}

function globalErrorEstimator(model: GlobalModel, factors: GlobalFactors = refactorise(model)): ErrorEstimator {
  const { zs } = model.global.scaling;
  const n = model.points.x.length;
  const { fit, u, v } = factors;
  const sqrtW = fit.state.sqrtW;
  const inv = borderedInverse(fit, u, v);
  const m = trendTerms(model.trend);
  const b = processScale(fit.state);
  const phi = kernelOfSquared(model.kernel, fit.epsilonScaled);
  const phi0 = phi(0);
  const map = coordinateMapper({ scaling: model.global.scaling, stretch: model.stretch });
  const uv = new Float64Array(2);
  const k = new Float64Array(n);
  const p = new Float64Array(Math.max(m, 1));
  const estimate = model.transform === "log" ? makeEvaluator(model) : undefined;
  const at = (x: number, yy: number): number => {
    map(x, yy, uv);
    for (let i = 0; i < n; i++) {
      const du = uv[0] - u[i], dv = uv[1] - v[i];
      k[i] = phi(du * du + dv * dv) * (sqrtW ? sqrtW[i] : 1);
    }
    trendRow(uv[0], uv[1], m, p);
    const q = borderedQuadratic(inv, k, p);
    const se = zs * Math.sqrt(Math.max(b * (phi0 - q), 0));
    if (!estimate) return se;
    // Lognormal: the back-transformed estimate is ẑ = exp(f̂ + σ²/2); a log-scale error se makes it
    // lognormal with relative standard deviation √(exp(se²) − 1) (Aitchison & Brown 1957, moments of
    // the lognormal), so its standard error is ẑ·√(exp(se²) − 1) — positive, in value units.
    return estimate.at(x, yy) * Math.sqrt(Math.expm1(se * se));
  };
  return { at, processScale: b };
}

/** Work (cells × the estimator's work per cell, N² for the global method) above which the error grid is computed on a coarser lattice and interpolated. */
export const STDERR_FULL_WORK = 4e9;

/**
 * Standard-error grid on the same cells and mask as a surface grid. When cells·N² (cells × the
 * estimator's work per cell) exceeds
 * STDERR_FULL_WORK, errors are computed every `stride` cells in each direction and filled in
 * bilinearly (the error surface is smooth away from data points; the stride is reported).
 */
export function gridStandardError(
  model: SurfaceModel,
  surface: GridValues,
  progress?: (m: string) => void,
  est: ErrorEstimator = makeErrorEstimator(model),
): { grid: GridValues; stride: number } {
  const { spec } = surface;
  const n = model.points.x.length;
  const cells = spec.cols * spec.rows;
  const stride = Math.max(1, Math.ceil(Math.sqrt((cells * (est.work ?? n * n)) / STDERR_FULL_WORK)));
  const values = new Float64Array(cells).fill(NaN);
  const xc = (c: number) => spec.xmin + (c + 0.5) * spec.cell;
  const yc = (r: number) => spec.ymax - (r + 0.5) * spec.cell;
  if (stride === 1) {
    let last = Date.now();
    for (let r = 0; r < spec.rows; r++) {
      for (let c = 0; c < spec.cols; c++) {
        const k = r * spec.cols + c;
        if (!Number.isNaN(surface.values[k])) values[k] = est.at(xc(c), yc(r));
      }
      if (progress && Date.now() - last > 1000) {
        last = Date.now();
        progress(`standard errors: row ${r + 1} of ${spec.rows}`);
      }
    }
    return { grid: { spec, values, crs: surface.crs }, stride };
  }
  // Coarse lattice including the last row and column, then bilinear fill.
  const cr = Array.from({ length: Math.ceil((spec.rows - 1) / stride) + 1 }, (_, i) => Math.min(i * stride, spec.rows - 1));
  const cc = Array.from({ length: Math.ceil((spec.cols - 1) / stride) + 1 }, (_, i) => Math.min(i * stride, spec.cols - 1));
  const coarse = new Float64Array(cr.length * cc.length);
  let lastCoarse = Date.now();
  for (let i = 0; i < cr.length; i++) {
    for (let j = 0; j < cc.length; j++) coarse[i * cc.length + j] = est.at(xc(cc[j]), yc(cr[i]));
    if (progress && Date.now() - lastCoarse > 1000) {
      lastCoarse = Date.now();
      progress(`standard errors: row ${i + 1} of ${cr.length} (every ${stride} cells)`);
    }
  }
  for (let r = 0; r < spec.rows; r++) {
    const i = Math.max(0, Math.min(Math.floor(r / stride), cr.length - 2));
    const ti = cr.length > 1 ? (r - cr[i]) / (cr[i + 1] - cr[i]) : 0;
    for (let c = 0; c < spec.cols; c++) {
      const k = r * spec.cols + c;
      if (Number.isNaN(surface.values[k])) continue;
      const j = Math.max(0, Math.min(Math.floor(c / stride), cc.length - 2));
      const tj = cc.length > 1 ? (c - cc[j]) / (cc[j + 1] - cc[j]) : 0;
      const i1 = Math.min(i + 1, cr.length - 1), j1 = Math.min(j + 1, cc.length - 1);
      const a = coarse[i * cc.length + j], b = coarse[i * cc.length + j1];
      const d = coarse[i1 * cc.length + j], e = coarse[i1 * cc.length + j1];
      values[k] = (1 - ti) * ((1 - tj) * a + tj * b) + ti * ((1 - tj) * d + tj * e);
    }
  }
  return { grid: { spec, values, crs: surface.crs }, stride };
}
