// Model selection, error bars, transforms, weights, the stretch and blunder flags, each checked
// against an outside source: explicit formulas evaluated with ml-matrix (general-purpose linear
// algebra library), analytic facts, or equivalences stated beside the check.
import { describe, expect, it } from "vitest";
import { inverse, Matrix, solve } from "ml-matrix";
import { fitSurface, fitSurfaceParallel } from "../src/fit/surface.ts";
import { evaluateModel } from "../src/evaluate/evaluate.ts";
import { errorsAt, makeErrorEstimator } from "../src/evaluate/stderr.ts";
import type { SurfaceModel } from "../src/model/model.ts";
import type { CleanPoints } from "../src/types.ts";
import { franke, makePoints } from "./helpers.ts";
import { gaussian, mulberry32 } from "../src/random.ts";

const gaussNoise = (seed: number) => gaussian(mulberry32(seed));

/**
 * Universal-kriging / GP variance with a vague prior on the trend (Rasmussen & Williams 2006,
 * eq. 2.42): V = b[φ(0) − k*ᵀA⁻¹k* + Rᵀ(H A⁻¹ Hᵀ)⁻¹R], A = K + λΩ⁻¹, R = h* − H A⁻¹ k*,
 * written out here with ml-matrix in the model's scaled coordinates.
 */
function referenceStdError(model: SurfaceModel, phi: (r2: number) => number, basis: (u: number, v: number) => number[], x: number, y: number, b: number): number {
  const { cx, cy, s, zs } = model.global.scaling;
  const n = model.points.x.length;
  const u = model.points.x.map((v) => (v - cx) / s), v = model.points.y.map((w) => (w - cy) / s);
  const lam = model.global.internal.lambdaScaled;
  const w = model.points.weight;
  const A = new Matrix(n, n);
  for (let i = 0; i < n; i++) for (let j = 0; j < n; j++) A.set(i, j, phi((u[i] - u[j]) ** 2 + (v[i] - v[j]) ** 2) + (i === j ? lam / (w ? w[i] : 1) : 0));
  const H = new Matrix(basis(0, 0).length, n);
  for (let i = 0; i < n; i++) basis(u[i], v[i]).forEach((val, r) => H.set(r, i, val));
  const ux = (x - cx) / s, vx = (y - cy) / s;
  const ks = Matrix.columnVector(u.map((_, i) => phi((ux - u[i]) ** 2 + (vx - v[i]) ** 2)));
  const hs = Matrix.columnVector(basis(ux, vx));
  const Ainv = inverse(A);
  const Aik = Ainv.mmul(ks);
  const R = hs.clone().sub(H.mmul(Aik));
  const HAH = H.mmul(Ainv).mmul(H.transpose());
  const term3 = R.transpose().mmul(solve(HAH, R)).get(0, 0);
  const V = b * (phi(0) - ks.transpose().mmul(Aik).get(0, 0) + term3);
  return zs * Math.sqrt(Math.max(V, 0));
}

