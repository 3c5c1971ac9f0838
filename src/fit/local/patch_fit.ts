// One patch of the local method: the global method's own fit (fitOne → fitCore, same kernels,
// trends and GCV) on the points of one disc, in coordinates centred on the disc and scaled by its
// radius, values centred and scaled within the patch; then the patch quantities the blended model
// needs: leave-one-out residuals (Rippa 1999), the hat diagonal, Pope's τ and the process scale.
// Patches are fitted in fixed blocks (PATCH_BLOCK), in this thread or in workers: each patch's
// result depends only on its own points, so the model does not depend on the number of workers.
import { ExitCode, RbfieldError } from "../../errors.ts";
import { medianSpacing, sortByCell } from "../../geometry.ts";
import type { KernelName, TrendName } from "../../types.ts";
import { type FittedCandidate, fitOne, type KernelGroup, rankGroup, type CandidateScore } from "../candidate.ts";
import {
  influenceComplementDiagonal,
  influenceComplementDiagonalCholesky,
  influenceDiagonal,
  leaveOneOutResiduals,
  processScale,
  rotatedBasis,
} from "../influence.ts";
import { applyReflector, applyReflectors, solveTridiagonal } from "../linalg.ts";
import { hasShape, kernelOfSquared, trendRow, trendTerms } from "../kernels.ts";
import { placeKernel } from "../../evaluate/local_stderr.ts";
import { choleskyQuadratic, factorFromFit } from "../../evaluate/null_space.ts";
import type { Prepared } from "../prepare.ts";
import { robustFit } from "../robust.ts";

/** Patches per block of work (a worker takes whole blocks, so the split does not follow the thread count). */
export const PATCH_BLOCK = 64;

/** The data every patch draws on: the prepared points in the global scaled frame. */
export interface PatchData {
  u: Float64Array;
  v: Float64Array;
  values: Float64Array;
  sqrtW?: Float64Array;
  /** Map units per global scaled unit. */
  s: number;
}

/** The model every patch fits: kernel, trend, shape (ε per map unit; null without shape), smoothing. */
export interface PatchModel {
  kernel: KernelName;
  trend: TrendName;
  shape: number | null;
  smoothing: "gcv" | number;
  robust: boolean;
}

/** A disc and its points. */
export interface PatchGeometry {
  cu: number;
  cv: number;
  radius: number;
  members: Int32Array;
}

/**
 * Nodes of a standard-error lattice in the global scaled frame, in a uniform bucket grid (cell side
 * h, cells cols × rows from (u0, v0); cell c holds order[start[c]] … order[start[c + 1] − 1]), so
 * that each patch finds the nodes inside its disc (FitOptions.errorPlaces).
 */
export interface PatchPlaces {
  u: Float64Array;
  v: Float64Array;
  u0: number;
  v0: number;
  h: number;
  cols: number;
  rows: number;
  start: Int32Array;
  order: Int32Array;
}

/** The bucket grid of nodes at scaled (u, v), cell side h (about a patch radius). */
export function bucketPlaces(u: Float64Array, v: Float64Array, h: number): PatchPlaces {
  let u0 = Infinity, v0 = Infinity, u1 = -Infinity, v1 = -Infinity;
  for (let k = 0; k < u.length; k++) {
    u0 = Math.min(u0, u[k]), u1 = Math.max(u1, u[k]), v0 = Math.min(v0, v[k]), v1 = Math.max(v1, v[k]);
  }
  if (!(u.length > 0)) u0 = v0 = u1 = v1 = 0;
  const cols = Math.min(Math.floor((u1 - u0) / h) + 1, 4096), rows = Math.min(Math.floor((v1 - v0) / h) + 1, 4096);
  const cellOf = Int32Array.from(u, (uk, k) => Math.min(rows - 1, Math.floor((v[k] - v0) / h)) * cols + Math.min(cols - 1, Math.floor((uk - u0) / h)));
  const { start, order } = sortByCell(cellOf, cols * rows);
  return { u, v, u0, v0, h, cols, rows, start, order };
}

/**
 * Patch standard errors √(b̂·(φ(0) − sᵀM⁻¹s)) at the nodes inside a fitted patch's disc (ρ² < 1,
 * as the blend weights them), from the fit's own factors (factorFromFit): the same formula and code
 * as the error estimator's (evaluate/local_stderr.ts), without factorising again.
 */
