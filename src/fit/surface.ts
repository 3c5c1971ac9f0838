// fitSurface: from clean points to a saved-model record. Prepares the data, chooses the method (the
// global dense fit, or above LOCAL_AUTO_POINTS the local partition-of-unity method in fit/local/),
// ranks the candidate models (select.ts), fits the chosen one to every point (robustly when asked),
// computes leave-one-out residuals and the blunder test, and records the data's extent and hull.
import { ExitCode, opt, RbfieldError } from "../errors.ts";
import { runWorker, workersAvailable } from "../workers.ts";
import { boundingBox, convexHullRing, medianSpacing } from "../geometry.ts";
import { MODEL_FORMAT, MODEL_VERSION, type SurfaceModel } from "../model/model.ts";
import type { CleanPoints, TrendName, KernelName } from "../types.ts";
import { dataSnooping } from "./blunders.ts";
import { type CandidateScore, type FittedCandidate, fitOne, type KernelGroup, rankGroup } from "./candidate.ts";
import { trendProblem } from "./core.ts";
import { influenceDiagonal, leaveOneOutResiduals, processScale } from "./influence.ts";
import { hasShape } from "./kernels.ts";
import { fitLocal, fitLocalParallel, LOCAL_AUTO_POINTS, type LocalInput } from "./local/local.ts";
import type { PlaceErrors } from "../evaluate/local_stderr.ts";
import type { FitOptions, MethodChoice, SelectRule } from "./options.ts";
import { prepareData, type Prepared, spacingOf, subsampleIndices, subsamplePrepared } from "./prepare.ts";
import { robustFit, type RobustResult } from "./robust.ts";
import { candidateList, chooseCandidate, kernelGroups, type SelectionOutcome } from "./select.ts";

export type { CandidateScore, KernelGroup } from "./candidate.ts";
export type { TrendChoice, FitOptions, KernelChoice, MethodChoice, SelectRule } from "./options.ts";
export { LOCAL_AUTO_POINTS } from "./local/local.ts";
export type { Prepared } from "./prepare.ts";
export { convexHullRing, medianSpacing };

/** Most points the global (dense) method accepts (measured: see DEVELOPERS.md, "Limits"). */
export const MAX_GLOBAL_POINTS = 5000;
/** Points above which automatic ranking runs on a subsample (then the winner is fitted on all). */
export const RANK_SUBSAMPLE = 500;
/** Robustness weight below which a point is listed as down-weighted. */
const DOWNWEIGHTED = 0.5;

/** Everything settled before the candidates are ranked: options, prepared data, candidates, method. */
interface FitPlan {
  method: "global" | "local";
  /** Which method runs and why, in words (stored in the model's diagnostics). */
  methodChoice: string;
  points: CleanPoints;
  options: FitOptions;
  prep: Prepared;
  candidates: { kernel: KernelName; trend: TrendName }[];
  /** Data the ranking runs on (a subsample above RANK_SUBSAMPLE points). */
  rankData: Prepared;
  rankedOnSubsample: boolean;
  shapeOpt: "auto" | number;
  smoothing: "gcv" | number;
  select: SelectRule;
  transform: "none" | "log";
}

/**
 * A fitted model and, for the local method, the patches' standard errors at the places
 * FitOptions.errorPlaces asked for (computed while each patch's factors were at hand).
 */
export interface FittedModel {
  model: SurfaceModel;
  /** Local method: patch errors at the places FitOptions.errorPlaces asked for. */
  places?: PlaceErrors;
}

/** Fit the surface and build the model record. */
export function fitSurface(points: CleanPoints, options: FitOptions = {}): SurfaceModel {
  return fitSurfaceWithPlaces(points, options).model;
}

/** fitSurface, also returning the local method's errors at the places asked for. */
export function fitSurfaceWithPlaces(points: CleanPoints, options: FitOptions = {}): FittedModel {
  const plan = planFit(points, options);
  if (plan.method === "local") return fitLocal(localInput(plan));
  return finishFit(plan, rankHere(plan));
}

/**
 * The same fit with the candidates of an automatic selection ranked in worker threads (one kernel
 * per task). Every candidate is computed by the same code as in fitSurface, so the result is identical.
 */
export async function fitSurfaceParallel(points: CleanPoints, options: FitOptions = {}, threads = navigator.hardwareConcurrency || 1): Promise<SurfaceModel> {
  return (await fitSurfaceParallelWithPlaces(points, options, threads)).model;
}

