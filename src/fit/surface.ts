// fitSurface: from clean points to a saved-model record. Scales the data, chooses the shape
// (when asked) and the smoothing by GCV, computes leave-one-out residuals and the data's hull.
import { convex, featureCollection, point } from "@turf/turf";
import Flatbush from "flatbush";
import { ExitCode, RbfieldError } from "../errors.ts";
import { MODEL_FORMAT, MODEL_VERSION, type SurfaceModel } from "../model/model.ts";
import type { CleanPoints, Crs, DriftName, KernelName } from "../types.ts";
import { boundingBox, computeScaling, driftProblem, fitCore, type KernelFit, leaveOneOutResiduals, type Scaling } from "./fit.ts";
import { hasShape, KERNELS } from "./kernels.ts";
import { mulberry32 } from "../random.ts";
import { goldenSection } from "./minimise.ts";

export type KernelChoice = KernelName | "auto";
export type DriftChoice = DriftName | "auto";

export interface FitOptions {
  /** Basis function, or "auto" to rank every kernel (the default). */
  kernel?: KernelChoice;
  /** Shape ε in 1/map units (φ(ε r)), or "auto" to choose it by GCV; default auto. */
  shape?: "auto" | number;
  /** Polynomial drift, or "auto" (with kernel auto: the degrees each kernel supports); default linear. */
  drift?: DriftChoice;
  /** λ in map-unit convention (added to the kernel matrix diagonal), or "gcv"; default gcv. */
  smoothing?: "gcv" | number;
  /** How auto selection ranks candidates: GCV score (default) or leave-one-out RMSE. */
  select?: "gcv" | "loocv";
  /** Observation weights ωᵢ > 0 (e.g. 1/variance), one per point; normalised to mean 1. */
  weights?: Float64Array;
  /** Geometric anisotropy: azimuth of the long axis (degrees clockwise from grid north), ratio ≥ 1. */
  anisotropy?: { azimuth: number; ratio: number };
  /** "log" fits ln z (values must be positive) and back-transforms with a lognormal bias correction. */
  transform?: "none" | "log";
  /** Standardised leave-one-out residuals beyond this are flagged as possible blunders; default 3. */
  flagThreshold?: number;
  crs?: Crs;
  source?: { file: string; x: string; y: string; z: string };
  /** Called with short progress messages during long work. */
  progress?: (message: string) => void;
}

/** One candidate model of an automatic selection, with its scores. */
export interface CandidateScore {
  kernel: KernelName;
  drift: DriftName;
  shape: number | null;
  lambda: number;
  edf: number;
  gcv: number;
  loocvRmse: number;
  chosen: boolean;
}

/** Median distance from each point to its nearest neighbour (map units). */
export function medianSpacing(x: Float64Array, y: Float64Array): number {
  const n = x.length;
  if (n < 2) return 1;
  const index = new Flatbush(n);
  for (let i = 0; i < n; i++) index.add(x[i], y[i], x[i], y[i]);
  index.finish();
  const d = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    const [j] = index.neighbors(x[i], y[i], 1, Infinity, (k: number) => k !== i);
    d[i] = Math.hypot(x[i] - x[j], y[i] - y[j]);
  }
  d.sort();
  return d[Math.floor(n / 2)];
}

/** Convex hull as a closed counter-clockwise ring (falls back to the bounding box for < 3 non-collinear points). */
export function convexHullRing(x: Float64Array, y: Float64Array): [number, number][] {
  const pts = [];
  for (let i = 0; i < x.length; i++) pts.push(point([x[i], y[i]]));
  const hull = convex(featureCollection(pts));
  if (hull) {
    const ring = hull.geometry.coordinates[0] as [number, number][];
    // turf returns a closed ring; make it counter-clockwise (positive shoelace area).
    let area2 = 0;
    for (let i = 0; i + 1 < ring.length; i++) area2 += ring[i][0] * ring[i + 1][1] - ring[i + 1][0] * ring[i][1];
    return area2 < 0 ? ring.slice().reverse() : ring;
  }
  const { xmin, ymin, xmax, ymax } = boundingBox(x, y);
  return [[xmin, ymin], [xmax, ymin], [xmax, ymax], [xmin, ymax], [xmin, ymin]];
}