function errorsAtPlaces(places: PatchPlaces, g: PatchGeometry, prep: Prepared, fit: FittedCandidate["fit"], l: Float64Array, b: number, sqrtW: Float64Array | undefined): { nodes: number[]; se: number[] } {
  const nodes: number[] = [], se: number[] = [];
  const { cu, cv, radius } = g;
  const { u0, v0, h, cols, rows, start, order, u, v } = places;
  const c0 = Math.max(0, Math.floor((cu - radius - u0) / h)), c1 = Math.min(cols - 1, Math.floor((cu + radius - u0) / h));
  const r0 = Math.max(0, Math.floor((cv - radius - v0) / h)), r1 = Math.min(rows - 1, Math.floor((cv + radius - v0) / h));
  if (c0 > c1 || r0 > r1) return { nodes, se };
  const f = factorFromFit(fit.state, fit.lambdaScaled, l, b);
  const phi = kernelOfSquared(fit.kernel, 1), phi0 = phi(0);
  const eps2 = fit.epsilonScaled * fit.epsilonScaled;
  const n = prep.n, m = f.m;
  const k = new Float64Array(n), tr = new Float64Array(Math.max(m, 1)), a1 = new Float64Array(Math.max(m, 1)), z = new Float64Array(n);
  for (let r = r0; r <= r1; r++) {
    for (let c = c0; c <= c1; c++) {
      const cell = r * cols + c;
      for (let q = start[cell]; q < start[cell + 1]; q++) {
        const node = order[q];
        const du = u[node] - cu, dv = v[node] - cv;
        // A superset of the blend's test (ρ² < 1): an extra entry is never asked for.
        if (!((du * du + dv * dv) / (radius * radius) < 1 + 1e-9)) continue;
        const x = (u[node] - cu) / radius, y = (v[node] - cv) / radius;
        placeKernel(phi, eps2, prep.u, prep.v, sqrtW, 0, x, y, k);
        trendRow(x, y, m, tr);
        const rest = phi0 - choleskyQuadratic(f, k, tr, a1, z);
        nodes.push(node);
        se.push(Math.sqrt(Math.max(b * rest, 0)));
      }
    }
  }
  return { nodes, se };
}

/** A patch's points as prepared data in the patch's own frame: ((u − cu)/ρ, (v − cv)/ρ). */
export function patchPrepared(data: PatchData, g: PatchGeometry, needSpacing: boolean): Prepared {
  const n = g.members.length;
  const u = new Float64Array(n), v = new Float64Array(n), values = new Float64Array(n);
  const sqrtW = data.sqrtW ? new Float64Array(n) : undefined;
  for (let k = 0; k < n; k++) {
    const i = g.members[k];
    u[k] = (data.u[i] - g.cu) / g.radius;
    v[k] = (data.v[i] - g.cv) / g.radius;
    values[k] = data.values[i];
    if (sqrtW) sqrtW[k] = data.sqrtW![i];
  }
  return {
    n,
    u,
    v,
    values,
    sqrtW,
    spacingScaled: needSpacing ? medianSpacing(u, v) : 0,
    s: data.s * g.radius,
    cx: 0,
    cy: 0,
    stretch: null,
  };
}

/** Smoothing choices coded as numbers for transfer. */
const CHOICES = ["gcv", "given", "given-raised"] as const;

/** The fitted patches of one block, as typed arrays (transferable); per-point arrays follow the members. */
export interface PatchBlock {
  /** Patch numbers in this block. */
  patches: Int32Array;
  /** Per patch: zc, zs, epsilonScaled, lambdaScaled, λ in map units, condition, heldAtFloor, smoothing choice, ν = n − m, process scale b̂, robust passes, converged, λ moved by the leave-one-out guard. */
  scalars: Float64Array;
  /** Per patch, m trend coefficients. */
  trend: Float64Array;
  /**
   * Per member of each patch in order: RBF weight, fitted value, leave-one-out residual, τ, hat
   * diagonal Aᵢᵢ, robustness weight (1 without robust), observation weight ω as fitted (1 without weights).
   */
  members: Float64Array;
  /** Patches whose fit failed, with the reason (the caller grows and refits them). */
  failed: { patch: number; message: string }[];
  /** With places: per patch, its entries' count; then the entries' nodes and √(b̂·rest) (errorsAtPlaces). */
  placeCount: Int32Array;
  placeNode: Int32Array;
  placeSe: Float64Array;
}

