// Quantities of a fitted system that the diagnostics and the error bars need: the diagonal and columns
// of G = Q₂(B + λI)⁻¹Q₂ᵀ (the upper-left block of the bordered system's inverse), leave-one-out
// residuals (Rippa 1999), the process scale, and the whole bordered inverse for standard errors.
import { weightedKernelMatrix } from "./kernels.ts";
import type { FitState, KernelFit } from "./core.ts";
import {
  applyReflector,
  applyReflectors,
  applyReflectorsTransposed,
  cholesky,
  reflectSymmetric,
  solveTridiagonal,
} from "./linalg.ts";
import { lowerInverse } from "./inverse_split.ts";

/**
 * Zᵀ = Hᵀ Q₂ᵀ (nb × N, row-major): the orthonormal basis in which (B + λI) is tridiagonal.
 * With it G = Q₂(B+λI)⁻¹Q₂ᵀ = Z (T+λI)⁻¹ Zᵀ for any λ. O(N³) once.
 */
export function rotatedBasis(state: FitState): Float64Array {
  const { n, m, qr, tri } = state;
  const nb = n - m;
  const zt = new Float64Array(nb * n);
  const col = new Float64Array(n);
  // Q₂ᵀ: column j is (Qᵀ eⱼ) rows m…; Q has m reflectors so this is O(N² m).
  for (let j = 0; j < n; j++) {
    col.fill(0);
    col[j] = 1;
    for (const refl of qr) applyReflector(refl, col);
    for (let i = 0; i < nb; i++) zt[i * n + j] = col[m + i];
  }
  // Apply Hᵀ = … H₁ H₀ to every column, row-block style for contiguous access.
  const dots = new Float64Array(n);
  for (const refl of tri.reflectors) {
    const { start, v, beta } = refl;
    if (beta === 0) continue;
    dots.fill(0);
    for (let i = 0; i < v.length; i++) {
      const vi = v[i];
      if (vi === 0) continue;
      const rowOff = (start + i) * n;
      for (let j = 0; j < n; j++) dots[j] += vi * zt[rowOff + j];
    }
    for (let i = 0; i < v.length; i++) {
      const f = beta * v[i];
      if (f === 0) continue;
      const rowOff = (start + i) * n;
      for (let j = 0; j < n; j++) zt[rowOff + j] -= f * dots[j];
    }
  }
  return zt;
}

/** Diagonal of G = Z (T+λI)⁻¹ Zᵀ: Gᵢᵢ = zᵢᵀ (T+λI)⁻¹ zᵢ. O(N²) given Zᵀ. */
export function influenceComplementDiagonal(state: FitState, zt: Float64Array, lambda: number): Float64Array {
  const { n, m, tri } = state;
  const nb = n - m;
  const gii = new Float64Array(n);
  const zi = new Float64Array(nb);
  const sol = new Float64Array(nb);
  for (let i = 0; i < n; i++) {
    for (let k = 0; k < nb; k++) zi[k] = zt[k * n + i];
    solveTridiagonal(tri.d, tri.e, lambda, zi, sol);
    let s = 0;
    for (let k = 0; k < nb; k++) s += zi[k] * sol[k];
    gii[i] = s;
  }
  return gii;
}

/**
 * diag(G̃) of a fit, by the Cholesky route (or the tridiagonal one when B + λI is not numerically
 * positive definite). `factor.l` receives the Cholesky factor when that route was taken.
 */
export function influenceDiagonal(fit: KernelFit, factor?: { l?: Float64Array }): Float64Array {
  return influenceComplementDiagonalCholesky(fit.state, fit.lambdaScaled, factor) ??
    influenceComplementDiagonal(fit.state, rotatedBasis(fit.state), fit.lambdaScaled);
}

/**
 * Column i of G̃ = Q₂ H (T+λI)⁻¹ Hᵀ Q₂ᵀ from the fit's factors, O(N²): the data snooping's exact
 * deletion of points needs a few columns, never the whole matrix.
 */