/** Most points the global (dense) method accepts (measured: see DEVELOPERS.md, "Limits"). */
export const MAX_GLOBAL_POINTS = 5000;
/** Points above which the shape search runs on a subsample (then one full fit at that shape). */
export const SHAPE_SUBSAMPLE = 500;
/** Points above which automatic ranking runs on a subsample (then the winner is fitted on all). */
export const RANK_SUBSAMPLE = 500;

/** A deterministic, spatially unbiased subsample (seeded shuffle; mulberry32 generator). */
export function subsampleIndices(n: number, k: number, seed = 12345): Int32Array {
  const idx = Int32Array.from({ length: n }, (_, i) => i);
  const rand = mulberry32(seed);
  for (let i = 0; i < k; i++) {
    const j = i + Math.floor(rand() * (n - i));
    const t = idx[i];
    idx[i] = idx[j];
    idx[j] = t;
  }
  return idx.slice(0, k).sort();
}

/** Candidates of an automatic selection: each kernel with the drifts it supports (constant–quadratic). */
export function candidateList(kernel: KernelChoice, drift: DriftChoice): { kernel: KernelName; drift: DriftName }[] {
  const kernels = kernel === "auto" ? KERNELS : [kernel];
  const out: { kernel: KernelName; drift: DriftName }[] = [];
  for (const k of kernels) {
    const drifts: DriftName[] = drift !== "auto" ? [drift] : k === "thin-plate" ? ["linear", "quadratic"] : ["linear", "constant"];
    for (const d of drifts) if (!driftProblem(k, d)) out.push({ kernel: k, drift: d });
  }
  return out;
}

/** Data prepared for fitting: transformed values, scaled coordinates, weights. */
export interface Prepared {
  n: number;
  u: Float64Array;
  v: Float64Array;
  values: Float64Array; // z or ln z
  sqrtW?: Float64Array;
  spacingScaled: number;
  s: number;
  cx: number;
  cy: number;
  anisotropy: SurfaceModel["anisotropy"];
}

function subset(a: Float64Array, idx: Int32Array): Float64Array {
  return Float64Array.from(idx, (i) => a[i]);
}

/** Everything settled before the candidates are ranked: options, prepared data, candidates. */
interface FitPlan {
  points: CleanPoints;
  options: FitOptions;
  prep: Prepared;
  candidates: { kernel: KernelName; drift: DriftName }[];
  /** Data the ranking runs on (a subsample above RANK_SUBSAMPLE points). */
  rankData: Prepared;
  rankedOnSubsample: boolean;
  shapeOpt: "auto" | number;
  smoothing: "gcv" | number;
  select: "gcv" | "loocv";
  transform: "none" | "log";
  spacing: number;
}

/** Fit the surface and build the model record. */
export function fitSurface(points: CleanPoints, options: FitOptions = {}): SurfaceModel {
  const plan = planFit(points, options);
  return finishFit(plan, rankHere(plan));
}

/**
 * The same fit with the candidates of an automatic selection ranked in worker threads (one kernel
 * per task). Every candidate is computed by the same code as in fitSurface, so the result is identical.
 */