export const SCALARS = 13;
export const MEMBER_FIELDS = 7;

/**
 * λ by GCV, with the exact leave-one-out error deciding between GCV's local minima. Two readings
 * much closer together than the rest (common among thousands of patches) give B a tiny eigenvalue;
 * for λ just above it tr(I − A) ≈ 1 while the residual is only the pair's difference, so GCV has a
 * second, spurious minimum at near-interpolation, and in a patch of ~150 points it wins whenever the
 * pair happens to agree to better than about σ/10 (GCV replaces each point's leverage by the mean;
 * the same failure select.ts guards against between candidates). At every local minimum of GCV's λ
 * grid the exact leave-one-out residuals eᵢ = w̃ᵢ/(Dᵢ G̃ᵢᵢ) (Rippa 1999) are computed, G̃ᵢᵢ by one
 * Cholesky factorisation of B + λI (influenceDiagonal's route, about (2/3)n³) and w̃ = Q₂H(T + λI)⁻¹h
 * by the fit's reflectors (O(n²)); the minimum with the smallest leave-one-out mean square is kept
 * (the chosen one refined as fitCore refines it, another one at its grid λ). Returns the diagonal
 * G̃ᵢᵢ at the λ kept, which fitPatch needs too, and (factor.l) the Cholesky factor of B + λI at that λ
 * when the Cholesky route gave the diagonal (standard errors at places reuse it).
 */
export function fitPatchSmoothing(prep: Prepared, kernel: KernelName, trend: TrendName, shape: "auto" | number, smoothing: "gcv" | number): { fitted: FittedCandidate; moved: boolean; gii: Float64Array; factor: { l?: Float64Array } } {
  const first = fitOne(prep, kernel, trend, shape, smoothing, undefined, true);
  const factor: { l?: Float64Array } = {};
  const curve = first.fit.curve;
  const minima: number[] = [];
  if (smoothing === "gcv") {
    for (let i = 0; i < curve.length; i++) {
      if ((i === 0 || curve[i].gcv < curve[i - 1].gcv) && (i === curve.length - 1 || curve[i].gcv <= curve[i + 1].gcv)) minima.push(i);
    }
  }
  if (minima.length < 2) return { fitted: first, moved: false, gii: influenceDiagonal(first.fit, factor), factor };
  const st = first.fit.state;
  const { n, m, tri, qr } = st;
  const t = new Float64Array(n - m);
  const w = new Float64Array(n);
  const looMse = (lambda: number, keep?: { l?: Float64Array }): { mse: number; gii: Float64Array } => {
    const gii = influenceComplementDiagonalCholesky(st, lambda, keep) ?? influenceComplementDiagonal(st, rotatedBasis(st), lambda);
    // w̃ = Q₂ H (T + λI)⁻¹ h, as fitCore forms the weights.
    solveTridiagonal(tri.d, tri.e, lambda, st.h, t);
    applyReflectors(tri.reflectors, t);
    w.fill(0, 0, m);
    w.set(t, m);
    for (let j = qr.length - 1; j >= 0; j--) applyReflector(qr[j], w);
    let gmax = 0;
    for (const g of gii) gmax = Math.max(gmax, Math.abs(g));
    let ss = 0, count = 0;
    for (let i = 0; i < n; i++) {
      if (!(gii[i] > 1e-12 * gmax)) continue;
      // eᵢ = w̃ᵢ / (Dᵢ G̃ᵢᵢ) (leaveOneOutResiduals).
      const e = w[i] / ((st.sqrtW ? st.sqrtW[i] : 1) * gii[i]);
      ss += e * e;
      count++;
    }
    return { mse: count > 0 ? ss / count : Infinity, gii };
  };
  const chosenScaled = first.fit.lambdaScaled;
  const atChosen = looMse(chosenScaled, factor);
  let best = { lambda: chosenScaled, mse: atChosen.mse };
  for (const i of minima) {
    const lambda = curve[i].lambda / first.lambdaToUser;
    // The chosen minimum's own grid point lies within a grid step of it.
    if (Math.abs(Math.log(lambda / chosenScaled)) < Math.log(curve[1].lambda / curve[0].lambda) * 1.5) continue;
    const { mse } = looMse(lambda);
    if (mse < best.mse) best = { lambda, mse };
  }
  if (best.lambda === chosenScaled) return { fitted: first, moved: false, gii: atChosen.gii, factor };
  const refit = fitOne(prep, kernel, trend, shape, best.lambda * first.lambdaToUser, undefined, true);
  const moved: { l?: Float64Array } = {};
  return { fitted: { ...refit, fit: { ...refit.fit, smoothingChoice: "gcv", curve } }, moved: true, gii: influenceDiagonal(refit.fit, moved), factor: moved };
}

