// The local method for large surveys: partition of unity over overlapping patches (patches.ts), each
// fitted by the global method's own code (patch_fit.ts), blended with Wendland's C² weights.
//
// Choosing the model once: every candidate of the global method's automatic selection is ranked
// (rankGroup) on up to SAMPLE_PATCHES patches spread over the domain; their leave-one-out errors are
// pooled and the global method's rule (chooseCandidate) chooses (see consensus). The shape is the
// median, in map units, of the shapes the samples found for that kernel. A named kernel, trend or
// shape is used as given.
// λ is chosen by GCV in every patch, the exact leave-one-out error deciding where GCV has several
// local minima (fitPatchSmoothing), or given, in map units, the same in every patch.
//
// Diagnostics of the blended surface f(x) = Σⱼ wⱼ(x) fⱼ(x) (Σⱼ wⱼ = 1; wⱼ(xᵢ) > 0 exactly when
// point i belongs to patch j), with every patch's λ fixed:
//   fitted value      f(xᵢ) = Σⱼ wⱼ(xᵢ) fⱼ(xᵢ);
//   leave-one-out     leaving point i out changes only the patches that contain it, and the blended
//                     prediction at xᵢ is Σⱼ wⱼ(xᵢ) fⱼ⁽⁻ⁱ⁾(xᵢ), so eᵢ = yᵢ − f⁽⁻ⁱ⁾(xᵢ) = Σⱼ wⱼ(xᵢ) eᵢⱼ
//                     with eᵢⱼ the patch's own exact leave-one-out residual (Rippa 1999). This is
//                     exact for the blended surface given the patch λs (and the patch layout);
//   edf               the trace of the blended smoother: ∂f(xᵢ)/∂yᵢ = Σⱼ wⱼ(xᵢ) Aᵢᵢ⁽ʲ⁾, summed over i;
//   GCV               N·Σωᵢrᵢ² / (N − edf)², the GCV score of that linear smoother (Craven & Wahba 1979);
//   σ                 √(Σωᵢrᵢ² / (N − edf)), as for the global method;
//   τ                 Pope's τ of point i in its home patch (the patch whose centre is nearest), tested
//                     at the survey-wide level α₀ = 1 − (1 − α)^{1/N} with that patch's ν = nⱼ − m
//                     degrees of freedom. Not iterated (no data snooping): a blunder's neighbours in
//                     the same patch can be flagged with it.
import { ExitCode, opt, RbfieldError } from "../../errors.ts";
import { boundingBox, convexHullRing, coordinateMapper, pointIndex } from "../../geometry.ts";
import type { LocalDiagnostics, LocalModel, ModelDiagnostics } from "../../model/model.ts";
import { MODEL_FORMAT, MODEL_VERSION } from "../../model/model.ts";
import type { CleanPoints, KernelName, TrendName } from "../../types.ts";
import { runWorker, runWorkerQueue, workersAvailable } from "../../workers.ts";
import type { CandidateScore } from "../candidate.ts";
import { hasShape, trendTerms } from "../kernels.ts";
import type { FitOptions, SelectRule } from "../options.ts";
import { type Prepared, spacingOf } from "../prepare.ts";
import { chooseCandidate, kernelGroups } from "../select.ts";
import { perTestLevel, tauCritical } from "../tau.ts";
import {
  fitPatchBlock,
  MEMBER_FIELDS,
  PATCH_BLOCK,
  type PatchBlock,
  type PatchData,
  patchFailure,
  type PatchGeometry,
  type PatchModel,
  type PatchPlaces,
  bucketPlaces,
  rankPatch,
  SCALARS,
  smoothingChoiceOf,
} from "./patch_fit.ts";
import { buildPatches, compress, growPatch, type PatchLayout, patchWeight, samplePatches } from "./patches.ts";
import { patchErrorWork, type PlaceErrors } from "../../evaluate/local_stderr.ts";
import { constantPatch } from "./patch_fit.ts";
import { cutLayout, type LineRecord, linePoints, mapLines, separateFaces } from "./sides.ts";
import type { BreaklinePart } from "../../model/local.ts";
import type { FitSetup, FitTask, RankJob } from "./patch_worker.ts";

/**
 * Points above which method "auto" uses the local method. Where the global method runs it is the
 * more accurate in general (bench/switch.ts: local/global RMSE 1.28 geometric mean over the sweep's
 * designs at 1,000 points, p90 2.6), so it keeps the surveys it fits in seconds; its time grows as N³
 * (about 5 s here at 2,000 points). See DEVELOPERS.md, "Local method".
 */
export const LOCAL_AUTO_POINTS = 2000;
/**
 * Default points per patch (every patch disc is grown to hold at least this many). Measured with
 * bench/local.ts: see DEVELOPERS.md, "Local method".
 */
export const DEFAULT_PATCH_POINTS = 150;
/**
 * Leaf capacity of the 2-d tree as a multiple of evenPoints, the points of a square cell whose disc
 * (overlap × its half-diagonal, covering π·overlap²/2 cells' area: 3.1 at 1.4) holds patchPoints
 * (48.7 by default, so 63). Evenly spread data stop at cells of about evenPoints points (the tree's
 * root is sized for that, patches.ts); 1.3 leaves room for their scatter (a cell of 49 points on
 * average rarely holds more than 63), so such cells are not split into halves that need grown discs.
 * The cost of the fit goes as N·r·n² (r patches per point, n points per patch): measured on
 * evenly spread points (bench/local.ts), about 1.4 times less work at 10⁶ points than cells split
 * at a third of patchPoints, for grid RMSE within 4% (see DEVELOPERS.md, "Local method").
 */
