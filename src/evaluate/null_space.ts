// The kriging variance of an RBF fit with a polynomial trend by the null-space method (Golub & Van
// Loan §12.1): one Cholesky factor of the system projected off the trend, shared by the global
// method's standard errors (stderr.ts) and the local method's patches (local_stderr.ts).
//
// The fit solves M [w; c] = [Dy; 0] with M = [DKD + λI, DP; (DP)ᵀ, 0] (D = Ω^½, K the kernel matrix,
// P the trend basis). With the trend's QR factorisation DP = Q[R; 0] and Â = Qᵀ(DKD + λI)Q in blocks
// A₁₁ (m×m), A₂₁ and B + λI = A₂₂ = LLᵀ, for s = [D k(x); p(x)], t = Qᵀ D k(x) and a₁ = R⁻ᵀ p(x),
//   sᵀM⁻¹s = 2 t₁ᵀa₁ − a₁ᵀA₁₁a₁ + ‖L⁻¹(t₂ − A₂₁a₁)‖²,
// and the process scale b̂ = ỹᵀw̃/(n − m) = ‖L⁻¹ (Qᵀ D y)₂‖²/(n − m) (processScale in fit/influence.ts).
// The standard error of the estimate at x is then √(b̂ (φ(0) − sᵀM⁻¹s)) in scaled units (universal
// kriging with generalised covariance b·φ; Rasmussen & Williams 2006, eq. 2.42). Cost: (n − m)³/6
// multiply-adds once (the factorisation), about (n − m)²/2 per place (one forward substitution).
import { applyReflector, cholesky, householderQR, type Reflector, reflectSymmetric } from "../fit/linalg.ts";
import type { FitState } from "../fit/core.ts";
import { trendRow, weightedKernelMatrix } from "../fit/kernels.ts";
import type { KernelName } from "../types.ts";

/** A system's factors by the Cholesky route (see the top of this file), with its process scale b̂. */
export interface CholeskyFactor {
  kind: "cholesky";
  n: number;
  nb: number;
  m: number;
  qr: Reflector[];
  rInv: Float64Array;
  a11: Float64Array;
  a21: Float64Array;
  l: Float64Array;
  b: number;
  bytes: number;
}

/** What the factorisation needs: the fit's points, values and settings, all in its scaled frame. */
export interface SystemOfFit {
  kernel: KernelName;
  /** Shape ε in the scaled frame (1 for the thin-plate spline). */
  epsilonScaled: number;
  u: Float64Array;
  v: Float64Array;
  /** √ωᵢ, or undefined when every weight is 1. */
  sqrtW: Float64Array | undefined;
  /** Values as fitted (centred and scaled). */
  y: Float64Array;
  /** λ in the scaled frame. */
  lambda: number;
  /** Trend terms. */
  m: number;
}

/** R⁻¹ of an m×m upper-triangular R (row-major), so that a₁ = R⁻ᵀp costs m² per place. */
function upperInverse(r: Float64Array, m: number): Float64Array {
  const rInv = new Float64Array(m * m);
  for (let c = 0; c < m; c++) {
    for (let i = c; i >= 0; i--) {
      let s = i === c ? 1 : 0;
      for (let t = i + 1; t <= c; t++) s -= r[i * m + t] * rInv[t * m + c];
      rInv[i * m + c] = s / r[i * m + i];
    }
  }
  return rInv;
}

/** Forward substitution L z = r for lower-triangular L (row-major nb×nb). */
function forward(l: Float64Array, nb: number, r: Float64Array): Float64Array {
  const z = new Float64Array(nb);
  for (let i = 0; i < nb; i++) {
    let s = r[i];
    const row = i * nb;
    for (let t = 0; t < i; t++) s -= l[row + t] * z[t];
    z[i] = s / l[row + i];
  }
  return z;
}

/**
 * Factorise a fitted system by the Cholesky route: the trend's QR factorisation, Qᵀ(DKD + λI)Q, the
 * Cholesky factor of its trailing block (two threads from SPLIT_MIN, linalg.ts cholesky) and b̂.
 * Undefined when B + λI is not numerically positive definite.
 */
