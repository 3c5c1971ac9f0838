// fitSurface: from clean points to a saved-model record. Scales the data, chooses the shape
// (when asked) and the smoothing by GCV, computes leave-one-out residuals and the data's hull.
import { convex, featureCollection, point } from "@turf/turf";
import Flatbush from "flatbush";
import { ExitCode, RbfieldError } from "../errors.ts";
import { MODEL_FORMAT, MODEL_VERSION, type SurfaceModel } from "../model/model.ts";
import type { CleanPoints, Crs, DriftName, KernelName } from "../types.ts";
import { computeScaling, driftProblem, fitCore, type KernelFit, leaveOneOutResiduals } from "./fit.ts";
import { hasShape } from "./kernels.ts";

export interface FitOptions {
  /** Basis function; default thin-plate. */
  kernel?: KernelName;
  /** Shape ε in 1/map units (φ(ε r)), or "auto" to choose it by GCV; default auto. */
  shape?: "auto" | number;
  /** Polynomial drift; default linear. */
  drift?: DriftName;
  /** λ in map-unit convention (added to the kernel matrix diagonal), or "gcv"; default gcv. */
  smoothing?: "gcv" | number;
  crs?: Crs;
  source?: { file: string; x: string; y: string; z: string };
  /** Called with short progress messages during long work. */
  progress?: (message: string) => void;
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
  let xmin = Infinity, xmax = -Infinity, ymin = Infinity, ymax = -Infinity;
  for (let i = 0; i < x.length; i++) {
    xmin = Math.min(xmin, x[i]);
    xmax = Math.max(xmax, x[i]);
    ymin = Math.min(ymin, y[i]);
    ymax = Math.max(ymax, y[i]);
  }
  return [[xmin, ymin], [xmax, ymin], [xmax, ymax], [xmin, ymax], [xmin, ymin]];
}