const LEAF_FRACTION = 1.3;
/** Default disc radius as a multiple of the tree cell's half-diagonal. */
export const DEFAULT_OVERLAP = 1.4;
/** Patches the model choice is made on. */
export const SAMPLE_PATCHES = 8;
/** Blocks handed to a worker at a time (about a second of work each here; small enough to balance). */
const BLOCKS_PER_TASK = 2;
/** A patch whose points cannot carry the model is enlarged by this factor, at most GROW_TRIES times. */
const GROW_FACTOR = 1.5;
const GROW_TRIES = 4;
/** Robustness weight below which a point is listed as down-weighted (as in the global method). */
const DOWNWEIGHTED = 0.5;

/** What the fit stage has settled before the local method starts (validated options, prepared data). */
export interface LocalInput {
  points: CleanPoints;
  options: FitOptions;
  prep: Prepared;
  trendOpt: TrendName | "auto";
  candidates: { kernel: KernelName; trend: TrendName }[];
  shapeOpt: "auto" | number;
  smoothing: "gcv" | number;
  select: SelectRule;
  transform: "none" | "log";
  methodChoice: string;
}

interface Settings {
  leafPoints: number;
  minPoints: number;
  overlap: number;
  evenPoints: number;
}

function settings(options: FitOptions): Settings {
  const minPoints = options.patchPoints ?? DEFAULT_PATCH_POINTS;
  const overlap = options.overlap ?? DEFAULT_OVERLAP;
  // A disc of overlap × the half-diagonal around a square cell covers π·overlap²/2 cells' area.
  const evenPoints = minPoints / (Math.PI * overlap * overlap / 2);
  const leafPoints = options.leafPoints ?? Math.max(1, Math.round(evenPoints * LEAF_FRACTION));
  if (!(Number.isInteger(minPoints) && minPoints >= 3)) throw new RbfieldError(`${opt("patchPoints")} must be a whole number ≥ 3, not ${minPoints}`, ExitCode.usage);
  if (!(Number.isInteger(leafPoints) && leafPoints >= 1)) throw new RbfieldError(`${opt("leafPoints")} must be a whole number ≥ 1, not ${leafPoints}`, ExitCode.usage);
  if (!(overlap > 1 && overlap <= 4)) throw new RbfieldError(`${opt("overlap")} must lie above 1 and at most 4, not ${overlap}`, ExitCode.usage);
  return { leafPoints, minPoints, overlap, evenPoints };
}

interface Stage {
  input: LocalInput;
  settings: Settings;
  layout: PatchLayout;
  data: PatchData;
  groups: ReturnType<typeof kernelGroups>;
  samples: number[];
  /** Breaklines: the layout's patches are the sides of the discs (fit/local/sides.ts). */
  cut: Cut | null;
}

/**
 * Observation weight ω of a 3-D line's points against the data points' mean of 1: their noise
 * variance is 10⁻⁶ of a reading's, so the surface passes through the line to about 10⁻³ of the
 * readings' scatter while the systems stay well conditioned (near-exact data).
 */
export const LINE_WEIGHT = 1e6;

/** What cutting the discs by breaklines adds to the stage. */
interface Cut {
  lines: LineRecord[];
  cellTarget: number;
  /** The data's bounding box in the scaled frame (umin, vmin, umax, vmax): where sides are found. */
  domain: number[];
  /** The 3-D lines' points (map coordinates, values as given); point n + k of the patch data. */
  extra: { x: number[]; y: number[]; z: number[]; line: number[] };
  parent: Int32Array;
  side: Int32Array;
  /** Per member of the cut layout: 1 where the member's diagnostics come from this side. */
  report: Uint8Array;
  /** Data points that coincide with a 3-D line's vertex (the line stands for them in the fits). */
  onLine: Uint8Array;
  /** Vertical faces kept apart (separateFaces). */
  faces: number;
  /** Sides fitted as a constant level (constantPatch), with their standard errors. */
  constant: number[];
  constantSe: number[];
}

