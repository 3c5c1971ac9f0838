// The hot kernels on their own, each at two or three sizes so that the growth exponent can be read,
// each against the same work done by numpy/LAPACK (or, for contours, by d3-contour) in the same run:
//   tridiag    tridiagonalize + tridiagonalEigenvalues on the n × n thin-plate kernel matrix,
//              vs numpy.linalg.eigvalsh (LAPACK dsyevd: dsytrd + dsterf, the same two steps)
//   loo        influenceComplementDiagonalCholesky (the exact leave-one-out diagonal), vs the same
//              algorithm in numpy/LAPACK (dpotrf + dtrtri + column norms; scipy_reference.py)
//   evaluator  makeEvaluator(model).many on an evalSide² grid for a model of n centres, vs numpy's
//              Σ wᵢ φ(‖u − uᵢ‖²) + trend on the same points
//   contours   contourLines (marching squares) on a side² grid, 20 levels, vs d3-contour's regions
//   bands      contourBands (d3-contour + turf difference) on the same grid, vs d3-contour alone
// The fit's own modules are being reorganised while this is written, so the internal functions are
// looked up by name (src/mod.ts first, then the modules they lived in); a renamed one stops only
// its own case, with a message saying what to update here.
import { contours as d3Contours } from "d3-contour";
import { contourBands, contourLines, type GridValues, makeEvaluator, type SurfaceModel } from "../src/mod.ts";
import { type BenchCase, type Context, prepared } from "./case.ts";
import { cellCentres, fieldGrid, relativeDifference, scaledPoints, thinPlateMatrix, writeF64 } from "./data.ts";
import { timed } from "./harness.ts";
import { fixedModel } from "./jobs.ts";
import { ReferenceCases, type ReferenceRun } from "./reference.ts";

const MOD = "../src/mod.ts";
const LINALG = [MOD, "../src/fit/linalg.ts"];
const FIT = [MOD, "../src/fit/core.ts", "../src/fit/influence.ts", "../src/fit/fit.ts"];

/** An exported function by name from the first module (relative to bench/) that has it. */
// deno-lint-ignore no-explicit-any
async function locate<F extends (...args: any[]) => unknown>(name: string, modules: string[]): Promise<F> {
  const problems: string[] = [];
  for (const path of modules) {
    try {
      const mod = await import(new URL(path, import.meta.url).href);
      if (typeof mod[name] === "function") return mod[name] as F;
    } catch (e) {
      problems.push(`${path}: ${(e as Error).message.split("\n")[0]}`);
    }
  }
  throw new Error(`${name} is not exported by ${modules.join(", ")} (renamed or moved? update bench/stages.ts)` + (problems.length ? `; ${problems.join("; ")}` : ""));
}

/** The parts of the saved model the numpy evaluator needs (model file format: DEVELOPERS.md). */
function globalPart(model: SurfaceModel): { scaling: { cx: number; cy: number; s: number; zc: number; zs: number }; weights: number[]; trendCoefficients: number[] } {
  const m = model as unknown as Record<string, unknown>;
  return (m.global ?? m) as ReturnType<typeof globalPart>;
}

/** Compare the subject's array with the reference's last array. */
async function arrayCheck(refs: ReferenceCases, mine: ArrayLike<number>, what: string): Promise<string> {
  const theirs = await refs.lastArray();
  return theirs ? `${what}: largest difference ${relativeDifference(mine, theirs).toExponential(1)} of the largest |value|` : "no reference";
}

/**
 * A stage at the sizes of --sizes against a Python reference whose array result is compared with
 * the subject's; `make` builds (untimed) the subject and the reference's parameters.
 */
function pythonStage(
  name: string,
  title: string,
  expected: string,
  referenceLabel: string,
  make: (n: number, ctx: Context) => Promise<{ subject: () => Float64Array; kind: string; params: () => Promise<Record<string, unknown>>; what: string }>,
): BenchCase {
  return {
    name,
    group: "stage",
    title,
    sizeName: "n",
    expected,
    sizes: (o) => o.sizes,
    prepare: async (n, ctx) => {
      const m = await make(n, ctx);
      const refs = new ReferenceCases(ctx.ref, ctx.tmp);
      return prepared<Float64Array, ReferenceRun>({
        subject: timed(m.subject),
        reference: async () => refs.runner(m.kind, await m.params()),
        referenceLabel,
        check: (values) => arrayCheck(refs, values, m.what),
        done: () => refs.drop(),
      });
    },
  };
}

/** 20 levels spread over the grid's range. */
function levelsOf(grid: GridValues): number[] {
  let lo = Infinity, hi = -Infinity;
  for (const v of grid.values) (lo = Math.min(lo, v), hi = Math.max(hi, v));
  return Array.from({ length: 20 }, (_, k) => lo + ((k + 0.5) * (hi - lo)) / 20);
}

/** Positions in nested GeoJSON coordinate arrays. */
const positions = (c: unknown): number => (Array.isArray(c) ? (typeof c[0] === "number" ? 1 : c.reduce((a: number, x) => a + positions(x), 0)) : 0);

