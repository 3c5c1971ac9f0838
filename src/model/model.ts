// The saved model: rbfield's own, versioned JSON format (documented in DEVELOPERS.md, "Model file").
// It holds everything needed to evaluate the surface again without refitting.
import { ExitCode, inputError, RbfieldError } from "../errors.ts";
import { DRIFTS, KERNELS } from "../fit/kernels.ts";
import type { Crs, DriftName, KernelName } from "../types.ts";

export const MODEL_FORMAT = "rbfield-model";
export const MODEL_VERSION = 1;

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
  shapeChoice: "auto" | "given" | "none";
  /** Automatic selection: how candidates were ranked, and the ranking (best first). */
  selection: {
    by: "gcv" | "loocv";
    onSubsample: number | null;
    ranking: { kernel: KernelName; drift: DriftName; shape: number | null; lambda: number; edf: number; gcv: number; loocvRmse: number; chosen: boolean }[];
  } | null;
  /** Possible blunders: input lines whose standardised leave-one-out residual exceeds the threshold. */
  flags: { threshold: number; robustScale: number; lines: number[] };
  warnings: string[];
  /** GCV curve over λ. */
  gcvCurve: { lambda: number; gcv: number; edf: number }[];
}

export interface SurfaceModel {
  format: typeof MODEL_FORMAT;
  version: typeof MODEL_VERSION;
  kernel: KernelName;
  /** Shape ε in 1/map units (φ(ε r)); null for the thin-plate spline. */
  shape: number | null;
  drift: DriftName;
  /** λ added to the diagonal of the kernel matrix written in map units (scipy's "smoothing"). */
  lambda: number;
  crs: Crs;
  source: { file: string; x: string; y: string; z: string };
  scaling: { cx: number; cy: number; s: number; zc: number; zs: number };
  /**
   * Optional anisotropy, applied before scaling: d = (x − x0, y − y0); along = d·(sin θ, cos θ),
   * across = ratio·d·(cos θ, −sin θ), θ the azimuth of the long axis clockwise from grid north.
   * Scaling then applies to (along, across).
   */
  anisotropy: { azimuth: number; ratio: number; x0: number; y0: number } | null;
  /** Value transform: "log" fits ln z and back-transforms with exp(f + σ²/2). */
  transform: "none" | "log";
  /** Shape in scaled units and λ in scaled units, as used by the evaluator. */
  internal: { epsilonScaled: number; lambdaScaled: number };
  /** Data after cleaning, in map units, with the input line of each point. */
  points: { x: number[]; y: number[]; z: number[]; line: number[]; weight: number[] | null };
  /** RBF weights and drift coefficients in scaled units. */
  weights: number[];
  driftCoefficients: number[];
  /** Fitted value and leave-one-out residual z − f₍₋ᵢ₎(xᵢ) at every point, value units. */
  fitted: number[];
  loo: number[];
  /** Leave-one-out residuals divided by the robust scale 1.4826·median|e|. */
  looStandardised: number[];
  diagnostics: ModelDiagnostics;
  /** Data extent, convex hull (closed ring, counter-clockwise) and median nearest-neighbour spacing. */
  extent: { xmin: number; ymin: number; xmax: number; ymax: number };
  hull: [number, number][];
  spacing: number;
}

/** Serialise a model as pretty JSON (deterministic key order: as built). */
export function modelToJson(model: SurfaceModel): string {
  return JSON.stringify(model, null, 1) + "\n";
}

/** Parse and check a model file; every problem names the file. */
export function modelFromJson(text: string, file: string): SurfaceModel {
  let data: unknown;
  try {
    data = JSON.parse(text);
  } catch (e) {
    const pos = /position (\d+)/.exec(String((e as Error).message));
    if (pos) {
      const offset = Number(pos[1]);
      const before = text.slice(0, offset);
      const line = before.split("\n").length;
      const column = offset - before.lastIndexOf("\n");
      throw inputError("not a valid rbfield model file (JSON syntax error; the file may be truncated)", { file, line, column });
    }
    throw inputError("not a valid rbfield model file (JSON syntax error; the file may be truncated)", { file });
  }
  const m = data as Record<string, unknown>;
  if (typeof m !== "object" || m === null || m.format !== MODEL_FORMAT) {
    throw inputError(`not an rbfield model file (no "format": "${MODEL_FORMAT}")`, { file });
  }
  if (m.version !== MODEL_VERSION) {
    throw inputError(
      `model file version ${JSON.stringify(m.version)} is not supported by this rbfield (reads version ${MODEL_VERSION}); refit the points`,
      { file },
    );
  }
  const bad = (what: string) => new RbfieldError(`${file}: model file is damaged: ${what}`, ExitCode.input, { file });
  if (!KERNELS.includes(m.kernel as KernelName)) throw bad(`unknown kernel ${JSON.stringify(m.kernel)}`);
  if (!DRIFTS.includes(m.drift as DriftName)) throw bad(`unknown drift ${JSON.stringify(m.drift)}`);
  const pts = m.points as SurfaceModel["points"];
  const n = pts?.x?.length;
  if (!Array.isArray(pts?.x) || !Array.isArray(pts?.y) || pts.y.length !== n || !(n > 0)) throw bad("points missing");
  const w = m.weights as number[];
  if (!Array.isArray(w) || w.length !== n) throw bad("weights do not match the points");
  const c = m.driftCoefficients as number[];
  if (!Array.isArray(c)) throw bad("drift coefficients missing");
  const sc = m.scaling as SurfaceModel["scaling"];
  const internal = m.internal as SurfaceModel["internal"];
  const numbers = [
    ...pts.x,
    ...pts.y,
    ...w,
    ...c,
    sc?.cx,
    sc?.cy,
    sc?.s,
    sc?.zc,
    sc?.zs,
    internal?.epsilonScaled,
  ];
  if (!numbers.every((v) => typeof v === "number" && Number.isFinite(v))) throw bad("non-numeric or missing values");
  if (!Array.isArray(m.hull) || !m.extent || typeof m.spacing !== "number") throw bad("extent or hull missing");
  return m as unknown as SurfaceModel;
}
