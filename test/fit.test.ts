// Checks of the fitting core against sources outside rbfield: ml-matrix (general-purpose linear
// algebra library, npm), analytic facts of RBF theory (Fasshauer 2007; Wendland 2005), the GCV
// definition (Craven & Wahba 1979) evaluated by brute force, leave-one-out by actual refitting,
// and Franke's 1982 test function.
import { describe, expect, it } from "vitest";
import { EigenvalueDecomposition, Matrix, solve } from "ml-matrix";
import { tridiagonalEigenvalues, tridiagonalize } from "../src/fit/linalg.ts";
import { choleskySplit, SPLIT_MIN, tridiagonalizeSplit } from "../src/fit/tridiag_split.ts";
import { lowerInverse } from "../src/fit/inverse_split.ts";
import { cholesky, choleskyColumn, choleskyUpdateRows, lowerInverseColumns } from "../src/fit/linalg.ts";
import { execFileSync, spawnSync } from "node:child_process";
import { fitSurface } from "../src/fit/surface.ts";
import { fitCore } from "../src/fit/core.ts";
import { influenceComplementDiagonal, influenceComplementDiagonalCholesky, rotatedBasis } from "../src/fit/influence.ts";
import { evaluateModel } from "../src/evaluate/evaluate.ts";
import { globalEvaluator } from "../src/evaluate/global.ts";
import { KERNEL_TABLE, KERNELS } from "../src/fit/kernels.ts";
import type { CleanPoints, TrendName, KernelName } from "../src/types.ts";
import { franke, makePoints, mulberry32 } from "./helpers.ts";

describe("symmetric tridiagonal eigenvalues", () => {
  it("match ml-matrix's EigenvalueDecomposition on a random symmetric matrix (reference library)", () => {
    const r = mulberry32(7);
    const n = 40;
    const a = new Float64Array(n * n);
    for (let i = 0; i < n; i++) for (let j = 0; j <= i; j++) a[i * n + j] = a[j * n + i] = r() - 0.5;
    const ref = new EigenvalueDecomposition(new Matrix(Array.from({ length: n }, (_, i) => Array.from(a.subarray(i * n, i * n + n)))), {
      assumeSymmetric: true,
    }).realEigenvalues.slice().sort((p, q) => p - q);
    const { d, e } = tridiagonalize(Float64Array.from(a), n);
    const mine = tridiagonalEigenvalues(d, e);
    for (let i = 0; i < n; i++) expect(Math.abs(mine[i] - ref[i])).toBeLessThan(1e-12);
  });
});