/** Cut the discs by the breaklines: the sides become the patches; 3-D lines add their points. */
function cutStage(input: LocalInput, layout: PatchLayout, data: PatchData, minPoints: number, m: number): { layout: PatchLayout; data: PatchData; cut: Cut } {
  const { prep } = input;
  const given = input.options.breaklines!;
  const n = prep.n;
  // The fit's coordinate mapping, the same arithmetic the evaluator uses (the side maps depend on it).
  const map = coordinateMapper({ scaling: prep, stretch: prep.stretch });
  const step = 0.5 * prep.spacingScaled;
  // Data points at a 3-D line's vertex (the shots of a coded string): the line stands for them.
  const at = new Set<string>();
  for (const l of given) if (l.z) l.x.forEach((x, k) => at.add(`${x},${l.y[k]}`));
  const onLine = new Uint8Array(n);
  for (let i = 0; i < n; i++) if (at.has(`${input.points.x[i]},${input.points.y[i]}`)) onLine[i] = 1;
  const { lines, faces } = separateFaces(given, input.points, onLine, spacingOf(input.points, input.options), pointIndex(input.points.x, input.points.y));
  if (faces) input.options.progress?.(`${faces} vertical faces: coincident line vertices with different levels kept apart`);
  const extra = linePoints(lines, map, step);
  const q = extra.x.length;
  const u = new Float64Array(n + q), v = new Float64Array(n + q), values = new Float64Array(n + q), sqrtW = new Float64Array(n + q);
  u.set(data.u);
  v.set(data.v);
  values.set(data.values);
  const uv = new Float64Array(2);
  for (let i = 0; i < n; i++) sqrtW[i] = data.sqrtW ? data.sqrtW[i] : 1;
  for (let k = 0; k < q; k++) {
    map(extra.x[k], extra.y[k], uv);
    u[n + k] = uv[0];
    v[n + k] = uv[1];
    const z = extra.z[k];
    if (input.transform === "log" && !(z > 0)) {
      throw new RbfieldError(`${opt("transform")} log needs positive levels on the breaklines; line "${lines[extra.line[k]].name}" has ${z}`, ExitCode.input);
    }
    values[n + k] = input.transform === "log" ? Math.log(z) : z;
    sqrtW[n + k] = Math.sqrt(LINE_WEIGHT);
  }
  const seg = mapLines(lines, map);
  const cellTarget = 0.25 * prep.spacingScaled;
  const members = (j: number) => layout.index.subarray(layout.start[j], layout.start[j + 1]).filter((i) => !onLine[i]);
  const box = boundingBox(data.u, data.v);
  const domain = [box.xmin, box.ymin, box.xmax, box.ymax];
  const c = cutLayout(layout, members, u, v, n, seg, cellTarget, domain);
  const e = c.parent.length;
  const occupied = new Uint8Array(e);
  for (let k = 0; k < e; k++) {
    let real = 0;
    for (let t = c.start[k]; t < c.start[k + 1]; t++) if (c.index[t] < n) real++;
    occupied[k] = layout.occupied[c.parent[k]] && real >= Math.max(m + 3, minPoints / 2) ? 1 : 0;
  }
  const cutLayoutOut: PatchLayout = {
    count: e,
    cu: Float64Array.from(c.parent, (j) => layout.cu[j]),
    cv: Float64Array.from(c.parent, (j) => layout.cv[j]),
    radius: Float64Array.from(c.parent, (j) => layout.radius[j]),
    start: c.start,
    index: c.index,
    occupied,
  };
  return {
    layout: cutLayoutOut,
    data: { u, v, values, sqrtW, s: data.s },
    cut: { lines, cellTarget, domain, extra, parent: c.parent, side: c.side, report: c.report, onLine, faces, constant: [], constantSe: [] },
  };
}

function stage(input: LocalInput): Stage {
  const s = settings(input.options);
  const { prep } = input;
  const minPoints = Math.max(s.minPoints, trendTerms(input.trendOpt === "auto" ? "quadratic" : input.trendOpt) + 2);
  let layout = buildPatches(prep.u, prep.v, { leafPoints: s.leafPoints, minPoints, overlap: s.overlap, evenPoints: s.evenPoints });
  let data: PatchData = { u: prep.u, v: prep.v, values: prep.values, sqrtW: prep.sqrtW, s: prep.s };
  let cut: Cut | null = null;
  if (input.options.breaklines?.length) {
    const m = trendTerms(input.trendOpt === "auto" ? "linear" : input.trendOpt);
    ({ layout, data, cut } = cutStage(input, layout, data, minPoints, m));
  }
  const needShape = input.shapeOpt === "auto" && input.candidates.some((c) => hasShape(c.kernel));
  const ranks = input.candidates.length > 1 || needShape;
  return { input, settings: s, layout, data, groups: kernelGroups(input.candidates), samples: ranks ? samplePatches(layout, SAMPLE_PATCHES) : [], cut };
}

function geometryOf(layout: PatchLayout): (j: number) => PatchGeometry {
  return (j) => ({ cu: layout.cu[j], cv: layout.cv[j], radius: layout.radius[j], members: layout.index.subarray(layout.start[j], layout.start[j + 1]) });
}

/** Fixed blocks of patch numbers (PATCH_BLOCK each), whatever the number of threads. */
function blocksOf(count: number): number[][] {
  const out: number[][] = [];
  for (let b = 0; b * PATCH_BLOCK < count; b++) out.push(Array.from({ length: Math.min(PATCH_BLOCK, count - b * PATCH_BLOCK) }, (_, k) => b * PATCH_BLOCK + k));
  return out;
}

/** A local model, with the patch errors its fit computed at the places FitOptions.errorPlaces asked for. */
export interface LocalFit {
  model: LocalModel;
  places?: PlaceErrors;
}

/**
 * The nodes FitOptions.errorPlaces asks for, in the global scaled frame (the blend's own mapping),
 * bucketed by about the median patch radius; none with breaklines (their sides factorise later).
 */
function placesFor(st: Stage, choice: Choice): { x: Float64Array; y: Float64Array; nodes: PatchPlaces } | undefined {
  const { input, layout } = st;
  if (!input.options.errorPlaces || st.cut) return undefined;
  const asked = input.options.errorPlaces(patchErrorWork(layout.start, trendTerms(choice.model.trend), input.prep.n));
  if (!asked) return undefined;
  const { prep } = input;
  const map = coordinateMapper({ scaling: { cx: prep.cx, cy: prep.cy, s: prep.s }, stretch: prep.stretch });
  const count = asked.x.length * asked.y.length;
  const u = new Float64Array(count), v = new Float64Array(count), uv = new Float64Array(2);
  for (let i = 0; i < asked.y.length; i++) {
    for (let j = 0; j < asked.x.length; j++) {
      map(asked.x[j], asked.y[i], uv);
      u[i * asked.x.length + j] = uv[0];
      v[i * asked.x.length + j] = uv[1];
    }
  }
  const h = Math.max(median(layout.radius), 1e-300);
  return { x: asked.x, y: asked.y, nodes: bucketPlaces(u, v, h) };
}

