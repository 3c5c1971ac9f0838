// One property suite for every fitting method: what any RBF-with-trend surface must do, whatever
// builds it. A method joins by adding one line at the bottom (a name and a build function); the
// checks and their sources stay in one place.
import * as fs from "node:fs";
import * as path from "node:path";
import { describe, expect, it } from "vitest";
import { Matrix, solve } from "ml-matrix";
import { fitSurface } from "../src/fit/surface.ts";
import type { FitOptions } from "../src/fit/options.ts";
import { makeEvaluator } from "../src/evaluate/evaluate.ts";
import type { SurfaceModel } from "../src/model/model.ts";
import type { CleanPoints, KernelName, TrendName } from "../src/types.ts";
import { franke, makePoints } from "./helpers.ts";
import { gaussian, mulberry32 } from "../src/random.ts";

/** How a method builds a surface from clean points and fit options. */
export type BuildSurface = (points: CleanPoints, options: FitOptions) => SurfaceModel;

/**
 * Properties of the global interpolant that a method does not share, each with the reason. They are
 * reported as skipped tests whose title gives the reason, never dropped silently; the method's own
 * test file checks what takes their place.
 */
export type NotShared = Partial<Record<"least-squares trend limit" | "scipy reference values", string>>;

const here = path.dirname(new URL(import.meta.url).pathname);

function transformed(p: CleanPoints, f: (x: number, y: number) => [number, number]): CleanPoints {
  const x = new Float64Array(p.x.length), y = new Float64Array(p.x.length);
  for (let i = 0; i < x.length; i++) [x[i], y[i]] = f(p.x[i], p.y[i]);
  return { ...p, x, y };
}

