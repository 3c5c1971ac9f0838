// The saved model: rbfield's own, versioned JSON format (documented in DEVELOPERS.md, "Model file").
// It holds everything needed to evaluate the surface again without refitting.
import { ExitCode, inputError, RbfieldError } from "../errors.ts";
import { KERNELS, TRENDS } from "../fit/kernels.ts";
import { checkGlobalPart, type GlobalPart } from "./global.ts";
import { checkLocalPart, type LocalPart } from "./local.ts";
import { COORDINATE_LIMIT, VALUE_LIMIT } from "../numbers.ts";
import { jsonErrorPlace } from "../json_syntax.ts";
import * as path from "node:path";
import { encodeWithSidecar, restoreFromSidecar, sidecarPath } from "./binary.ts";
import type { Crs, PointText, TrendName, KernelName } from "../types.ts";

export const MODEL_FORMAT = "rbfield-model";
/** Version of the model record (what every key means); single-file models carry it. */
export const MODEL_VERSION = 2;
/**
 * Version of a model file whose large arrays live in a binary sidecar (binary.ts): the version 2
 * record without those arrays, plus the `binary` member that says where they are.
 */
export const MODEL_VERSION_SIDECAR = 3;
/** Versions this rbfield reads (1 is upgraded on reading; 3 is read with its sidecar). */
export const READABLE_VERSIONS: readonly number[] = [1, 2, 3];

/** One candidate of an automatic selection, with its scores (the fields marked optional are absent in version 1 files). */
export interface RankedCandidate {
  kernel: KernelName;
  trend: TrendName;
  shape: number | null;
  lambda: number;
  edf: number;
  gcv: number;
  loocvRmse: number;
  /** Standard error of the leave-one-out RMSE (delta method on the mean squared error). */
  loocvSe?: number;
  /** λ was held at the numerical floor (GCV asked for less smoothing than the arithmetic resolves). */
  heldAtFloor?: boolean;
  /** Why the candidate may not be chosen, if it may not. */
  excluded?: string | null;
  chosen: boolean;
}

export interface ModelDiagnostics {
  n: number;
  /** Effective degrees of freedom tr(A_λ). */
  edf: number;
  /** GCV score N‖(I−A)y‖²/tr(I−A)², squared value units. */
  gcv: number;
  /** Root mean square of the leave-one-out residuals. */
  loocvRmse: number;
  /** Root mean square of the fit residuals y − f. */
  rmse: number;
  /** Noise standard deviation estimate √(RSS/(N − edf)) (Wahba 1990, eq. 4.7.?; common practice). */
  sigma: number;
  /** Condition estimate (μmax+λ)/(μmin+λ) of the solved system. */
  condition: number;
  smoothingChoice: "gcv" | "given" | "given-raised";
  /** λ sits at the numerical or conditioning floor (version 2; false when read from version 1). */
  heldAtFloor: boolean;
  shapeChoice: "auto" | "given" | "none";
  /** Automatic selection: the rule, the ranking (best first under the rule's score) and what parsimony overrode. */
  selection: {
    by: "one-se" | "gcv" | "loocv";
    onSubsample: number | null;
    ranking: RankedCandidate[];
    /**
     * How the choice was made (absent in version 1 files): "minimum" the best score, "parsimony" the
     * one-standard-error rule took a simpler candidate than `best`, "few-points" too few points to
     * choose, so the simplest candidate was taken.
     */
    decision?: "minimum" | "parsimony" | "few-points";
    best?: { kernel: KernelName; trend: TrendName };
  } | null;
  /**
   * Possible blunders. Version 2: Pope's tau test at family-wise level `level`, iterated (`critical`
   * is the last round's critical value, null when too few points leave no test); version 1 files:
   * |robust z| > `critical` (level null).
   */
  flags: { test: "tau" | "robust-z"; level: number | null; critical: number | null; lines: number[]; truncated: boolean };
  /** The robust fit (--robust): passes, whether it settled, and the input lines down-weighted below 0.5, lowest first. */
  robust: { passes: number; converged: boolean; downweighted: number[] } | null;
  warnings: string[];
  /** GCV curve over λ (empty for the local method, whose λ is chosen per patch). */
  gcvCurve: { lambda: number; gcv: number; edf: number }[];
  /** Which method made the surface and why (absent in files written before the local method). */
  methodChoice?: string;
  /** The local method's figures (local models only). */
  local?: LocalDiagnostics;
}

