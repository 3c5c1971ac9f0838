// Possible blunders: iterated data snooping with Pope's tau test on studentised leave-one-out residuals.
//
// Read as a Gaussian process (covariance b·φ, noise b·λ/ωᵢ, flat prior on the trend), the weighted
// leave-one-out residual of point i has variance b/G̃ᵢᵢ, with G̃ = Q₂(B + λI)⁻¹Q₂ᵀ and w̃ = G̃ỹ
// (Rasmussen & Williams 2006, eq. 5.12, with the trend projected out). So
//   τᵢ = w̃ᵢ / √(b̂ G̃ᵢᵢ),   b̂ = ỹᵀw̃ / ν,   ν = N − m,
// is exactly τ²/ν ~ Beta(1/2, (ν − 1)/2) under the model: Pope's tau (1976). Every point is tested
// at α₀ = 1 − (1 − α)^{1/n}, so that clean data raise no flag with probability about 1 − α.
//
// As in the adjustment of survey networks, the worst point is set aside and the rest are tested
// again (Baarda 1968's data snooping, one point at a time), so a blunder's neighbours are not flagged
// for it. Setting points D aside is an exact deletion with the same kernel, shape and λ: the inverse
// of a principal submatrix gives, for j outside D,
//   G̃'ⱼⱼ = G̃ⱼⱼ − cⱼᵀ G̃_DD⁻¹ cⱼ,   w̃'ⱼ = w̃ⱼ − cⱼᵀ G̃_DD⁻¹ w̃_D,   cⱼ = G̃_{D,j},
// so each round costs one column of G̃ (O(N²)) and no refit. The model itself keeps every point.
import type { FitState } from "./core.ts";
import { influenceComplementColumn } from "./influence.ts";
import { perTestLevel, tauCritical } from "./tau.ts";

export interface SnoopingResult {
  /** Family-wise level α of the test. */
  level: number;
  /**
   * τ per point (NaN where undefined): for points not flagged, against the data without the flagged
   * points; for a flagged point, its leave-one-out residual among the unflagged points and itself.
   */
  statistic: Float64Array;
  /** Indices of flagged points, in the order they were found (worst first). */
  flagged: number[];
  /** Critical value of the last round (the one that found no further blunder). */
  critical: number;
  /** True when the search stopped at `maxFlags` with points still beyond the critical value. */
  truncated: boolean;
}

/** Most points set aside (beyond this the data do not fit the model, and the summary says so). */
export const MAX_FLAGS = 100;

/**
 * Run the iterated tau test. `gii` is diag(G̃) of the fit. The deleted block G̃_DD = LLᵀ grows one
 * row per round (Cholesky append), with rⱼ = L⁻¹cⱼ and s = L⁻¹w̃_D kept per point, so that
 * G̃'ⱼⱼ = G̃ⱼⱼ − ‖rⱼ‖² and w̃'ⱼ = w̃ⱼ − rⱼᵀs cost O(k) per point and round.
 */
export function dataSnooping(state: FitState, lambda: number, gii: Float64Array, level = 0.05, maxFlags = Math.min(MAX_FLAGS, Math.floor(0.2 * state.n))): SnoopingResult {
  const { n, m, y, wTilde, sqrtW } = state;
  const yt = Float64Array.from(y, (v, i) => v * (sqrtW ? sqrtW[i] : 1));
  let gmax = 0;
  for (const g of gii) gmax = Math.max(gmax, Math.abs(g));
  const defined = Uint8Array.from(gii, (g) => (g > 1e-12 * gmax ? 1 : 0));
  const deleted: number[] = [];
  const isDeleted = new Uint8Array(n);
  const r: Float64Array[] = []; // r[a][j] = (L⁻¹ cⱼ)ₐ
  const s: number[] = []; // L⁻¹ w̃_D
  const lRows: Float64Array[] = []; // rows of L
  const gNew = Float64Array.from(gii), wNew = Float64Array.from(wTilde);
  const statistic = new Float64Array(n).fill(NaN);
  let critical = Infinity, truncated = false, scale = 0;
  for (;;) {
    let yw = 0;
    for (let j = 0; j < n; j++) if (!isDeleted[j]) yw += yt[j] * wNew[j];
    const tested = n - deleted.length;
    const nu = tested - m;
    scale = Math.max(yw, 0) / Math.max(nu, 1);
    critical = tauCritical(nu, perTestLevel(level, tested));
    let worst = -1;
    for (let j = 0; j < n; j++) {
      if (isDeleted[j]) continue;
      statistic[j] = defined[j] && gNew[j] > 0 && scale > 0 ? wNew[j] / Math.sqrt(scale * gNew[j]) : NaN;
      if (Math.abs(statistic[j]) > critical && (worst < 0 || Math.abs(statistic[j]) > Math.abs(statistic[worst]))) worst = j;
    }
    if (worst < 0) break;
    if (deleted.length >= maxFlags || nu - 1 < 3) {
      truncated = true;
      break;
    }
    // Append `worst` to the deleted block: new row of L is [r_worst, √G̃'_worst,worst].
    const k = deleted.length;
    const c = influenceComplementColumn(state, lambda, worst);
    const row = new Float64Array(k + 1);
    for (let a = 0; a < k; a++) row[a] = r[a][worst];
    row[k] = Math.sqrt(gNew[worst]);
    const rk = new Float64Array(n);
    for (let j = 0; j < n; j++) {
      let dot = 0;
      for (let a = 0; a < k; a++) dot += row[a] * r[a][j];
      rk[j] = (c[j] - dot) / row[k];
    }
    let dotS = 0;
    for (let a = 0; a < k; a++) dotS += row[a] * s[a];
    const sk = (wTilde[worst] - dotS) / row[k];
    r.push(rk);
    s.push(sk);
    lRows.push(row);
    deleted.push(worst);
    isDeleted[worst] = 1;
    for (let j = 0; j < n; j++) {
      gNew[j] -= rk[j] * rk[j];
      wNew[j] -= rk[j] * sk;
    }
  }
  // A flagged point d, tested among the clean points and itself: with A = G̃_DD, its leave-one-out
  // quantities are G̃''_dd = 1/(A⁻¹)_dd and w̃''_d = (A⁻¹w̃_D)_d/(A⁻¹)_dd (block inverse of A), so
  // τ_d = (A⁻¹w̃_D)_d / √((A⁻¹)_dd · b̂) with the clean points' scale b̂.
  const k = deleted.length;
  if (k > 0 && scale > 0) {
    // A⁻¹ = L⁻ᵀL⁻¹: X = L⁻¹ by forward substitution, then (A⁻¹)_dd = ‖X[:, d]‖², A⁻¹w̃_D = Xᵀs.
    const x = new Float64Array(k * k);
    for (let i = 0; i < k; i++) {
      for (let j = 0; j <= i; j++) {
        let v = i === j ? 1 : 0;
        for (let a = j; a < i; a++) v -= lRows[i][a] * x[a * k + j];
        x[i * k + j] = v / lRows[i][i];
      }
    }
    for (let d = 0; d < k; d++) {
      let diag = 0, aw = 0;
      for (let i = d; i < k; i++) {
        diag += x[i * k + d] * x[i * k + d];
        aw += x[i * k + d] * s[i];
      }
      statistic[deleted[d]] = defined[deleted[d]] ? aw / Math.sqrt(diag * scale) : NaN;
    }
  }
  return { level, statistic, flagged: deleted, critical, truncated };
}