/** Fit the local model in this thread. */
export function fitLocal(input: LocalInput): LocalFit {
  const st = stage(input);
  const { layout, data } = st;
  const geometry = geometryOf(layout);
  input.options.progress?.(`local method: ${layout.count} patches; choosing the model on ${st.samples.length} of them`);
  const rows = st.samples.map((j) => rankPatch(data, geometry(j), st.groups, input.shapeOpt, input.smoothing));
  const choice = consensus(st, rows);
  const places = placesFor(st, choice);
  input.options.progress?.(`fitting ${layout.count} patches`);
  const blocks = blocksOf(layout.count).map((b) => fitPatchBlock(data, geometry, b, choice.model, places?.nodes));
  return assemble(st, choice, blocks, places);
}

/** The same fit with the sample ranking and the patch fits in worker threads; identical result. */
export async function fitLocalParallel(input: LocalInput, threads: number): Promise<LocalFit> {
  const st = stage(input);
  const { layout, data } = st;
  const geometry = geometryOf(layout);
  const blocks = blocksOf(layout.count);
  if (!workersAvailable(threads) || blocks.length < 2) return fitLocal(input);
  const url = new URL("./patch_worker.ts", import.meta.url);
  const workers = Math.min(threads, blocks.length);
  try {
    input.options.progress?.(`local method: ${layout.count} patches; choosing the model on ${st.samples.length} of them (${workers} threads)`);
    const rows: CandidateScore[][] = new Array(st.samples.length);
    await Promise.all(Array.from({ length: Math.min(workers, st.samples.length) }, async (_, t) => {
      const mine = st.samples.map((_, k) => k).filter((k) => k % workers === t);
      const job: RankJob = { kind: "rank", data, geometries: mine.map((k) => geometry(st.samples[k])), groups: st.groups, shapeOpt: input.shapeOpt, smoothing: input.smoothing };
      const reply = await runWorker<{ rows: CandidateScore[][] }>(url, job);
      mine.forEach((k, i) => (rows[k] = reply.rows[i]));
    }));
    const choice = consensus(st, rows);
    const places = placesFor(st, choice);
    input.options.progress?.(`fitting ${layout.count} patches in ${blocks.length} blocks on ${workers} threads`);
    // The data and layout go to each worker once; then blocks, a few at a time, to whichever worker
    // is free (the result is stored by block number, so it does not depend on the scheduling).
    const setup: FitSetup = { kind: "setup", data, cu: layout.cu, cv: layout.cv, radius: layout.radius, start: layout.start, index: layout.index, model: choice.model, places: places?.nodes };
    const tasks: FitTask[] = [];
    for (let b = 0; b < blocks.length; b += BLOCKS_PER_TASK) tasks.push({ kind: "fit", blocks: blocks.slice(b, b + BLOCKS_PER_TASK) });
    const replies = await runWorkerQueue<{ blocks: PatchBlock[] }>(url, setup, tasks, workers);
    const results: PatchBlock[] = replies.flatMap((r) => r.blocks);
    return assemble(st, choice, results, places);
  } catch (e) {
    if (e instanceof RbfieldError) throw e;
    input.options.progress?.(`worker threads unavailable (${(e as Error).message}); fitting in one thread`);
    return fitLocal(input);
  }
}

interface Choice {
  model: PatchModel;
  selection: ModelDiagnostics["selection"];
  consensus: LocalDiagnostics["consensus"];
}

const median = (a: ArrayLike<number>): number => {
  const s = Float64Array.from(a).sort();
  if (s.length === 0) return NaN;
  const h = s.length >> 1;
  return s.length % 2 ? s[h] : 0.5 * (s[h - 1] + s[h]);
};

/**
 * The model chosen on the sample patches. Every candidate is fitted to every sample patch by the
 * global method's own ranking (rankGroup: shape and λ by GCV, exact leave-one-out residuals); the
 * leave-one-out mean squared errors are pooled over the samples' points (MSE = Σ nₛ MSEₛ / Σ nₛ,
 * its standard error from the samples' by Var = Σ nₛ² Var(MSEₛ) / (Σ nₛ)², the samples being
 * disjoint in the main), and the global method's rule (chooseCandidate: one-standard-error by
 * default) chooses on the pooled scores. Pooling gives the rule the power of all the samples' points;
 * a vote among per-patch winners let parsimony win on each small patch. The shape is the median,
 * in map units, of the shapes the samples found for the chosen kernel. A candidate that cannot be
 * fitted on every sample patch is not eligible.
 */