export function choleskyFactorOf(sys: SystemOfFit): CholeskyFactor | undefined {
  const { kernel, epsilonScaled, u, v, sqrtW: sw, y, lambda, m } = sys;
  const n = u.length, nb = n - m;
  const row = new Float64Array(Math.max(m, 1));
  const p = new Float64Array(n * m);
  for (let i = 0; i < n; i++) {
    trendRow(u[i], v[i], m, row);
    for (let t = 0; t < m; t++) p[i * m + t] = row[t] * (sw ? sw[i] : 1);
  }
  const { reflectors: qr, r } = householderQR(p, n, m);
  let k: Float64Array | null = weightedKernelMatrix(kernel, epsilonScaled, u, v, sw);
  for (let i = 0; i < n; i++) k[i * n + i] += lambda;
  for (const refl of qr) reflectSymmetric(k, n, refl);
  const a11 = new Float64Array(m * m), a21 = new Float64Array(nb * m), l = new Float64Array(nb * nb);
  for (let i = 0; i < m; i++) for (let t = 0; t < m; t++) a11[i * m + t] = k[i * n + t];
  for (let i = 0; i < nb; i++) {
    for (let t = 0; t < m; t++) a21[i * m + t] = k[(m + i) * n + t];
    for (let t = 0; t <= i; t++) l[i * nb + t] = k[(m + i) * n + m + t];
  }
  k = null; // the kernel matrix may go before the factorisation (large systems)
  if (!cholesky(l, nb)) return undefined;
  const rInv = upperInverse(r, m);
  // b̂ = ‖L⁻¹ (Qᵀ D y)₂‖² / (n − m).
  const qy = Float64Array.from(y);
  if (sw) for (let i = 0; i < n; i++) qy[i] *= sw[i];
  for (const refl of qr) applyReflector(refl, qy);
  const z = forward(l, nb, qy.subarray(m));
  let zz = 0;
  for (let i = 0; i < nb; i++) zz += z[i] * z[i];
  const b = Math.max(zz, 0) / Math.max(n - m, 1);
  const bytes = 8 * (nb * nb + nb * m + 2 * m * m + m * n);
  return { kind: "cholesky", n, nb, m, qr, rInv, a11, a21, l, b, bytes };
}

/**
 * A local patch's Cholesky-route factors from its own fit, without refactorising: the fit keeps
 * A₁₁ = Q₁ᵀK̃Q₁, A₁₂ and B (fit/core.ts, keepReduced) and factorised B + λI = LLᵀ for the
 * leave-one-out diagonal (influence.ts); the blocks of Qᵀ(K̃ + λI)Q are A₁₁ + λI, A₂₁ = A₁₂ᵀ and
 * B + λI (Q is orthogonal). b̂ is the fit's process scale (processScale, the same quantity).
 */
export function factorFromFit(state: FitState, lambda: number, l: Float64Array, b: number): CholeskyFactor {
  const { n, m, qr, r, a11: a, a12 } = state;
  const nb = n - m;
  const a11 = Float64Array.from(a!);
  for (let i = 0; i < m; i++) a11[i * m + i] += lambda;
  const a21 = new Float64Array(nb * m);
  for (let i = 0; i < nb; i++) for (let t = 0; t < m; t++) a21[i * m + t] = a12![t * nb + i];
  return { kind: "cholesky", n, nb, m, qr, rInv: upperInverse(r, m), a11, a21, l, b, bytes: 0 };
}

/**
 * The trend's part of sᵀM⁻¹s for one place, 2 t₁ᵀa₁ − a₁ᵀA₁₁a₁: `k` becomes t = Qᵀk and `a1` gets
 * a₁ = R⁻ᵀp (p in `tr`); shared by choleskyQuadratic and choleskyQuadraticBlock.
 */
