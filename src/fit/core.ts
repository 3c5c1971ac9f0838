// Fit one kernel, shape and trend: RBF regression with polynomial trend, smoothing chosen by GCV.
//
// Model (Wahba 1990, ch. 2; Fasshauer 2007, ch. 19):
//   f(x) = Σᵢ wᵢ φ(‖x − xᵢ‖) + Σⱼ cⱼ pⱼ(x),   (K + λI) w + P c = y,   Pᵀ w = 0.
// With P = Q [R; 0] and Q = [Q₁ Q₂], w = Q₂ (B + λI)⁻¹ Q₂ᵀ y where B = Q₂ᵀ K Q₂ (positive definite
// for a kernel that is conditionally positive definite of the trend's order). B is reduced once to
// tridiagonal form T = Hᵀ B H; then for every λ
//   residual y − f = λ w,  ‖y − f‖² = λ² ‖(T + λI)⁻¹ h‖²,  h = Hᵀ Q₂ᵀ y,
//   tr(I − A_λ) = Σₖ λ / (μₖ + λ)  (μₖ the eigenvalues of B),
// so GCV(λ) = N ‖(I − A_λ) y‖² / tr(I − A_λ)² (Craven & Wahba 1979; Golub, Heath & Wahba 1979)
// costs O(N) per λ after one O(N³) reduction.
// Leave-one-out residuals: eᵢ = wᵢ / Gᵢᵢ with G = Q₂ (B + λI)⁻¹ Q₂ᵀ, the upper-left block of the
// inverse of the bordered system (Rippa 1999 for λ = 0; the same identity eᵢ = rᵢ / (1 − Aᵢᵢ) for λ > 0).
import { ExitCode, opt, RbfieldError } from "../errors.ts";
import type { KernelName, TrendName } from "../types.ts";
import { boundingBox } from "../geometry.ts";
import { KERNEL_TABLE, minimumTrend, trendRow, trendTerms, weightedKernelMatrix } from "./kernels.ts";
import { goldenSection } from "./minimise.ts";
import {
  applyReflector,
  applyReflectors,
  applyReflectorsTransposed,
  householderQR,
  type Reflector,
  reflectSymmetric,
  solveTridiagonal,
  solveUpper,
  tridiagonalEigenvalues,
  tridiagonalize,
} from "./linalg.ts";

/** Largest condition number (μmax + λ)/(μmin + λ) we accept before adding smoothing. */
export const CONDITION_LIMIT = 1e12;

/** Unit roundoff of IEEE double precision, 2⁻⁵³. */
const UNIT_ROUNDOFF = 2 ** -53;
/**
 * How far above the rounding level δ every μₖ + λ must stay. A perturbation dμ of an eigenvalue moves
 * the filter factor λ/(μ+λ) by at most |dμ|/(μ+λ), so with μ + λ ≥ 10³δ every filter factor, the
 * edf tr(A) and the GCV score are accurate to about 10⁻³ whatever the eigenvalues below δ really are.
 */
export const TRUST_FACTOR = 1e3;

/**
 * Rounding level of the eigenvalues of B = Q₂ᵀK̃Q₂ computed in double precision: δ = 10·N·u·max|K̃ᵢⱼ|.
 * Forming K̃ perturbs each entry by about u·max|K̃ᵢⱼ|, so ‖ΔK̃‖₂ ≤ N·u·max|K̃ᵢⱼ|; the orthogonal
 * reduction adds a backward error of the same order (Golub & Van Loan 2013, §8.3.1), and by Weyl's
 * inequality the computed eigenvalues are off by at most ‖ΔB‖₂ (the factor 10 covers both).
 * Measured against the largest kernel entry, not the largest eigenvalue: for a flat kernel the
 * entries are near 1 while every eigenvalue of B is tiny.
 */
export function roundingLevel(k: Float64Array, n: number): number {
  let kmax = 0;
  for (let i = 0; i < k.length; i++) {
    const a = Math.abs(k[i]);
    if (a > kmax) kmax = a;
  }
  return 10 * n * UNIT_ROUNDOFF * kmax;
}

