// Whole jobs, as the user runs them: n noisy points (default 2,000), a side × side grid (default
// 500 × 500), against scipy's RBFInterpolator fitted to the same points and evaluated on the same
// cell centres with a FIXED kernel, shape, trend and smoothing (scipy does no selection).
//   auto   rbfield's full automatic selection + grid, vs scipy with the model rbfield chose
//   fixed  a fixed thin-plate model (linear trend, smoothing 1) + grid in both
//   fit    that fixed fit alone (rbfield's includes the GCV curve and exact leave-one-out)
//   grid   grid evaluation alone of the fixed model
// Each checks that both give the same centre cell (and the largest difference over the grid).
import { fitSurface, fitSurfaceParallel, gridModelParallel, type GridValues, type SurfaceModel } from "../src/mod.ts";
import { type BenchCase, type Context, prepared } from "./case.ts";
import { noisyPoints, relativeDifference, SITE, writeF64 } from "./data.ts";
import { formatSeconds, type Runner, timed } from "./harness.ts";
import { ReferenceCases, type ReferenceRun } from "./reference.ts";

/** scipy's names for rbfield's kernels (scipy's multiquadric is negated, like rbfield's). */
const SCIPY_KERNEL: Record<string, string> = {
  "thin-plate": "thin_plate_spline",
  gaussian: "gaussian",
  multiquadric: "multiquadric",
  "inverse-multiquadric": "inverse_multiquadric",
};
const DEGREE: Record<string, number> = { none: -1, constant: 0, linear: 1, quadratic: 2 };
/** λ of the fixed thin-plate model (map-unit convention, scipy's `smoothing`): near what GCV picks here. */
export const FIXED_SMOOTHING = 1.0;
const FIXED = { kernel: "thin-plate", trend: "linear", smoothing: FIXED_SMOOTHING } as const;

interface Job {
  model: SurfaceModel;
  grid?: GridValues;
  fitSeconds: number;
  gridSeconds: number;
  /** Seconds from each progress message of the fit to the next (where the fit's time goes). */
  steps: [string, number][];
}

const gridOptions = (side: number) => ({ cell: SITE / side, extent: [0, 0, SITE, SITE] as [number, number, number, number], mask: "none" as const });

// Prepared inputs shared by the cases of one run: the points (and their file) and the fixed model per n.
const pointsFiles = new Map<number, string>();
const fixedModels = new Map<number, SurfaceModel>();

async function pointsFile(n: number, ctx: Context): Promise<string> {
  if (!pointsFiles.has(n)) {
    const p = noisyPoints(n);
    pointsFiles.set(n, await writeF64(`${ctx.tmp}/points-${n}.f64`, p.x, p.y, p.z));
  }
  return pointsFiles.get(n)!;
}

/** The fixed thin-plate model of n points (fitted once per run, untimed). */
export function fixedModel(n: number): SurfaceModel {
  if (!fixedModels.has(n)) fixedModels.set(n, fitSurface(noisyPoints(n), FIXED));
  return fixedModels.get(n)!;
}

/** rbfield: fit (by `fit`, which reports progress) and optionally grid, timing the parts. */
function job(fit: (progress: (message: string) => void) => SurfaceModel | Promise<SurfaceModel>, side: number | undefined): () => Promise<Job> {
  return async () => {
    const steps: [string, number][] = [];
    let mark = performance.now();
    const t0 = mark;
    // Counters such as "shape scan 3/7" or "row 5 of 9" are folded into the step before them.
    const progress = (message: string) => {
      const now = performance.now();
      if (steps.length && /\d+\s*(\/|of)\s*\d+$/.test(message)) return;
      if (steps.length) steps[steps.length - 1][1] += (now - mark) / 1000;
      steps.push([message, 0]);
      mark = now;
    };
    const model = await fit(progress);
    const t1 = performance.now();
    if (steps.length) steps[steps.length - 1][1] += (t1 - mark) / 1000;
    const grid = side === undefined ? undefined : await gridModelParallel(model, gridOptions(side));
    const t2 = performance.now();
    return { model, grid, fitSeconds: (t1 - t0) / 1000, gridSeconds: (t2 - t1) / 1000, steps };
  };
}

