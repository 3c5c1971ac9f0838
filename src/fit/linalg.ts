// Dense symmetric linear algebra on row-major Float64Array matrices, hand-written for speed
// (the fit's O(N³) steps live here). Algorithms follow Golub & Van Loan, "Matrix Computations",
// 4th ed. (2013): Householder reflections §5.1, tridiagonalisation §8.3.1, implicit symmetric QL
// (as in the EISPACK routine tql1), Cholesky §4.2.

import { choleskySplit, SPLIT_MIN, tridiagonalizeSplit } from "./tridiag_split.ts";

/** A Householder reflection H = I − β v vᵀ acting on indices [start, n). */
export interface Reflector {
  start: number;
  v: Float64Array; // length n − start
  beta: number;
}

/** Householder vector for x (GVL Alg. 5.1.1): H x = ∓‖x‖ e₁. */
export function householder(x: Float64Array): { v: Float64Array; beta: number; alpha: number } {
  const n = x.length;
  let scale = 0;
  for (let i = 0; i < n; i++) scale = Math.max(scale, Math.abs(x[i]));
  const v = new Float64Array(n);
  if (scale === 0) return { v, beta: 0, alpha: 0 };
  let sigma = 0;
  for (let i = 0; i < n; i++) {
    v[i] = x[i] / scale;
    sigma += v[i] * v[i];
  }
  const norm = Math.sqrt(sigma);
  const alpha = v[0] >= 0 ? -norm : norm; // H x = alpha·scale·e₁, sign chosen to avoid cancellation
  v[0] -= alpha;
  let s = 0;
  for (let i = 0; i < n; i++) s += v[i] * v[i];
  return { v, beta: s === 0 ? 0 : 2 / s, alpha: alpha * scale };
}

/** Apply H = I − β v vᵀ (acting on indices start…) to vector y in place. */
export function applyReflector(r: Reflector, y: Float64Array): void {
  const { start, v, beta } = r;
  if (beta === 0) return;
  let dot = 0;
  for (let i = 0; i < v.length; i++) dot += v[i] * y[start + i];
  const f = beta * dot;
  for (let i = 0; i < v.length; i++) y[start + i] -= f * v[i];
}

/**
 * Two-sided update A ← H A H of a full symmetric n×n matrix by one reflector (GVL §5.1.4):
 * p = β A v, w = p − (β/2)(vᵀp) v, A ← A − v wᵀ − w vᵀ. O(n²).
 */
export function reflectSymmetric(a: Float64Array, n: number, r: Reflector): void {
  const { start, v, beta } = r;
  if (beta === 0) return;
  const m = v.length;
  const p = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    let s = 0;
    const row = i * n + start;
    for (let k = 0; k < m; k++) s += a[row + k] * v[k];
    p[i] = beta * s;
  }
  let vp = 0;
  for (let k = 0; k < m; k++) vp += v[k] * p[start + k];
  const half = 0.5 * beta * vp;
  // w = p − half·v (v padded with zeros before start)
  const w = p;
  for (let k = 0; k < m; k++) w[start + k] -= half * v[k];
  for (let i = 0; i < n; i++) {
    const vi = i >= start ? v[i - start] : 0;
    const wi = w[i];
    const row = i * n;
    if (vi === 0) {
      for (let k = 0; k < m; k++) a[row + start + k] -= wi * v[k];
    } else {
      // vⱼ = 0 before start: the same operations, without a test per entry.
      for (let j = 0; j < start; j++) a[row + j] -= vi * w[j] + wi * 0;
      const r = row + start;
      for (let k = 0; k < m; k++) a[r + k] -= vi * w[start + k] + wi * v[k];
    }
  }
}

/**
 * Householder QR of a tall N×m matrix P (row-major), m ≤ N. Returns the m reflectors and the
 * m×m upper-triangular R (row-major). Qᵀ P = [R; 0].
 */