/** What the local (partition-of-unity) method reports about its patches. */
export interface LocalDiagnostics {
  patches: number;
  /** Settings: patch discs grown to hold at least patchPoints points; 2-d tree cells split above leafPoints; disc radius = overlap × cell half-diagonal. */
  patchPoints: number;
  leafPoints: number;
  overlap: number;
  pointsPerPatch: { min: number; median: number; max: number };
  /** λ of the patches, map-unit convention. */
  lambda: { min: number; median: number; max: number };
  /** RMSE of the blended leave-one-out residuals (exact for the blended surface with the patch λs fixed). */
  loocvRmse: number;
  /** Patches whose λ sits at the numerical floor, patches whose given λ was raised, patches enlarged because their points could not carry the model. */
  heldAtFloor: number;
  raised: number;
  /**
   * Patches whose GCV curve had several local minima and whose λ the exact leave-one-out error took
   * from another minimum than GCV's lowest (near-coincident readings; fit/local/patch_fit.ts).
   */
  lambdaByLeaveOneOut: number;
  enlarged: number;
  /** Critical values of Pope's τ over the patches (each point is tested with its home patch's degrees of freedom). */
  critical: { min: number; max: number } | null;
  /**
   * How kernel, trend and shape were chosen: every candidate ranked on `samples` patches, their
   * leave-one-out errors pooled over those patches' `points`, the selection rule applied to the pooled
   * scores (diagnostics.selection), the shape the median of the samples' shapes.
   */
  consensus: {
    samples: number;
    rule: string;
    points: number;
    /** The distinct points among them (patches overlap; optional, absent in older files). */
    distinctPoints?: number;
    /** The shapes (ε per map unit) the sample patches found for the chosen kernel; null when it has none or it was given. */
    shapes: number[] | null;
  } | null;
}

/** Fitting methods a model can come from; each stores its own part (see DEVELOPERS.md, "Model file"). */
export type MethodName = "global" | "local";
export const METHODS: readonly MethodName[] = ["global", "local"];

/** Input rows skipped or merged when the model was fitted (ModelBase.cleaning). */
export interface ModelCleaning {
  rowsRead: number;
  skipped: { line: number; reason: string }[];
  merged: { lines: number[]; x: number; y: number; spread: number; value: number }[];
}

/** What every model holds, whatever the method that made it. */
export interface ModelBase {
  format: typeof MODEL_FORMAT;
  version: typeof MODEL_VERSION;
  /** The method that made the surface; its own data are under the key of that name. */
  method: MethodName;
  kernel: KernelName;
  /** Shape ε in 1/map units (φ(ε r)); null for the thin-plate spline. */
  shape: number | null;
  trend: TrendName;
  /** λ added to the diagonal of the kernel matrix written in map units (scipy's "smoothing"). */
  lambda: number;
  crs: Crs;
  source: { file: string; x: string; y: string; z: string };
  /**
   * Optional stretch (geometric anisotropy), applied before scaling: d = (x − x0, y − y0);
   * along = d·(sin θ, cos θ), across = factor·d·(cos θ, −sin θ), θ the azimuth of the long axis
   * clockwise from grid north: the surface varies `factor` times more slowly along θ than across it.
   * Scaling then applies to (along, across). (Version 1 files: `anisotropy` with `ratio`.)
   */
  stretch: { azimuth: number; factor: number; x0: number; y0: number } | null;
  /** Value transform: "log" fits ln z and back-transforms with exp(f + σ²/2). */
  transform: "none" | "log";
  /**
   * Data after cleaning, in map units, with the input line of each point; `weight` the weights as
   * fitted (normalised to mean 1), `robustWeight` the robustness weights of a robust fit (else null);
   * `text` (optional, additive in version 2) the text columns carried with the points (point ids, codes,
   * qualifiers), one string per point.
   */
  points: { x: number[]; y: number[]; z: number[]; line: number[]; weight: number[] | null; robustWeight: number[] | null; text?: PointText[] };
  /** Fitted value and leave-one-out residual z − f₍₋ᵢ₎(xᵢ) at every point, value units. */
  fitted: number[];
  loo: number[];
  /** Studentised leave-one-out residuals τ (Pope's tau; version 1: divided by 1.4826·median|e|); null where undefined. */
  looStandardised: (number | null)[];
  diagnostics: ModelDiagnostics;
  /**
   * The input rows the cleaning stage skipped or merged, with their lines (optional, additive in
   * versions 2 and 3; written by fit and run): the report of a saved model lists them.
   */
  cleaning?: ModelCleaning;
  /** Data extent, convex hull (closed ring, counter-clockwise) and median nearest-neighbour spacing. */
  extent: { xmin: number; ymin: number; xmax: number; ymax: number };
  hull: [number, number][];
  spacing: number;
}