describe("standard error of the estimate (universal kriging variance; Rasmussen & Williams 2006, eq. 2.42)", () => {
  const noisy = (seed: number, n: number) => {
    const g = gaussNoise(seed);
    const p = makePoints(n, seed, franke);
    for (let i = 0; i < n; i++) p.z[i] += 0.05 * g();
    return p;
  };
  it("Gaussian kernel with constant trend matches the GP formula", () => {
    const pts = noisy(3, 60);
    const model = fitSurface(pts, { kernel: "gaussian", trend: "constant", shape: 3 });
    const se = makeErrorEstimator(model);
    const e2 = model.global.internal.epsilonScaled ** 2;
    for (const [x, y] of [[0.5, 0.5], [0.05, 0.9], [1.2, 1.1]]) {
      const ref = referenceStdError(model, (r2) => Math.exp(-e2 * r2), () => [1], x, y, se.processScale);
      expect(Math.abs(se.at(x, y) - ref)).toBeLessThan(1e-7 * ref + 1e-12);
    }
  });
  it("thin-plate spline with linear trend matches the same formula (power function with trend constraints)", () => {
    const pts = noisy(4, 50);
    const model = fitSurface(pts, { kernel: "thin-plate", trend: "linear" });
    const se = makeErrorEstimator(model);
    for (const [x, y] of [[0.3, 0.6], [0.95, 0.05]]) {
      const ref = referenceStdError(model, (r2) => (r2 > 0 ? 0.5 * r2 * Math.log(r2) : 0), (u, v) => [1, u, v], x, y, se.processScale);
      expect(Math.abs(se.at(x, y) - ref)).toBeLessThan(1e-6 * ref + 1e-12);
    }
  });
  it("weighted fit (noise variance σ²/ωᵢ) matches the formula with A = K + λΩ⁻¹", () => {
    const pts = noisy(5, 40);
    const weights = Float64Array.from({ length: 40 }, (_, i) => (i % 3 === 0 ? 4 : 1));
    const model = fitSurface(pts, { kernel: "inverse-multiquadric", trend: "linear", shape: 2, weights });
    const se = makeErrorEstimator(model);
    const e2 = model.global.internal.epsilonScaled ** 2;
    const ref = referenceStdError(model, (r2) => 1 / Math.sqrt(1 + e2 * r2), (u, v) => [1, u, v], 0.4, 0.4, se.processScale);
    expect(Math.abs(se.at(0.4, 0.4) - ref)).toBeLessThan(1e-6 * ref);
  });
  it("at the readings, the errors the fit stored (b̂λAᵢᵢ/ωᵢ) match the GP formula, and a model without them computes the same", () => {
    const pts = noisy(12, 60);
    const weights = Float64Array.from({ length: 60 }, (_, i) => (i % 4 === 0 ? 3 : 1));
    // Smoothing given large enough that the reference's explicit inverse keeps its digits at the readings.
    const model = fitSurface(pts, { kernel: "gaussian", trend: "linear", shape: 2, weights, smoothing: 0.05 });
    expect(model.global.pointStdErrors).toHaveLength(60);
    const se = makeErrorEstimator(model);
    const bare = makeErrorEstimator({ ...model, global: { ...model.global, pointStdErrors: undefined } });
    const e2 = model.global.internal.epsilonScaled ** 2;
    for (const i of [0, 1, 4, 33]) {
      const ref = referenceStdError(model, (r2) => Math.exp(-e2 * r2), (u, v) => [1, u, v], pts.x[i], pts.y[i], se.processScale);
      expect(se.at(pts.x[i], pts.y[i])).toBe(model.global.pointStdErrors![i]);
      expect(Math.abs(se.at(pts.x[i], pts.y[i]) - ref)).toBeLessThan(1e-6 * ref);
      expect(Math.abs(bare.at(pts.x[i], pts.y[i]) - ref)).toBeLessThan(1e-6 * ref);
    }
  });
  it("errors at many places (four at a time, one pass over the factor) are the bits of one place at a time; log fits too", () => {
    const pts = noisy(7, 70);
    for (const model of [fitSurface(pts, { kernel: "thin-plate", trend: "quadratic" }), fitSurface(pts, { kernel: "gaussian", trend: "linear", shape: 2, transform: "log" })]) {
      const se = makeErrorEstimator(model);
      expect(se.atMany).toBeDefined();
      // 11 places: two full blocks and a partial one, with a place without coordinates among them.
      const r = mulberry32(9);
      const x = Float64Array.from({ length: 11 }, () => 1.2 * r() - 0.1), y = Float64Array.from({ length: 11 }, () => 1.2 * r() - 0.1);
      x[5] = NaN;
      const out = new Float64Array(11);
      errorsAt(se, x, y, out);
      for (let i = 0; i < 11; i++) expect(Object.is(out[i], se.at(x[i], y[i]))).toBe(true);
      expect(out.filter(Number.isFinite)).toHaveLength(10);
    }
  });
  it("an interpolating fit has zero error at the data and more error far from it (kriging is exact at data points)", () => {
    const pts = makePoints(40, 6, franke);
    const model = fitSurface(pts, { kernel: "thin-plate", trend: "linear", smoothing: 0 });
    const se = makeErrorEstimator(model);
    const scale = Math.sqrt(se.processScale) * model.global.scaling.zs;
    for (let i = 0; i < 5; i++) expect(se.at(pts.x[i], pts.y[i])).toBeLessThan(1e-5 * scale);
    expect(se.at(2, 2)).toBeGreaterThan(se.at(0.5, 0.5));
  });
});