/** scipy's RBFInterpolator with the model's kernel, shape, trend and smoothing, fixed. */
async function scipy(refs: ReferenceCases, ctx: Context, model: SurfaceModel, n: number, stage: "fit+grid" | "fit" | "grid") {
  const side = ctx.options.side;
  return refs.runner("rbf", {
    n,
    points: await pointsFile(n, ctx),
    kernel: SCIPY_KERNEL[model.kernel],
    epsilon: model.shape ?? 1,
    degree: DEGREE[model.trend],
    smoothing: model.lambda,
    stage,
    ...(stage === "fit" ? {} : { grid: { cols: side, rows: side, xmin: 0, ymax: SITE, cell: SITE / side } }),
  });
}

/** Same centre cell, and the largest difference over the grid, relative to the largest value. */
async function gridCheck(refs: ReferenceCases, side: number, grid: GridValues | undefined, ref: ReferenceRun | undefined): Promise<string> {
  const values = await refs.lastArray();
  if (!grid || !ref || !values) return "no reference";
  const centre = grid.values[Math.floor(side / 2) * side + Math.floor(side / 2)];
  return `centre cell rbfield ${centre.toFixed(9)} vs scipy ${ref.summary.centre.toFixed(9)}; ` +
    `largest difference over the grid ${relativeDifference(grid.values, values).toExponential(1)} of the largest value`;
}

const split = (a: Job, b: ReferenceRun | undefined) =>
  `last run: rbfield fit ${formatSeconds(a.fitSeconds)} (${a.steps.map(([m, t]) => `${m}: ${formatSeconds(t)}`).join("; ")}) + grid ${formatSeconds(a.gridSeconds)}` +
  (b?.summary.fit !== undefined ? `; scipy fit ${formatSeconds(b.summary.fit)} + grid ${formatSeconds(b.summary.grid)}` : "");

/** A whole-job case at the sizes of --n; `make` builds its subject, reference and check. */
function jobCase<A>(
  name: string,
  title: string,
  make: (n: number, ctx: Context, refs: ReferenceCases) => {
    subject: () => A | Promise<A>;
    reference: (warm: A) => Promise<Runner<ReferenceRun> | undefined>;
    check?: (a: A, b: ReferenceRun | undefined) => Promise<string>;
  },
): BenchCase {
  return {
    name,
    group: "job",
    title,
    sizeName: "n",
    sizes: (o) => o.n,
    prepare: (n, ctx) => {
      const refs = new ReferenceCases(ctx.ref, ctx.tmp);
      const m = make(n, ctx, refs);
      return Promise.resolve(prepared<A, ReferenceRun>({
        subject: timed(m.subject),
        reference: m.reference,
        referenceLabel: "scipy RBFInterpolator",
        check: m.check,
        done: () => refs.drop(),
      }));
    },
  };
}

export const JOB_CASES: BenchCase[] = [
  jobCase<Job>("auto", "automatic selection + grid vs scipy, chosen model fixed", (n, ctx, refs) => {
    const points = noisyPoints(n);
    return {
      subject: job((progress) => fitSurfaceParallel(points, { kernel: "auto", progress }), ctx.options.side),
      reference: (warm) => scipy(refs, ctx, warm.model, n, "fit+grid"),
      check: async (a, b) =>
        `chose ${a.model.kernel}/${a.model.trend} (shape ${a.model.shape ?? "–"}, λ ${a.model.lambda.toPrecision(3)}); ` +
        `${await gridCheck(refs, ctx.options.side, a.grid, b)}; ${split(a, b)}`,
    };
  }),
  jobCase<Job>("fixed", "fixed thin-plate fit + grid vs scipy thin-plate", (n, ctx, refs) => {
    const points = noisyPoints(n);
    return {
      subject: job((progress) => fitSurface(points, { ...FIXED, progress }), ctx.options.side),
      reference: (warm) => scipy(refs, ctx, warm.model, n, "fit+grid"),
      check: async (a, b) => `${await gridCheck(refs, ctx.options.side, a.grid, b)}; ${split(a, b)}`,
    };
  }),
  jobCase<SurfaceModel>("fit", "fixed thin-plate fit alone (rbfield: with GCV curve and leave-one-out)", (n, ctx, refs) => {
    const points = noisyPoints(n);
    return { subject: () => fitSurface(points, FIXED), reference: (warm) => scipy(refs, ctx, warm, n, "fit") };
  }),
  jobCase<GridValues>("grid", "grid evaluation alone of the fixed thin-plate model", (n, ctx, refs) => {
    const model = fixedModel(n);
    return {
      subject: () => gridModelParallel(model, gridOptions(ctx.options.side)),
      reference: () => scipy(refs, ctx, model, n, "grid"),
      check: (a, b) => gridCheck(refs, ctx.options.side, a, b),
    };
  }),
];