describe("tridiagonalisation of large matrices on two threads (tridiag_split.ts)", () => {
  // A kernel matrix above SPLIT_MIN: tridiagonalize splits each step between this thread and a helper.
  const n = SPLIT_MIN + 100;
  const r = mulberry32(17);
  const u = Float64Array.from({ length: n }, () => r()), v = Float64Array.from({ length: n }, () => r());
  const k = new Float64Array(n * n);
  for (let i = 0; i < n; i++) for (let j = 0; j <= i; j++) k[i * n + j] = k[j * n + i] = Math.sqrt(1 + 9 * ((u[i] - u[j]) ** 2 + (v[i] - v[j]) ** 2));
  const split = tridiagonalizeSplit(k, n);
  const mine = tridiagonalEigenvalues(split.d, split.e);

  it("gives the same bits with the helper thread as in one thread, and tridiagonalize takes that route", () => {
    expect(split.threads).toBe(2);
    const alone = tridiagonalizeSplit(k, n, false);
    expect(alone.threads).toBe(1);
    const routed = tridiagonalize(Float64Array.from(k), n);
    expect(Buffer.from(routed.d.buffer).equals(Buffer.from(split.d.buffer))).toBe(true);
    expect(Buffer.from(alone.d.buffer).equals(Buffer.from(split.d.buffer))).toBe(true);
    expect(Buffer.from(alone.e.buffer).equals(Buffer.from(split.e.buffer))).toBe(true);
    alone.reflectors.forEach((rf, i) => expect(Buffer.from(rf.v.buffer).equals(Buffer.from(split.reflectors[i].v.buffer)) && rf.beta === split.reflectors[i].beta).toBe(true));
  });

  it("keeps the trace and the Frobenius norm (Σλ = Σaᵢᵢ, Σλ² = ‖A‖²_F: similarity invariants)", () => {
    let trace = 0, frob = 0, sl = 0, sl2 = 0;
    for (let i = 0; i < n; i++) {
      trace += k[i * n + i];
      for (let j = 0; j < n; j++) frob += k[i * n + j] ** 2;
    }
    for (const l of mine) sl += l, sl2 += l * l;
    expect(Math.abs(sl - trace) / frob ** 0.5).toBeLessThan(1e-12);
    expect(Math.abs(sl2 - frob) / frob).toBeLessThan(1e-12);
  });

  const numpy = spawnSync("/usr/bin/python3", ["-c", "import numpy"]).status === 0;
  it.skipIf(!numpy)("matches numpy.linalg.eigvalsh (LAPACK; Debian python3-numpy) to 1e-12 of the largest eigenvalue", () => {
    const out = execFileSync("/usr/bin/python3", ["-c", "import sys, numpy as np; a = np.frombuffer(sys.stdin.buffer.read(), dtype='<f8').reshape(" + n + ", " + n + "); sys.stdout.write(' '.join(repr(x) for x in np.linalg.eigvalsh(a)))"], {
      input: Buffer.from(k.buffer),
      maxBuffer: 1 << 26,
    }).toString();
    const ref = out.trim().split(" ").map(Number);
    const scale = Math.max(...ref.map(Math.abs));
    for (let i = 0; i < n; i++) expect(Math.abs(mine[i] - ref[i])).toBeLessThan(1e-12 * scale);
  });
});

describe("Cholesky factorisation of a large matrix on two threads (choleskySplit)", () => {
  it("L·Lᵀ = A (the definition), with the bits of one thread (the serial loop, column by column)", () => {
    const n = SPLIT_MIN + 21;
    const r = mulberry32(29);
    const u = Float64Array.from({ length: n }, () => r()), v = Float64Array.from({ length: n }, () => r());
    const a = new Float64Array(n * n);
    for (let i = 0; i < n; i++) for (let j = 0; j <= i; j++) a[i * n + j] = a[j * n + i] = Math.exp(-4 * ((u[i] - u[j]) ** 2 + (v[i] - v[j]) ** 2)) + (i === j ? 0.5 : 0);
    const info: { threads?: number } = {};
    const two = Float64Array.from(a);
    expect(choleskySplit(two, n, true, info)).toBe(true);
    expect(info.threads).toBe(2);
    const serial = Float64Array.from(a), col = new Float64Array(n);
    for (let k = 0; k < n; k++) {
      expect(choleskyColumn(serial, n, k, col)).toBe(true);
      choleskyUpdateRows(serial, n, k, col, k + 1, n);
    }
    for (let i = 0; i < n; i++) {
      for (let j = 0; j <= i; j++) if (!Object.is(two[i * n + j], serial[i * n + j])) throw new Error(`L[${i}][${j}] differs`);
    }
    let worst = 0;
    for (let i = 0; i < n; i += 11) {
      for (let j = 0; j <= i; j += 7) {
        let s2 = 0;
        for (let k = 0; k <= j; k++) s2 += two[i * n + k] * two[j * n + k];
        worst = Math.max(worst, Math.abs(s2 - a[i * n + j]));
      }
    }
    expect(worst).toBeLessThan(1e-12);
    // Not positive definite: refused, as in one thread.
    const bad = Float64Array.from(a);
    bad[(n - 1) * n + n - 1] = -1;
    expect(cholesky(bad, n)).toBe(false);
  });
});

