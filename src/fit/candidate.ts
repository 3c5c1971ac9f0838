// One candidate model: a kernel and trend fitted with its shape and smoothing chosen by GCV, and
// scored by GCV and exact leave-one-out error for the selection.
import { ExitCode, RbfieldError } from "../errors.ts";
import type { RankedCandidate } from "../model/model.ts";
import type { TrendName, KernelName } from "../types.ts";
import { fitCore, type KernelFit, type Scaling } from "./core.ts";
import { leaveOneOutResiduals } from "./influence.ts";
import { hasShape } from "./kernels.ts";
import { goldenSection } from "./minimise.ts";
import { type Prepared, subsampleIndices, subsamplePrepared } from "./prepare.ts";

/** Points above which the shape search runs on a subsample (then one full fit at that shape). */
export const SHAPE_SUBSAMPLE = 500;

/** One candidate model of an automatic selection, with its scores (as stored in the model, every field present). */
export type CandidateScore = Required<RankedCandidate>;

/** A fitted candidate with what the selection and the final model need. */
export interface FittedCandidate {
  fit: KernelFit;
  scaling: Scaling;
  zs: number;
  lambdaToUser: number;
}

/** Fit one kernel and trend (choosing the shape when asked; on a subsample when N is large). */
export function fitOne(
  prep: Prepared,
  kernel: KernelName,
  trend: TrendName,
  shapeOpt: "auto" | number,
  smoothing: "gcv" | number,
  progress?: (m: string) => void,
  keepReduced = false,
): FittedCandidate {
  const { n, values } = prep;
  // Values are centred unless the trend is none (centring would act as a hidden constant trend).
  let zc = 0;
  if (trend !== "none") {
    for (let i = 0; i < n; i++) zc += values[i] / n;
  }
  let ss = 0;
  for (let i = 0; i < n; i++) ss += (values[i] - zc) ** 2;
  const zs = Math.sqrt(ss / n) || 1;
  const yv = Float64Array.from(values, (z) => (z - zc) / zs);
  // λ in map units: the thin-plate kernel scales as s² (the r² log s part lies in the trend's
  // null space); the shape kernels are unchanged when ε is scaled with the coordinates.
  const lambdaToUser = kernel === "thin-plate" ? prep.s * prep.s : 1;
  const smoothingScaled = smoothing === "gcv" ? "gcv" as const : smoothing / lambdaToUser;
  const run = (epsilonScaled: number, data: Prepared = prep, yy: Float64Array = yv) =>
    fitCore(data.u, data.v, yy, zs, { kernel, trend, epsilonScaled, smoothing: smoothingScaled, lambdaToUser, sqrtWeights: data.sqrtW, keepReduced });
  let fit: KernelFit;
  if (!hasShape(kernel)) fit = run(1);
  else if (shapeOpt !== "auto") fit = run(shapeOpt * prep.s);
  else if (n > SHAPE_SUBSAMPLE) {
    const idx = subsampleIndices(n, SHAPE_SUBSAMPLE);
    const sub = subsamplePrepared(prep, idx);
    const sy = Float64Array.from(idx, (i) => yv[i]);
    const best = chooseShape((e) => run(e, sub, sy), sub.spacingScaled, progress);
    fit = run(best.epsilonScaled);
  } else fit = chooseShape((e) => run(e), prep.spacingScaled, progress);
  const scaling: Scaling = { cx: prep.cx, cy: prep.cy, s: prep.s, zc, zs };
  return { fit, scaling, zs, lambdaToUser };
}

/**
 * Choose the shape ε by GCV: a 7-point log-spaced scan of ε·h from 0.02 to 3 (h the median
 * spacing), then six steps of golden-section refinement (about 9% in ε) between the best scan
 * point's neighbours (Rippa 1999 uses the same idea with leave-one-out error). Shapes at which the
 * kernel is flat to rounding level fail in fitCore and are skipped; a shape whose smoothing is held
 * at the numerical floor loses to any shape whose GCV optimum is reachable, so the search stays
 * where the scores are reliable.
 */