/** A model made by the global (dense) method. */
export interface GlobalModel extends ModelBase {
  method: "global";
  global: GlobalPart;
}

/** A model made by the local (partition-of-unity) method: overlapping patches blended by Wendland weights. */
export interface LocalModel extends ModelBase {
  method: "local";
  local: LocalPart;
}

/** A saved surface, whatever method made it. */
export type SurfaceModel = GlobalModel | LocalModel;

/** Serialise a model as pretty JSON (deterministic key order: as built). */
export function modelToJson(model: SurfaceModel): string {
  return JSON.stringify(model, null, 1) + "\n";
}

/** Is a model written with a binary sidecar? Local models are (their arrays grow with N and the patch overlap); global ones, at most 5,000 points, stay one JSON file. */
export function usesSidecar(model: SurfaceModel): boolean {
  return model.method === "local";
}

/**
 * A model as the files to write for it: the JSON text, and for models that use one (usesSidecar)
 * the sidecar's bytes, to be written at `sidecarPath(file)`; the JSON then names `sidecarName`.
 */
export function encodeModel(model: SurfaceModel, sidecarName: string): { json: string; binary: Uint8Array | null } {
  if (!usesSidecar(model)) return { json: modelToJson(model), binary: null };
  return encodeWithSidecar(model, sidecarName, MODEL_VERSION_SIDECAR);
}

/** The files to write for a model saved as `file`: the JSON, and its sidecar (sidecarPath) when it uses one. */
export function modelFiles(file: string, model: SurfaceModel): [string, string | Uint8Array][] {
  const side = sidecarPath(file);
  const { json, binary } = encodeModel(model, path.basename(side));
  return binary ? [[file, json], [side, binary]] : [[file, json]];
}

/** Where a version 3 model file's sidecar is read from: its path and a function that reads it. */
export interface SidecarSource {
  file: string;
  read(): Uint8Array;
}

/**
 * Parse and check a model file; every problem names the file. A version 3 file's arrays are read
 * from `sidecar` (the reader derives its path from the model file's own, never from the file's content).
 */