export function householderQR(p: Float64Array, nRows: number, m: number): { reflectors: Reflector[]; r: Float64Array } {
  const a = Float64Array.from(p);
  const reflectors: Reflector[] = [];
  for (let j = 0; j < m; j++) {
    const x = new Float64Array(nRows - j);
    for (let i = j; i < nRows; i++) x[i - j] = a[i * m + j];
    const h = householder(x);
    const refl: Reflector = { start: j, v: h.v, beta: h.beta };
    reflectors.push(refl);
    // apply to remaining columns
    for (let c = j; c < m; c++) {
      let dot = 0;
      for (let i = j; i < nRows; i++) dot += h.v[i - j] * a[i * m + c];
      const f = h.beta * dot;
      for (let i = j; i < nRows; i++) a[i * m + c] -= f * h.v[i - j];
    }
  }
  const r = new Float64Array(m * m);
  for (let i = 0; i < m; i++) for (let j = i; j < m; j++) r[i * m + j] = a[i * m + j];
  return { reflectors, r };
}

/**
 * Householder tridiagonalisation of a symmetric n×n matrix (GVL Alg. 8.3.1), using and
 * updating only the lower triangle. Returns diagonal d, sub-diagonal e (e[i] = T[i+1][i],
 * e[n−1] = 0) and the reflectors, so that Hᵀ A H = T with H = H₀H₁…H_{n−3}.
 * The input matrix is overwritten (below SPLIT_MIN; above it, left as it was). About (4/3)n³ flops.
 */
export function tridiagonalize(a: Float64Array, n: number): { d: Float64Array; e: Float64Array; reflectors: Reflector[] } {
  // Large matrices: each step's loops split between two threads (tridiag_split.ts; the same numbers
  // with or without the helper thread).
  if (n >= SPLIT_MIN) return tridiagonalizeSplit(a, n);
  const p = new Float64Array(n);
  return householderSteps(a, n, (start, m, v, beta) => {
    // p = β A₂₂ v using the lower triangle of the trailing block (lowerMatvecRows), then w (in p).
    p.fill(0, 0, m);
    lowerMatvecRows(a, n, start, v, 0, m, p);
    reflectorUpdateVector(p, v, m, beta);
    // A₂₂ ← A₂₂ − v wᵀ − w vᵀ on the lower triangle (lowerRank2Rows).
    lowerRank2Rows(a, n, start, v, p, 0, m);
  });
}

/**
 * The loop of tridiagonalize: for each column k the Householder vector of its part below the
 * diagonal, d and e, and `step(start, m, v, β)`, which must apply the two-sided update to the
 * trailing m × m block's lower triangle (rows and columns start…).
 */
export function householderSteps(
  a: Float64Array,
  n: number,
  step: (start: number, m: number, v: Float64Array, beta: number) => void,
): { d: Float64Array; e: Float64Array; reflectors: Reflector[] } {
  const d = new Float64Array(n);
  const e = new Float64Array(n);
  const reflectors: Reflector[] = [];
  for (let k = 0; k < n - 2; k++) {
    const start = k + 1;
    const m = n - start;
    const x = new Float64Array(m);
    for (let i = 0; i < m; i++) x[i] = a[(start + i) * n + k];
    const h = householder(x);
    reflectors.push({ start, v: h.v, beta: h.beta });
    d[k] = a[k * n + k];
    e[k] = h.beta === 0 ? x[0] : h.alpha;
    if (h.beta !== 0) step(start, m, h.v, h.beta);
  }
  if (n >= 2) {
    d[n - 2] = a[(n - 2) * n + n - 2];
    e[n - 2] = a[(n - 1) * n + n - 2];
  }
  if (n >= 1) d[n - 1] = a[(n - 1) * n + n - 1];
  e[n - 1] = 0;
  return { d, e, reflectors };
}

/** p = A₂₂v (its first m entries) → w = βp − ½β²(vᵀp)v in place (GVL §8.3.1), the update's vector. */
export function reflectorUpdateVector(p: Float64Array, v: Float64Array, m: number, beta: number): void {
  let vp = 0;
  for (let i = 0; i < m; i++) {
    p[i] *= beta;
    vp += v[i] * p[i];
  }
  const half = 0.5 * beta * vp;
  for (let i = 0; i < m; i++) p[i] -= half * v[i];
}

