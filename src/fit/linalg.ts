// Dense symmetric linear algebra on row-major Float64Array matrices, hand-written for speed
// (the fit's O(N³) steps live here). Algorithms follow Golub & Van Loan, "Matrix Computations",
// 4th ed. (2013): Householder reflections §5.1, tridiagonalisation §8.3.1, implicit symmetric QL
// (as in the EISPACK routine tql1), Cholesky §4.2.

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
      for (let j = 0; j < n; j++) {
        const vj = j >= start ? v[j - start] : 0;
        a[row + j] -= vi * w[j] + wi * vj;
      }
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
 * The input matrix is overwritten. About (4/3)n³ flops.
 */
export function tridiagonalize(a: Float64Array, n: number): { d: Float64Array; e: Float64Array; reflectors: Reflector[] } {
  const d = new Float64Array(n);
  const e = new Float64Array(n);
  const reflectors: Reflector[] = [];
  const p = new Float64Array(n);
  for (let k = 0; k < n - 2; k++) {
    const start = k + 1;
    const m = n - start;
    const x = new Float64Array(m);
    for (let i = 0; i < m; i++) x[i] = a[(start + i) * n + k];
    const h = householder(x);
    reflectors.push({ start, v: h.v, beta: h.beta });
    d[k] = a[k * n + k];
    e[k] = h.beta === 0 ? x[0] : h.alpha;
    if (h.beta === 0) continue;
    const v = h.v;
    const beta = h.beta;
    // p = β A₂₂ v using the lower triangle of the trailing block
    p.fill(0, 0, m);
    for (let i = 0; i < m; i++) {
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
    let vp = 0;
    for (let i = 0; i < m; i++) {
      p[i] *= beta;
      vp += v[i] * p[i];
    }
    const half = 0.5 * beta * vp;
    for (let i = 0; i < m; i++) p[i] -= half * v[i];
    // A₂₂ ← A₂₂ − v wᵀ − w vᵀ on the lower triangle (w stored in p)
    for (let i = 0; i < m; i++) {
      const row = (start + i) * n + start;
      const vi = v[i];
      const wi = p[i];
      for (let j = 0; j <= i; j++) a[row + j] -= vi * p[j] + wi * v[j];
    }
  }
  if (n >= 2) {
    d[n - 2] = a[(n - 2) * n + n - 2];
    e[n - 2] = a[(n - 1) * n + n - 2];
  }
  if (n >= 1) d[n - 1] = a[(n - 1) * n + n - 1];
  e[n - 1] = 0;
  return { d, e, reflectors };
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
 * Eigenvalues of a symmetric tridiagonal matrix by the implicit QL method with Wilkinson-type
 * shifts (EISPACK tql1; GVL §8.3.5). d: diagonal, e: sub-diagonal with e[i] = T[i+1][i].
 * Returns the eigenvalues sorted ascending. O(n²).
 */
export function tridiagonalEigenvalues(dIn: Float64Array, eIn: Float64Array): Float64Array {
  const n = dIn.length;
  const d = Float64Array.from(dIn);
  const e = Float64Array.from(eIn);
  e[n - 1] = 0;
  const eps = Number.EPSILON;
  // Off-diagonals below ε‖T‖ are set aside as zero: that changes no eigenvalue by more than the
  // backward error the method already has, and stops endless sweeps on tiny blocks.
  let tnorm = 0;
  for (let i = 0; i < n; i++) tnorm = Math.max(tnorm, Math.abs(d[i]) + Math.abs(e[i]) + (i > 0 ? Math.abs(e[i - 1]) : 0));
  const tiny = eps * tnorm;
  for (let l = 0; l < n; l++) {
    let iter = 0;
    for (;;) {
      let m = l;
      for (; m < n - 1; m++) {
        const dd = Math.abs(d[m]) + Math.abs(d[m + 1]);
        if (Math.abs(e[m]) <= eps * dd || Math.abs(e[m]) <= tiny) break;
      }
      if (m === l) break;
      if (iter++ === 100) throw new Error("tridiagonal eigenvalues did not converge");
      let g = (d[l + 1] - d[l]) / (2 * e[l]);
      let r = Math.hypot(g, 1);
      g = d[m] - d[l] + e[l] / (g + (g >= 0 ? Math.abs(r) : -Math.abs(r)));
      let s = 1;
      let c = 1;
      let p = 0;
      let i = m - 1;
      let underflow = false;
      for (; i >= l; i--) {
        const f = s * e[i];
        const b = c * e[i];
        r = Math.hypot(f, g);
        e[i + 1] = r;
        if (r === 0) {
          d[i + 1] -= p;
          e[m] = 0;
          underflow = true;
          break;
        }
        s = f / r;
        c = g / r;
        g = d[i + 1] - p;
        r = (d[i] - g) * s + 2 * c * b;
        p = s * r;
        d[i + 1] = g + p;
        g = c * r - b;
      }
      if (underflow) continue;
      d[l] -= p;
      e[l] = g;
      e[m] = 0;
    }
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
 */
export function cholesky(a: Float64Array, n: number): boolean {
  for (let j = 0; j < n; j++) {
    const rj = j * n;
    let s = a[rj + j];
    for (let k = 0; k < j; k++) s -= a[rj + k] * a[rj + k];
    if (!(s > 0)) return false;
    const ljj = Math.sqrt(s);
    a[rj + j] = ljj;
    for (let i = j + 1; i < n; i++) {
      const ri = i * n;
      let t = a[ri + j];
      for (let k = 0; k < j; k++) t -= a[ri + k] * a[rj + k];
      a[ri + j] = t / ljj;
    }
  }
  return true;
}

/** Solve the upper-triangular system R x = b (m×m, row-major) in place. */
export function solveUpper(r: Float64Array, m: number, b: Float64Array): void {
  for (let i = m - 1; i >= 0; i--) {
    let s = b[i];
    for (let k = i + 1; k < m; k++) s -= r[i * m + k] * b[k];
    b[i] = s / r[i * m + i];
  }
}
