// The part of a saved model that only the global (dense) method needs: the scaling of coordinates
// and values, the shape and smoothing in scaled units, and the weights and trend coefficients of
// f(u) = zc + zs·(Σᵢ wᵢ φ(‖u − uᵢ‖²) + Σⱼ cⱼ pⱼ(u)).
import { trendTerms } from "../fit/kernels.ts";
import type { TrendName } from "../types.ts";

export interface GlobalPart {
  /** Centring and isotropic scaling: u = (x − cx)/s, values (z − zc)/zs. */
  scaling: { cx: number; cy: number; s: number; zc: number; zs: number };
  /** Shape ε and λ in scaled units, as used by the evaluator. */
  internal: { epsilonScaled: number; lambdaScaled: number };
  /** RBF weights (one per point) and trend coefficients, scaled units. */
  weights: number[];
  trendCoefficients: number[];
  /**
   * Standard error of the surface at each data point, from the fit: zs √(b̂ λ Aᵢᵢ / ωᵢ) (at a reading
   * φ(0) − sᵀM⁻¹s = λAᵢᵢ/ωᵢ, Aᵢᵢ the hat diagonal; evaluate/stderr.ts), in value units (log units for
   * log fits, before the back-transform). Optional (added within version 2; absent in earlier models).
   */
  pointStdErrors?: number[];
}

const finite = (v: unknown): v is number => typeof v === "number" && Number.isFinite(v);
const finiteArray = (v: unknown, n?: number): v is number[] => Array.isArray(v) && (n === undefined || v.length === n) && v.every(finite);
/** Magnitudes a fit can produce; anything larger is damage, not data. */
const sane = (v: number[]) => v.every((x) => Math.abs(x) < 1e200);

/** Check the global part of a model of `n` points with trend `trend`; `bad` makes the error to throw. */
export function checkGlobalPart(part: unknown, n: number, trend: TrendName, bad: (what: string) => Error): GlobalPart {
  if (typeof part !== "object" || part === null) throw bad("the global method's part is missing");
  const g = part as Partial<GlobalPart>;
  if (!finiteArray(g.weights, n) || !sane(g.weights)) throw bad("weights do not match the points");
  if (!finiteArray(g.trendCoefficients, trendTerms(trend)) || !sane(g.trendCoefficients)) throw bad("trend coefficients missing or not numbers");
  const sc = g.scaling;
  if (
    !sc || ![sc.cx, sc.cy, sc.zc].every((v) => finite(v) && Math.abs(v) <= 1e38) || !(finite(sc.s) && sc.s > 1e-300 && sc.s <= 1e16) ||
    !(finite(sc.zs) && sc.zs > 1e-300 && sc.zs <= 1e38)
  ) {
    throw bad("scaling missing, zero or not numbers");
  }
  const internal = g.internal;
  if (
    !internal || !(finite(internal.epsilonScaled) && internal.epsilonScaled > 0 && internal.epsilonScaled < 1e100) ||
    !(finite(internal.lambdaScaled) && internal.lambdaScaled >= 0 && internal.lambdaScaled < 1e200)
  ) {
    throw bad("shape or smoothing missing or not numbers");
  }
  if (g.pointStdErrors !== undefined && !(finiteArray(g.pointStdErrors, n) && g.pointStdErrors.every((e) => e >= 0 && e < 1e200))) {
    throw bad("standard errors at the points are not one number ≥ 0 per point");
  }
  return g as GlobalPart;
}