export async function fitSurfaceParallel(points: CleanPoints, options: FitOptions = {}, threads = navigator.hardwareConcurrency || 1): Promise<SurfaceModel> {
  const plan = planFit(points, options);
  if (plan.candidates.length <= 1 || threads < 2 || typeof Worker === "undefined") return finishFit(plan, rankHere(plan));
  const groups = kernelGroups(plan.candidates);
  // Greedy split by cost (a shape search costs about three fixed-shape fits).
  const cost = (g: KernelGroup) => (hasShape(g.kernel) && plan.shapeOpt === "auto" ? 3 : 1) + g.drifts.length - 1;
  const order = groups.map((_g, i) => i).sort((a, b) => cost(groups[b]) - cost(groups[a]) || a - b);
  const bins: number[][] = Array.from({ length: Math.min(threads, groups.length) }, () => []);
  const load = bins.map(() => 0);
  for (const i of order) {
    const k = load.indexOf(Math.min(...load));
    bins[k].push(i);
    load[k] += cost(groups[i]);
  }
  plan.options.progress?.(`ranking ${plan.candidates.length} candidate models on ${bins.length} threads`);
  const results = new Map<number, CandidateScore[]>();
  try {
    await Promise.all(bins.map((bin) =>
      new Promise<void>((resolve, reject) => {
        const worker = new Worker(new URL("./rank_worker.ts", import.meta.url).href, { type: "module" });
        worker.onmessage = (e: MessageEvent<{ rows?: CandidateScore[][]; error?: string }>) => {
          worker.terminate();
          if (e.data.error || !e.data.rows) return reject(new Error(e.data.error ?? "no result"));
          bin.forEach((gi, j) => results.set(gi, e.data.rows![j]));
          resolve();
        };
        worker.onerror = (e) => {
          worker.terminate();
          e.preventDefault();
          reject(new Error(e.message));
        };
        worker.postMessage({ data: plan.rankData, groups: bin.map((i) => groups[i]), shapeOpt: plan.shapeOpt, smoothing: plan.smoothing });
      })
    ));
  } catch (e) {
    // Workers unavailable here: rank in this thread.
    plan.options.progress?.(`worker threads unavailable (${(e as Error).message}); ranking in one thread`);
    return finishFit(plan, rankHere(plan));
  }
  return finishFit(plan, rankAll(plan, (_g, i) => results.get(i)!));
}

/** Rank the candidates in this thread (null when there is only one candidate). */
function rankHere(plan: FitPlan): CandidateScore[] | null {
  if (plan.candidates.length <= 1) return null;
  return rankAll(plan, (g) => rankGroup(plan.rankData, g, plan.shapeOpt, plan.smoothing, plan.options.progress));
}

