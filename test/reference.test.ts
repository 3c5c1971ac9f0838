// Checks of rbfield's fit against reference libraries, from committed fixtures made by the scripts
// in test/reference/ (regeneration is optional; CI only reads the fixtures):
//   scipy 1.10.1, scipy.interpolate.RBFInterpolator — fixed kernel/ε/degree/smoothing: estimates at
//     test points (fixtures/scipy-*.json, test/reference/scipy_rbf.py);
//   R mgcv 1.8-41, gam(z ~ s(x, y, bs = "tp", k = N), method = "GCV.Cp") — full-rank thin-plate
//     smoothing spline with GCV-chosen smoothing: edf, GCV score, fitted values
//     (fixtures/mgcv-*.json, test/reference/mgcv_tp.R).
// The data in the fixtures are Franke's (1982) test function plus seeded Gaussian noise, generated
// by those scripts (numpy / R RNG), not by rbfield.
import { describe, expect, it } from "vitest";
import { readFileSync } from "node:fs";
import { fitSurface } from "../src/fit/surface.ts";
import { evaluateModel } from "../src/evaluate/evaluate.ts";
import type { CleanPoints, TrendName, KernelName } from "../src/types.ts";

const FIXTURES = new URL("./reference/fixtures/", import.meta.url);

interface ScipyCase {
  label: string;
  kernel: KernelName;
  shape: number | null;
  trend: TrendName;
  degree: number;
  smoothing: number;
  estimates: number[];
  edf: number;
  condition: number;
  selfCheck: number;
  /** Trend none only: scipy (degree −1) on z − mean(z), plus mean(z). */
  estimatesMeanRemoved?: number[];
  edfMeanRemoved?: number;
}
interface ScipyFixture {
  source: string;
  scipyVersion: string;
  dataset: string;
  points: { x: number[]; y: number[]; z: number[] };
  test: { x: number[]; y: number[] };
  cases: ScipyCase[];
}
interface MgcvFixture {
  source: string;
  mgcvVersion: string;
  dataset: string;
  k: number;
  points: { x: number[]; y: number[]; z: number[] };
  edf: number;
  gcv: number;
  rss: number;
  fitted: number[];
}

function load<T>(name: string): T {
  return JSON.parse(readFileSync(new URL(name, FIXTURES), "utf8")) as T;
}

function cleanPoints(p: { x: number[]; y: number[]; z: number[] }, dx = 0, dy = 0): CleanPoints {
  const n = p.x.length;
  return {
    x: Float64Array.from(p.x, (v) => v + dx),
    y: Float64Array.from(p.y, (v) => v + dy),
    z: Float64Array.from(p.z),
    lines: Array.from({ length: n }, (_, i) => i + 2),
    skipped: [],
    merged: [],
    rowsRead: n,
  };
}

function range(v: ArrayLike<number>): number {
  let lo = Infinity, hi = -Infinity;
  for (let i = 0; i < v.length; i++) {
    lo = Math.min(lo, v[i]);
    hi = Math.max(hi, v[i]);
  }
  return hi - lo;
}

/** max |a − b| / range(data values). */
function maxRelDiff(a: ArrayLike<number>, b: ArrayLike<number>, zRange: number): number {
  expect(a.length).toBe(b.length);
  let m = 0;
  for (let i = 0; i < a.length; i++) m = Math.max(m, Math.abs(a[i] - b[i]) / zRange);
  return m;
}

// Estimates must match scipy's to 1e-6 of the data-value range (max over the 50 test points).
// The fixtures' selfCheck (scipy vs. an independent numpy null-space solve of the same system) is
// ≤ 4e-9 of the range for every case, so the reference itself is far more precise than that.
const SCIPY_TOL = 1e-6;

const SCIPY_FILES = ["scipy-unit-square.json", "scipy-projected.json"];