/** Smallest λ with μmin + λ ≥ TRUST_FACTOR·δ (0 when the kernel is well clear of rounding). */
export function numericalFloor(muMin: number, rounding: number): number {
  return Math.max(0, TRUST_FACTOR * rounding - muMin);
}

/** Centring and isotropic scaling of coordinates and values: u = (x − cx)/s, ỹ = (z − zc)/zs. */
export interface Scaling {
  cx: number;
  cy: number;
  s: number;
  zc: number;
  zs: number;
}

export function computeScaling(x: Float64Array, y: Float64Array, z: Float64Array, centreValues = true): Scaling {
  const n = x.length;
  const { xmin, ymin, xmax, ymax } = boundingBox(x, y);
  let zsum = 0;
  for (let i = 0; i < n; i++) zsum += z[i];
  const cx = 0.5 * (xmin + xmax);
  const cy = 0.5 * (ymin + ymax);
  // One scale for both axes keeps distances isotropic.
  const s = Math.max(0.5 * (xmax - xmin), 0.5 * (ymax - ymin)) || 1;
  // With no trend the surface must fall to 0 away from the data (f = Σ wᵢ φ), so values are
  // only scaled, not centred; centring would act as a hidden constant trend.
  const zc = centreValues ? zsum / n : 0;
  let ss = 0;
  for (let i = 0; i < n; i++) ss += (z[i] - zc) ** 2;
  const zs = Math.sqrt(ss / n) || 1;
  return { cx, cy, s, zc, zs };
}

/** Which smoothing was used and how it was chosen. */
export type SmoothingChoice = "gcv" | "given" | "given-raised";

/** One point of the GCV curve, in the user's units. */
export interface GcvPoint {
  lambda: number;
  gcv: number;
  edf: number;
}

/** Everything the fit of one kernel/shape/trend produces, in scaled units unless stated. */
export interface KernelFit {
  kernel: KernelName;
  trend: TrendName;
  /** Shape ε in scaled units (1 for the thin-plate spline, which has none). */
  epsilonScaled: number;
  /** λ in scaled units (added to the diagonal of the scaled kernel matrix). */
  lambdaScaled: number;
  smoothingChoice: SmoothingChoice;
  /** True when λ sits at the numerical or conditioning floor rather than where GCV or the user put it. */
  heldAtFloor: boolean;
  /** RBF weights w of the surface (scaled units). */
  weights: Float64Array;
  /** Residuals y − f at the data (scaled value units). */
  residual: Float64Array;
  trendCoefficients: Float64Array;
  /** GCV score, in squared value units. */
  gcv: number;
  edf: number;
  /** Residual sum of squares in value units. */
  rss: number;
  /** (μmax + λ)/(μmin + λ): the condition estimate of the solved system. */
  condition: number;
  /** The GCV curve over λ (user units). */
  curve: GcvPoint[];
  warnings: string[];
  /** Kept for leave-one-out and error estimates. */
  state: FitState;
}

/** Factorisation pieces reused after λ is chosen. */
export interface FitState {
  n: number; // N points
  m: number; // trend terms
  r: Float64Array; // m×m upper-triangular factor of (weighted) P
  sqrtW?: Float64Array;
  wTilde: Float64Array; // weights of the transformed system
  qr: Reflector[];
  tri: { d: Float64Array; e: Float64Array; reflectors: Reflector[] };
  mu: Float64Array;
  h: Float64Array;
  y: Float64Array; // scaled values
  u: Float64Array; // scaled coordinates (kept by reference to rebuild K when needed)
  v: Float64Array;
  kernel: KernelName;
  epsilonScaled: number;
  /** B = Q₂ᵀK̃Q₂ ((N−m)×(N−m), row-major) when CoreOptions.keepReduced asked for it. */
  b?: Float64Array;
  /** With b: the other blocks of QᵀK̃Q, A₁₁ = Q₁ᵀK̃Q₁ (m×m) and A₁₂ = Q₁ᵀK̃Q₂ (m×(N−m)), row-major. */
  a11?: Float64Array;
  a12?: Float64Array;
}