/** Validate the options and prepare the data. */
function planFit(points: CleanPoints, options: FitOptions): FitPlan {
  const kernelOpt = options.kernel ?? "auto";
  const driftOpt = options.drift ?? (kernelOpt === "auto" ? "auto" : "linear");
  const smoothing = options.smoothing ?? "gcv";
  const shapeOpt = options.shape ?? "auto";
  const select = options.select ?? "gcv";
  const transform = options.transform ?? "none";
  const n = points.x.length;
  if (n < 3) throw new RbfieldError(`${n} usable points are too few to fit a surface: at least 3 are needed`, ExitCode.input);
  if (n > MAX_GLOBAL_POINTS) {
    throw new RbfieldError(
      `${n.toLocaleString("en")} points are more than the global method takes (${MAX_GLOBAL_POINTS.toLocaleString("en")}; its cost grows as N³ ` +
        "and its memory as N²); thin the points first, for example by averaging them within cells of a few metres",
      ExitCode.numerical,
    );
  }
  if (kernelOpt !== "auto" && driftOpt !== "auto") {
    const problem = driftProblem(kernelOpt, driftOpt);
    if (problem) throw new RbfieldError(problem, ExitCode.usage);
  }
  if (shapeOpt !== "auto" && (!(shapeOpt > 0) || !Number.isFinite(shapeOpt))) {
    throw new RbfieldError(`shape must be a positive number (1/map units) or auto, not ${shapeOpt}`, ExitCode.usage);
  }
  const candidates = candidateList(kernelOpt, driftOpt);
  if (candidates.length === 0) throw new RbfieldError(`no kernel supports ${driftOpt} drift here`, ExitCode.usage);

  // Values: z, or ln z for the log transform (all must be positive).
  const values = Float64Array.from(points.z);
  if (transform === "log") {
    const bad: number[] = [];
    for (let i = 0; i < n; i++) {
      if (!(values[i] > 0)) bad.push(points.lines[i]);
      else values[i] = Math.log(values[i]);
    }
    if (bad.length) {
      throw new RbfieldError(
        `--transform log needs positive values; ${bad.length} are zero or negative (lines ${bad.slice(0, 5).join(", ")}${bad.length > 5 ? ", …" : ""}); ` +
          "correct them or fit without the log transform",
        ExitCode.input,
      );
    }
  }
  // Coordinates: optional anisotropy, then centring and one isotropic scale.
  let ax = points.x, ay = points.y;
  let anisotropy: SurfaceModel["anisotropy"] = null;
  if (options.anisotropy) {
    const { azimuth, ratio } = options.anisotropy;
    if (!Number.isFinite(azimuth) || !(ratio >= 1) || !Number.isFinite(ratio)) {
      throw new RbfieldError(`anisotropy needs an azimuth in degrees and a ratio ≥ 1, not ${azimuth}, ${ratio}`, ExitCode.usage);
    }
    // Rotate about the centre of the data's bounding box.
    const bb = boundingBox(points.x, points.y);
    const x0 = 0.5 * (bb.xmin + bb.xmax), y0 = 0.5 * (bb.ymin + bb.ymax);
    const th = (azimuth * Math.PI) / 180, sn = Math.sin(th), cs = Math.cos(th);
    ax = new Float64Array(n);
    ay = new Float64Array(n);
    for (let i = 0; i < n; i++) {
      const dx = points.x[i] - x0, dy = points.y[i] - y0;
      ax[i] = dx * sn + dy * cs;
      ay[i] = ratio * (dx * cs - dy * sn);
    }
    anisotropy = { azimuth, ratio, x0, y0 };
  }
  const geo = computeScaling(ax, ay, values);
  const u = new Float64Array(n), v = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    u[i] = (ax[i] - geo.cx) / geo.s;
    v[i] = (ay[i] - geo.cy) / geo.s;
  }
  let sqrtW: Float64Array | undefined;
  if (options.weights) {
    const w = options.weights;
    if (w.length !== n || !w.every((x) => x > 0 && Number.isFinite(x))) {
      throw new RbfieldError("weights must be positive finite numbers, one per point", ExitCode.input);
    }
    let mean = 0;
    for (const x of w) mean += x / n;
    sqrtW = Float64Array.from(w, (x) => Math.sqrt(x / mean));
  }
  const spacing = medianSpacing(points.x, points.y);
  const prep: Prepared = { n, u, v, values, sqrtW, spacingScaled: medianSpacing(u, v), s: geo.s, cx: geo.cx, cy: geo.cy, anisotropy };
  const idx = candidates.length > 1 && n > RANK_SUBSAMPLE ? subsampleIndices(n, RANK_SUBSAMPLE) : null;
  const rankData: Prepared = idx
    ? {
      ...prep,
      n: idx.length,
      u: subset(u, idx),
      v: subset(v, idx),
      values: subset(values, idx),
      sqrtW: prep.sqrtW && subset(prep.sqrtW, idx),
      spacingScaled: prep.spacingScaled * Math.sqrt(n / idx.length),
    }
    : prep;
  return { points, options, prep, candidates, rankData, rankedOnSubsample: idx !== null, shapeOpt, smoothing, select, transform, spacing };
}

/** Candidates grouped by kernel, in candidate order (the shape search is shared within a group). */
export interface KernelGroup {
  kernel: KernelName;
  drifts: DriftName[];
}

function kernelGroups(candidates: { kernel: KernelName; drift: DriftName }[]): KernelGroup[] {
  const groups: KernelGroup[] = [];
  for (const c of candidates) {
    const g = groups.find((x) => x.kernel === c.kernel);
    if (g) g.drifts.push(c.drift);
    else groups.push({ kernel: c.kernel, drifts: [c.drift] });
  }
  return groups;
}

