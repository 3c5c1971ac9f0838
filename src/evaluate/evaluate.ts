// Evaluate a fitted surface: f(x) = zc + zs·(Σᵢ wᵢ φ(‖u − uᵢ‖²) + Σⱼ cⱼ pⱼ(u)), u = (x − c)/s.
import { driftRow, kernelOfSquared } from "../fit/kernels.ts";
import type { SurfaceModel } from "../model/model.ts";

/** A model prepared for fast repeated evaluation (scaled centres as typed arrays). */
export interface Evaluator {
  /** Estimate at one map coordinate. */
  at(x: number, y: number): number;
  /** Estimates at many map coordinates. */
  many(x: ArrayLike<number>, y: ArrayLike<number>, out?: Float64Array): Float64Array;
}

export function makeEvaluator(model: SurfaceModel): Evaluator {
  const { cx, cy, s, zc, zs } = model.scaling;
  const n = model.points.x.length;
  const cu = new Float64Array(n);
  const cv = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    cu[i] = (model.points.x[i] - cx) / s;
    cv[i] = (model.points.y[i] - cy) / s;
  }
  const w = Float64Array.from(model.weights);
  const c = Float64Array.from(model.driftCoefficients);
  const m = c.length;
  const row = new Float64Array(Math.max(m, 1));
  const eps = model.internal.epsilonScaled;
  const e2 = eps * eps;
  // Kernel loops are written out per kernel so the JIT sees one monomorphic loop each.
  const radial = (u: number, v: number): number => {
    let sum = 0;
    switch (model.kernel) {
      case "thin-plate":
        for (let i = 0; i < n; i++) {
          const du = u - cu[i];
          const dv = v - cv[i];
          const rho = du * du + dv * dv;
          if (rho > 0) sum += w[i] * 0.5 * rho * Math.log(rho);
        }
        return sum;
      case "gaussian":
        for (let i = 0; i < n; i++) {
          const du = u - cu[i];
          const dv = v - cv[i];
          sum += w[i] * Math.exp(-e2 * (du * du + dv * dv));
        }
        return sum;
      case "multiquadric":
        for (let i = 0; i < n; i++) {
          const du = u - cu[i];
          const dv = v - cv[i];
          sum -= w[i] * Math.sqrt(1 + e2 * (du * du + dv * dv));
        }
        return sum;
      case "inverse-multiquadric":
        for (let i = 0; i < n; i++) {
          const du = u - cu[i];
          const dv = v - cv[i];
          sum += w[i] / Math.sqrt(1 + e2 * (du * du + dv * dv));
        }
        return sum;
      default: {
        const phi = kernelOfSquared(model.kernel, eps);
        for (let i = 0; i < n; i++) {
          const du = u - cu[i];
          const dv = v - cv[i];
          sum += w[i] * phi(du * du + dv * dv);
        }
        return sum;
      }
    }
  };
  const at = (x: number, y: number): number => {
    const u = (x - cx) / s;
    const v = (y - cy) / s;
    let f = radial(u, v);
    driftRow(u, v, m, row);
    for (let j = 0; j < m; j++) f += c[j] * row[j];
    return zc + zs * f;
  };
  return {
    at,
    many(x, y, out) {
      const res = out ?? new Float64Array(x.length);
      for (let i = 0; i < x.length; i++) res[i] = at(x[i], y[i]);
      return res;
    },
  };
}

/** Estimates of a model at map coordinates. */
export function evaluateModel(model: SurfaceModel, x: ArrayLike<number>, y: ArrayLike<number>): Float64Array {
  return makeEvaluator(model).many(x, y);
}