export function influenceComplementColumn(state: FitState, lambda: number, i: number): Float64Array {
  const { n, m, qr, tri } = state;
  const col = new Float64Array(n);
  col[i] = 1;
  for (const refl of qr) applyReflector(refl, col);
  const z = col.slice(m);
  applyReflectorsTransposed(tri.reflectors, z);
  const t = solveTridiagonal(tri.d, tri.e, lambda, z);
  applyReflectors(tri.reflectors, t);
  const g = new Float64Array(n);
  g.set(t, m);
  for (let j = qr.length - 1; j >= 0; j--) applyReflector(qr[j], g);
  return g;
}

/**
 * Process scale b̂ = ỹᵀw̃ / (N − m) in scaled units: the fit read as a Gaussian process with covariance
 * b·φ, noise variance b·λ/ωᵢ and a flat prior on the trend, b̂ is the maximum-likelihood scale of the
 * N − m trend-free contrasts Q₂ᵀỹ ~ N(0, b(B + λI)); b̂·λ = ỹᵀ(I − A)ỹ/(N − m) is Wahba's generalized
 * maximum likelihood variance (Wahba 1985, Ann. Statist. 13). Unlike RSS/λ it does not vanish for an
 * interpolating fit (λ → 0), where it is the kriging sill estimate.
 */
export function processScale(state: FitState): number {
  const { n, m, y, wTilde, sqrtW } = state;
  let yw = 0;
  for (let i = 0; i < n; i++) yw += y[i] * (sqrtW ? sqrtW[i] : 1) * wTilde[i];
  return Math.max(yw, 0) / Math.max(n - m, 1);
}

/** Leave-one-out residuals eᵢ = wᵢ / Gᵢᵢ (Rippa 1999), in value units; G from the weighted system. */
export function leaveOneOutResiduals(fit: KernelFit, zs: number, gii: Float64Array = influenceDiagonal(fit)): Float64Array {
  const e = new Float64Array(gii.length);
  // eᵢ = (yᵢ − fᵢ)/(1 − Aᵢᵢ) = w̃ᵢ / (Dᵢ G̃ᵢᵢ) for the weighted system (D = I unweighted).
  const sw = fit.state.sqrtW;
  let gmax = 0;
  for (const g of gii) gmax = Math.max(gmax, Math.abs(g));
  for (let i = 0; i < e.length; i++) {
    // Gᵢᵢ ≈ 0: without point i the others cannot carry the trend, so its leave-one-out
    // residual is undefined (NaN; left out of the RMSE and reported).
    e[i] = gii[i] > 1e-12 * gmax ? (fit.state.wTilde[i] / ((sw ? sw[i] : 1) * gii[i])) * zs : NaN;
  }
  return e;
}

/**
 * diag(G), G = Q₂(B+λI)⁻¹Q₂ᵀ, in about (2/3)n³ flops: Cholesky B + λI = LLᵀ, L⁻¹ explicitly, and the
 * compact WY form Q = I − V S Vᵀ of the trend's m reflectors (Schreiber & Van Loan 1989), so that
 * L⁻¹Q₂ᵀ = [0 | L⁻¹] − U Vᵀ with U = L⁻¹V₂Sᵀ (rank m). Then for column i (j = i − m):
 *   Gᵢᵢ = ‖L⁻¹eⱼ‖² − 2 (L⁻ᵀU)ⱼ·vᵢ + vᵢᵀ(UᵀU)vᵢ   (the first two terms only when i ≥ m).
 * Returns undefined when B + λI is not numerically positive definite (the caller falls back).
 * `factor.l` receives L (lower triangle, row-major (n−m)×(n−m)), which standard errors reuse.
 */