/** fitSurfaceParallel, also returning the local method's errors at the places asked for. */
export async function fitSurfaceParallelWithPlaces(points: CleanPoints, options: FitOptions = {}, threads = navigator.hardwareConcurrency || 1): Promise<FittedModel> {
  const plan = planFit(points, options);
  if (plan.method === "local") return await fitLocalParallel(localInput(plan), threads);
  if (plan.candidates.length <= 1 || !workersAvailable(threads)) return finishFit(plan, rankHere(plan));
  const groups = kernelGroups(plan.candidates);
  // Greedy split by cost (a shape search costs about three fixed-shape fits).
  const cost = (g: KernelGroup) => (hasShape(g.kernel) && plan.shapeOpt === "auto" ? 3 : 1) + g.trends.length - 1;
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
  const url = new URL("./rank_worker.ts", import.meta.url);
  try {
    await Promise.all(bins.map(async (bin) => {
      const message = { data: plan.rankData, groups: bin.map((i) => groups[i]), shapeOpt: plan.shapeOpt, smoothing: plan.smoothing };
      const reply = await runWorker<{ rows: CandidateScore[][] }>(url, message);
      bin.forEach((gi, j) => results.set(gi, reply.rows[j]));
    }));
  } catch (e) {
    // Workers unavailable here: rank in this thread.
    plan.options.progress?.(`worker threads unavailable (${(e as Error).message}); ranking in one thread`);
    return finishFit(plan, rankHere(plan));
  }
  return finishFit(plan, rankAll(plan, (_g, i) => results.get(i)!));
}

/** Rank the candidates in this thread (null when there is only one candidate). */
function rankHere(plan: FitPlan): SelectionOutcome | null {
  if (plan.candidates.length <= 1) return null;
  return rankAll(plan, (g) => rankGroup(plan.rankData, g, plan.shapeOpt, plan.smoothing, plan.options.progress));
}

/** The local method's input: the settled options and prepared data. */
function localInput(plan: FitPlan): LocalInput {
  const { points, options, prep, candidates, shapeOpt, smoothing, select, transform, methodChoice } = plan;
  const trendOpt = options.trend ?? ((options.kernel ?? "auto") === "auto" ? "auto" : "linear");
  return { points, options, prep, trendOpt, candidates, shapeOpt, smoothing, select, transform, methodChoice };
}

/**
 * Which method runs: as asked, or with "auto" the local method above LOCAL_AUTO_POINTS points, where
 * the global method grows slow (it is the more accurate where it runs: bench/switch.ts, README "Large
 * surveys").
 * The global method refuses more than MAX_GLOBAL_POINTS points.
 */
function chooseMethod(n: number, asked: MethodChoice): { method: "global" | "local"; why: string } {
  if (asked !== "auto" && asked !== "global" && asked !== "local") {
    throw new RbfieldError(`method must be auto, global or local, not ${String(asked)}`, ExitCode.usage, undefined, "method");
  }
  const count = n.toLocaleString("en");
  const limit = LOCAL_AUTO_POINTS.toLocaleString("en");
  if (asked === "global" && n > MAX_GLOBAL_POINTS) {
    throw new RbfieldError(
      `${count} points are more than the global method takes (${MAX_GLOBAL_POINTS.toLocaleString("en")}; its cost grows as N³ ` +
        `and its memory as N²); use ${opt("method")} local or auto, or thin the points first`,
      ExitCode.numerical,
    );
  }
  if (asked === "global") return { method: "global", why: "global method, as asked" };
  if (asked === "local") return { method: "local", why: "local method (partition of unity), as asked" };
  return n > LOCAL_AUTO_POINTS
    ? {
      method: "local",
      why: `local method (partition of unity): ${count} points are more than ${limit}, where the global method's time grows as N³` +
        (n <= MAX_GLOBAL_POINTS ? ` (${opt("method")} global fits up to ${MAX_GLOBAL_POINTS.toLocaleString("en")} points, slower and often more accurate)` : ""),
    }
    : { method: "global", why: `global method: ${count} points, at most ${limit} (above that the local method runs)` };
}