/** Rank all groups (scores from `score`), sorted by the selection criterion; best first, marked chosen. */
function rankAll(plan: FitPlan, score: (g: KernelGroup, index: number) => CandidateScore[]): CandidateScore[] {
  const ranking = kernelGroups(plan.candidates).flatMap((g, i) => score(g, i));
  if (ranking.length === 0) {
    // Every candidate failed: fitting the first one again gives its own, specific reason.
    const first = plan.candidates[0];
    fitOne(plan.rankData, first.kernel, first.drift, plan.shapeOpt, plan.smoothing);
    throw new RbfieldError("no candidate model could be fitted to these points", ExitCode.numerical);
  }
  const key = (c: CandidateScore) => (plan.select === "loocv" ? c.loocvRmse : c.gcv);
  ranking.sort((a, b) => key(a) - key(b));
  ranking[0].chosen = true;
  return ranking;
}

/**
 * Score one kernel with each of its drifts: GCV, edf and exact leave-one-out RMSE. The shape is
 * searched once (with the first drift) and reused for the others: the GCV-best shape barely moves
 * with the drift, and the search is most of the cost. Candidates that cannot be fitted are left out.
 */
export function rankGroup(data: Prepared, group: KernelGroup, shapeOpt: "auto" | number, smoothing: "gcv" | number, progress?: (m: string) => void): CandidateScore[] {
  const rows: CandidateScore[] = [];
  let shape: "auto" | number = shapeOpt;
  for (const drift of group.drifts) {
    progress?.(`trying ${group.kernel} with ${drift} drift`);
    try {
      const f = fitOne(data, group.kernel, drift, shape, smoothing, progress);
      if (hasShape(group.kernel) && shapeOpt === "auto") shape = f.fit.epsilonScaled / data.s;
      const loo = leaveOneOutResiduals(f.fit, f.zs);
      let ss = 0, cnt = 0;
      for (const e of loo) {
        if (Number.isNaN(e)) continue;
        ss += e * e;
        cnt++;
      }
      if (cnt === 0) continue; // no point can be left out: nothing to rank this candidate by
      rows.push({
        kernel: group.kernel,
        drift,
        shape: hasShape(group.kernel) ? f.fit.epsilonScaled / data.s : null,
        lambda: f.fit.lambdaScaled * f.lambdaToUser,
        edf: f.fit.edf,
        gcv: f.fit.gcv,
        loocvRmse: Math.sqrt(ss / cnt),
        chosen: false,
      });
    } catch (e) {
      if (!(e instanceof RbfieldError)) throw e;
    }
  }
  return rows;
}