/** Fit one patch and return what the blended model needs (and, with places, its errors there). */
export function fitPatch(data: PatchData, g: PatchGeometry, model: PatchModel, places?: PatchPlaces): { fitted: FittedCandidate; scalars: number[]; members: Float64Array; places: { nodes: number[]; se: number[] } } {
  const prep = patchPrepared(data, g, false);
  const shape: "auto" | number = hasShape(model.kernel) ? model.shape! : 1;
  let fitted: FittedCandidate;
  let moved: boolean;
  let gii: Float64Array;
  let factor: { l?: Float64Array };
  let robustWeights: Float64Array | undefined;
  let sqrtW = prep.sqrtW;
  let passes = 0, converged = 1;
  if (model.robust) {
    // Robustness weights from the global method's reweighting (robust.ts); the final fit at those
    // weights then chooses λ with the guard below, like every other patch.
    const r = robustFit(prep, model.kernel, model.trend, shape, model.smoothing);
    robustWeights = r.weights;
    sqrtW = r.sqrtW;
    ({ fitted, moved, gii, factor } = fitPatchSmoothing({ ...prep, sqrtW }, model.kernel, model.trend, shape, model.smoothing));
    passes = r.passes;
    converged = r.converged ? 1 : 0;
  } else ({ fitted, moved, gii, factor } = fitPatchSmoothing(prep, model.kernel, model.trend, shape, model.smoothing));
  const { fit, zs } = fitted;
  const n = prep.n;
  const loo = leaveOneOutResiduals(fit, zs, gii);
  const b = processScale(fit.state);
  let gmax = 0;
  for (const x of gii) gmax = Math.max(gmax, Math.abs(x));
  const out = new Float64Array(n * MEMBER_FIELDS);
  for (let k = 0; k < n; k++) {
    const o = k * MEMBER_FIELDS;
    out[o] = fit.weights[k];
    out[o + 1] = prep.values[k] - fit.residual[k] * zs;
    out[o + 2] = loo[k];
    // Pope's τ in the patch: w̃ᵢ/√(b̂ G̃ᵢᵢ) (blunders.ts, first round of the data snooping).
    out[o + 3] = gii[k] > 1e-12 * gmax && b > 0 ? fit.state.wTilde[k] / Math.sqrt(b * gii[k]) : NaN;
    // (I − A)ᵢᵢ = λ G̃ᵢᵢ for the weighted system (the residual is λ D⁻¹G̃Dy).
    out[o + 4] = 1 - fit.lambdaScaled * gii[k];
    out[o + 5] = robustWeights ? robustWeights[k] : 1;
    out[o + 6] = sqrtW ? sqrtW[k] * sqrtW[k] : 1;
  }
  const scalars = [
    fitted.scaling.zc,
    zs,
    fit.epsilonScaled,
    fit.lambdaScaled,
    fit.lambdaScaled * fitted.lambdaToUser,
    fit.condition,
    fit.heldAtFloor ? 1 : 0,
    CHOICES.indexOf(fit.smoothingChoice),
    n - trendTerms(model.trend),
    b,
    passes,
    converged,
    moved ? 1 : 0,
  ];
  // The fit's own warnings (λ held at the floor or raised) are counted from the scalars by the caller.
  // Errors at places need the Cholesky route's factor (else the estimator factorises this patch later).
  const at = places && factor.l && fit.state.a11 ? errorsAtPlaces(places, g, prep, fit, factor.l, b, sqrtW) : { nodes: [], se: [] };
  return { fitted, scalars, members: out, places: at };
}

export function smoothingChoiceOf(code: number): (typeof CHOICES)[number] {
  return CHOICES[code];
}