describe("inverse of a large Cholesky factor on two threads (inverse_split.ts)", () => {
  it("L·X = I (the definition of the inverse), the same bits with or without the helper and as one column range", () => {
    const nb = SPLIT_MIN + 37;
    const r = mulberry32(23);
    const l = new Float64Array(nb * nb);
    for (let i = 0; i < nb; i++) {
      for (let j = 0; j < i; j++) l[i * nb + j] = (r() - 0.5) / Math.sqrt(nb);
      l[i * nb + i] = 1 + r();
    }
    const info: { threads?: number } = {};
    const two = lowerInverse(l, nb, true, info), one = lowerInverse(l, nb, false);
    expect(info.threads).toBe(2);
    const whole = new Float64Array(nb * nb);
    lowerInverseColumns(l, whole, nb, 0, nb);
    expect(Buffer.from(two.buffer).equals(Buffer.from(one.buffer))).toBe(true);
    expect(Buffer.from(one.buffer).equals(Buffer.from(whole.buffer))).toBe(true);
    let worst = 0;
    for (let i = 0; i < nb; i += 7) {
      for (let j = 0; j < nb; j += 5) {
        let s = 0;
        for (let k = j; k <= i; k++) s += l[i * nb + k] * two[k * nb + j];
        worst = Math.max(worst, Math.abs(s - (i === j ? 1 : 0)));
      }
    }
    expect(worst).toBeLessThan(1e-12);
  });
});

describe("polynomial reproduction (RBF theory: the trend space is reproduced exactly; Fasshauer 2007, ch. 6)", () => {
  const cases: [KernelName, TrendName, (x: number, y: number) => number][] = [
    ["thin-plate", "linear", (x, y) => 3 + 2 * x - 5 * y],
    ["thin-plate", "quadratic", (x, y) => 1 + x - y + 0.5 * x * x - 2 * x * y + 3 * y * y],
    ["gaussian", "constant", () => 7.25],
    ["multiquadric", "linear", (x, y) => -1 + 4 * x + y],
    ["inverse-multiquadric", "quadratic", (x, y) => 2 - x * x + y * y],
  ];
  for (const [kernel, trend, f] of cases) {
    it(`${kernel} with ${trend} trend reproduces a ${trend} polynomial, with GCV smoothing`, () => {
      const pts = makePoints(60, 11, f);
      const model = fitSurface(pts, { kernel, trend, shape: kernel === "thin-plate" ? "auto" : 2 });
      const tx = [0.1, 0.5, 0.93, 0.37];
      const ty = [0.2, 0.5, 0.11, 0.81];
      const est = evaluateModel(model, tx, ty);
      tx.forEach((x, i) => expect(Math.abs(est[i] - f(x, ty[i]))).toBeLessThan(1e-8));
    });
  }
});

describe("interpolation with λ = 0 (the surface passes through every data point)", () => {
  for (const kernel of ["thin-plate", "gaussian", "multiquadric", "inverse-multiquadric"] as KernelName[]) {
    it(kernel, () => {
      const pts = makePoints(80, 3, franke);
      const model = fitSurface(pts, { kernel, trend: "linear", smoothing: 0, shape: kernel === "thin-plate" ? "auto" : 3 });
      expect(model.diagnostics.smoothingChoice).toBe("given");
      const est = evaluateModel(model, pts.x, pts.y);
      for (let i = 0; i < pts.x.length; i++) expect(Math.abs(est[i] - pts.z[i])).toBeLessThan(1e-8);
      expect(model.diagnostics.edf).toBeCloseTo(80, 6);
    });
  }
});