describe("automatic kernel selection (--kernel auto)", () => {
  const pts = (() => {
    const g = gaussNoise(8);
    const p = makePoints(120, 8, franke);
    for (let i = 0; i < p.x.length; i++) p.z[i] += 0.02 * g();
    return p;
  })();
  it("--select gcv ranks every kernel with the trends it supports, best GCV first, and fits the winner", () => {
    const model = fitSurface(pts, { kernel: "auto", select: "gcv" });
    const sel = model.diagnostics.selection!;
    expect(sel.by).toBe("gcv");
    // 4 kernels × 2 trends each (thin-plate linear/quadratic, the others constant/linear).
    expect(sel.ranking).toHaveLength(8);
    const eligible = sel.ranking.filter((c) => !c.excluded);
    for (let i = 1; i < eligible.length; i++) expect(eligible[i].gcv).toBeGreaterThanOrEqual(eligible[i - 1].gcv);
    expect(sel.ranking[0].chosen).toBe(true);
    expect(model.kernel).toBe(sel.ranking[0].kernel);
    expect(model.trend).toBe(sel.ranking[0].trend);
    expect(model.diagnostics.gcv).toBeCloseTo(sel.ranking[0].gcv, 12);
    // The winner's GCV is no worse than the thin-plate spline fitted alone (an eligible candidate here).
    expect(model.diagnostics.gcv).toBeLessThanOrEqual(fitSurface(pts, { kernel: "thin-plate" }).diagnostics.gcv + 1e-15);
  });
  it("ranking in worker threads gives exactly the same model as in one thread (determinism)", async () => {
    const a = fitSurface(pts, { kernel: "auto" });
    const messages: string[] = [];
    const b = await fitSurfaceParallel(pts, { kernel: "auto", progress: (m) => messages.push(m) }, 2);
    expect(messages.some((m) => m.includes("on 2 threads"))).toBe(true);
    expect(messages.filter((m) => m.includes("unavailable"))).toEqual([]);
    expect(JSON.stringify(b)).toBe(JSON.stringify(a));
  });
  it("--select loocv ranks by leave-one-out RMSE", () => {
    const model = fitSurface(pts, { kernel: "auto", select: "loocv" });
    const r = model.diagnostics.selection!.ranking;
    for (let i = 1; i < r.length; i++) expect(r[i].loocvRmse).toBeGreaterThanOrEqual(r[i - 1].loocvRmse);
    expect(model.diagnostics.loocvRmse).toBeCloseTo(r[0].loocvRmse, 10);
  });
});

describe("log transform (--transform log)", () => {
  it("z = exp(plane) is reproduced exactly: ln z is in the linear trend space and σ = 0 (analytic)", () => {
    const f = (x: number, y: number) => Math.exp(1 + 0.5 * x - 0.8 * y);
    const pts = makePoints(40, 9, f);
    const model = fitSurface(pts, { transform: "log" });
    expect(model.transform).toBe("log");
    const est = evaluateModel(model, [0.25, 0.75], [0.5, 0.1]);
    expect(Math.abs(est[0] - f(0.25, 0.5)) / f(0.25, 0.5)).toBeLessThan(1e-8);
    expect(Math.abs(est[1] - f(0.75, 0.1)) / f(0.75, 0.1)).toBeLessThan(1e-8);
  });
  it("the back-transform carries the lognormal bias correction exp(σ²/2) (Aitchison & Brown 1957)", () => {
    const g = gaussNoise(10);
    const pts = makePoints(80, 10, (x, y) => Math.exp(2 + x));
    for (let i = 0; i < pts.z.length; i++) pts.z[i] *= Math.exp(0.3 * g());
    const model = fitSurface(pts, { kernel: "thin-plate", transform: "log", smoothing: 1e6 }); // heavy smoothing: ln f ≈ the trend plane
    const sigma = model.diagnostics.sigma;
    const logModel = { ...model, transform: "none" as const };
    const e = evaluateModel(model, [0.5], [0.5])[0];
    const l = evaluateModel(logModel, [0.5], [0.5])[0];
    expect(e / Math.exp(l)).toBeCloseTo(Math.exp(0.5 * sigma * sigma), 12);
    expect(sigma).toBeGreaterThan(0.2);
  });
  it("refuses zero or negative values and names their lines", () => {
    const pts = makePoints(20, 11, () => 5);
    pts.z[3] = 0;
    pts.z[7] = -1;
    expect(() => fitSurface(pts, { transform: "log" })).toThrow(/lines 5, 9/);
  });
});