/**
 * Rows [from, to) of p += A₂₂v for the trailing block of tridiagonalize (rows and columns start…,
 * local indices), from its lower triangle: row i adds Σⱼ≤ᵢ aᵢⱼvⱼ to pᵢ and aᵢⱼvᵢ to every pⱼ, j < i.
 * Rows go four at a time, which gives four independent dot-product chains and shares the loads of v;
 * every sum keeps its order of operations (each pⱼ takes its rows in increasing order), so the bits
 * are those of one row at a time.
 */
export function lowerMatvecRows(a: Float64Array, n: number, start: number, v: Float64Array, from: number, to: number, p: Float64Array): void {
  let i = from;
  for (; i + 3 < to; i += 4) {
    const r0 = (start + i) * n + start, r1 = r0 + n, r2 = r1 + n, r3 = r2 + n;
    const v0 = v[i], v1 = v[i + 1], v2 = v[i + 2], v3 = v[i + 3];
    let s0 = 0, s1 = 0, s2 = 0, s3 = 0;
    for (let j = 0; j < i; j++) {
      const a0 = a[r0 + j], a1 = a[r1 + j], a2 = a[r2 + j], a3 = a[r3 + j], vj = v[j];
      s0 += a0 * vj;
      s1 += a1 * vj;
      s2 += a2 * vj;
      s3 += a3 * vj;
      let pj = p[j];
      pj += a0 * v0;
      pj += a1 * v1;
      pj += a2 * v2;
      pj += a3 * v3;
      p[j] = pj;
    }
    // The 4×4 diagonal block, row by row.
    p[i] += s0 + a[r0 + i] * v0;
    let t = a[r1 + i];
    s1 += t * v[i];
    p[i] += t * v1;
    p[i + 1] += s1 + a[r1 + i + 1] * v1;
    t = a[r2 + i];
    s2 += t * v[i];
    p[i] += t * v2;
    t = a[r2 + i + 1];
    s2 += t * v[i + 1];
    p[i + 1] += t * v2;
    p[i + 2] += s2 + a[r2 + i + 2] * v2;
    t = a[r3 + i];
    s3 += t * v[i];
    p[i] += t * v3;
    t = a[r3 + i + 1];
    s3 += t * v[i + 1];
    p[i + 1] += t * v3;
    t = a[r3 + i + 2];
    s3 += t * v[i + 2];
    p[i + 2] += t * v3;
    p[i + 3] += s3 + a[r3 + i + 3] * v3;
  }
  for (; i < to; i++) {
    const row = (start + i) * n + start;
    let s = 0;
    const vi = v[i];
    for (let j = 0; j < i; j++) {
      const aij = a[row + j];
      s += aij * v[j];
      p[j] += aij * vi;
    }
    p[i] += s + a[row + i] * vi;
  }
}

/**
 * Rows [q0, q1) of A₂₂ ← A₂₂ − v wᵀ − w vᵀ on the lower triangle of tridiagonalize's trailing block
 * (w in `p`), four rows at a time sharing the loads of w and v (every entry is updated once).
 */