describe("GCV and leave-one-out against brute force", () => {
  // Thin-plate kernel written out here (Duchon 1977), independent of src/fit/kernels.ts.
  const tps = (r2: number) => (r2 > 0 ? 0.5 * r2 * Math.log(r2) : 0);
  const noisy = (x: number, y: number) => Math.sin(6 * x) * Math.cos(4 * y);

  it("GCV score and edf equal N‖(I−A)y‖²/tr(I−A)² and tr(A) from the explicit influence matrix (Craven & Wahba 1979)", () => {
    const n = 40;
    const pts = makePoints(n, 5, noisy);
    const r = mulberry32(9);
    for (let i = 0; i < n; i++) pts.z[i] += 0.6 * (r() - 0.5);
    const model = fitSurface(pts, { kernel: "thin-plate", trend: "linear" });
    expect(model.diagnostics.edf).toBeLessThan(n - 5); // a real smoothing fit, not interpolation
    // Build the bordered system in the model's scaled coordinates with ml-matrix and get A column by column.
    const { cx, cy, s } = model.global.scaling;
    const lam = model.global.internal.lambdaScaled;
    const u = Array.from(pts.x, (v) => (v - cx) / s), v = Array.from(pts.y, (w) => (w - cy) / s);
    const m = 3;
    const M = Matrix.zeros(n + m, n + m);
    for (let i = 0; i < n; i++) {
      for (let j = 0; j < n; j++) M.set(i, j, tps((u[i] - u[j]) ** 2 + (v[i] - v[j]) ** 2) + (i === j ? lam : 0));
      const p = [1, u[i], v[i]];
      for (let k = 0; k < m; k++) {
        M.set(i, n + k, p[k]);
        M.set(n + k, i, p[k]);
      }
    }
    const A = Matrix.zeros(n, n);
    for (let j = 0; j < n; j++) {
      const e = Matrix.zeros(n + m, 1);
      e.set(j, 0, 1);
      const sol = solve(M, e);
      // fitted = y − λ w, so column j of A is e_j − λ w(e_j)
      for (let i = 0; i < n; i++) A.set(i, j, (i === j ? 1 : 0) - lam * sol.get(i, 0));
    }
    let tr = 0;
    for (let i = 0; i < n; i++) tr += A.get(i, i);
    const y = Matrix.columnVector(Array.from(pts.z));
    const res = y.clone().sub(A.mmul(y));
    const gcv = (n * res.norm() ** 2) / (n - tr) ** 2;
    expect(model.diagnostics.edf).toBeCloseTo(tr, 6);
    expect(Math.abs(model.diagnostics.gcv - gcv) / gcv).toBeLessThan(1e-6);
  });

  const looCases: [KernelName, TrendName, boolean][] = [
    ["gaussian", "constant", false],
    ["thin-plate", "linear", false],
    ["multiquadric", "quadratic", false],
    ["thin-plate", "linear", true],
  ];
  for (const [kernel, trend, weighted] of looCases) it(`leave-one-out residuals from one factorisation equal residuals from actually refitting without each point (Rippa 1999): ${kernel}, ${trend}${weighted ? ", weighted" : ""}`, () => {
    const n = 25;
    const pts = makePoints(n, 8, noisy);
    const lambda = 0.001;
    const weights = weighted ? Float64Array.from({ length: n }, (_, i) => 1 + (i % 3)) : undefined;
    const opts = { kernel, trend, shape: 2.5, smoothing: lambda };
    const model = fitSurface(pts, { ...opts, weights });
    for (const i of [0, 7, 24]) {
      const keep = [...Array(n).keys()].filter((k) => k !== i);
      const sub: CleanPoints = {
        x: Float64Array.from(keep, (k) => pts.x[k]),
        y: Float64Array.from(keep, (k) => pts.y[k]),
        z: Float64Array.from(keep, (k) => pts.z[k]),
        lines: keep.map((k) => k + 2),
        skipped: [],
        merged: [],
        rowsRead: n - 1,
      };
      // λ is in map units and the weights are normalised to mean 1 over the points used, so the
      // refit without point i keeps the same absolute weights by rescaling λ accordingly.
      let subLambda = lambda;
      let subWeights: Float64Array | undefined;
      if (weights) {
        subWeights = Float64Array.from(keep, (k) => weights[k]);
        const meanAll = weights.reduce((a, b) => a + b) / n, meanSub = subWeights.reduce((a, b) => a + b) / (n - 1);
        subLambda = (lambda * meanAll) / meanSub;
      }
      const m2 = fitSurface(sub, { ...opts, smoothing: subLambda, weights: subWeights });
      const pred = evaluateModel(m2, [pts.x[i]], [pts.y[i]])[0];
      expect(model.loo[i]).toBeCloseTo(pts.z[i] - pred, 8);
    }
  });
});