function trendPart(f: CholeskyFactor, k: Float64Array, tr: Float64Array, a1: Float64Array): number {
  const m = f.m;
  for (const refl of f.qr) applyReflector(refl, k);
  let q = 0;
  for (let i = 0; i < m; i++) {
    let s = 0;
    for (let t = 0; t <= i; t++) s += f.rInv[t * m + i] * tr[t];
    a1[i] = s;
    q += 2 * k[i] * s;
  }
  for (let i = 0; i < m; i++) for (let t = 0; t < m; t++) q -= a1[i] * f.a11[i * m + t] * a1[t];
  return q;
}

/**
 * sᵀM⁻¹s = 2 t₁ᵀa₁ − a₁ᵀA₁₁a₁ + ‖L⁻¹(t₂ − A₂₁a₁)‖² for s = [k; p] (the top of this file); `k` is
 * overwritten by Qᵀk, `a1` (m) and `z` (≥ n − m) are scratch.
 */
export function choleskyQuadratic(f: CholeskyFactor, k: Float64Array, tr: Float64Array, a1: Float64Array, z: Float64Array): number {
  const m = f.m;
  let q = trendPart(f, k, tr, a1);
  const nb = f.nb, l = f.l;
  for (let i = 0; i < nb; i++) {
    let s = k[m + i];
    for (let t = 0; t < m; t++) s -= f.a21[i * m + t] * a1[t];
    const row = i * nb;
    for (let t = 0; t < i; t++) s -= l[row + t] * z[t];
    z[i] = s / l[row + i];
    q += z[i] * z[i];
  }
  return q;
}

/** Places per block of choleskyQuadraticBlock. */
export const PLACE_BLOCK = 4;

/**
 * choleskyQuadratic at PLACE_BLOCK places at once (k: PLACE_BLOCK × n, place b's kernel vector at
 * b·n; tr: PLACE_BLOCK × m), into q: the forward substitution reads each row of L once for all of
 * them (a large L does not fit the cache, and one place at a time streams it from memory every time).
 * Every place's numbers take the same operations in the same order as choleskyQuadratic, so the
 * results are bit for bit the same. `k` is overwritten; `z` (PLACE_BLOCK × (n − m)) is scratch.
 * Unused places of a partial block must hold finite numbers (zeros will do).
 */
export function choleskyQuadraticBlock(f: CholeskyFactor, k: Float64Array, tr: Float64Array, q: Float64Array, a1: Float64Array, z: Float64Array): void {
  const { m, n, nb, l, a21 } = f;
  for (let b = 0; b < PLACE_BLOCK; b++) {
    q[b] = trendPart(f, k.subarray(b * n, b * n + n), tr.subarray(b * m, b * m + m), a1.subarray(b * m, b * m + m));
  }
  // z is interleaved: z[t·4 + b] is place b's t-th entry.
  const n1 = n, n2 = 2 * n, n3 = 3 * n, m1 = m, m2 = 2 * m, m3 = 3 * m;
  let q0 = q[0], q1 = q[1], q2 = q[2], q3 = q[3];
  for (let i = 0; i < nb; i++) {
    let s0 = k[m + i], s1 = k[n1 + m + i], s2 = k[n2 + m + i], s3 = k[n3 + m + i];
    for (let t = 0; t < m; t++) {
      const c = a21[i * m + t];
      s0 -= c * a1[t];
      s1 -= c * a1[m1 + t];
      s2 -= c * a1[m2 + t];
      s3 -= c * a1[m3 + t];
    }
    const row = i * nb;
    for (let t = 0; t < i; t++) {
      const lt = l[row + t], o = 4 * t;
      s0 -= lt * z[o];
      s1 -= lt * z[o + 1];
      s2 -= lt * z[o + 2];
      s3 -= lt * z[o + 3];
    }
    const d = l[row + i], o = 4 * i;
    const z0 = (z[o] = s0 / d), z1 = (z[o + 1] = s1 / d), z2 = (z[o + 2] = s2 / d), z3 = (z[o + 3] = s3 / d);
    q0 += z0 * z0;
    q1 += z1 * z1;
    q2 += z2 * z2;
    q3 += z3 * z3;
  }
  q[0] = q0, q[1] = q1, q[2] = q2, q[3] = q3;
}
