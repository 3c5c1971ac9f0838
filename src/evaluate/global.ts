// The global method's evaluator: f(x) = zc + zs·(Σᵢ wᵢ φ(‖u − uᵢ‖²) + Σⱼ cⱼ pⱼ(u)), u the mapped
// coordinates (the stretch, then centring and scaling). The model is first packed into typed arrays
// (what worker threads receive); the evaluator is built from the packed form only, so the main
// thread and the workers run the same code on the same numbers.
import { trendRow } from "../fit/kernels.ts";
import { coordinateMapper } from "../geometry.ts";

export { coordinateMapper };
import type { GlobalModel } from "../model/model.ts";
import type { KernelName } from "../types.ts";

/** A surface value at map coordinates, one place or many. */
export interface Evaluator {
  /** Estimate at one map coordinate. */
  at(x: number, y: number): number;
  /** Estimates at many map coordinates. */
  many(x: ArrayLike<number>, y: ArrayLike<number>, out?: Float64Array): Float64Array;
}

/** The global model as typed arrays and a few numbers: all its evaluator needs. */
export interface PackedGlobal {
  method: "global";
  kernel: KernelName;
  epsilonScaled: number;
  scaling: { cx: number; cy: number; s: number; zc: number; zs: number };
  stretch: GlobalModel["stretch"];
  /** exp(σ²/2) for log fits (lognormal bias correction), else 0 (no back-transform). */
  logBias: number;
  /** Scaled centres uᵢ, vᵢ; weights wᵢ; trend coefficients cⱼ. */
  u: Float64Array;
  v: Float64Array;
  w: Float64Array;
  c: Float64Array;
}

/** Scaled coordinates of the model's data points. */
export function scaledCentres(model: GlobalModel): { u: Float64Array; v: Float64Array } {
  return mappedPoints(model.points, coordinateMapper({ scaling: model.global.scaling, stretch: model.stretch }));
}

/** Points mapped by `map` (the same arithmetic as the fit's preparation). */
export function mappedPoints(points: { x: ArrayLike<number>; y: ArrayLike<number> }, map: (x: number, y: number, out: Float64Array) => void): { u: Float64Array; v: Float64Array } {
  const n = points.x.length;
  const u = new Float64Array(n), v = new Float64Array(n);
  const uv = new Float64Array(2);
  for (let i = 0; i < n; i++) {
    map(points.x[i], points.y[i], uv);
    u[i] = uv[0];
    v[i] = uv[1];
  }
  return { u, v };
}

export function packGlobal(model: GlobalModel): PackedGlobal {
  const { u, v } = scaledCentres(model);
  return {
    method: "global",
    kernel: model.kernel,
    epsilonScaled: model.global.internal.epsilonScaled,
    scaling: { ...model.global.scaling },
    stretch: model.stretch ? { ...model.stretch } : null,
    // Log transform: back-transform with the lognormal bias correction exp(f + σ²/2), σ² the
    // residual variance in log units (common practice; e.g. Aitchison & Brown 1957).
    logBias: model.transform === "log" ? Math.exp(0.5 * model.diagnostics.sigma ** 2) : 0,
    u,
    v,
    w: Float64Array.from(model.global.weights),
    c: Float64Array.from(model.global.trendCoefficients),
  };
}

/** The typed arrays of a packed model, for postMessage transfer lists. */
export function packedBuffers(p: PackedGlobal): ArrayBuffer[] {
  return [p.u.buffer, p.v.buffer, p.w.buffer, p.c.buffer] as ArrayBuffer[];
}

export function globalEvaluator(p: PackedGlobal): Evaluator {
  const { zc, zs } = p.scaling;
  const { u: cu, v: cv, w, c } = p;
  const n = cu.length;
  const map = coordinateMapper(p);
  const uv = new Float64Array(2);
  const m = c.length;
  const row = new Float64Array(Math.max(m, 1));
  const e2 = p.epsilonScaled * p.epsilonScaled;
  // Kernel loops are written out per kernel so the JIT sees one monomorphic loop each; test/fit.test.ts
  // checks them against the kernel table (fit/kernels.ts).
  const radial = (u: number, v: number): number => {
    let sum = 0;
    switch (p.kernel) {
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
  return evaluatorOfRaw(raw, p.logBias);
}

/**
 * An evaluator from the surface in fitted units: back-transformed as exp(f)·logBias for log fits
 * (logBias = exp(σ²/2) > 0), as is otherwise. Shared by every method's evaluator.
 */
export function evaluatorOfRaw(raw: (x: number, y: number) => number, logBias: number): Evaluator {
  const at = logBias > 0 ? (x: number, y: number) => Math.exp(raw(x, y)) * logBias : raw;
  return {
    at,
    many(x, y, out) {
      const res = out ?? new Float64Array(x.length);
      for (let i = 0; i < x.length; i++) res[i] = at(x[i], y[i]);
      return res;
    },
  };
}