export function lowerRank2Rows(a: Float64Array, n: number, start: number, v: Float64Array, p: Float64Array, q0: number, q1: number): void {
  let q = q0;
  for (; q + 3 < q1; q += 4) {
    const r0 = (start + q) * n + start, r1 = r0 + n, r2 = r1 + n, r3 = r2 + n;
    const v0 = v[q], w0 = p[q], v1 = v[q + 1], w1 = p[q + 1], v2 = v[q + 2], w2 = p[q + 2], v3 = v[q + 3], w3 = p[q + 3];
    for (let j = 0; j <= q; j++) {
      const pj = p[j], vj = v[j];
      a[r0 + j] -= v0 * pj + w0 * vj;
      a[r1 + j] -= v1 * pj + w1 * vj;
      a[r2 + j] -= v2 * pj + w2 * vj;
      a[r3 + j] -= v3 * pj + w3 * vj;
    }
    a[r1 + q + 1] -= v1 * p[q + 1] + w1 * v[q + 1];
    a[r2 + q + 1] -= v2 * p[q + 1] + w2 * v[q + 1];
    a[r2 + q + 2] -= v2 * p[q + 2] + w2 * v[q + 2];
    a[r3 + q + 1] -= v3 * p[q + 1] + w3 * v[q + 1];
    a[r3 + q + 2] -= v3 * p[q + 2] + w3 * v[q + 2];
    a[r3 + q + 3] -= v3 * p[q + 3] + w3 * v[q + 3];
  }
  for (; q < q1; q++) {
    const row = (start + q) * n + start;
    const vi = v[q];
    const wi = p[q];
    for (let j = 0; j <= q; j++) a[row + j] -= vi * p[j] + wi * v[j];
  }
}

/**
 * Columns [c0, c1) of X = L⁻¹ for lower-triangular L (row-major nb × nb; X zero there beforehand),
 * row by row: X[i,:] = (eᵢ − Σ_{k<i} L[i,k] X[k,:]) / L[i,i]. Rows go four at a time sharing the
 * loads of X[k,:]. Every entry takes its terms in increasing k and is then scaled, whatever the
 * column range, so columns computed in separate calls (threads) hold the bits of one call.
 */
export function lowerInverseColumns(l: Float64Array, x: Float64Array, nb: number, c0: number, c1: number): void {
  const update = (ri: number, kk: number, lik: number) => {
    const rk = kk * nb, top = Math.min(kk, c1 - 1);
    for (let j = c0; j <= top; j++) x[ri + j] -= lik * x[rk + j];
  };
  const finish = (i: number) => {
    const ri = i * nb;
    if (i < c1) x[ri + i] += 1;
    const inv = 1 / l[ri + i];
    const top = Math.min(i, c1 - 1);
    for (let j = c0; j <= top; j++) x[ri + j] *= inv;
  };
  let i = c0;
  for (; i + 3 < nb; i += 4) {
    const r0 = i * nb, r1 = r0 + nb, r2 = r1 + nb, r3 = r2 + nb;
    for (let kk = c0; kk < i; kk++) {
      const l0 = l[r0 + kk], l1 = l[r1 + kk], l2 = l[r2 + kk], l3 = l[r3 + kk];
      if (l0 !== 0 && l1 !== 0 && l2 !== 0 && l3 !== 0) {
        const rk = kk * nb, top = Math.min(kk, c1 - 1);
        for (let j = c0; j <= top; j++) {
          const xk = x[rk + j];
          x[r0 + j] -= l0 * xk;
          x[r1 + j] -= l1 * xk;
          x[r2 + j] -= l2 * xk;
          x[r3 + j] -= l3 * xk;
        }
      } else {
        if (l0 !== 0) update(r0, kk, l0);
        if (l1 !== 0) update(r1, kk, l1);
        if (l2 !== 0) update(r2, kk, l2);
        if (l3 !== 0) update(r3, kk, l3);
      }
    }
    // The 4×4 diagonal block, row by row.
    for (let q = 0; q < 4; q++) {
      const rq = r0 + q * nb;
      for (let kk = i; kk < i + q; kk++) if (l[rq + kk] !== 0) update(rq, kk, l[rq + kk]);
      finish(i + q);
    }
  }
  for (; i < nb; i++) {
    const ri = i * nb;
    for (let kk = c0; kk < i; kk++) if (l[ri + kk] !== 0) update(ri, kk, l[ri + kk]);
    finish(i);
  }
}

/** y ← Hᵀ y for H = H₀H₁…: apply H₀ first. */
export function applyReflectorsTransposed(reflectors: Reflector[], y: Float64Array): void {
  for (let k = 0; k < reflectors.length; k++) applyReflector(reflectors[k], y);
}