describe("the two routes to the leave-one-out diagonal agree", () => {
  it("Cholesky + compact WY (used) and the rotated basis Z = Q₂H (the fallback) give the same Gᵢᵢ", () => {
    // The Cholesky route is checked against actual refitting above; this pins the fallback to it.
    const pts = makePoints(40, 21, (x, y) => Math.sin(5 * x) + y * y);
    const { x, y, z } = pts;
    const u = Float64Array.from(x, (v) => 2 * v - 1), v = Float64Array.from(y, (w) => 2 * w - 1);
    const fit = fitCore(u, v, z, 1, { kernel: "thin-plate", trend: "quadratic", epsilonScaled: 1, smoothing: 1e-3, lambdaToUser: 1 });
    const a = influenceComplementDiagonalCholesky(fit.state, fit.lambdaScaled)!;
    const b = influenceComplementDiagonal(fit.state, rotatedBasis(fit.state), fit.lambdaScaled);
    for (let i = 0; i < 40; i++) expect(Math.abs(a[i] - b[i])).toBeLessThan(1e-9 * Math.abs(b[i]) + 1e-12);
  });
});

describe("Franke's function (Franke 1982): accuracy improves at the expected rate as points are added", () => {
  // Each fourfold increase in points halves the spacing h. Expected rates (from memory of the
  // literature): thin-plate splines converge at least like O(h²) on smooth functions away from the
  // boundary (Powell 1994; Wendland 2005, ch. 11), so the error ratio per halving should be ≤ 1/4;
  // Gaussian and inverse multiquadric kernels converge spectrally (faster than any power of h;
  // Madych & Nelson 1992; Wendland 2005, ch. 11), so the ratio should be far smaller.
  function errors(kernel: KernelName): number[] {
    const errs: number[] = [];
    for (const n of [50, 200, 800]) {
      const model = fitSurface(makePoints(n, 100 + n, franke), { kernel, trend: "linear" });
      const g = 30;
      const tx: number[] = [], ty: number[] = [];
      for (let i = 0; i < g; i++) for (let j = 0; j < g; j++) {
        tx.push(0.1 + (0.8 * i) / (g - 1));
        ty.push(0.1 + (0.8 * j) / (g - 1));
      }
      const est = evaluateModel(model, tx, ty);
      let ss = 0;
      for (let k = 0; k < tx.length; k++) ss += (est[k] - franke(tx[k], ty[k])) ** 2;
      errs.push(Math.sqrt(ss / tx.length));
    }
    return errs;
  }
  it("thin-plate with GCV on 50, 200 and 800 points: at least second order (measured ratios 0.085, 0.073)", () => {
    const e = errors("thin-plate");
    expect(e[1] / e[0]).toBeLessThan(0.25);
    expect(e[2] / e[1]).toBeLessThan(0.25);
  });
  it("inverse multiquadric with shape and smoothing by GCV: spectral (measured ratios 0.003, < 0.001)", () => {
    const e = errors("inverse-multiquadric");
    expect(e[1] / e[0]).toBeLessThan(0.05);
    expect(e[2] / e[1]).toBeLessThan(0.05);
  });
});