export function influenceComplementDiagonalCholesky(state: FitState, lambda: number, factor?: { l?: Float64Array }): Float64Array | undefined {
  const { n, m, qr } = state;
  const nb = n - m;
  // The lower triangle of B = Q₂ᵀK̃Q₂: kept by the fit, or rebuilt (the same operations, the same bits).
  const l = new Float64Array(nb * nb);
  if (state.b) {
    for (let i = 0; i < nb; i++) l.set(state.b.subarray(i * nb, i * nb + i + 1), i * nb);
  } else {
    const k = weightedKernelMatrix(state.kernel, state.epsilonScaled, state.u, state.v, state.sqrtW);
    for (const refl of qr) reflectSymmetric(k, n, refl);
    for (let i = 0; i < nb; i++) l.set(k.subarray((m + i) * n + m, (m + i) * n + m + i + 1), i * nb);
  }
  for (let i = 0; i < nb; i++) l[i * nb + i] += lambda;
  if (!cholesky(l, nb)) return undefined;
  if (factor) factor.l = l;
  // X = L⁻¹ (lowerInverseColumns; large ones by column blocks on two threads, the same bits).
  const x = lowerInverse(l, nb);
  const colNorm = new Float64Array(nb);
  for (let i = 0; i < nb; i++) {
    const ri = i * nb;
    for (let j = 0; j <= i; j++) colNorm[j] += x[ri + j] * x[ri + j];
  }
  // Compact WY: V (N×m, row-major), S (m×m upper): S_new = [[S, −β S Vᵀv], [0, β]].
  const vm = new Float64Array(n * m);
  const sm = new Float64Array(m * m);
  qr.forEach((refl, j) => {
    for (let i = 0; i < refl.v.length; i++) vm[(refl.start + i) * m + j] = refl.v[i];
    const vtv = new Float64Array(j);
    for (let a = 0; a < j; a++) {
      let s = 0;
      for (let i = 0; i < n; i++) s += vm[i * m + a] * vm[i * m + j];
      vtv[a] = s;
    }
    for (let a = 0; a < j; a++) {
      let s = 0;
      for (let b = a; b < j; b++) s += sm[a * m + b] * vtv[b];
      sm[a * m + j] = -refl.beta * s;
    }
    sm[j * m + j] = refl.beta;
  });
  // U = L⁻¹ (V₂ Sᵀ), nb×m.
  const v2s = new Float64Array(nb * m);
  for (let i = 0; i < nb; i++) {
    for (let a = 0; a < m; a++) {
      let s = 0;
      for (let b = 0; b < m; b++) s += vm[(m + i) * m + b] * sm[a * m + b];
      v2s[i * m + a] = s;
    }
  }
  const um = new Float64Array(nb * m);
  for (let i = 0; i < nb; i++) {
    const ri = i * nb;
    for (let kk = 0; kk <= i; kk++) {
      const xik = x[ri + kk];
      if (xik === 0) continue;
      for (let a = 0; a < m; a++) um[i * m + a] += xik * v2s[kk * m + a];
    }
  }
  // Z = L⁻ᵀ U = Xᵀ U, nb×m; UᵀU, m×m.
  const zm = new Float64Array(nb * m);
  for (let i = 0; i < nb; i++) {
    const ri = i * nb;
    for (let j = 0; j <= i; j++) {
      const xij = x[ri + j];
      if (xij === 0) continue;
      for (let a = 0; a < m; a++) zm[j * m + a] += xij * um[i * m + a];
    }
  }
  const utu = new Float64Array(m * m);
  for (let i = 0; i < nb; i++) for (let a = 0; a < m; a++) for (let b = 0; b < m; b++) utu[a * m + b] += um[i * m + a] * um[i * m + b];
  const gii = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    let quad = 0;
    for (let a = 0; a < m; a++) for (let b = 0; b < m; b++) quad += vm[i * m + a] * utu[a * m + b] * vm[i * m + b];
    let val = quad;
    if (i >= m) {
      const j = i - m;
      let cross = 0;
      for (let a = 0; a < m; a++) cross += zm[j * m + a] * vm[i * m + a];
      val += colNorm[j] - 2 * cross;
    }
    gii[i] = val;
  }
  return gii;
}


/**
 * Pieces of the inverse of the bordered system M̃ = [K̃ + λI, P̃; P̃ᵀ, 0] (K̃ = DKD, P̃ = DP):
 * M̃⁻¹ = [G, W; Wᵀ, C] with G = Q₂(B+λI)⁻¹Q₂ᵀ, F = Q₁R⁻ᵀ, W = F − G(K̃+λI)F, C = −Fᵀ(K̃+λI)W.
 * Then for s = [D k(x); p(x)], sᵀM̃⁻¹s = kᵀGk + 2kᵀWp + pᵀCp (block inverse of a saddle-point
 * matrix; Benzi, Golub & Liesen 2005, §3). O(N³) once; O(N²) per point.
 */