/** Fit the surface and build the model record. */
export function fitSurface(points: CleanPoints, options: FitOptions = {}): SurfaceModel {
  const kernel = options.kernel ?? "thin-plate";
  const drift = options.drift ?? "linear";
  const smoothing = options.smoothing ?? "gcv";
  const shapeOpt = options.shape ?? "auto";
  const problem = driftProblem(kernel, drift);
  if (problem) throw new RbfieldError(problem, ExitCode.usage);
  const n = points.x.length;
  if (n < 3) throw new RbfieldError(`${n} usable points are too few to fit a surface: at least 3 are needed`, ExitCode.input);

  const sc = computeScaling(points.x, points.y, points.z, drift !== "none");
  const u = new Float64Array(n);
  const v = new Float64Array(n);
  const yv = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    u[i] = (points.x[i] - sc.cx) / sc.s;
    v[i] = (points.y[i] - sc.cy) / sc.s;
    yv[i] = (points.z[i] - sc.zc) / sc.zs;
  }
  const spacing = medianSpacing(points.x, points.y);
  // λ in map units: the thin-plate kernel scales as s² (the r² log s part lies in the drift's
  // null space), the shape kernels are unchanged when ε is scaled with the coordinates.
  const lambdaToUser = kernel === "thin-plate" ? sc.s * sc.s : 1;
  const smoothingScaled = smoothing === "gcv" ? "gcv" as const : smoothing / lambdaToUser;

  const run = (epsilonScaled: number) =>
    fitCore(u, v, yv, sc.zs, { kernel, drift, epsilonScaled, smoothing: smoothingScaled, lambdaToUser });

  let fit: KernelFit;
  let shapeChoice: "auto" | "given" | "none" = "none";
  if (!hasShape(kernel)) {
    fit = run(1);
  } else if (shapeOpt === "auto") {
    shapeChoice = "auto";
    fit = chooseShape(run, spacing / sc.s, options.progress);
  } else {
    if (!(shapeOpt > 0) || !Number.isFinite(shapeOpt)) {
      throw new RbfieldError(`shape must be a positive number (1/map units) or auto, not ${shapeOpt}`, ExitCode.usage);
    }
    shapeChoice = "given";
    fit = run(shapeOpt * sc.s);
  }
  options.progress?.("computing leave-one-out residuals");
  const loo = leaveOneOutResiduals(fit, sc.zs);
  let looSs = 0;
  for (let i = 0; i < n; i++) looSs += loo[i] * loo[i];
  const fitted = new Float64Array(n);
  let rss = 0;
  for (let i = 0; i < n; i++) {
    // y − f = λ w in scaled units
    const resid = fit.lambdaScaled * fit.weights[i] * sc.zs;
    fitted[i] = points.z[i] - resid;
    rss += resid * resid;
  }
  const dof = n - fit.edf;
  const hull = convexHullRing(points.x, points.y);
  let xmin = Infinity, xmax = -Infinity, ymin = Infinity, ymax = -Infinity;
  for (let i = 0; i < n; i++) {
    xmin = Math.min(xmin, points.x[i]);
    xmax = Math.max(xmax, points.x[i]);
    ymin = Math.min(ymin, points.y[i]);
    ymax = Math.max(ymax, points.y[i]);
  }
  const warnings = [...fit.warnings];
  if (fit.condition > 1e10) warnings.push(`the system is close to ill-conditioned (condition estimate ${fit.condition.toExponential(2)})`);
  const model: SurfaceModel = {
    format: MODEL_FORMAT,
    version: MODEL_VERSION,
    kernel,
    shape: hasShape(kernel) ? fit.epsilonScaled / sc.s : null,
    drift,
    lambda: fit.lambdaScaled * lambdaToUser,
    crs: options.crs ?? { label: "local site grid (no EPSG code)" },
    source: options.source ?? { file: "", x: "x", y: "y", z: "z" },
    scaling: sc,
    internal: { epsilonScaled: fit.epsilonScaled, lambdaScaled: fit.lambdaScaled },
    points: { x: Array.from(points.x), y: Array.from(points.y), z: Array.from(points.z), line: points.lines.slice() },
    weights: Array.from(fit.weights),
    driftCoefficients: Array.from(fit.driftCoefficients),
    fitted: Array.from(fitted),
    loo: Array.from(loo),
    diagnostics: {
      n,
      edf: fit.edf,
      gcv: fit.gcv,
      loocvRmse: Math.sqrt(looSs / n),
      rmse: Math.sqrt(rss / n),
      sigma: dof > 1e-9 ? Math.sqrt(rss / dof) : 0,
      condition: fit.condition,
      smoothingChoice: fit.smoothingChoice,
      shapeChoice,
      warnings,
      gcvCurve: fit.curve,
    },
    extent: { xmin, ymin, xmax, ymax },
    hull,
    spacing,
  };
  return model;
}

/**
 * Choose the shape ε by GCV: a log-spaced scan of ε·h from 0.02 to 3 (h the median spacing),
 * then golden-section refinement between the best scan point's neighbours (common practice for
 * one-dimensional minimisation; Rippa 1999 uses the same idea with leave-one-out error).
 */
function chooseShape(run: (eps: number) => KernelFit, spacingScaled: number, progress?: (m: string) => void): KernelFit {
  const h = spacingScaled > 0 ? spacingScaled : 0.1;
  const scan = 9;
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
  let a = logs[Math.max(0, bestIdx - 1)];
  let c = logs[Math.min(scan - 1, bestIdx + 1)];
  const phi = (Math.sqrt(5) - 1) / 2;
  const tryAt = (le: number) => {
    try {
      const f = run(Math.exp(le));
      if (f.gcv < best.gcv) best = f;
      return f.gcv;
    } catch {
      return Infinity;
    }
  };
  let x1 = c - phi * (c - a);
  let x2 = a + phi * (c - a);
  let f1 = tryAt(x1);
  let f2 = tryAt(x2);
  for (let it = 0; it < 8; it++) {
    progress?.(`shape refinement ${it + 1}/8`);
    if (f1 < f2) {
      c = x2;
      x2 = x1;
      f2 = f1;
      x1 = c - phi * (c - a);
      f1 = tryAt(x1);
    } else {
      a = x1;
      x1 = x2;
      f1 = f2;
      x2 = a + phi * (c - a);
      f2 = tryAt(x2);
    }
  }
  return best;
}