describe("RBF fits with fixed settings match scipy.interpolate.RBFInterpolator (scipy 1.10.1)", () => {
  for (const file of SCIPY_FILES) {
    const fx = load<ScipyFixture>(file);
    const zRange = range(fx.points.z);
    describe(`${fx.dataset} (${fx.points.x.length} points; ${fx.source})`, () => {
      it("the fixture was made with scipy 1.10.1", () => {
        expect(fx.scipyVersion).toBe("1.10.1");
        expect(fx.cases.every((c) => c.selfCheck < 1e-8)).toBe(true);
      });
      for (const c of fx.cases) {
        const fit = () =>
          fitSurface(cleanPoints(fx.points), {
            kernel: c.kernel,
            trend: c.trend,
            shape: c.shape ?? "auto",
            smoothing: c.smoothing,
          });
        it(`${c.label}: estimates within ${SCIPY_TOL} of the data range (scipy ${fx.scipyVersion})`, () => {
          const model = fit();
          // rbfield must use the smoothing as given (no raise for conditioning in these cases).
          expect(model.diagnostics.smoothingChoice).toBe("given");
          expect(Math.abs(model.lambda - c.smoothing)).toBeLessThanOrEqual(1e-12 * c.smoothing);
          const est = evaluateModel(model, fx.test.x, fx.test.y);
          // Trend "none" is scipy's degree = −1: f = Σ wᵢ φ fitted to z itself, falling to 0 away from the data.
          expect(maxRelDiff(est, c.estimates, zRange)).toBeLessThan(SCIPY_TOL);
          // edf = tr(A_λ), from the fixture's independent numpy solve of the same system.
          expect(Math.abs(model.diagnostics.edf - c.edf)).toBeLessThan(1e-6 * c.edf);
        });
      }
    });
  }

  describe("translation invariance: the unit-square cases shifted by (5e5, 6e6) give scipy's unshifted estimates", () => {
    const fx = load<ScipyFixture>("scipy-unit-square.json");
    const zRange = range(fx.points.z);
    const dx = 5e5, dy = 6e6;
    const tx = fx.test.x.map((v) => v + dx);
    const ty = fx.test.y.map((v) => v + dy);
    for (const c of fx.cases) {
      it(`${c.label} (scipy ${fx.scipyVersion}, unshifted)`, () => {
        const model = fitSurface(cleanPoints(fx.points, dx, dy), {
          kernel: c.kernel,
          trend: c.trend,
          shape: c.shape ?? "auto",
          smoothing: c.smoothing,
        });
        const est = evaluateModel(model, tx, ty);
        const expected = c.estimates;
        // Shifting rounds the unit-square coordinates to the ulp of 6e6 (≈ 1e-9), which moves
        // the surface by that order at most; the scipy tolerance still applies.
        expect(maxRelDiff(est, expected, zRange)).toBeLessThan(SCIPY_TOL);
      });
    }
  });
});

// mgcv and rbfield minimise the same GCV criterion n·RSS/(n − edf)² over the same family of
// smoothers (full thin-plate spline with linear null space; mgcv's λ is rbfield's λ/(8π) up to
// mgcv's internal penalty rescaling, so λ itself is not compared). Both optimisers converge
// tightly (mgcv's magic reports fully.converged; rbfield runs a golden section in log λ), so:
//  - GCV score: the minimum value of a smooth function is second-order insensitive to an error
//    δ in log λ, so the two minima must agree very closely: 1e-7 relative (measured 5e-14, 3e-12);
//  - edf: first order in δ, and GCV is flat near its minimum; mgcv stops when the score changes by
//    ~1e-7 relative, which allows δ ~ 1e-3 and an edf change of ~1e-4 relative: allow 1e-3
//    (measured 6.7e-8, 2.4e-8);
//  - fitted values: also first order in δ: within 1e-4 of the data range (measured 7e-9, 2e-9).
const MGCV_FILES = ["mgcv-unit-square.json", "mgcv-site.json"];

describe("GCV thin-plate smoothing spline matches mgcv (R mgcv 1.8-41, bs = \"tp\", k = N, GCV.Cp)", () => {
  for (const file of MGCV_FILES) {
    const fx = load<MgcvFixture>(file);
    const n = fx.points.x.length;
    const zRange = range(fx.points.z);
    describe(`${fx.dataset} (${n} points; ${fx.source})`, () => {
      const model = fitSurface(cleanPoints(fx.points), { kernel: "thin-plate", trend: "linear", smoothing: "gcv" });
      it("the fixture was made with mgcv 1.8-41 at full rank (k = N)", () => {
        expect(fx.mgcvVersion).toBe("1.8.41");
        expect(fx.k).toBe(n);
      });
      it(`GCV score within 1e-7 relative of mgcv's m$gcv.ubre (mgcv ${fx.mgcvVersion})`, () => {
        expect(model.diagnostics.smoothingChoice).toBe("gcv");
        expect(Math.abs(model.diagnostics.gcv - fx.gcv) / fx.gcv).toBeLessThan(1e-7);
      });
      it(`edf within 0.1 % of mgcv's sum(m$edf) (mgcv ${fx.mgcvVersion})`, () => {
        expect(Math.abs(model.diagnostics.edf - fx.edf) / fx.edf).toBeLessThan(1e-3);
      });
      it(`fitted values within 1e-4 of the data range of mgcv's fitted(m) (mgcv ${fx.mgcvVersion})`, () => {
        expect(maxRelDiff(model.fitted, fx.fitted, zRange)).toBeLessThan(1e-4);
      });
      it(`GCV recomputed from rbfield's own fitted values and edf equals its reported score`, () => {
        let rss = 0;
        for (let i = 0; i < n; i++) rss += (fx.points.z[i] - model.fitted[i]) ** 2;
        const gcv = (n * rss) / (n - model.diagnostics.edf) ** 2;
        expect(Math.abs(gcv - model.diagnostics.gcv) / gcv).toBeLessThan(1e-9);
      });
    });
  }
});