/** Validate the options and prepare the data. */
function planFit(points: CleanPoints, options: FitOptions): FitPlan {
  const kernelOpt = options.kernel ?? "auto";
  const trendOpt = options.trend ?? (kernelOpt === "auto" ? "auto" : "linear");
  const smoothing = options.smoothing ?? "gcv";
  const shapeOpt = options.shape ?? "auto";
  const select = options.select ?? "one-se";
  const transform = options.transform ?? "none";
  const n = points.x.length;
  if (n < 3) throw new RbfieldError(`${n} usable points are too few to fit a surface: at least 3 are needed`, ExitCode.input);
  let { method, why: methodChoice } = chooseMethod(n, options.method ?? "auto");
  if (options.breaklines?.length) {
    // Breaklines cut the local method's patches into sides (fit/local/sides.ts); a small survey is
    // then one or a few patches.
    if (options.method === "global") throw new RbfieldError(`breaklines are honoured by the local method only; drop ${opt("method")} global`, ExitCode.usage, undefined, "method");
    method = "local";
    methodChoice = `local method (partition of unity) with its patches cut by ${options.breaklines.length} breakline${options.breaklines.length === 1 ? "" : "s"} into sides`;
  }
  if (kernelOpt !== "auto" && trendOpt !== "auto") {
    const problem = trendProblem(kernelOpt, trendOpt);
    if (problem) throw new RbfieldError(problem, ExitCode.usage);
  }
  if (shapeOpt !== "auto" && (!(shapeOpt > 0) || !Number.isFinite(shapeOpt))) {
    throw new RbfieldError(`shape must be a positive number (1/map units) or auto, not ${shapeOpt}`, ExitCode.usage);
  }
  const level = options.flagLevel ?? 0.05;
  if (!(level > 0 && level < 1)) throw new RbfieldError(`the blunder test level must lie between 0 and 1, not ${level}`, ExitCode.usage);
  const candidates = candidateList(kernelOpt, trendOpt);
  if (candidates.length === 0) throw new RbfieldError(`no kernel supports ${trendOpt} trend here`, ExitCode.usage);
  // The local method reads the spacing only to place its breakline cuts.
  const prep = prepareData(points, { ...options, transform }, method === "global" || (options.breaklines?.length ?? 0) > 0);
  const idx = method === "global" && candidates.length > 1 && n > RANK_SUBSAMPLE ? subsampleIndices(n, RANK_SUBSAMPLE) : null;
  const rankData = idx ? subsamplePrepared(prep, idx) : prep;
  return { method, methodChoice, points, options, prep, candidates, rankData, rankedOnSubsample: idx !== null, shapeOpt, smoothing, select, transform };
}

/** Score all groups (scores from `score`) and apply the selection rule. */
function rankAll(plan: FitPlan, score: (g: KernelGroup, index: number) => CandidateScore[]): SelectionOutcome {
  const rows = kernelGroups(plan.candidates).flatMap((g, i) => score(g, i));
  if (!rows.some((r) => Number.isFinite(r.loocvRmse) && Number.isFinite(r.gcv))) {
    // Every candidate failed: fitting the first one again gives its own, specific reason.
    const first = plan.candidates[0];
    fitOne(plan.rankData, first.kernel, first.trend, plan.shapeOpt, plan.smoothing);
    throw new RbfieldError("no candidate model could be fitted to these points", ExitCode.numerical);
  }
  return chooseCandidate(rows, plan.select, plan.shapeOpt !== "auto", plan.rankData.n);
}