/** Fit a list of patches (one block) into typed arrays. */
export function fitPatchBlock(data: PatchData, geometry: (j: number) => PatchGeometry, patches: number[], model: PatchModel, places?: PatchPlaces): PatchBlock {
  const m = trendTerms(model.trend);
  const scalars = new Float64Array(patches.length * SCALARS);
  const trend = new Float64Array(patches.length * m);
  const parts: Float64Array[] = [];
  const failed: PatchBlock["failed"] = [];
  const placeCount = new Int32Array(patches.length);
  const placeNode: number[] = [], placeSe: number[] = [];
  patches.forEach((j, b) => {
    const g = geometry(j);
    try {
      const r = fitPatch(data, g, model, places);
      scalars.set(r.scalars, b * SCALARS);
      trend.set(r.fitted.fit.trendCoefficients, b * m);
      parts.push(r.members);
      placeCount[b] = r.places.nodes.length;
      for (const k of r.places.nodes) placeNode.push(k);
      for (const e of r.places.se) placeSe.push(e);
    } catch (e) {
      if (!(e instanceof RbfieldError)) throw e;
      failed.push({ patch: j, message: e.template });
      parts.push(new Float64Array(g.members.length * MEMBER_FIELDS).fill(NaN));
    }
  });
  const members = new Float64Array(parts.reduce((s, p) => s + p.length, 0));
  let o = 0;
  for (const p of parts) {
    members.set(p, o);
    o += p.length;
  }
  return { patches: Int32Array.from(patches), scalars, trend, members, failed, placeCount, placeNode: Int32Array.from(placeNode), placeSe: Float64Array.from(placeSe) };
}

/** The transferable buffers of a block. */
export function blockBuffers(b: PatchBlock): ArrayBuffer[] {
  return [b.patches.buffer, b.scalars.buffer, b.trend.buffer, b.members.buffer, b.placeCount.buffer, b.placeNode.buffer, b.placeSe.buffer] as ArrayBuffer[];
}

/** Rank the candidate models on one patch (the global method's automatic selection, rankGroup). */
export function rankPatch(data: PatchData, g: PatchGeometry, groups: KernelGroup[], shapeOpt: "auto" | number, smoothing: "gcv" | number): CandidateScore[] {
  const prep = patchPrepared(data, g, true);
  return groups.flatMap((group) => rankGroup(prep, group, shapeOpt, smoothing));
}

/** A patch whose points cannot carry the model even after growing. */
export function patchFailure(j: number, message: string): RbfieldError {
  return new RbfieldError(`the local fit failed on patch ${j + 1} even after enlarging it: ${message}`, ExitCode.numerical);
}

/**
 * A side of a patch cut by breaklines whose points cannot carry the model (too few for the trend):
 * the weighted mean of its values (RBF weights 0, trend coefficients 0, zc the mean), so the side
 * keeps its own level and borrows nothing from across the line. Hat diagonal ωᵢ/Σω; leave-one-out
 * residual yᵢ − mean of the others.
 */
export function constantPatch(data: PatchData, g: PatchGeometry, m: number): { scalars: number[]; trend: Float64Array; members: Float64Array; se: number } {
  const n = g.members.length;
  let sw = 0, swy = 0;
  for (const i of g.members) {
    const w = data.sqrtW ? data.sqrtW[i] ** 2 : 1;
    sw += w;
    swy += w * data.values[i];
  }
  const mean = swy / sw;
  const out = new Float64Array(n * MEMBER_FIELDS);
  g.members.forEach((i, k) => {
    const w = data.sqrtW ? data.sqrtW[i] ** 2 : 1;
    const o = k * MEMBER_FIELDS;
    out[o] = 0;
    out[o + 1] = mean;
    out[o + 2] = sw - w > 0 ? data.values[i] - (swy - w * data.values[i]) / (sw - w) : NaN;
    out[o + 3] = NaN;
    out[o + 4] = w / sw;
    out[o + 5] = 1;
    out[o + 6] = w;
  });
  const scalars = [mean, 1, 1, 0, 0, 1, 0, CHOICES.indexOf("gcv"), Math.max(n - 1, 0), 0, 0, 1, 0];
  // Its standard error: the weighted spread of the side's values about their mean (a level is all
  // this side can say), NaN for a single point.
  let ss = 0;
  for (const i of g.members) ss += (data.sqrtW ? data.sqrtW[i] ** 2 : 1) * (data.values[i] - mean) ** 2;
  const se = n > 1 ? Math.sqrt(ss / sw * n / (n - 1)) : NaN;
  return { scalars, trend: new Float64Array(m), members: out, se };
}