describe("invariance (a fit must not depend on where the origin is)", () => {
  it("translating coordinates by (5·10⁵, 6·10⁶) m changes no estimate by more than 1e-6 of the data range", () => {
    const f = (x: number, y: number) => franke(x / 1000, y / 1000) * 10;
    const a = makePoints(150, 21, f, 0, 0, 1000);
    const b: CleanPoints = { ...a, x: a.x.map((v) => v + 5e5), y: a.y.map((v) => v + 6e6) };
    for (const kernel of ["thin-plate", "gaussian"] as KernelName[]) {
      const ma = fitSurface(a, { kernel, trend: "linear" });
      const mb = fitSurface(b, { kernel, trend: "linear" });
      const tx = [100, 500, 900], ty = [300, 500, 700];
      const ea = evaluateModel(ma, tx, ty);
      const eb = evaluateModel(mb, tx.map((v) => v + 5e5), ty.map((v) => v + 6e6));
      for (let i = 0; i < 3; i++) expect(Math.abs(ea[i] - eb[i])).toBeLessThan(1e-6 * 10);
    }
  });
  it("scaling the values by a constant scales the estimates by it", () => {
    const a = makePoints(100, 4, franke);
    const b: CleanPoints = { ...a, z: a.z.map((v) => v * 250) };
    // Default options (automatic selection): GCV scores scale by the same factor, so the same model wins.
    const ma = fitSurface(a, {}), mb = fitSurface(b, {});
    expect(mb.kernel).toBe(ma.kernel);
    const ea = evaluateModel(ma, [0.3, 0.6], [0.4, 0.7]), eb = evaluateModel(mb, [0.3, 0.6], [0.4, 0.7]);
    for (let i = 0; i < 2; i++) expect(Math.abs(eb[i] - 250 * ea[i])).toBeLessThan(1e-9 * 250);
  });
});

describe("degenerate data is refused with a clear message", () => {
  it("thin-plate without linear trend", () => {
    expect(() => fitSurface(makePoints(20, 1, franke), { kernel: "thin-plate", trend: "constant" })).toThrow(/needs at least linear trend/);
  });
  it("all points on one line with linear trend", () => {
    const p = makePoints(20, 1, franke);
    p.y = p.x.map((v) => 2 * v + 1);
    expect(() => fitSurface(p, { kernel: "thin-plate", trend: "linear" })).toThrow(/do not support linear trend/);
  });
  it("too few points for the trend", () => {
    expect(() => fitSurface(makePoints(5, 1, franke), { kernel: "gaussian", trend: "quadratic", shape: 1 })).toThrow(/too few/);
  });
});

describe("the kernel table and the evaluator's unrolled loops agree", () => {
  // The evaluator writes one loop per kernel for speed (evaluate/global.ts); the kernel table
  // (fit/kernels.ts) is the one statement of each formula, itself checked against scipy in
  // test/reference.test.ts. Random centres, weights and trend coefficients.
  it("for every kernel of KERNEL_TABLE", () => {
    const r = mulberry32(77);
    const n = 25;
    const u = Float64Array.from({ length: n }, () => r() * 2 - 1), v = Float64Array.from({ length: n }, () => r() * 2 - 1);
    const w = Float64Array.from({ length: n }, () => r() - 0.5), c = Float64Array.from([0.3, -0.2, 0.7]);
    for (const kernel of KERNELS) {
      const eps = 1.7;
      const ev = globalEvaluator({
        method: "global", kernel, epsilonScaled: eps, scaling: { cx: 0, cy: 0, s: 1, zc: 0, zs: 1 }, stretch: null, logBias: 0, u, v, w, c,
      });
      for (const [x, y] of [[0.1, -0.3], [0.77, 0.5], [u[3], v[3]]]) {
        let f = c[0] + c[1] * x + c[2] * y;
        for (let i = 0; i < n; i++) f += w[i] * KERNEL_TABLE[kernel].phi((x - u[i]) ** 2 + (y - v[i]) ** 2, eps * eps);
        expect(Math.abs(ev.at(x, y) - f), kernel).toBeLessThan(1e-12);
      }
    }
  });
});
