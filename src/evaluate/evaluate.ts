// Evaluate a fitted surface: f(x) = zc + zs·(Σᵢ wᵢ φ(‖u − uᵢ‖²) + Σⱼ cⱼ pⱼ(u)), u = (x − c)/s.
import { trendRow, kernelOfSquared } from "../fit/kernels.ts";
import { stretchMap } from "../geometry.ts";
import type { SurfaceModel } from "../model/model.ts";

/** A model prepared for fast repeated evaluation (scaled centres as typed arrays). */
export interface Evaluator {
  /** Estimate at one map coordinate. */
  at(x: number, y: number): number;
  /** Estimates at many map coordinates. */
  many(x: ArrayLike<number>, y: ArrayLike<number>, out?: Float64Array): Float64Array;
}

/** Map coordinates → scaled model coordinates (the stretch, then centring and scaling). */
export function coordinateMapper(model: SurfaceModel): (x: number, y: number, out: Float64Array) => void {
  const { cx, cy, s } = model.scaling;
  const an = model.stretch;
  if (!an) {
    return (x, y, out) => {
      out[0] = (x - cx) / s;
      out[1] = (y - cy) / s;
    };
  }
  const rotate = stretchMap(an);
  return (x, y, out) => {
    rotate(x, y, out);
    out[0] = (out[0] - cx) / s;
    out[1] = (out[1] - cy) / s;
  };
}

/** Scaled coordinates of the model's data points. */
export function scaledCentres(model: SurfaceModel): { u: Float64Array; v: Float64Array } {
  const n = model.points.x.length;
  const u = new Float64Array(n), v = new Float64Array(n);
  const map = coordinateMapper(model);
  const uv = new Float64Array(2);
  for (let i = 0; i < n; i++) {
    map(model.points.x[i], model.points.y[i], uv);
    u[i] = uv[0];
    v[i] = uv[1];
  }
  return { u, v };
}

export function makeEvaluator(model: SurfaceModel): Evaluator {
  const { zc, zs } = model.scaling;
  const n = model.points.x.length;
  const { u: cu, v: cv } = scaledCentres(model);
  const map = coordinateMapper(model);
  const uv = new Float64Array(2);
  // Log transform: back-transform with the lognormal bias correction exp(f + σ²/2), σ² the
  // residual variance in log units (common practice; e.g. Aitchison & Brown 1957).
  const logBias = model.transform === "log" ? Math.exp(0.5 * model.diagnostics.sigma ** 2) : 1;
  const w = Float64Array.from(model.weights);
  const c = Float64Array.from(model.trendCoefficients);
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
  const raw = (x: number, y: number): number => {
    map(x, y, uv);
    const u = uv[0], v = uv[1];
    let f = radial(u, v);
    trendRow(u, v, m, row);
    for (let j = 0; j < m; j++) f += c[j] * row[j];
    return zc + zs * f;
  };
  const at = model.transform === "log" ? (x: number, y: number) => Math.exp(raw(x, y)) * logBias : raw;
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