/** Fit the chosen candidate to all points and build the model record. */
function finishFit(plan: FitPlan, outcome: SelectionOutcome | null): FittedModel {
  const { points, options, prep, shapeOpt, smoothing, transform, select } = plan;
  const { n, values, stretch } = prep;
  const ranking = outcome?.ranking ?? null;
  const winner = ranking?.find((r) => r.chosen);
  const chosen = winner ? { kernel: winner.kernel, trend: winner.trend } : plan.candidates[0];
  const shapeForFinal = shapeOpt !== "auto" ? shapeOpt : winner?.shape ?? "auto";
  let robust: RobustResult | null = null;
  let final: FittedCandidate;
  if (options.robust) {
    options.progress?.(`fitting ${chosen.kernel} with ${chosen.trend} trend to ${n} points, robustly`);
    robust = robustFit(prep, chosen.kernel, chosen.trend, shapeForFinal, smoothing, options.progress);
    final = robust.fitted;
  } else {
    options.progress?.(`fitting ${chosen.kernel} with ${chosen.trend} trend to ${n} points`);
    final = fitOne(prep, chosen.kernel, chosen.trend, shapeForFinal, smoothing, options.progress);
  }
  const fit = final.fit;
  const sc = final.scaling;
  const sqrtW = robust ? robust.sqrtW : prep.sqrtW;
  const shapeChoice: "auto" | "given" | "none" = !hasShape(chosen.kernel) ? "none" : shapeOpt === "auto" ? "auto" : "given";
  if (winner && !plan.rankedOnSubsample && !robust) {
    // Keep the ranking's numbers identical to the final fit's for the chosen row.
    winner.lambda = fit.lambdaScaled * final.lambdaToUser;
    winner.gcv = fit.gcv;
    winner.edf = fit.edf;
  }

  options.progress?.("computing leave-one-out residuals");
  const gii = influenceDiagonal(fit);
  const loo = leaveOneOutResiduals(fit, sc.zs, gii);
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
  // Blunders: iterated data snooping with Pope's tau test (blunders.ts).
  const level = options.flagLevel ?? 0.05;
  const snoop = dataSnooping(fit.state, fit.lambdaScaled, gii, level);
  const looRmse = looN > 0 ? Math.sqrt(looSs / looN) : NaN;
  // Standard errors at the readings: φ(0) − sᵀM⁻¹s = λAᵢᵢ/ωᵢ there with Aᵢᵢ = 1 − λG̃ᵢᵢ (evaluate/stderr.ts),
  // exact where the estimator's general formula loses digits to cancellation.
  const b = processScale(fit.state), lam = fit.lambdaScaled, fitW = fit.state.sqrtW;
  const pointSe = Array.from(gii, (g, i) => sc.zs * Math.sqrt(Math.max((b * lam * (1 - lam * g)) / (fitW ? fitW[i] * fitW[i] : 1), 0)));

  const hull = convexHullRing(points.x, points.y);
  const extent = boundingBox(points.x, points.y);
  const warnings = [...fit.warnings];
  if (looN < n) {
    warnings.push(
      `${n - looN} point${n - looN > 1 ? "s have" : " has"} no leave-one-out residual (without ${n - looN > 1 ? "each" : "it"} the other points cannot carry the ${chosen.trend} trend): ` +
        `lines ${points.lines.filter((_, i) => Number.isNaN(loo[i])).slice(0, 5).join(", ")}`,
    );
  }
  if (fit.condition > 1e10) {
    warnings.push(
      `the system is close to ill-conditioned (condition estimate ${fit.condition.toExponential(2)}; λ keeps it below 10¹², so the results hold): ` +
        "readings very close together or a very flat shape cause it; check near-coincident shots, or give --kernel thin-plate",
    );
  }
  if (snoop.truncated) {
    warnings.push(
      `the blunder test stopped after setting ${snoop.flagged.length} points aside with more still beyond its critical value: ` +
        "the data do not fit the model (a wrong trend, breaks of slope, or many blunders); look at residuals.csv",
    );
  }
  if (robust && !robust.converged) warnings.push(`the robust fit did not settle in ${robust.passes} passes; its weights may still change`);
  const model: SurfaceModel = {
    format: MODEL_FORMAT,
    version: MODEL_VERSION,
    method: "global",
    kernel: chosen.kernel,
    shape: hasShape(chosen.kernel) ? fit.epsilonScaled / sc.s : null,
    trend: chosen.trend,
    lambda: fit.lambdaScaled * final.lambdaToUser,
    crs: options.crs ?? { label: "local site grid (no EPSG code)" },
    source: options.source ?? { file: "", x: "x", y: "y", z: "z" },
    stretch,
    transform,
    points: {
      x: Array.from(points.x),
      y: Array.from(points.y),
      z: Array.from(points.z),
      line: points.lines.slice(),
      weight: sqrtW ? Array.from(sqrtW, (d) => d * d) : null,
      robustWeight: robust ? Array.from(robust.weights) : null,
    },
    fitted: Array.from(fitted),
    // Undefined leave-one-out residuals are stored as null.
    loo: Array.from(loo, (e) => (Number.isNaN(e) ? null : e)) as number[],
    looStandardised: Array.from(snoop.statistic, (t) => (Number.isNaN(t) ? null : t)) as number[],
    diagnostics: {
      n,
      edf: fit.edf,
      gcv: fit.gcv,
      loocvRmse: looN > 0 ? looRmse : 0,
      rmse: Math.sqrt(rss / n),
      sigma: dof > 1e-9 ? Math.sqrt(wrss / dof) : 0,
      condition: fit.condition,
      smoothingChoice: fit.smoothingChoice,
      heldAtFloor: fit.heldAtFloor,
      shapeChoice,
      selection: ranking
        ? {
          by: select,
          onSubsample: plan.rankedOnSubsample ? RANK_SUBSAMPLE : null,
          ranking,
          decision: outcome!.decision,
          best: { kernel: outcome!.best.kernel, trend: outcome!.best.trend },
        }
        : null,
      flags: { test: "tau", level, critical: Number.isFinite(snoop.critical) ? snoop.critical : null, lines: snoop.flagged.map((i) => points.lines[i]), truncated: snoop.truncated },
      robust: robust
        ? {
          passes: robust.passes,
          converged: robust.converged,
          downweighted: Array.from(robust.weights.keys()).filter((i) => robust!.weights[i] < DOWNWEIGHTED)
            .sort((a, b) => robust!.weights[a] - robust!.weights[b]).map((i) => points.lines[i]),
        }
        : null,
      warnings,
      gcvCurve: fit.curve,
      methodChoice: plan.methodChoice,
    },
    extent,
    hull,
    spacing: spacingOf(points, options),
    global: {
      scaling: sc,
      internal: { epsilonScaled: fit.epsilonScaled, lambdaScaled: fit.lambdaScaled },
      weights: Array.from(fit.weights),
      trendCoefficients: Array.from(fit.trendCoefficients),
      ...(pointSe.every(Number.isFinite) ? { pointStdErrors: pointSe } : {}),
    },
  };
  return { model };
}