function consensus(st: Stage, rows: CandidateScore[][]): Choice {
  const { input } = st;
  const base = { smoothing: input.smoothing, robust: input.options.robust ?? false };
  if (st.samples.length === 0) {
    const c = input.candidates[0];
    return { model: { ...base, kernel: c.kernel, trend: c.trend, shape: hasShape(c.kernel) ? input.shapeOpt as number : null }, selection: null, consensus: null };
  }
  const shapeGiven = input.shapeOpt !== "auto";
  const sizeOf = (s: number) => st.layout.start[st.samples[s] + 1] - st.layout.start[st.samples[s]];
  // Samples on which some candidate could be fitted.
  const used = rows.map((_, s) => s).filter((s) => rows[s].some((x) => Number.isFinite(x.loocvRmse)));
  if (used.length === 0) throw new RbfieldError("no candidate model could be fitted to the sample patches of the local method", ExitCode.numerical);
  const pooledPoints = used.reduce((a, s) => a + sizeOf(s), 0);
  // Sample patches may overlap (on a small survey they cover the same points several times): the
  // pooled errors then rest on fewer independent points than members, so the variance of the pooled
  // mean square error is scaled by members ÷ distinct points (Kish's design effect for repeated
  // units, Kish 1965), and the few-points rule counts distinct points.
  const distinct = new Set<number>();
  for (const s of used) for (let k = st.layout.start[st.samples[s]]; k < st.layout.start[st.samples[s] + 1]; k++) distinct.add(st.layout.index[k]);
  const overlap = pooledPoints / Math.max(distinct.size, 1);
  const pooled: CandidateScore[] = input.candidates.map((c) => {
    const mine = used.map((s) => ({ n: sizeOf(s), row: rows[s].find((x) => x.kernel === c.kernel && x.trend === c.trend) }));
    const complete = mine.every((x) => x.row && Number.isFinite(x.row.loocvRmse) && Number.isFinite(x.row.gcv));
    let mse = 0, varMse = 0, gcv = 0;
    for (const { n, row } of complete ? mine : []) {
      const r = row!;
      mse += (n * r.loocvRmse ** 2) / pooledPoints;
      varMse += (n * 2 * r.loocvRmse * r.loocvSe / pooledPoints) ** 2;
      gcv += (n * r.gcv) / pooledPoints;
    }
    const rmse = Math.sqrt(mse);
    const found = mine.map((x) => x.row).filter((x): x is CandidateScore => x !== undefined);
    const med = (f: (x: CandidateScore) => number) => median(found.map(f).filter(Number.isFinite));
    return {
      kernel: c.kernel,
      trend: c.trend,
      shape: hasShape(c.kernel) ? (shapeGiven ? input.shapeOpt as number : med((x) => x.shape ?? NaN)) : null,
      lambda: med((x) => x.lambda),
      edf: med((x) => x.edf),
      gcv: complete ? gcv : NaN,
      loocvRmse: complete ? rmse : NaN,
      loocvSe: complete && rmse > 0 ? Math.sqrt(varMse * overlap) / (2 * rmse) : complete ? 0 : NaN,
      heldAtFloor: found.filter((x) => x.heldAtFloor).length * 2 > found.length,
      excluded: complete ? null : "could not be fitted on every sample patch",
      chosen: false,
    };
  });
  const outcome = chooseCandidate(pooled, input.select, shapeGiven, distinct.size);
  const winner = outcome.ranking.find((r) => r.chosen)!;
  const shapes = hasShape(winner.kernel) && !shapeGiven
    ? used.map((s) => rows[s].find((x) => x.kernel === winner.kernel && x.shape !== null)?.shape).filter((x): x is number => typeof x === "number")
    : null;
  return {
    model: { ...base, kernel: winner.kernel, trend: winner.trend, shape: winner.shape },
    selection: { by: input.select, onSubsample: pooledPoints, ranking: outcome.ranking, decision: outcome.decision, best: { kernel: outcome.best.kernel, trend: outcome.best.trend } },
    consensus: {
      samples: used.length,
      rule: "leave-one-out errors pooled over the sample patches' points, then the selection rule; shape the median of the samples' shapes",
      points: pooledPoints,
      distinctPoints: distinct.size,
      shapes,
    },
  };
}

