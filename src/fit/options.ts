// The options of a fit, shared by every module of the fit stage.
import type { Crs, TrendName, KernelName } from "../types.ts";

export type KernelChoice = KernelName | "auto";
export type TrendChoice = TrendName | "auto";
/**
 * How automatic selection picks among candidates: "one-se" (default) the simplest candidate whose
 * leave-one-out error is within one standard error of the best (Breiman et al. 1984); "loocv" the
 * smallest leave-one-out RMSE; "gcv" the smallest GCV score among candidates whose leave-one-out
 * RMSE is not grossly worse than the best's (see select.ts).
 */
export type SelectRule = "one-se" | "loocv" | "gcv";
/**
 * Which fitting method: "global" one dense fit (at most MAX_GLOBAL_POINTS points), "local" overlapping
 * patches blended by partition of unity (fit/local/), "auto" (default) local above LOCAL_AUTO_POINTS.
 */
export type MethodChoice = "auto" | "global" | "local";

export interface FitOptions {
  /** Fitting method; default "auto" (the local method above LOCAL_AUTO_POINTS points). */
  method?: MethodChoice;
  /** Local method: points per patch; every patch disc is grown to hold at least this many (default 150). */
  patchPoints?: number;
  /** Local method: a cell of the 2-d tree is split while it holds more points than this (default patchPoints/3). */
  leafPoints?: number;
  /** Local method: patch disc radius as a multiple of its tree cell's half-diagonal, > 1 (default 1.4). */
  overlap?: number;
  /** Basis function, or "auto" to rank every kernel (the default). */
  kernel?: KernelChoice;
  /** Shape ε in 1/map units (φ(ε r)), or "auto" to choose it by GCV; default auto. */
  shape?: "auto" | number;
  /** Polynomial trend, or "auto" (with kernel auto: the degrees each kernel supports); default linear. */
  trend?: TrendChoice;
  /** λ in map-unit convention (added to the kernel matrix diagonal), or "gcv"; default gcv. */
  smoothing?: "gcv" | number;
  /** How automatic selection picks the model; default "one-se". */
  select?: SelectRule;
  /** Observation weights ωᵢ > 0 (e.g. 1/variance), one per point; normalised to mean 1. */
  weights?: Float64Array;
  /**
   * Stretch (geometric anisotropy): the surface varies `factor` (≥ 1) times more slowly along the
   * azimuth (degrees clockwise from grid north) than across it, e.g. along a valley.
   */
  stretch?: { azimuth: number; factor: number };
  /** "log" fits ln z (values must be positive) and back-transforms with a lognormal bias correction. */
  transform?: "none" | "log";
  /** Family-wise level α of the blunder test (Pope's tau, iterated); default 0.05. */
  flagLevel?: number;
  /** Refit by iteratively reweighted least squares with Tukey's biweight (bounded influence of blunders). */
  robust?: boolean;
  /**
   * Breaklines in map coordinates (the points' CRS): z on every vertex (3-D: the surface passes
   * through the line and may change slope across it) or null (a 2-D barrier: it may jump). Fitted by
   * the local method with its patches cut into sides (fit/local/sides.ts).
   */
  breaklines?: { name: string; x: number[]; y: number[]; z: number[] | null }[];
  crs?: Crs;
  source?: { file: string; x: string; y: string; z: string };
  /** Called with short progress messages during long work. */
  progress?: (message: string) => void;
  /**
   * The points' median spacing (medianSpacing of these very x, y), when the caller has it already:
   * cleaning computes it for the isolated-sample search (0.8 s at 10⁶ points). Else computed.
   */
  spacing?: number;
  /**
   * The local method only: asked, once the patches are laid out, with the work of one standard
   * error (patchErrorWork), for the places where the error grid will be wanted — the map x of its
   * lattice's columns and y of its rows — so each patch's error there is computed from the fit's
   * own factors (PlaceErrors in evaluate/local_stderr.ts). `run` asks; undefined: none.
   */
  errorPlaces?: (work: number) => { x: Float64Array; y: Float64Array } | undefined;
}