function contourCase(name: string, title: string, draw: typeof contourLines | typeof contourBands): BenchCase {
  return {
    name,
    group: "stage",
    title,
    sizeName: "cells",
    expected: "1 (linear in cells)",
    sizes: (o) => o.cells.map((s) => s * s),
    prepare: (cells, ctx) => {
      const side = Math.round(Math.sqrt(cells));
      const grid = fieldGrid(side);
      const levels = levelsOf(grid);
      const generator = d3Contours().size([side, side]).thresholds(levels);
      return Promise.resolve(prepared<ReturnType<typeof draw>, { coordinates: unknown }[]>({
        subject: timed(() => draw(grid, levels)),
        reference: () => Promise.resolve(ctx.options.reference ? timed(() => generator(grid.values) as { coordinates: unknown }[]) : undefined),
        referenceLabel: "d3-contour (JS)",
        check: (a, b) =>
          `rbfield ${a.features.length} features, ${positions(a.features.map((f) => f.geometry.coordinates))} vertices; ` +
          `d3-contour ${b?.length ?? 0} regions, ${positions(b?.map((g) => g.coordinates))} vertices`,
      }));
    },
  };
}

export const STAGE_CASES: BenchCase[] = [
  pythonStage("tridiag", "tridiagonal reduction + eigenvalues vs numpy.linalg.eigvalsh", "3 ((4/3) n³ flops)", "numpy eigvalsh", async (n, ctx) => {
    type Tri = (a: Float64Array, n: number) => { d: Float64Array; e: Float64Array };
    const tridiagonalize = await locate<Tri>("tridiagonalize", LINALG);
    const eigenvalues = await locate<(d: Float64Array, e: Float64Array) => Float64Array>("tridiagonalEigenvalues", LINALG);
    const a = thinPlateMatrix(n);
    return {
      // The reduction overwrites its input: each run reduces a fresh copy (numpy copies too).
      subject: () => {
        const t = tridiagonalize(a.slice(), n);
        return eigenvalues(t.d, t.e);
      },
      kind: "eigvalsh",
      params: async () => ({ n, matrix: await writeF64(`${ctx.tmp}/matrix-${n}.f64`, a) }),
      what: "eigenvalues",
    };
  }),
  pythonStage("loo", "leave-one-out diagonal (Cholesky route) vs the same in numpy/LAPACK", "3 ((2/3) n³ flops)", "numpy/LAPACK potrf+trtri", async (n, ctx) => {
    type Core = (u: Float64Array, v: Float64Array, y: Float64Array, zs: number, o: Record<string, unknown>) => { lambdaScaled: number; state: unknown };
    const fitCore = await locate<Core>("fitCore", FIT);
    const diagonal = await locate<(state: unknown, lambda: number) => Float64Array | undefined>("influenceComplementDiagonalCholesky", FIT);
    const { u, v, y } = scaledPoints(n);
    // The fit's own state at the smoothing GCV chooses (untimed): what the final fit hands on.
    const fit = fitCore(u, v, y, 1, { kernel: "thin-plate", trend: "linear", epsilonScaled: 1, smoothing: "gcv", lambdaToUser: 1 });
    return {
      subject: () => {
        const g = diagonal(fit.state, fit.lambdaScaled);
        if (!g) throw new Error("B + λI is not numerically positive definite: the Cholesky route was not taken");
        return g;
      },
      kind: "loo",
      params: async () => ({ n, lambda: fit.lambdaScaled, points: await writeF64(`${ctx.tmp}/uv-${n}.f64`, u, v) }),
      what: `diag(G), λ ${fit.lambdaScaled.toExponential(2)} (scaled)`,
    };
  }),
  pythonStage("evaluator", "evaluator, one thread, on a fixed grid vs numpy Σ wᵢφ + trend", "1 (linear in centres)", "numpy Σ wᵢφ", (n, ctx) => {
    const model = fixedModel(n);
    const { x, y } = cellCentres(ctx.options.evalSide);
    const out = new Float64Array(x.length);
    const g = globalPart(model);
    const { cx, cy, s } = g.scaling;
    const cu = model.points.x.map((p) => (p - cx) / s), cv = model.points.y.map((p) => (p - cy) / s);
    return Promise.resolve({
      subject: () => makeEvaluator(model).many(x, y, out),
      kind: "evaluate",
      params: async () => ({
        n,
        points: x.length,
        centres: await writeF64(`${ctx.tmp}/centres-${n}.f64`, cu, cv, g.weights),
        at: await writeF64(`${ctx.tmp}/at-${x.length}.f64`, x, y),
        trend: g.trendCoefficients,
        scaling: g.scaling,
      }),
      what: `${x.length} points`,
    });
  }),
  contourCase("contours", "contour lines (marching squares), 20 levels, vs d3-contour regions", contourLines),
  contourCase("bands", "filled bands (d3-contour + turf difference), 20 levels, vs d3-contour alone", contourBands),
];