export function modelFromJson(text: string, file: string, sidecar?: SidecarSource): SurfaceModel {
  let data: unknown;
  try {
    data = JSON.parse(text);
  } catch (e) {
    const trimmed = text.replace(/^\uFEFF/, "").trimStart();
    if (!trimmed.startsWith("{")) {
      throw inputError("not an rbfield model file (not JSON); give the model file written by 'rbfield fit'", { file });
    }
    const { line, column } = jsonErrorPlace(text, e);
    const place = { file, line, column };
    throw inputError("not a valid rbfield model file (JSON syntax error; the file may be truncated): refit the points", place);
  }
  const m = data as Record<string, unknown>;
  if (typeof m !== "object" || m === null || Array.isArray(m) || m.format !== MODEL_FORMAT) {
    throw inputError(`not an rbfield model file (no "format": "${MODEL_FORMAT}"); give the model file written by 'rbfield fit'`, { file });
  }
  if (!READABLE_VERSIONS.includes(m.version as number)) {
    throw inputError(
      `model file version ${JSON.stringify(m.version)} is not supported by this rbfield (reads versions ${READABLE_VERSIONS.slice(0, -1).join(", ")} and ${READABLE_VERSIONS.at(-1)}); refit the points`,
      { file },
    );
  }
  if (m.version === 1) renameVersion1Keys(m);
  if (m.version === MODEL_VERSION_SIDECAR) {
    if (!sidecar) {
      throw inputError("this model file keeps its arrays in a binary part beside it (version 3); read it with the file beside it (readModel)", { file });
    }
    restoreFromSidecar(m, sidecar.read(), sidecar.file);
    m.version = MODEL_VERSION;
  } else if ("binary" in m) {
    throw inputError(`a version ${JSON.stringify(m.version)} model file cannot have a binary part; refit the points`, { file });
  }
  const bad = (what: string) => new RbfieldError(`the model file is damaged (${what}); refit the points`, ExitCode.input, { file });
  const finite = (v: unknown): v is number => typeof v === "number" && Number.isFinite(v);
  const finiteArray = (v: unknown, n?: number): v is number[] => Array.isArray(v) && (n === undefined || v.length === n) && v.every(finite);
  if (!KERNELS.includes(m.kernel as KernelName)) throw bad(`unknown kernel ${JSON.stringify(m.kernel)}`);
  if (!TRENDS.includes(m.trend as TrendName)) throw bad(`unknown trend ${JSON.stringify(m.trend)}`);
  if (m.transform !== "none" && m.transform !== "log") throw bad(`unknown transform ${JSON.stringify(m.transform)}`);
  const pts = m.points as SurfaceModel["points"] | undefined;
  const n = Array.isArray(pts?.x) ? pts!.x.length : 0;
  if (!pts || !(n > 0) || !finiteArray(pts.x, n) || !finiteArray(pts.y, n) || !finiteArray(pts.z, n)) throw bad("points missing or not numbers");
  // The limits the cleaning stage applies to input.
  const within = (a: number[], limit: number) => a.every((x) => Math.abs(x) <= limit);
  if (!within(pts.x, COORDINATE_LIMIT) || !within(pts.y, COORDINATE_LIMIT) || !within(pts.z, VALUE_LIMIT)) throw bad("point coordinates or values out of range");
  if (pts.weight !== null && pts.weight !== undefined && !(finiteArray(pts.weight, n) && pts.weight.every((w) => w > 0))) {
    throw bad("point weights are not positive numbers");
  }
  if (!Array.isArray(pts.line) || pts.line.length !== n) throw bad("point line numbers missing");
  if (pts.text !== undefined && !(Array.isArray(pts.text) && pts.text.every((t) =>
    t && typeof t === "object" && typeof t.name === "string" && typeof t.role === "string" && Array.isArray(t.values) &&
    t.values.length === n && t.values.every((v) => typeof v === "string")
  ))) throw bad("point texts are not one string per point");
  if (m.version !== 1 && pts.robustWeight !== null && !(finiteArray(pts.robustWeight, n) && pts.robustWeight.every((w) => w > 0 && w <= 1))) {
    throw bad("robustness weights are not numbers between 0 and 1");
  }
  if (!METHODS.includes(m.method as MethodName)) throw bad(`unknown method ${JSON.stringify(m.method)}`);
  if (m.method === "local") checkLocalPart(m.local, n, m.trend as TrendName, bad);
  else checkGlobalPart(m.global, n, m.trend as TrendName, bad);
  const an = m.stretch as SurfaceModel["stretch"] | undefined;
  if (an !== null && an !== undefined) {
    if (typeof an !== "object" || ![an.azimuth, an.x0, an.y0].every((v) => finite(v) && Math.abs(v) <= COORDINATE_LIMIT) || !(finite(an.factor) && an.factor >= 1 && an.factor <= 1e6)) {
      throw bad("stretch not numbers");
    }
  }
  const d = m.diagnostics as SurfaceModel["diagnostics"] | undefined;
  if (!d || typeof d !== "object" || !finite(d.sigma) || d.sigma < 0 || (m.transform === "log" && d.sigma > 30)) throw bad("diagnostics missing");
  if (m.version !== 1 && (typeof d.flags !== "object" || d.flags === null || !Array.isArray(d.flags.lines) || (d.flags.critical !== null && typeof d.flags.critical !== "number"))) {
    throw bad("blunder flags missing");
  }
  const c = m.cleaning as ModelCleaning | undefined;
  if (c !== undefined && !(
    c && typeof c === "object" && Number.isInteger(c.rowsRead) && c.rowsRead >= 0 &&
    Array.isArray(c.skipped) && c.skipped.every((r) => r && Number.isInteger(r.line) && typeof r.reason === "string") &&
    Array.isArray(c.merged) && c.merged.every((g) => g && Array.isArray(g.lines) && g.lines.every(Number.isInteger) && [g.x, g.y, g.spread, g.value].every(finite))
  )) throw bad("the list of skipped and merged rows is not as written");
  const e = m.extent as SurfaceModel["extent"] | undefined;
  if (!e || ![e.xmin, e.ymin, e.xmax, e.ymax].every((v) => finite(v) && Math.abs(v) <= COORDINATE_LIMIT)) throw bad("extent missing or not numbers");
  const hull = m.hull;
  if (!Array.isArray(hull) || hull.length < 4 || !hull.every((p) => Array.isArray(p) && finite(p[0]) && finite(p[1]))) throw bad("hull missing");
  if (!(finite(m.spacing) && (m.spacing as number) >= 0)) throw bad("spacing missing");
  const crs = m.crs as Crs | undefined;
  if (!crs || typeof crs.label !== "string" || (crs.epsg !== undefined && !(Number.isInteger(crs.epsg) && crs.epsg > 0))) throw bad("CRS missing");
  if (m.version === 1) upgradeVersion1(m);
  return m as unknown as SurfaceModel;
}