export interface CoreOptions {
  kernel: KernelName;
  trend: TrendName;
  epsilonScaled: number;
  /** "gcv" or λ in scaled units. */
  smoothing: "gcv" | number;
  /** Multiply scaled λ by this to report it in the user's units. */
  lambdaToUser: number;
  /**
   * √ωᵢ for weighted least squares Σ ωᵢ(yᵢ − fᵢ)² + λJ(f), ω normalised to mean 1. The system
   * (K + λΩ⁻¹)w + Pc = y becomes (DKD + λI)w̃ + DPc = Dy with D = Ω^½, w = Dw̃ (Wahba 1990, §1.3).
   */
  sqrtWeights?: Float64Array;
  /**
   * Keep a copy of B = Q₂ᵀK̃Q₂ in the state, so that the leave-one-out diagonal's Cholesky route need
   * not rebuild and project the kernel matrix (for small systems: the local method's patches).
   */
  keepReduced?: boolean;
}

/** Fit one kernel, shape and trend to scaled coordinates (u, v) and scaled values y. */
export function fitCore(u: Float64Array, v: Float64Array, y: Float64Array, zs: number, opts: CoreOptions): KernelFit {
  const n = u.length;
  const m = trendTerms(opts.trend);
  if (n < m + 1) {
    throw new RbfieldError(
      `${n} points are too few for ${opts.trend} trend (${m} terms): at least ${m + 1} are needed`,
      ExitCode.input,
    );
  }
  const warnings: string[] = [];
  // Trend basis and its QR factorisation.
  const p = new Float64Array(n * m);
  const row = new Float64Array(Math.max(m, 1));
  for (let i = 0; i < n; i++) {
    trendRow(u[i], v[i], m, row);
    const di = opts.sqrtWeights ? opts.sqrtWeights[i] : 1;
    for (let j = 0; j < m; j++) p[i * m + j] = row[j] * di;
  }
  const { reflectors: qr, r } = householderQR(p, n, m);
  let rmax = 0;
  for (let j = 0; j < m; j++) rmax = Math.max(rmax, Math.abs(r[j * m + j]));
  for (let j = 0; j < m; j++) {
    if (Math.abs(r[j * m + j]) <= 1e-10 * rmax * Math.sqrt(n)) {
      throw new RbfieldError(
        `the points do not support ${opts.trend} trend (they lie on a line or on a conic, so the trend terms ` +
          `are not independent); use ${opt("trend")} ${m > 3 ? "linear" : "constant"} or add points off the line`,
        ExitCode.numerical,
      );
    }
  }
  // Qᵀ K Q, then B = its trailing (n−m)×(n−m) block.
  const sw = opts.sqrtWeights;
  const k = weightedKernelMatrix(opts.kernel, opts.epsilonScaled, u, v, sw);
  const rounding = roundingLevel(k, n);
  for (const refl of qr) reflectSymmetric(k, n, refl);
  const nb = n - m;
  const b = new Float64Array(nb * nb);
  for (let i = 0; i < nb; i++) b.set(k.subarray((m + i) * n + m, (m + i) * n + n), i * nb);
  // Top m rows of QᵀKQ (columns m…) are needed for the trend coefficients.
  const top = new Float64Array(m * nb);
  for (let i = 0; i < m; i++) top.set(k.subarray(i * n + m, i * n + n), i * nb);
  const qty = Float64Array.from(y);
  if (sw) for (let i = 0; i < n; i++) qty[i] *= sw[i];
  for (const refl of qr) applyReflector(refl, qty);
  const reduced = opts.keepReduced ? b.slice() : undefined;
  let a11: Float64Array | undefined;
  if (opts.keepReduced) {
    a11 = new Float64Array(m * m);
    for (let i = 0; i < m; i++) a11.set(k.subarray(i * n, i * n + m), i * m);
  }
  const tri = tridiagonalize(b, nb);
  const mu = tridiagonalEigenvalues(tri.d, tri.e);
  const h = qty.slice(m);
  applyReflectorsTransposed(tri.reflectors, h);

  const muMin = mu[0];
  // A kernel that is flat at this shape (all values equal to working precision) leaves B ≈ 0.
  let kmax = 0;
  for (let i = 0; i < nb; i++) kmax = Math.max(kmax, Math.abs(tri.d[i]), Math.abs(tri.e[i]));
  if (!(mu[nb - 1] > 1e-14 * Math.max(kmax, 1e-300)) || !(mu[nb - 1] > 0)) {
    throw new RbfieldError(
      `the ${opts.kernel} kernel is flat at this shape over these points (no variation left after the trend); ` +
        `use a larger ${opt("shape")}, ${opt("shape")} auto, or another kernel`,
      ExitCode.numerical,
    );
  }
  const muMax = mu[nb - 1];
  if (!(muMax > TRUST_FACTOR * rounding)) {
    throw new RbfieldError(
      `the ${opts.kernel} kernel is flat at this shape over these points (its variation after the trend is at rounding level); ` +
        `use a larger ${opt("shape")}, ${opt("shape")} auto, or another kernel`,
      ExitCode.numerical,
    );
  }
  // Smallest λ that keeps (μmax+λ)/(μmin+λ) ≤ CONDITION_LIMIT, and the numerical floor: μₖ + λ must
  // stay TRUST_FACTOR times above the rounding level of the computed eigenvalues, so that every GCV
  // filter factor λ/(μₖ+λ), the edf and the solve are accurate (see numericalFloor).
  const trustFloor = numericalFloor(muMin, rounding);
  const conditionFloor = Math.max(0, (muMax - CONDITION_LIMIT * muMin) / (CONDITION_LIMIT - 1));
  const floor = Math.max(conditionFloor, trustFloor);
  const t = new Float64Array(nb);
  // GCV in the λ-free form N ‖t‖² / (Σ 1/(μₖ+λ))², t = (T+λI)⁻¹h, which equals the usual form
  // after dividing numerator and denominator by λ²; it stays finite as λ → 0.
  const gcvAt = (lambda: number): { gcv: number; edf: number; rssScaled: number } => {
    solveTridiagonal(tri.d, tri.e, lambda, h, t);
    let tt = 0;
    for (let i = 0; i < nb; i++) tt += t[i] * t[i];
    let inv = 0;
    for (let i = 0; i < nb; i++) inv += 1 / (mu[i] + lambda);
    const edf = n - lambda * inv;
    return { gcv: (n * tt) / (inv * inv), edf, rssScaled: lambda * lambda * tt };
  };

  const lower = Math.max(floor, muMax * 1e-13);
  const upper = muMax * 1e4;
  const steps = 61;
  const curve: GcvPoint[] = [];
  let best = { lambda: lower, gcv: Infinity };
  const grid: number[] = [];
  for (let s = 0; s < steps; s++) grid.push(lower * Math.pow(upper / lower, s / (steps - 1)));
  for (const lambda of grid) {
    const g = gcvAt(lambda);
    curve.push({ lambda: lambda * opts.lambdaToUser, gcv: g.gcv * zs * zs, edf: g.edf });
    if (g.gcv < best.gcv) best = { lambda, gcv: g.gcv };
  }

  let lambda: number;
  let smoothingChoice: SmoothingChoice;
  let heldAtFloor = false;
  if (opts.smoothing === "gcv") {
    // Golden-section refinement in log λ between the grid neighbours of the best grid point.
    const idx = grid.indexOf(best.lambda);
    const { a, c } = goldenSection(
      (x) => gcvAt(Math.exp(x)).gcv,
      Math.log(grid[Math.max(0, idx - 1)]),
      Math.log(grid[Math.min(steps - 1, idx + 1)]),
      40,
    );
    const xm = Math.exp(0.5 * (a + c));
    lambda = gcvAt(xm).gcv <= best.gcv ? xm : best.lambda;
    smoothingChoice = "gcv";
    heldAtFloor = idx === 0 && floor > 0;
    if (heldAtFloor) {
      warnings.push(
        `GCV asks for less smoothing than double precision resolves for this kernel and shape; smoothing was held at ` +
          `the numerical floor λ = ${fmtExp(lambda * opts.lambdaToUser)}, where the scores are still reliable`,
      );
    }
  } else {
    lambda = opts.smoothing;
    smoothingChoice = "given";
    if (lambda < floor || (lambda === 0 && muMin <= 0)) {
      const cond = muMin + lambda > 0 ? (muMax + lambda) / (muMin + lambda) : Infinity;
      warnings.push(
        `the system is ill-conditioned at the smoothing given (condition estimate ${fmtExp(cond)}); ` +
          `smoothing was raised to ${fmtExp(floor * opts.lambdaToUser)} so the solution is stable`,
      );
      lambda = floor;
      smoothingChoice = "given-raised";
      heldAtFloor = true;
    }
  }

  const g = gcvAt(lambda);
  const condition = mu[0] + lambda > 0 ? (muMax + lambda) / (mu[0] + lambda) : Infinity;
  // Weights w = Q₂ H t, t = (T+λI)⁻¹ h.
  solveTridiagonal(tri.d, tri.e, lambda, h, t);
  const ht = Float64Array.from(t);
  applyReflectors(tri.reflectors, ht);
  const w = new Float64Array(n);
  w.set(ht, m);
  for (let j = qr.length - 1; j >= 0; j--) applyReflector(qr[j], w);
  // w̃ → w = D w̃; residual y − f = λ D⁻¹ w̃ (scaled value units).
  const wTilde = Float64Array.from(w);
  const residual = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    const di = sw ? sw[i] : 1;
    w[i] = wTilde[i] * di;
    residual[i] = (lambda * wTilde[i]) / di;
  }
  // Trend: R c = (Qᵀ y)₁..ₘ − (QᵀKQ)₁..ₘ,ₘ.. · H t.
  const rhs = new Float64Array(m);
  for (let i = 0; i < m; i++) {
    let s = qty[i];
    for (let j = 0; j < nb; j++) s -= top[i * nb + j] * ht[j];
    rhs[i] = s;
  }
  solveUpper(r, m, rhs);

  if (!Number.isFinite(g.gcv) || !w.every(Number.isFinite) || !rhs.every(Number.isFinite)) {
    throw new RbfieldError(
      `the ${opts.kernel} fit failed numerically (condition estimate ${fmtExp(condition)}); ` +
        `try more smoothing, another shape or another kernel`,
      ExitCode.numerical,
    );
  }
  return {
    kernel: opts.kernel,
    trend: opts.trend,
    epsilonScaled: opts.epsilonScaled,
    lambdaScaled: lambda,
    smoothingChoice,
    heldAtFloor,
    weights: w,
    residual,
    trendCoefficients: rhs,
    gcv: g.gcv * zs * zs,
    edf: g.edf,
    rss: g.rssScaled * zs * zs,
    condition,
    curve,
    warnings,
    state: { n, m, r, sqrtW: sw, wTilde, qr, tri, mu, h, y, u, v, kernel: opts.kernel, epsilonScaled: opts.epsilonScaled, b: reduced, a11, a12: reduced ? top : undefined },
  };
}

function fmtExp(v: number): string {
  return Number.isFinite(v) ? v.toExponential(2) : "infinite";
}

/** Check that the kernel can be used with the trend asked for; return a message if not. */
export function trendProblem(kernel: KernelName, trend: TrendName): string | undefined {
  const need = minimumTrend(kernel);
  if (trendTerms(trend) < trendTerms(need)) {
    return `${kernel} needs at least ${need} trend (${KERNEL_TABLE[kernel].why}); use ${opt("trend")} ${need} or a higher degree`;
  }
  return undefined;
}
