// Radial basis functions and polynomial trend. Kernels are written as functions of the squared
// distance ρ = r² (no square root in the hot loops) in centred and scaled coordinates.
import type { TrendName, KernelName } from "../types.ts";

export const KERNELS: readonly KernelName[] = ["thin-plate", "gaussian", "multiquadric", "inverse-multiquadric"];
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
  return kernel !== "thin-plate";
}

/**
 * Lowest trend a kernel needs to give a uniquely solvable, well-posed system: its order of
 * conditional positive definiteness (Micchelli 1986; Wendland 2005, ch. 8; Fasshauer 2007, ch. 8).
 * Thin-plate r² log r is CPD of order 2 → linear trend; the (negated) multiquadric is CPD of
 * order 1 → constant trend; Gaussian and inverse multiquadric are positive definite.
 */
export function minimumTrend(kernel: KernelName): TrendName {
  if (kernel === "thin-plate") return "linear";
  if (kernel === "multiquadric") return "constant";
  return "none";
}

/**
 * φ as a function of ρ = r² with shape ε (both in scaled units):
 *   thin-plate  r² log r = ½ ρ log ρ (Duchon 1977), 0 at r = 0
 *   gaussian    exp(−ε² r²)
 *   multiquadric −√(1 + ε² r²) (Hardy 1971; negated so that the kernel is CPD of order 1
 *               with positive sign, the same sign convention as scipy's RBFInterpolator)
 *   inverse-multiquadric 1/√(1 + ε² r²)
 */
export function kernelOfSquared(kernel: KernelName, epsilon: number): (rho: number) => number {
  const e2 = epsilon * epsilon;
  switch (kernel) {
    case "thin-plate":
      return (rho) => (rho > 0 ? 0.5 * rho * Math.log(rho) : 0);
    case "gaussian":
      return (rho) => Math.exp(-e2 * rho);
    case "multiquadric":
      return (rho) => -Math.sqrt(1 + e2 * rho);
    case "inverse-multiquadric":
      return (rho) => 1 / Math.sqrt(1 + e2 * rho);
  }
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