/** y ← H y for H = H₀H₁…: apply the last reflector first. */
export function applyReflectors(reflectors: Reflector[], y: Float64Array): void {
  for (let k = reflectors.length - 1; k >= 0; k--) applyReflector(reflectors[k], y);
}

/**
 * √(a² + b²). Math.hypot guards against overflow and underflow at several times the cost; here the
 * squares are formed directly and Math.hypot is used only when they could leave the safe range
 * (|a|, |b| beyond about 10¹⁴⁵ or both below about 10⁻¹⁴⁵), as EISPACK's pythag does by rescaling.
 */
export function pythag(a: number, b: number): number {
  const s = a * a + b * b;
  return s < 1e290 && s > 1e-290 ? Math.sqrt(s) : Math.hypot(a, b);
}

/**
 * Eigenvalues of a symmetric tridiagonal matrix by the root-free (rational) QL method with implicit
 * shifts: Reinsch 1973, "Algorithm 464: eigenvalues of a real, symmetric, tridiagonal matrix",
 * Comm. ACM 16, 689 (EISPACK tqlrat; GVL §8.3.5). It works on the squared off-diagonals, so a QL
 * sweep takes no square roots: about half the time of the tql1 form, to the same backward error
 * (measured against it: eigenvalues within 10⁻¹⁴·‖T‖). An off-diagonal is set aside as zero once its
 * square is below (ε·t)², t the largest |dᵢ| + |eᵢ| met so far. d: diagonal, e: sub-diagonal with
 * e[i] = T[i+1][i]. Returns the eigenvalues sorted ascending. O(n²).
 */
export function tridiagonalEigenvalues(dIn: Float64Array, eIn: Float64Array): Float64Array {
  const n = dIn.length;
  const d = Float64Array.from(dIn);
  const e2 = new Float64Array(n);
  for (let i = 0; i + 1 < n; i++) e2[i] = eIn[i] * eIn[i];
  let f = 0, t = 0, b = 0, c = 0;
  for (let l = 0; l < n; l++) {
    const h0 = Math.abs(d[l]) + Math.sqrt(e2[l]);
    if (t < h0) {
      t = h0;
      b = Number.EPSILON * t;
      c = b * b;
    }
    // Look for a negligible squared off-diagonal (e2[n − 1] = 0 ends the search).
    let m = l;
    while (m < n - 1 && e2[m] > c) m++;
    let iter = 0;
    while (m !== l) {
      if (iter++ === 100) throw new Error("tridiagonal eigenvalues did not converge");
      // Shift from the leading 2×2 block, subtracted from the whole remaining diagonal.
      const l1 = l + 1;
      let s = Math.sqrt(e2[l]);
      let g = d[l];
      let p = (d[l1] - g) / (2 * s);
      let r = pythag(p, 1);
      d[l] = s / (p + (p >= 0 ? r : -r));
      let h = g - d[l];
      for (let i = l1; i < n; i++) d[i] -= h;
      f += h;
      // Rational QL sweep from m up to l.
      g = d[m];
      if (g === 0) g = b;
      h = g;
      s = 0;
      for (let i = m - 1; i >= l; i--) {
        p = g * h;
        r = p + e2[i];
        e2[i + 1] = s * r;
        s = e2[i] / r;
        d[i + 1] = h + s * (h + d[i]);
        g = d[i] - e2[i] / g;
        if (g === 0) g = b;
        h = (g * p) / r;
      }
      e2[l] = s * g;
      d[l] = h;
      // Converged (with a guard against underflow in the test), else sweep again.
      if (h === 0 || Math.abs(e2[l]) <= Math.abs(c / h)) break;
      e2[l] = h * e2[l];
      if (e2[l] === 0) break;
    }
    d[l] += f;
  }
  return d.sort();
}

