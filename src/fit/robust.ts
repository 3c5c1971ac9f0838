// Resistance to blunders: iteratively reweighted least squares with bounded-influence weights.
//
// Each pass fits the surface with weights ωᵢ = ωᵢ(user)·ρᵢ, λ chosen again by GCV, and recomputes ρ
// from the standardised leave-one-out residuals uᵢ = eᵢ√ωᵢ(user) / s, s = 1.4826·median|eᵢ√ωᵢ(user)|
// (the MAD scale; Hampel 1974). The first two passes use Huber's weights min(1, k/|u|), k = 1.345,
// which cannot reject a good point; later passes Tukey's biweight (1 − (u/c)²)² for |u| < c, else 0,
// c = 4.685, which gives a blunder no influence at all (both constants give 95% efficiency for
// normal errors; Huber 1981; Beaton & Tukey 1974). Starting a redescending estimator from a Huber fit
// is common practice (Maronna, Martin & Yohai 2006, §4.4). Leave-one-out residuals are used because
// a surface that follows a blunder hides part of its ordinary residual.
import { leaveOneOutResiduals } from "./influence.ts";
import { type FittedCandidate, fitOne } from "./candidate.ts";
import type { TrendName, KernelName } from "../types.ts";
import { normalisedSqrtWeights, type Prepared } from "./prepare.ts";

const HUBER_K = 1.345;
const BIWEIGHT_C = 4.685;
/** Smallest robustness weight: keeps every point in the system (a weight of 10⁻⁴ is 10⁴ times the noise variance). */
export const MIN_ROBUST_WEIGHT = 1e-4;
const MAX_PASSES = 30;

export interface RobustResult {
  fitted: FittedCandidate;
  /** Robustness weight ρᵢ ∈ [MIN_ROBUST_WEIGHT, 1] per point. */
  weights: Float64Array;
  /** Total weights ω(user)·ρ normalised to mean 1, as fitted. */
  sqrtW: Float64Array;
  passes: number;
  converged: boolean;
}

export function robustFit(prep: Prepared, kernel: KernelName, trend: TrendName, shape: "auto" | number, smoothing: "gcv" | number, progress?: (m: string) => void): RobustResult {
  const n = prep.n;
  const userW = Float64Array.from({ length: n }, (_, i) => (prep.sqrtW ? prep.sqrtW[i] ** 2 : 1));
  const rho = new Float64Array(n).fill(1);
  let fitted!: FittedCandidate;
  let sqrtW!: Float64Array;
  let used = rho.slice();
  let converged = false;
  let pass = 0;
  while (pass < MAX_PASSES) {
    pass++;
    progress?.(`robust fit, pass ${pass}`);
    used = rho.slice();
    sqrtW = normalisedSqrtWeights(Float64Array.from(rho, (r, i) => r * userW[i]));
    fitted = fitOne({ ...prep, sqrtW }, kernel, trend, shape, smoothing);
    if (pass === 1 && shape === "auto") shape = fitted.fit.epsilonScaled / prep.s;
    const loo = leaveOneOutResiduals(fitted.fit, fitted.zs);
    const std = Float64Array.from(loo, (e, i) => (Number.isNaN(e) ? 0 : e * Math.sqrt(userW[i])));
    const abs = Float64Array.from(std, Math.abs).sort();
    const scale = 1.4826 * abs[Math.floor(n / 2)];
    if (!(scale > 0)) break; // an exact fit: nothing to down-weight
    let change = 0;
    for (let i = 0; i < n; i++) {
      const u = std[i] / scale;
      const w = pass <= 2 ? Math.min(1, HUBER_K / Math.max(Math.abs(u), 1e-300)) : Math.abs(u) < BIWEIGHT_C ? (1 - (u / BIWEIGHT_C) ** 2) ** 2 : 0;
      const next = Math.max(w, MIN_ROBUST_WEIGHT);
      change = Math.max(change, Math.abs(next - rho[i]));
      rho[i] = next;
    }
    if (pass > 2 && change < 1e-3) {
      converged = true;
      break;
    }
  }
  return { fitted, weights: used, sqrtW, passes: pass, converged };
}