export function describeSurfaceMethod(name: string, build: BuildSurface, notShared: NotShared = {}): void {
  const check = (property: keyof NotShared, title: string, fn: () => void) =>
    notShared[property] ? it.skip(`${title} — not a property of this method: ${notShared[property]}`, fn) : it(title, fn);
  describe(`surface properties: ${name}`, () => {
    const cases: [KernelName, TrendName][] = [["thin-plate", "linear"], ["multiquadric", "constant"], ["gaussian", "linear"], ["inverse-multiquadric", "quadratic"]];

    // Polynomial precision: a surface with a trend of degree d reproduces polynomials of degree d
    // exactly, whatever the smoothing (Fasshauer 2007, ch. 6 and 8; Wahba 1990, §2.4: the penalty
    // does not see the trend's null space).
    for (const [kernel, trend] of cases) {
      it(`${kernel} with ${trend} trend reproduces a polynomial of that degree (polynomial precision)`, () => {
        const poly = trend === "quadratic" ? (x: number, y: number) => 3 + 2 * x - y + 0.5 * x * x - 0.3 * x * y + 0.8 * y * y
          : trend === "linear" ? (x: number, y: number) => 3 + 2 * x - y : () => 3;
        const pts = makePoints(60, 7, poly);
        for (const smoothing of ["gcv", 1e-3] as const) {
          const ev = makeEvaluator(build(pts, { kernel, trend, shape: kernel === "thin-plate" ? undefined : 2, smoothing }));
          for (const [x, y] of [[0.3, 0.7], [0.55, 0.12], [0.9, 0.9]]) expect(Math.abs(ev.at(x, y) - poly(x, y)), `λ ${smoothing}`).toBeLessThan(1e-7);
        }
      });
    }

    // λ = 0: the surface passes through every reading (interpolation; Fasshauer 2007, ch. 1).
    it("interpolates the readings at λ = 0", () => {
      const pts = makePoints(80, 8, franke);
      for (const [kernel, trend] of cases) {
        // A shape at which the system is well conditioned: at flatter shapes λ = 0 is raised to the
        // numerical floor (fit/core.ts) and the surface misses the readings by that much.
        const model = build(pts, { kernel, trend, shape: kernel === "thin-plate" ? undefined : 8, smoothing: 0 });
        expect(model.diagnostics.smoothingChoice, kernel).toBe("given");
        const ev = makeEvaluator(model);
        let worst = 0;
        for (let i = 0; i < pts.x.length; i++) worst = Math.max(worst, Math.abs(ev.at(pts.x[i], pts.y[i]) - pts.z[i]));
        expect(worst, kernel).toBeLessThan(1e-6);
      }
    });

    // λ → ∞: the penalty forces the kernel part to zero and the surface to the least-squares fit of
    // the trend alone (Wahba 1990, §1.3). Reference: the normal equations solved with ml-matrix.
    check("least-squares trend limit", "tends to the least-squares trend as λ → ∞", () => {
      const g = gaussian(mulberry32(9));
      const pts = makePoints(70, 9, (x, y) => franke(x, y) + 0.1 * g());
      const model = build(pts, { kernel: "thin-plate", trend: "linear", smoothing: 1e12 });
      const P = new Matrix(pts.x.length, 3);
      for (let i = 0; i < pts.x.length; i++) P.setRow(i, [1, pts.x[i], pts.y[i]]);
      const c = solve(P.transpose().mmul(P), P.transpose().mmul(Matrix.columnVector(Array.from(pts.z))));
      const ev = makeEvaluator(model);
      for (const [x, y] of [[0.2, 0.2], [0.8, 0.4]]) expect(Math.abs(ev.at(x, y) - (c.get(0, 0) + c.get(1, 0) * x + c.get(2, 0) * y))).toBeLessThan(1e-6);
    });

    // Shift and scale: moving the site to projected coordinates (5·10⁵, 6·10⁶) and measuring in
    // other units changes nothing (the thin-plate spline is scale-free, the trend is affine-invariant:
    // Duchon 1977). GCV chooses λ in each frame.
    it("is invariant to a shift and a change of units of the coordinates", () => {
      const g = gaussian(mulberry32(10));
      const pts = makePoints(90, 10, (x, y) => franke(x, y) + 0.02 * g());
      const a = makeEvaluator(build(pts, { kernel: "thin-plate", trend: "linear" }));
      const map = (x: number, y: number): [number, number] => [5e5 + 1000 * x, 6e6 + 1000 * y];
      const b = makeEvaluator(build(transformed(pts, map), { kernel: "thin-plate", trend: "linear" }));
      for (const [x, y] of [[0.25, 0.5], [0.6, 0.35], [0.05, 0.95]]) {
        const [X, Y] = map(x, y);
        expect(Math.abs(a.at(x, y) - b.at(X, Y))).toBeLessThan(1e-6);
      }
    });

    // Reference values: scipy's RBFInterpolator (Debian python3-scipy 1.10.1) on the committed
    // fixture (test/reference/README.md), thin-plate with linear trend at λ = 0 and λ = 10⁻³.
    check("scipy reference values", "matches scipy's RBFInterpolator on the committed fixture", () => {
      const fx = JSON.parse(fs.readFileSync(path.join(here, "reference", "fixtures", "scipy-unit-square.json"), "utf8"));
      const pts: CleanPoints = {
        x: Float64Array.from(fx.points.x), y: Float64Array.from(fx.points.y), z: Float64Array.from(fx.points.z),
        lines: fx.points.x.map((_: number, i: number) => i + 2), skipped: [], merged: [], rowsRead: fx.points.x.length,
      };
      const lo = Math.min(...fx.points.z), hi = Math.max(...fx.points.z);
      for (const c of fx.cases.filter((c: { kernel: string; trend: string }) => c.kernel === "thin-plate" && c.trend === "linear")) {
        const ev = makeEvaluator(build(pts, { kernel: "thin-plate", trend: "linear", smoothing: c.smoothing }));
        fx.test.x.forEach((x: number, i: number) => expect(Math.abs(ev.at(x, fx.test.y[i]) - c.estimates[i]) / (hi - lo), c.label).toBeLessThan(1e-6));
      }
    });
  });
}

describeSurfaceMethod("global (dense) method", fitSurface);
// Patches of 25 points: the suite's 60–100 point sets form 10–16 overlapping patches.
describeSurfaceMethod("local (partition of unity) method", (points, options) => fitSurface(points, { ...options, method: "local", patchPoints: 25 }), {
  "least-squares trend limit": "as λ → ∞ each patch tends to the least-squares trend of its own points, and the blend of those local " +
    "trends is not the trend fitted to all points (test/local.test.ts checks the blend of the patches' least-squares trends)",
  "scipy reference values": "the fixture holds scipy's global interpolant; between the readings a blend of patch interpolants differs " +
    "from it (test/local.test.ts checks the blend of scipy fits on each patch's points)",
});