describe("observation weights (--weight)", () => {
  it("match a direct solve of (K + λΩ⁻¹)w + Pc = y, Pᵀw = 0 (weighted penalised least squares; Wahba 1990 §1.3)", () => {
    const pts = makePoints(30, 12, (x, y) => Math.sin(3 * x) + y);
    const g = gaussNoise(12);
    for (let i = 0; i < 30; i++) pts.z[i] += 0.1 * g();
    const omega = Float64Array.from({ length: 30 }, (_, i) => 0.5 + (i % 4));
    const lambda = 0.05;
    const model = fitSurface(pts, { kernel: "gaussian", trend: "linear", shape: 2, smoothing: lambda, weights: omega });
    const mean = omega.reduce((a, b) => a + b) / 30;
    const n = 30, m = 3, eps2 = 4;
    const M = Matrix.zeros(n + m, n + m);
    for (let i = 0; i < n; i++) {
      for (let j = 0; j < n; j++) {
        M.set(i, j, Math.exp(-eps2 * ((pts.x[i] - pts.x[j]) ** 2 + (pts.y[i] - pts.y[j]) ** 2)) + (i === j ? lambda / (omega[i] / mean) : 0));
      }
      [1, pts.x[i], pts.y[i]].forEach((p, k) => {
        M.set(i, n + k, p);
        M.set(n + k, i, p);
      });
    }
    const rhs = Matrix.columnVector([...pts.z, 0, 0, 0]);
    const sol = solve(M, rhs);
    const at = (x: number, y: number) => {
      let f = sol.get(n, 0) + sol.get(n + 1, 0) * x + sol.get(n + 2, 0) * y;
      for (let i = 0; i < n; i++) f += sol.get(i, 0) * Math.exp(-eps2 * ((x - pts.x[i]) ** 2 + (y - pts.y[i]) ** 2));
      return f;
    };
    const est = evaluateModel(model, [0.2, 0.6], [0.3, 0.9]);
    expect(est[0]).toBeCloseTo(at(0.2, 0.3), 9);
    expect(est[1]).toBeCloseTo(at(0.6, 0.9), 9);
  });
  it("multiplying every weight by a constant changes nothing (weights are relative)", () => {
    const pts = makePoints(40, 13, franke);
    const w = Float64Array.from({ length: 40 }, (_, i) => 1 + (i % 5));
    const a = fitSurface(pts, { weights: w }), b = fitSurface(pts, { weights: w.map((v) => v * 1000) });
    expect(evaluateModel(a, [0.4], [0.6])[0]).toBeCloseTo(evaluateModel(b, [0.4], [0.6])[0], 10);
  });
});

describe("stretch (--stretch AZIMUTH:FACTOR)", () => {
  it("equals an isotropic fit on coordinates rotated and stretched by hand (geometric anisotropy; common practice in geostatistics)", () => {
    const az = 30, ratio = 3;
    const pts = makePoints(60, 14, (x, y) => Math.sin(4 * (x * Math.sin(0.5236) + y * Math.cos(0.5236))));
    const a = fitSurface(pts, { kernel: "gaussian", trend: "linear", shape: 1.5, smoothing: 1e-4, stretch: { azimuth: az, factor: ratio } });
    // The same transform written independently: along = d·(sin θ, cos θ), across = ratio·d·(cos θ, −sin θ).
    const th = (az * Math.PI) / 180;
    const cx = a.stretch!.x0, cy = a.stretch!.y0;
    const tr = (x: number, y: number) => [(x - cx) * Math.sin(th) + (y - cy) * Math.cos(th), ratio * ((x - cx) * Math.cos(th) - (y - cy) * Math.sin(th))];
    const t: CleanPoints = { ...pts, x: pts.x.map((x, i) => tr(x, pts.y[i])[0]), y: pts.x.map((x, i) => tr(x, pts.y[i])[1]) };
    const b = fitSurface(t, { kernel: "gaussian", trend: "linear", shape: 1.5, smoothing: 1e-4 });
    for (const [x, y] of [[0.3, 0.3], [0.7, 0.2]]) {
      const [tx, ty] = tr(x, y);
      expect(evaluateModel(a, [x], [y])[0]).toBeCloseTo(evaluateModel(b, [tx], [ty])[0], 8);
    }
  });
});

describe("blunder flags (robust standardised leave-one-out residuals)", () => {
  it("a 20σ blunder in smooth noisy data is flagged first and kept in the fit", () => {
    const g = gaussNoise(15);
    const pts = makePoints(150, 15, (x, y) => 2 * x + Math.sin(3 * y));
    for (let i = 0; i < 150; i++) pts.z[i] += 0.01 * g();
    pts.z[42] += 0.2;
    const model = fitSurface(pts, { kernel: "thin-plate" });
    expect(model.diagnostics.flags.lines[0]).toBe(pts.lines[42]);
    expect(model.points.x).toHaveLength(150);
    expect(Math.abs(model.looStandardised[42]!)).toBeGreaterThan(10);
  });
});