/** Version 1 keys under their version 2 names: drift → trend, anisotropy {ratio} → stretch {factor}. */
function renameVersion1Keys(m: Record<string, unknown>): void {
  const rename = (o: Record<string, unknown>, from: string, to: string) => {
    if (from in o) {
      o[to] = o[from];
      delete o[from];
    }
  };
  rename(m, "drift", "trend");
  rename(m, "driftCoefficients", "trendCoefficients");
  rename(m, "anisotropy", "stretch");
  // The global method's own fields move under "global".
  m.method = "global";
  const global: Record<string, unknown> = {};
  for (const key of ["scaling", "internal", "weights", "trendCoefficients"]) {
    global[key] = m[key];
    delete m[key];
  }
  m.global = global;
  const st = m.stretch as Record<string, unknown> | null | undefined;
  if (st && typeof st === "object") rename(st, "ratio", "factor");
  const d = m.diagnostics as { selection?: { ranking?: unknown } } | undefined;
  const ranking = d?.selection?.ranking;
  if (Array.isArray(ranking)) for (const r of ranking) if (r && typeof r === "object") rename(r as Record<string, unknown>, "drift", "trend");
}

/** Version 1 → 2 in memory: the blunder flags' description, the robust fields, the floor marker. */
function upgradeVersion1(m: Record<string, unknown>): void {
  const d = m.diagnostics as Record<string, unknown>;
  const f = (d.flags ?? {}) as { threshold?: number; lines?: number[] };
  d.flags = { test: "robust-z", level: null, critical: f.threshold ?? 3, lines: Array.isArray(f.lines) ? f.lines : [], truncated: false };
  d.robust = null;
  d.heldAtFloor = d.smoothingChoice === "given-raised";
  (m.points as Record<string, unknown>).robustWeight = null;
  m.version = MODEL_VERSION;
}