/** Solve (T + shift·I) x = b for symmetric tridiagonal T (Thomas algorithm; T + shift·I is SPD). */
export function solveTridiagonal(d: Float64Array, e: Float64Array, shift: number, b: Float64Array, out?: Float64Array): Float64Array {
  const n = d.length;
  const x = out ?? new Float64Array(n);
  const c = new Float64Array(n);
  let piv = d[0] + shift;
  x[0] = b[0] / piv;
  for (let i = 1; i < n; i++) {
    c[i - 1] = e[i - 1] / piv;
    piv = d[i] + shift - e[i - 1] * c[i - 1];
    x[i] = (b[i] - e[i - 1] * x[i - 1]) / piv;
  }
  for (let i = n - 2; i >= 0; i--) x[i] -= c[i] * x[i + 1];
  return x;
}

/**
 * In-place Cholesky factorisation A = L Lᵀ of a symmetric positive definite n×n matrix
 * (row-major, lower triangle used; L overwrites it). Returns false if a pivot is not positive.
 * Right-looking (outer-product) form, GVL Alg. 4.2.2 (a copy of column k makes the trailing update
 * run along rows): every entry receives aᵢⱼ − Σₖ lᵢₖlⱼₖ in increasing k, exactly the operations of
 * the dot-product form, but the updates of different entries are independent, which a long
 * dot-product chain is not.
 */
export function cholesky(a: Float64Array, n: number): boolean {
  // Large matrices: each column's trailing update split between two threads (tridiag_split.ts's
  // helper; every entry is updated once per column, so the bits are those of one thread).
  if (n >= SPLIT_MIN) return choleskySplit(a, n);
  const col = new Float64Array(n);
  for (let k = 0; k < n; k++) {
    if (!choleskyColumn(a, n, k, col)) return false;
    choleskyUpdateRows(a, n, k, col, k + 1, n);
  }
  return true;
}

/** Column k of the Cholesky factor in place (L[k][k] = √a, L[i][k] = a/L[k][k]), copied into col; false when a[k][k] ≤ 0. */
export function choleskyColumn(a: Float64Array, n: number, k: number, col: Float64Array): boolean {
  const s = a[k * n + k];
  if (!(s > 0)) return false;
  const lkk = Math.sqrt(s);
  a[k * n + k] = lkk;
  for (let i = k + 1; i < n; i++) {
    const l = a[i * n + k] / lkk;
    a[i * n + k] = l;
    col[i] = l;
  }
  return true;
}

/**
 * Rows [i0, i1) of the trailing update after column k: aᵢⱼ −= lᵢₖ lⱼₖ for k < j ≤ i, four rows at a
 * time sharing the loads of column k (each entry is updated once, whatever the rows given).
 */
export function choleskyUpdateRows(a: Float64Array, n: number, k: number, col: Float64Array, i0: number, i1: number): void {
  let i = i0;
  for (; i + 3 < i1; i += 4) {
    const r0 = i * n, r1 = r0 + n, r2 = r1 + n, r3 = r2 + n;
    const l0 = col[i], l1 = col[i + 1], l2 = col[i + 2], l3 = col[i + 3];
    for (let j = k + 1; j <= i; j++) {
      const cj = col[j];
      a[r0 + j] -= l0 * cj;
      a[r1 + j] -= l1 * cj;
      a[r2 + j] -= l2 * cj;
      a[r3 + j] -= l3 * cj;
    }
    a[r1 + i + 1] -= l1 * col[i + 1];
    a[r2 + i + 1] -= l2 * col[i + 1];
    a[r2 + i + 2] -= l2 * col[i + 2];
    a[r3 + i + 1] -= l3 * col[i + 1];
    a[r3 + i + 2] -= l3 * col[i + 2];
    a[r3 + i + 3] -= l3 * col[i + 3];
  }
  for (; i < i1; i++) {
    const ri = i * n;
    const lik = col[i];
    for (let j = k + 1; j <= i; j++) a[ri + j] -= lik * col[j];
  }
}

/** Solve the upper-triangular system R x = b (m×m, row-major) in place. */
export function solveUpper(r: Float64Array, m: number, b: Float64Array): void {
  for (let i = m - 1; i >= 0; i--) {
    let s = b[i];
    for (let k = i + 1; k < m; k++) s -= r[i * m + k] * b[k];
    b[i] = s / r[i * m + i];
  }
}