function chooseShape(run: (eps: number) => KernelFit, spacingScaled: number, progress?: (m: string) => void): KernelFit {
  const better = (a: KernelFit, b: KernelFit) => (a.heldAtFloor !== b.heldAtFloor ? !a.heldAtFloor : a.gcv < b.gcv);
  const h = spacingScaled > 0 ? spacingScaled : 0.1;
  const scan = 7;
  const lo = Math.log(0.02 / h);
  const hi = Math.log(3 / h);
  const logs: number[] = [];
  const fits: (KernelFit | undefined)[] = [];
  let bestIdx = -1;
  for (let s = 0; s < scan; s++) {
    const le = lo + ((hi - lo) * s) / (scan - 1);
    logs.push(le);
    progress?.(`shape scan ${s + 1}/${scan}`);
    let f: KernelFit | undefined;
    try {
      f = run(Math.exp(le));
    } catch (e) {
      if (!(e instanceof RbfieldError) || e.exitCode !== ExitCode.numerical) throw e;
    }
    fits.push(f);
    if (f && (bestIdx < 0 || better(f, fits[bestIdx]!))) bestIdx = s;
  }
  if (bestIdx < 0) throw new RbfieldError("no shape parameter gave a stable fit; try another kernel", ExitCode.numerical);
  let best = fits[bestIdx]!;
  const tryAt = (le: number) => {
    try {
      const f = run(Math.exp(le));
      if (better(f, best)) best = f;
      return f.heldAtFloor && !best.heldAtFloor ? Infinity : f.gcv;
    } catch {
      return Infinity;
    }
  };
  goldenSection(tryAt, logs[Math.max(0, bestIdx - 1)], logs[Math.min(scan - 1, bestIdx + 1)], 6, (it) => progress?.(`shape refinement ${it + 1}/6`));
  return best;
}

/**
 * Leave-one-out RMSE and its standard error: with squared errors qᵢ = eᵢ², MSE = mean(q) has standard
 * error sd(q)/√n (the standard error of a cross-validation estimate, Breiman et al. 1984, §11.5), and
 * by the delta method SE(RMSE) = SE(MSE) / (2·RMSE). Undefined residuals (NaN) are left out.
 */
export function looStatistics(loo: ArrayLike<number>): { rmse: number; se: number; count: number } {
  let s = 0, s2 = 0, count = 0;
  for (let i = 0; i < loo.length; i++) {
    const e = loo[i];
    if (Number.isNaN(e)) continue;
    const q = e * e;
    s += q;
    s2 += q * q;
    count++;
  }
  if (count === 0) return { rmse: NaN, se: NaN, count };
  const mse = s / count;
  const varQ = count > 1 ? Math.max(s2 / count - mse * mse, 0) * (count / (count - 1)) : 0;
  const rmse = Math.sqrt(mse);
  const seMse = Math.sqrt(varQ / count);
  return { rmse, se: rmse > 0 ? seMse / (2 * rmse) : 0, count };
}

/** Candidates grouped by kernel, in candidate order (the shape search is shared within a group). */
export interface KernelGroup {
  kernel: KernelName;
  trends: TrendName[];
}

/**
 * Score one kernel with each of its trends: GCV, edf and exact leave-one-out RMSE. The shape is
 * searched once (with the first trend) and reused for the others: the GCV-best shape barely moves
 * with the trend, and the search is most of the cost. Candidates that cannot be fitted are left out.
 */
export function rankGroup(data: Prepared, group: KernelGroup, shapeOpt: "auto" | number, smoothing: "gcv" | number, progress?: (m: string) => void): CandidateScore[] {
  const rows: CandidateScore[] = [];
  let shape: "auto" | number = shapeOpt;
  for (const trend of group.trends) {
    progress?.(`trying ${group.kernel} with ${trend} trend`);
    try {
      const f = fitOne(data, group.kernel, trend, shape, smoothing, progress);
      if (hasShape(group.kernel) && shapeOpt === "auto") shape = f.fit.epsilonScaled / data.s;
      const stats = looStatistics(leaveOneOutResiduals(f.fit, f.zs));
      if (stats.count === 0) continue; // no point can be left out: nothing to rank this candidate by
      rows.push({
        kernel: group.kernel,
        trend,
        shape: hasShape(group.kernel) ? f.fit.epsilonScaled / data.s : null,
        lambda: f.fit.lambdaScaled * f.lambdaToUser,
        edf: f.fit.edf,
        gcv: f.fit.gcv,
        loocvRmse: stats.rmse,
        loocvSe: stats.se,
        heldAtFloor: f.fit.heldAtFloor,
        excluded: null,
        chosen: false,
      });
    } catch (e) {
      if (!(e instanceof RbfieldError)) throw e;
    }
  }
  return rows;
}