/** Blend the patch results into the model record. */
function assemble(st: Stage, choice: Choice, blocks: PatchBlock[], places?: { x: Float64Array; y: Float64Array; nodes: PatchPlaces }): LocalFit {
  const { input, layout, data } = st;
  const { points, options, prep } = input;
  options.progress?.(`blending ${layout.count} patches`);
  const n = prep.n;
  const p = layout.count;
  const m = trendTerms(choice.model.trend);
  const scalars = new Float64Array(p * SCALARS);
  const trendCoef = new Float64Array(p * m);
  const lists: Int32Array[] = [];
  const member: Float64Array[] = [];
  const failed: { patch: number; message: string }[] = [];
  for (const b of blocks) {
    let o = 0;
    b.patches.forEach((j, k) => {
      scalars.set(b.scalars.subarray(k * SCALARS, (k + 1) * SCALARS), j * SCALARS);
      trendCoef.set(b.trend.subarray(k * m, (k + 1) * m), j * m);
      const len = (layout.start[j + 1] - layout.start[j]) * MEMBER_FIELDS;
      member[j] = b.members.subarray(o, o + len);
      lists[j] = layout.index.subarray(layout.start[j], layout.start[j + 1]);
      o += len;
    });
    failed.push(...b.failed);
  }
  // Patches whose points cannot carry the model (on a line, too few for the trend): enlarge and
  // refit, in patch order in this thread, so the result does not depend on the workers.
  let enlarged = 0;
  if (failed.length && st.cut) {
    // A side that cannot carry the model keeps its own level (constantPatch): growing its disc would
    // reach across the line.
    for (const f of failed) {
      const members = layout.index.subarray(layout.start[f.patch], layout.start[f.patch + 1]);
      const r = constantPatch(data, { cu: layout.cu[f.patch], cv: layout.cv[f.patch], radius: layout.radius[f.patch], members }, m);
      st.cut.constant.push(f.patch);
      st.cut.constantSe.push(r.se);
      scalars.set(r.scalars, f.patch * SCALARS);
      trendCoef.set(r.trend, f.patch * m);
      member[f.patch] = r.members;
      lists[f.patch] = members;
    }
  } else if (failed.length) {
    const index = pointIndex(data.u, data.v);
    failed.sort((a, b) => a.patch - b.patch);
    for (const f of failed) {
      let message = f.message;
      let done = false;
      for (let t = 0; t < GROW_TRIES && !done; t++) {
        const members = growPatch(layout, f.patch, data.u, data.v, index, GROW_FACTOR);
        const g: PatchGeometry = { cu: layout.cu[f.patch], cv: layout.cv[f.patch], radius: layout.radius[f.patch], members };
        const r = fitPatchBlock(data, () => g, [f.patch], choice.model);
        if (r.failed.length) {
          message = r.failed[0].message;
          continue;
        }
        scalars.set(r.scalars, f.patch * SCALARS);
        trendCoef.set(r.trend, f.patch * m);
        member[f.patch] = r.members;
        lists[f.patch] = members;
        done = true;
      }
      if (!done) throw patchFailure(f.patch, message);
      enlarged++;
    }
  }
  const { start, index } = compress(lists);

  // Blending weights at the data points, in patch order (a fixed summation order).
  const psi = new Float64Array(index.length);
  const total = new Float64Array(n);
  const home = new Int32Array(n).fill(-1);
  const homeD = new Float64Array(n).fill(Infinity);
  const homeK = new Int32Array(n);
  const report = st.cut?.report;
  for (let j = 0; j < p; j++) {
    for (let k = start[j]; k < start[j + 1]; k++) {
      const i = index[k];
      if (report && !report[k]) continue;
      psi[k] = patchWeight(data.u[i], data.v[i], layout.cu[j], layout.cv[j], layout.radius[j]);
      total[i] += psi[k];
      const du = data.u[i] - layout.cu[j], dv = data.v[i] - layout.cv[j];
      const d = du * du + dv * dv;
      if (d < homeD[i]) {
        homeD[i] = d;
        home[i] = j;
        homeK[i] = k;
      }
    }
  }
  const fitted = new Float64Array(n), loo = new Float64Array(n), hat = new Float64Array(n), pointSe = new Float64Array(n);
  const fieldOf = (k: number, j: number, f: number) => member[j][(k - start[j]) * MEMBER_FIELDS + f];
  const patchOf = (j: number, f: number) => scalars[j * SCALARS + f];
  // Sides fitted as a constant level carry the spread of their values as standard error (constantPatch).
  const constantSe = new Float64Array(p).fill(NaN);
  st.cut?.constant.forEach((j, a) => (constantSe[j] = st.cut!.constantSe[a]));
  for (let j = 0; j < p; j++) {
    for (let k = start[j]; k < start[j + 1]; k++) {
      const i = index[k];
      if (report && !report[k]) continue;
      const w = psi[k] / total[i];
      fitted[i] += w * fieldOf(k, j, 1);
      loo[i] += w * fieldOf(k, j, 2);
      hat[i] += w * fieldOf(k, j, 4);
      // The patch's standard error at its own data point: zsⱼ √(b̂ⱼ λⱼ Aᵢᵢ / ωᵢ) (evaluate/local_stderr.ts).
      pointSe[i] += w * (Number.isNaN(constantSe[j])
        ? patchOf(j, 1) * Math.sqrt(Math.max(patchOf(j, 9) * patchOf(j, 3) * fieldOf(k, j, 4) / fieldOf(k, j, 6), 0))
        : constantSe[j]);
    }
  }
  // Data points a 3-D line point stands for: on the line, which the surface passes through.
  for (let i = 0; i < n; i++) {
    if (home[i] >= 0) continue;
    fitted[i] = prep.values[i];
    loo[i] = NaN;
    hat[i] = 1;
  }
  // Observation weights as fitted: the user's, times the home patch's robustness weight (mean 1).
  const robustWeight = options.robust ? Float64Array.from({ length: n }, (_, i) => (home[i] >= 0 ? fieldOf(homeK[i], home[i], 5) : 1)) : null;
  let omega: Float64Array | null = null;
  if (prep.sqrtW || robustWeight) {
    omega = Float64Array.from({ length: n }, (_, i) => (prep.sqrtW ? prep.sqrtW[i] ** 2 : 1) * (robustWeight ? robustWeight[i] : 1));
    let mean = 0;
    for (const w of omega) mean += w / n;
    for (let i = 0; i < n; i++) omega[i] /= mean;
  }
  // Residuals, edf, GCV and σ of the blended smoother.
  let rss = 0, wrss = 0, edf = 0, looSs = 0, looN = 0;
  for (let i = 0; i < n; i++) {
    const r = prep.values[i] - fitted[i];
    rss += r * r;
    wrss += r * r * (omega ? omega[i] : 1);
    edf += hat[i];
    if (!Number.isNaN(loo[i])) {
      looSs += loo[i] * loo[i];
      looN++;
    }
  }
  const dof = n - edf;
  const looRmse = looN > 0 ? Math.sqrt(looSs / looN) : 0;
  // Pope's τ from the home patch, tested at the survey-wide level with that patch's ν.
  const level = options.flagLevel ?? 0.05;
  const alpha0 = perTestLevel(level, n);
  const criticalOf = new Map<number, number>();
  const critical = (nu: number) => {
    if (!criticalOf.has(nu)) criticalOf.set(nu, tauCritical(nu, alpha0));
    return criticalOf.get(nu)!;
  };
  const tau = new Float64Array(n);
  const flagged: number[] = [];
  for (let i = 0; i < n; i++) {
    const j = home[i];
    tau[i] = j >= 0 ? fieldOf(homeK[i], j, 3) : NaN;
    if (j >= 0 && Math.abs(tau[i]) > critical(patchOf(j, 8))) flagged.push(i);
  }
  flagged.sort((a, b) => Math.abs(tau[b]) - Math.abs(tau[a]) || a - b);
  const usedCritical = [...new Set(Array.from({ length: p }, (_, j) => critical(patchOf(j, 8))))].filter(Number.isFinite);
  const nus = Float64Array.from({ length: p }, (_, j) => patchOf(j, 8));
  const medianCritical = critical(Math.round(median(nus)));

  // Per-patch figures.
  const counts = Float64Array.from({ length: p }, (_, j) => start[j + 1] - start[j]);
  const lambdas = Float64Array.from({ length: p }, (_, j) => patchOf(j, 4));
  let condition = 0, held = 0, raised = 0, passes = 0, converged = true, moved = 0;
  for (let j = 0; j < p; j++) {
    condition = Math.max(condition, patchOf(j, 5));
    if (patchOf(j, 6)) held++;
    if (smoothingChoiceOf(patchOf(j, 7)) === "given-raised") raised++;
    passes = Math.max(passes, patchOf(j, 10));
    if (!patchOf(j, 11)) converged = false;
    if (patchOf(j, 12)) moved++;
  }
  const range = (a: Float64Array) => {
    let lo = Infinity, hi = -Infinity;
    for (const x of a) {
      lo = Math.min(lo, x);
      hi = Math.max(hi, x);
    }
    return { min: lo, median: median(a), max: hi };
  };
  const warnings: string[] = [];
  if (held) warnings.push(`${held} of ${p} patches hold λ at the numerical floor (GCV asked for less smoothing than double precision resolves there)`);
  if (raised) warnings.push(`${raised} of ${p} patches raised the given smoothing to their numerical floor so that their systems stay stable`);
  if (enlarged) warnings.push(`${enlarged} patches were enlarged because their points could not carry the ${choice.model.trend} trend`);
  const onLine = st.cut ? st.cut.onLine.reduce((a, x) => a + x, 0) : 0;
  if (st.cut) {
    // Points on no side of any disc (between lines closer than the side raster resolves).
    let lost = 0;
    for (let i = 0; i < n; i++) if (home[i] < 0 && !st.cut.onLine[i]) lost++;
    if (lost) warnings.push(`${lost} points lie between breaklines closer together than the sides are resolved (a quarter of the median spacing); their fitted value is their reading`);
  }
  if (looN < n - onLine) warnings.push(`${n - onLine - looN} points have no leave-one-out residual (without them a patch cannot carry the ${choice.model.trend} trend)`);
  // Near-exact 3-D line points (LINE_WEIGHT) raise the condition of the patches they join by design.
  const lines3d = Boolean(st.cut?.lines.some((l) => l.z));
  if (condition > 1e10 && !lines3d) {
    warnings.push(
      `a patch system is close to ill-conditioned (condition estimate ${condition.toExponential(2)}; λ keeps every patch below 10¹², so the results hold): ` +
        "readings very close together or a very flat shape cause it; check near-coincident shots, or give --kernel thin-plate",
    );
  }
  if (robustWeight && !converged) warnings.push(`the robust fit did not settle in ${passes} passes in every patch; its weights may still change`);

  const kernel = choice.model.kernel;
  const shapeChoice: "auto" | "given" | "none" = !hasShape(kernel) ? "none" : input.shapeOpt === "auto" ? "auto" : "given";
  const smoothingChoice = input.smoothing === "gcv" ? "gcv" as const : raised ? "given-raised" as const : "given" as const;
  const local: LocalDiagnostics = {
    patches: p,
    leafPoints: st.settings.leafPoints,
    patchPoints: st.settings.minPoints,
    overlap: st.settings.overlap,
    pointsPerPatch: range(counts),
    lambda: range(lambdas),
    loocvRmse: looRmse,
    heldAtFloor: held,
    raised,
    lambdaByLeaveOneOut: moved,
    enlarged,
    critical: usedCritical.length ? { min: Math.min(...usedCritical), max: Math.max(...usedCritical) } : null,
    consensus: choice.consensus,
  };
  const weights = new Float64Array(index.length);
  const memberWeights = omega || st.cut ? new Float64Array(index.length) : null;
  for (let j = 0; j < p; j++) {
    for (let k = start[j]; k < start[j + 1]; k++) {
      weights[k] = fieldOf(k, j, 0);
      if (memberWeights) memberWeights[k] = fieldOf(k, j, 6);
    }
  }
  const model: LocalModel = {
    format: MODEL_FORMAT,
    version: MODEL_VERSION,
    method: "local",
    kernel,
    shape: choice.model.shape,
    trend: choice.model.trend,
    lambda: median(lambdas),
    crs: options.crs ?? { label: "local site grid (no EPSG code)" },
    source: options.source ?? { file: "", x: "x", y: "y", z: "z" },
    stretch: prep.stretch,
    transform: input.transform,
    points: {
      x: Array.from(points.x),
      y: Array.from(points.y),
      z: Array.from(points.z),
      line: points.lines.slice(),
      weight: omega ? Array.from(omega) : null,
      robustWeight: robustWeight ? Array.from(robustWeight) : null,
    },
    fitted: Array.from(fitted),
    loo: Array.from(loo, (e) => (Number.isNaN(e) ? null : e)) as number[],
    looStandardised: Array.from(tau, (t) => (Number.isNaN(t) ? null : t)) as number[],
    diagnostics: {
      n,
      edf,
      gcv: dof > 1e-9 ? (n * wrss) / (dof * dof) : 0,
      loocvRmse: looRmse,
      rmse: Math.sqrt(rss / n),
      sigma: dof > 1e-9 ? Math.sqrt(wrss / dof) : 0,
      condition,
      smoothingChoice,
      heldAtFloor: held > 0,
      shapeChoice,
      selection: choice.selection,
      flags: { test: "tau", level, critical: Number.isFinite(medianCritical) ? medianCritical : null, lines: flagged.map((i) => points.lines[i]), truncated: false },
      robust: robustWeight
        ? {
          passes,
          converged,
          downweighted: Array.from(robustWeight.keys()).filter((i) => robustWeight[i] < DOWNWEIGHTED)
            .sort((a, b) => robustWeight[a] - robustWeight[b] || a - b).map((i) => points.lines[i]),
        }
        : null,
      warnings,
      gcvCurve: [],
      methodChoice: input.methodChoice,
      local,
    },
    extent: boundingBox(points.x, points.y),
    hull: convexHullRing(points.x, points.y),
    spacing: spacingOf(points, options),
    local: {
      scaling: { cx: prep.cx, cy: prep.cy, s: prep.s },
      coverage: 1 / st.settings.overlap,
      cu: Array.from(layout.cu),
      cv: Array.from(layout.cv),
      radius: Array.from(layout.radius),
      zc: Array.from({ length: p }, (_, j) => patchOf(j, 0)),
      zs: Array.from({ length: p }, (_, j) => patchOf(j, 1)),
      epsilonScaled: Array.from({ length: p }, (_, j) => patchOf(j, 2)),
      lambdaScaled: Array.from({ length: p }, (_, j) => patchOf(j, 3)),
      start: Array.from(start),
      index: Array.from(index),
      weights: Array.from(weights),
      memberWeights: memberWeights ? Array.from(memberWeights) : null,
      trendCoefficients: Array.from(trendCoef),
      pointStdErrors: Array.from(pointSe),
      ...(st.cut ? { breaklines: breaklinePart(st.cut) } : {}),
    },
  };
  return { model, places: places ? placeErrorsOf(blocks, places, p) : undefined };
}