/** Fit the chosen candidate to all points and build the model record. */
function finishFit(plan: FitPlan, ranking: CandidateScore[] | null): SurfaceModel {
  const { points, options, prep, shapeOpt, smoothing, transform, spacing } = plan;
  const { n, values, sqrtW, anisotropy } = prep;
  const rankedOnSubsample = plan.rankedOnSubsample;
  const select = plan.select;
  const chosen = ranking ? { kernel: ranking[0].kernel, drift: ranking[0].drift } : plan.candidates[0];
  const chosenShape = ranking && ranking[0].shape !== null ? ranking[0].shape : undefined;
  options.progress?.(`fitting ${chosen.kernel} with ${chosen.drift} drift to ${n} points`);
  const shapeForFinal = shapeOpt !== "auto" ? shapeOpt : chosenShape ?? "auto";
  const final = fitOne(prep, chosen.kernel, chosen.drift, shapeForFinal, smoothing, options.progress);
  const fit = final.fit;
  const sc = final.scaling;
  const shapeChoice: "auto" | "given" | "none" = !hasShape(chosen.kernel) ? "none" : shapeOpt === "auto" ? "auto" : "given";
  if (ranking && !rankedOnSubsample) {
    // Keep the ranking's numbers identical to the final fit's for the chosen row.
    ranking[0].lambda = fit.lambdaScaled * final.lambdaToUser;
    ranking[0].gcv = fit.gcv;
    ranking[0].edf = fit.edf;
  }

  options.progress?.("computing leave-one-out residuals");
  const loo = leaveOneOutResiduals(fit, sc.zs);
  let looSs = 0, looN = 0;
  for (let i = 0; i < n; i++) {
    if (Number.isNaN(loo[i])) continue;
    looSs += loo[i] * loo[i];
    looN++;
  }
  const fitted = new Float64Array(n);
  let rss = 0, wrss = 0;
  for (let i = 0; i < n; i++) {
    const resid = fit.residual[i] * sc.zs;
    fitted[i] = values[i] - resid;
    rss += resid * resid;
    wrss += resid * resid * (sqrtW ? sqrtW[i] ** 2 : 1);
  }
  const dof = n - fit.edf;
  // Blunder flags: leave-one-out residuals standardised by a robust scale, 1.4826·median|eᵢ|
  // (the MAD estimate of σ for normal errors; Hampel 1974), so one large blunder does not hide itself.
  const threshold = options.flagThreshold ?? 3;
  const absLoo = Float64Array.from(loo.filter((e) => !Number.isNaN(e)), Math.abs).sort();
  const looRmse = looN > 0 ? Math.sqrt(looSs / looN) : NaN;
  const robust = (absLoo.length ? 1.4826 * absLoo[Math.floor(absLoo.length / 2)] : 0) || looRmse || 1;
  const looZ = Array.from(loo, (e) => (Number.isNaN(e) ? 0 : e / robust));
  const flagged: number[] = [];
  looZ.forEach((z, i) => {
    if (Math.abs(z) > threshold) flagged.push(i);
  });
  flagged.sort((a, b) => Math.abs(looZ[b]) - Math.abs(looZ[a]));

  const hull = convexHullRing(points.x, points.y);
  const extent = boundingBox(points.x, points.y);
  const warnings = [...fit.warnings];
  if (looN < n) {
    warnings.push(
      `${n - looN} point${n - looN > 1 ? "s have" : " has"} no leave-one-out residual (without ${n - looN > 1 ? "each" : "it"} the other points cannot carry the ${chosen.drift} drift): ` +
        `lines ${points.lines.filter((_, i) => Number.isNaN(loo[i])).slice(0, 5).join(", ")}`,
    );
  }
  if (fit.condition > 1e10) warnings.push(`the system is close to ill-conditioned (condition estimate ${fit.condition.toExponential(2)})`);
  const model: SurfaceModel = {
    format: MODEL_FORMAT,
    version: MODEL_VERSION,
    kernel: chosen.kernel,
    shape: hasShape(chosen.kernel) ? fit.epsilonScaled / sc.s : null,
    drift: chosen.drift,
    lambda: fit.lambdaScaled * final.lambdaToUser,
    crs: options.crs ?? { label: "local site grid (no EPSG code)" },
    source: options.source ?? { file: "", x: "x", y: "y", z: "z" },
    scaling: sc,
    anisotropy,
    transform,
    internal: { epsilonScaled: fit.epsilonScaled, lambdaScaled: fit.lambdaScaled },
    points: {
      x: Array.from(points.x),
      y: Array.from(points.y),
      z: Array.from(points.z),
      line: points.lines.slice(),
      weight: sqrtW ? Array.from(sqrtW, (d) => d * d) : null,
    },
    weights: Array.from(fit.weights),
    driftCoefficients: Array.from(fit.driftCoefficients),
    fitted: Array.from(fitted),
    // Undefined leave-one-out residuals are stored as null.
    loo: Array.from(loo, (e) => (Number.isNaN(e) ? null : e)) as number[],
    looStandardised: looZ,
    diagnostics: {
      n,
      edf: fit.edf,
      gcv: fit.gcv,
      loocvRmse: looN > 0 ? looRmse : 0,
      rmse: Math.sqrt(rss / n),
      sigma: dof > 1e-9 ? Math.sqrt(wrss / dof) : 0,
      condition: fit.condition,
      smoothingChoice: fit.smoothingChoice,
      shapeChoice,
      selection: ranking ? { by: select, onSubsample: rankedOnSubsample ? RANK_SUBSAMPLE : null, ranking } : null,
      flags: { threshold, robustScale: robust, lines: flagged.map((i) => points.lines[i]) },
      warnings,
      gcvCurve: fit.curve,
    },
    extent,
    hull,
    spacing,
  };
  return model;
}