export interface BorderedInverse {
  n: number;
  m: number;
  g: Float64Array; // N×N
  w: Float64Array; // N×m
  c: Float64Array; // m×m
}

export function borderedInverse(fit: KernelFit, u: Float64Array, v: Float64Array): BorderedInverse {
  const st = fit.state;
  const { n, m, tri, qr, r } = st;
  const nb = n - m;
  const lambda = fit.lambdaScaled;
  const zt = rotatedBasis(st);
  // Y = (T+λI)⁻¹ Zᵀ column by column, then G = Z Y.
  const yMat = new Float64Array(nb * n);
  const col = new Float64Array(nb);
  const sol = new Float64Array(nb);
  for (let j = 0; j < n; j++) {
    for (let k = 0; k < nb; k++) col[k] = zt[k * n + j];
    solveTridiagonal(tri.d, tri.e, lambda, col, sol);
    for (let k = 0; k < nb; k++) yMat[k * n + j] = sol[k];
  }
  const g = new Float64Array(n * n);
  for (let k = 0; k < nb; k++) {
    const zRow = k * n;
    for (let i = 0; i < n; i++) {
      const zki = zt[zRow + i];
      if (zki === 0) continue;
      const gRow = i * n;
      for (let j = 0; j < n; j++) g[gRow + j] += zki * yMat[zRow + j];
    }
  }
  // F = Q₁R⁻ᵀ: column j is Q [R⁻ᵀeⱼ; 0].
  const f = new Float64Array(n * m);
  const t = new Float64Array(n);
  for (let j = 0; j < m; j++) {
    t.fill(0);
    // forward substitution with Rᵀ (lower triangular)
    for (let i = 0; i < m; i++) {
      let s = i === j ? 1 : 0;
      for (let k = 0; k < i; k++) s -= r[k * m + i] * t[k];
      t[i] = s / r[i * m + i];
    }
    for (let q = qr.length - 1; q >= 0; q--) applyReflector(qr[q], t);
    for (let i = 0; i < n; i++) f[i * m + j] = t[i];
  }
  // KF = (K̃ + λI) F
  const kt = weightedKernelMatrix(fit.kernel, fit.epsilonScaled, u, v, st.sqrtW);
  const kf = new Float64Array(n * m);
  for (let i = 0; i < n; i++) {
    for (let k = 0; k < n; k++) {
      const a = kt[i * n + k] + (i === k ? lambda : 0);
      if (a === 0) continue;
      for (let j = 0; j < m; j++) kf[i * m + j] += a * f[k * m + j];
    }
  }
  // W = F − G·KF; C = −KFᵀ W
  const w = Float64Array.from(f);
  for (let i = 0; i < n; i++) {
    for (let k = 0; k < n; k++) {
      const gik = g[i * n + k];
      if (gik === 0) continue;
      for (let j = 0; j < m; j++) w[i * m + j] -= gik * kf[k * m + j];
    }
  }
  const c = new Float64Array(m * m);
  for (let a = 0; a < m; a++) {
    for (let b = 0; b < m; b++) {
      let s = 0;
      for (let i = 0; i < n; i++) s += kf[i * m + a] * w[i * m + b];
      c[a * m + b] = -s;
    }
  }
  return { n, m, g, w, c };
}

/** sᵀM̃⁻¹s for s = [k̃; p]: kᵀGk + 2kᵀWp + pᵀCp. */
export function borderedQuadratic(inv: BorderedInverse, k: Float64Array, p: Float64Array, gk?: Float64Array): number {
  const { n, m, g, w, c } = inv;
  let q = 0;
  for (let i = 0; i < n; i++) {
    let s = 0;
    const row = i * n;
    for (let j = 0; j < n; j++) s += g[row + j] * k[j];
    if (gk) gk[i] = s;
    q += k[i] * s;
  }
  for (let i = 0; i < n; i++) {
    let s = 0;
    for (let j = 0; j < m; j++) s += w[i * m + j] * p[j];
    q += 2 * k[i] * s;
  }
  for (let a = 0; a < m; a++) for (let b = 0; b < m; b++) q += p[a] * c[a * m + b] * p[b];
  return q;
}