/**
 * The blocks' patch errors at places, by node (row-major over the lattice), each node's entries in
 * ascending patch order whatever the order the blocks came back in. Patches refitted after a failure
 * have none (the estimator factorises them when asked).
 */
function placeErrorsOf(blocks: PatchBlock[], places: { x: Float64Array; y: Float64Array; nodes: PatchPlaces }, patches: number): PlaceErrors {
  const byPatch: { block: PatchBlock; from: number; count: number }[] = new Array(patches);
  for (const b of blocks) {
    let o = 0;
    b.patches.forEach((j, k) => {
      byPatch[j] = { block: b, from: o, count: b.placeCount[k] };
      o += b.placeCount[k];
    });
  }
  const nodes = places.nodes.u.length;
  const start = new Int32Array(nodes + 1);
  for (const e of byPatch) if (e) for (let t = 0; t < e.count; t++) start[e.block.placeNode[e.from + t] + 1]++;
  for (let k = 0; k < nodes; k++) start[k + 1] += start[k];
  const fill = start.slice(0, nodes);
  const patch = new Int32Array(start[nodes]), se = new Float64Array(start[nodes]);
  for (let j = 0; j < patches; j++) {
    const e = byPatch[j];
    if (!e) continue;
    for (let t = 0; t < e.count; t++) {
      const node = e.block.placeNode[e.from + t];
      patch[fill[node]] = j;
      se[fill[node]++] = e.block.placeSe[e.from + t];
    }
  }
  return { x: places.x, y: places.y, start, patch, se };
}

/** The model's record of the breaklines and the sides (model/local.ts, BreaklinePart). */
function breaklinePart(cut: Cut): BreaklinePart {
  return {
    lines: cut.lines.map((l) => ({ name: l.name, x: l.x.slice(), y: l.y.slice(), z: l.z ? l.z.slice() : null })),
    cellTarget: cut.cellTarget,
    domain: cut.domain.slice(),
    faces: cut.faces,
    points: { x: cut.extra.x.slice(), y: cut.extra.y.slice(), z: cut.extra.z.slice() },
    lineWeight: LINE_WEIGHT,
    parent: Array.from(cut.parent),
    side: Array.from(cut.side),
    constant: cut.constant.map((j, k) => ({ patch: j, se: Number.isFinite(cut.constantSe[k]) ? cut.constantSe[k] : null })),
  };
}
