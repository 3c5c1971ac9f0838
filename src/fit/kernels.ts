// Radial basis functions and the polynomial trend: the facts about each kernel in one table, and the
// kernel matrix. Kernels are written as functions of the squared distance ρ = r² (no square root in
// the hot loops) in centred and scaled coordinates. The evaluator (evaluate/global.ts) unrolls one
// loop per kernel for speed; test/fit.test.ts checks those loops against this table.
import type { KernelName, TrendName } from "../types.ts";

export interface KernelFacts {
  /** φ(ρ) for ρ = r² and ε² = e2 (scaled units). */
  phi: (rho: number, e2: number) => number;
  /** Does the kernel take a shape parameter ε? */
  hasShape: boolean;
  /**
   * Lowest trend that gives a uniquely solvable, well-posed system: the order of conditional positive
   * definiteness (Micchelli 1986; Wendland 2005, ch. 8; Fasshauer 2007, ch. 8).
   */
  minimumTrend: TrendName;
  /** Why that trend is needed, for messages. */
  why: string;
  /** The formula, for people. */
  text: string;
}

/**
 *   thin-plate  r² log r = ½ ρ log ρ (Duchon 1977), 0 at r = 0; CPD of order 2 → linear trend
 *   gaussian    exp(−ε² r²); positive definite
 *   multiquadric −√(1 + ε² r²) (Hardy 1971; negated so that the kernel is CPD of order 1 with
 *               positive sign, the same sign convention as scipy's RBFInterpolator) → constant trend
 *   inverse-multiquadric 1/√(1 + ε² r²); positive definite
 */
export const KERNEL_TABLE: Readonly<Record<KernelName, KernelFacts>> = {
  "thin-plate": {
    phi: (rho) => (rho > 0 ? 0.5 * rho * Math.log(rho) : 0),
    hasShape: false,
    minimumTrend: "linear",
    why: "the thin-plate spline is conditionally positive definite of order 2",
    text: "thin-plate spline r² log r",
  },
  gaussian: {
    phi: (rho, e2) => Math.exp(-e2 * rho),
    hasShape: true,
    minimumTrend: "none",
    why: "the Gaussian is positive definite",
    text: "Gaussian exp(−(εr)²)",
  },
  multiquadric: {
    phi: (rho, e2) => -Math.sqrt(1 + e2 * rho),
    hasShape: true,
    minimumTrend: "constant",
    why: "the multiquadric is conditionally positive definite of order 1",
    text: "multiquadric −√(1+(εr)²)",
  },
  "inverse-multiquadric": {
    phi: (rho, e2) => 1 / Math.sqrt(1 + e2 * rho),
    hasShape: true,
    minimumTrend: "none",
    why: "the inverse multiquadric is positive definite",
    text: "inverse multiquadric 1/√(1+(εr)²)",
  },
};

export const KERNELS: readonly KernelName[] = Object.keys(KERNEL_TABLE) as KernelName[];
export const TRENDS: readonly TrendName[] = ["none", "constant", "linear", "quadratic"];

/** Degree of the trend polynomial: none −1, constant 0, linear 1, quadratic 2. */
export function trendDegree(trend: TrendName): number {
  return TRENDS.indexOf(trend) - 1;
}

/** Number of trend terms in 2-D: degree d has (d+1)(d+2)/2 monomials. */
export function trendTerms(trend: TrendName): number {
  const d = trendDegree(trend);
  return d < 0 ? 0 : ((d + 1) * (d + 2)) / 2;
}

/** Does the kernel take a shape parameter ε? The thin-plate spline is scale-free. */
export function hasShape(kernel: KernelName): boolean {
  return KERNEL_TABLE[kernel].hasShape;
}

/** Lowest trend the kernel needs (see KernelFacts.minimumTrend). */
export function minimumTrend(kernel: KernelName): TrendName {
  return KERNEL_TABLE[kernel].minimumTrend;
}

/** φ as a function of ρ = r² with shape ε (both in scaled units). */
export function kernelOfSquared(kernel: KernelName, epsilon: number): (rho: number) => number {
  const e2 = epsilon * epsilon;
  const phi = KERNEL_TABLE[kernel].phi;
  return (rho) => phi(rho, e2);
}

/** Monomials of the trend at scaled point (u, v): 1, u, v, u², uv, v² (first `terms` of them). */
export function trendRow(u: number, v: number, terms: number, out: Float64Array, offset = 0): void {
  if (terms > 0) out[offset] = 1;
  if (terms > 1) {
    out[offset + 1] = u;
    out[offset + 2] = v;
  }
  if (terms > 3) {
    out[offset + 3] = u * u;
    out[offset + 4] = u * v;
    out[offset + 5] = v * v;
  }
}

/** Kernel matrix K_ij = φ(‖uᵢ − uⱼ‖²) for scaled coordinates (row-major, N×N). */
export function kernelMatrix(kernel: KernelName, epsilon: number, u: Float64Array, v: Float64Array): Float64Array {
  const n = u.length;
  const k = new Float64Array(n * n);
  const phi = kernelOfSquared(kernel, epsilon);
  for (let i = 0; i < n; i++) {
    const ui = u[i];
    const vi = v[i];
    k[i * n + i] = phi(0);
    for (let j = 0; j < i; j++) {
      const du = ui - u[j];
      const dv = vi - v[j];
      const val = phi(du * du + dv * dv);
      k[i * n + j] = val;
      k[j * n + i] = val;
    }
  }
  return k;
}

/**
 * Kernel matrix of the weighted system, K̃ = DKD with D = diag(√ωᵢ) (Wahba 1990, §1.3); plain K
 * when there are no weights.
 */
export function weightedKernelMatrix(kernel: KernelName, epsilon: number, u: Float64Array, v: Float64Array, sqrtW?: Float64Array): Float64Array {
  const k = kernelMatrix(kernel, epsilon, u, v);
  if (sqrtW) {
    const n = u.length;
    for (let i = 0; i < n; i++) for (let j = 0; j < n; j++) k[i * n + j] *= sqrtW[i] * sqrtW[j];
  }
  return k;
}