/** Fit one kernel and drift (choosing the shape when asked; on a subsample when N is large). */
function fitOne(
  prep: Prepared,
  kernel: KernelName,
  drift: DriftName,
  shapeOpt: "auto" | number,
  smoothing: "gcv" | number,
  progress?: (m: string) => void,
): { fit: KernelFit; scaling: Scaling; zs: number; lambdaToUser: number } {
  const { n, u, v, values, sqrtW } = prep;
  // Values are centred unless the drift is none (centring would act as a hidden constant drift).
  let zc = 0;
  if (drift !== "none") {
    for (let i = 0; i < n; i++) zc += values[i] / n;
  }
  let ss = 0;
  for (let i = 0; i < n; i++) ss += (values[i] - zc) ** 2;
  const zs = Math.sqrt(ss / n) || 1;
  const yv = Float64Array.from(values, (z) => (z - zc) / zs);
  // λ in map units: the thin-plate kernel scales as s² (the r² log s part lies in the drift's
  // null space); the shape kernels are unchanged when ε is scaled with the coordinates.
  const lambdaToUser = kernel === "thin-plate" ? prep.s * prep.s : 1;
  const smoothingScaled = smoothing === "gcv" ? "gcv" as const : smoothing / lambdaToUser;
  const run = (epsilonScaled: number, uu: Float64Array = u, vv: Float64Array = v, yy: Float64Array = yv, ww: Float64Array | undefined = sqrtW) =>
    fitCore(uu, vv, yy, zs, { kernel, drift, epsilonScaled, smoothing: smoothingScaled, lambdaToUser, sqrtWeights: ww });
  let fit: KernelFit;
  if (!hasShape(kernel)) fit = run(1);
  else if (shapeOpt !== "auto") fit = run(shapeOpt * prep.s);
  else if (n > SHAPE_SUBSAMPLE) {
    const idx = subsampleIndices(n, SHAPE_SUBSAMPLE);
    const su = subset(u, idx), sv = subset(v, idx), sy = subset(yv, idx), sw = sqrtW && subset(sqrtW, idx);
    const best = chooseShape((e) => run(e, su, sv, sy, sw), prep.spacingScaled * Math.sqrt(n / SHAPE_SUBSAMPLE), progress);
    fit = run(best.epsilonScaled);
  } else fit = chooseShape((e) => run(e), prep.spacingScaled, progress);
  const scaling: Scaling = { cx: prep.cx, cy: prep.cy, s: prep.s, zc, zs };
  return { fit, scaling, zs, lambdaToUser };
}

/**
 * Choose the shape ε by GCV: a 7-point log-spaced scan of ε·h from 0.02 to 3 (h the median
 * spacing), then six steps of golden-section refinement (about 9% in ε) between the best scan
 * point's neighbours (Rippa 1999 uses the same idea with leave-one-out error).
 */
function chooseShape(run: (eps: number) => KernelFit, spacingScaled: number, progress?: (m: string) => void): KernelFit {
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
    if (f && (bestIdx < 0 || f.gcv < fits[bestIdx]!.gcv)) bestIdx = s;
  }
  if (bestIdx < 0) throw new RbfieldError("no shape parameter gave a stable fit; try another kernel", ExitCode.numerical);
  let best = fits[bestIdx]!;
  const tryAt = (le: number) => {
    try {
      const f = run(Math.exp(le));
      if (f.gcv < best.gcv) best = f;
      return f.gcv;
    } catch {
      return Infinity;
    }
  };
  goldenSection(tryAt, logs[Math.max(0, bestIdx - 1)], logs[Math.min(scan - 1, bestIdx + 1)], 6, (it) => progress?.(`shape refinement ${it + 1}/6`));
  return best;
}
