// Benchmark of the local (partition-of-unity) method on invented data: Franke's function on a 1 km
// site, z = 100 + 10·F(x/1000, y/1000) + Gaussian noise of sd 0.05 (seeded).
//
//   npx -y deno@2 run -A bench/local.ts                 N = 10⁴ and 10⁵, 1000 × 1000 grid, and scipy
//   npx -y deno@2 run -A bench/local.ts --million       also N = 10⁶
//   npx -y deno@2 run -A bench/local.ts --sizes         points per patch: time and accuracy
//   npx -y deno@2 run -A bench/local.ts --threshold     global against local for the auto threshold
//   npx -y deno@2 run -A bench/local.ts --no-scipy      skip the scipy comparison
//   npx -y deno@2 run -A bench/local.ts --stderr-all    the standard-error grid above 10⁵ points too
//
// Every stage prints its wall time, the CPU time of the process over all its threads (Linux), the
// largest resident set sampled (Deno.memoryUsage().rss every 50 ms while the main thread waits for
// workers, and at each stage's end) and the process's peak
// (getrusage's maximum resident set, src/job/memory.ts peakResidentBytes), and the RMSE of the grid against the true function. The
// fitted exponent of wall time against N comes from a least-squares line through log t and log N.
// scipy: RBFInterpolator(neighbors=50, kernel="thin_plate_spline", degree=1) on N = 2·10⁵ points,
// evaluated on a 500 × 500 grid, run by Debian's /usr/bin/python3 with OPENBLAS_CORETYPE and
// OPENBLAS_L2_SIZE removed (both together) from that child's environment only.
import { fitSurface, fitSurfaceParallel } from "../src/fit/surface.ts";
import { gridModelParallel } from "../src/evaluate/parallel.ts";
import { gridStandardError, makeErrorEstimator } from "../src/evaluate/stderr.ts";
import { makeEvaluator } from "../src/evaluate/evaluate.ts";
import { modelFromJson, modelToJson, type SurfaceModel } from "../src/model/model.ts";
import type { CleanPoints, GridValues } from "../src/types.ts";
import { gaussian, mulberry32 } from "../src/random.ts";
import { franke } from "../test/helpers.ts";
import { peakRss } from "./harness.ts";

const SITE = 1000;
const args = new Set(Deno.args);
const truth = (x: number, y: number) => 100 + 10 * franke(x / SITE, y / SITE);

function sitePoints(n: number, seed: number): CleanPoints {
  const u = mulberry32(seed);
  const g = gaussian(mulberry32(seed + 1));
  const x = new Float64Array(n), y = new Float64Array(n), z = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    x[i] = SITE * u();
    y[i] = SITE * u();
    z[i] = truth(x[i], y[i]) + 0.05 * g();
  }
  return { x, y, z, lines: Array.from({ length: n }, (_, i) => i + 2), skipped: [], merged: [], rowsRead: n };
}

/**
 * CPU seconds used so far by this process, all threads (utime + stime from /proc/self/stat, Linux;
 * NaN elsewhere). On a machine shared with other work the wall time of a stage depends on the others;
 * its CPU time much less.
 */
function cpuSeconds(): number {
  try {
    const f = Deno.readTextFileSync("/proc/self/stat").split(") ")[1].split(" ");
    return (Number(f[11]) + Number(f[12])) / 100;
  } catch {
    return NaN;
  }
}

/** Time a stage, sampling the resident set while it runs (when the main thread is free) and at its end. */
async function stage<T>(name: string, run: () => T | Promise<T>, rows: string[][]): Promise<{ value: T; seconds: number }> {
  let sampled = Deno.memoryUsage().rss;
  const timer = setInterval(() => (sampled = Math.max(sampled, Deno.memoryUsage().rss)), 50);
  const t0 = performance.now(), c0 = cpuSeconds();
  const value = await run();
  const seconds = (performance.now() - t0) / 1000;
  clearInterval(timer);
  sampled = Math.max(sampled, Deno.memoryUsage().rss);
  rows.push([name, seconds.toFixed(2), (cpuSeconds() - c0).toFixed(1), (sampled / 2 ** 20).toFixed(0), peakRss().toFixed(0)]);
  return { value, seconds };
}

function gridRmse(grid: GridValues): number {
  const { spec, values } = grid;
  let ss = 0, count = 0;
  for (let r = 0; r < spec.rows; r++) {
    const y = spec.ymax - (r + 0.5) * spec.cell;
    for (let c = 0; c < spec.cols; c++) {
      const v = values[r * spec.cols + c];
      if (Number.isNaN(v)) continue;
      ss += (v - truth(spec.xmin + (c + 0.5) * spec.cell, y)) ** 2;
      count++;
    }
  }
  return Math.sqrt(ss / count);
}

function table(rows: string[][]): string {
  const widths = rows[0].map((_, c) => Math.max(...rows.map((r) => r[c].length)));
  return rows.map((r) => r.map((x, c) => (c === 0 ? x.padEnd(widths[c]) : x.padStart(widths[c]))).join("  ")).join("\n");
}

/** Least-squares slope of log t against log N. */
function exponent(ns: number[], ts: number[]): number {
  const lx = ns.map(Math.log), ly = ts.map(Math.log);
  const mx = lx.reduce((a, b) => a + b) / lx.length, my = ly.reduce((a, b) => a + b) / ly.length;
  let sxy = 0, sxx = 0;
  lx.forEach((x, i) => {
    sxy += (x - mx) * (ly[i] - my);
    sxx += (x - mx) ** 2;
  });
  return sxy / sxx;
}

const gridOptions = (side: number) => ({ cell: SITE / side, extent: [0, 0, SITE, SITE] as [number, number, number, number], mask: "none" as const });

async function scaling(sizes: number[]): Promise<void> {
  const totals: number[] = [], fits: number[] = [], grids: number[] = [];
  for (const n of sizes) {
    const rows: string[][] = [["stage", "seconds", "cpu s (all threads)", "rss MiB (sampled)", "peak MiB (max RSS)"]];
    const points = sitePoints(n, 2024);
    console.log(`\nN = ${n.toLocaleString("en")} points, grid 1000 × 1000 cells of 1 m`);
    // Progress lines carry the time since the fit started: the fit's own stages (layout, model
    // choice on the sample patches, patch fits in workers, blending and the model record).
    const t0 = performance.now();
    const progress = (m: string) => console.error(`  [${((performance.now() - t0) / 1000).toFixed(2)} s] ${m}`);
    const fit = await stage("fit (auto → local, workers)", () => fitSurfaceParallel(points, { progress }), rows);
    const model = fit.value;
    const grid = await stage("grid 1000 × 1000 (workers)", () => gridModelParallel(model, gridOptions(1000)), rows);
    // The error grid refactorises every patch in one thread (about 14 ms each here): above 10⁵ points
    // it is left out unless asked for (--stderr-all).
    const se = n <= 100_000 || args.has("--stderr-all")
      ? (await stage("standard-error grid (one thread)", () => gridStandardError(model, grid.value, undefined, makeErrorEstimator(model)), rows)).value
      : undefined;
    let jsonBytes = NaN;
    if (n <= 100_000) {
      await stage("model file: write and read JSON", () => {
        const text = modelToJson(model);
        jsonBytes = text.length;
        return modelFromJson(text, "bench");
      }, rows);
    }
    console.log(table(rows));
    const d = model.diagnostics, l = d.local!;
    console.log(
      `  ${model.method} ${model.kernel}/${model.trend}${model.shape === null ? "" : ` ε=${model.shape.toPrecision(3)}`}; ${l.patches} patches, ` +
        `points per patch ${l.pointsPerPatch.min}/${l.pointsPerPatch.median}/${l.pointsPerPatch.max}; λ ${l.lambda.min.toPrecision(2)}…${l.lambda.max.toPrecision(2)}; ` +
        `LOO RMSE ${d.loocvRmse.toFixed(4)}; σ ${d.sigma.toFixed(4)}; flags ${d.flags.lines.length}; SE stride ${se ? se.stride : "(not run)"}`,
    );
    console.log(`  RMSE of the grid against the true surface: ${gridRmse(grid.value).toFixed(5)} (noise sd 0.05)`);
    if (Number.isFinite(jsonBytes)) console.log(`  model file ${(jsonBytes / 2 ** 20).toFixed(0)} MiB of JSON`);
    totals.push(fit.seconds + grid.seconds);
    fits.push(fit.seconds);
    grids.push(grid.seconds);
  }
  if (sizes.length > 1) {
    console.log(`\nwall time ∝ N^k: fit k = ${exponent(sizes, fits).toFixed(2)}, grid k = ${exponent(sizes, grids).toFixed(2)}, fit + grid k = ${exponent(sizes, totals).toFixed(2)}`);
  }
}

/** scipy's local RBF (50 neighbours) against rbfield's local method on the same points and grid. */
async function scipyComparison(): Promise<void> {
  const n = 200_000, side = 500;
  const points = sitePoints(n, 77);
  const dir = Deno.makeTempDirSync({ prefix: "rbfield-bench-" });
  try {
    const xyz = new Float64Array(3 * n);
    for (let i = 0; i < n; i++) xyz.set([points.x[i], points.y[i], points.z[i]], 3 * i);
    Deno.writeFileSync(`${dir}/points.f64`, new Uint8Array(xyz.buffer));
    const script = `
import sys, time, json, numpy as np
from scipy.interpolate import RBFInterpolator
p = np.fromfile(sys.argv[1] + "/points.f64", dtype="<f8").reshape(-1, 3)
side = ${side}; cell = ${SITE} / side
xs = (np.arange(side) + 0.5) * cell
gx, gy = np.meshgrid(xs, ${SITE} - xs)
t0 = time.perf_counter()
f = RBFInterpolator(p[:, :2], p[:, 2], neighbors=50, kernel="thin_plate_spline", degree=1)
t1 = time.perf_counter()
g = f(np.column_stack([gx.ravel(), gy.ravel()]))
t2 = time.perf_counter()
g.astype("<f8").tofile(sys.argv[1] + "/grid.f64")
print(json.dumps({"fit": t1 - t0, "evaluate": t2 - t1}))
`;
    const env = Deno.env.toObject();
    delete env.OPENBLAS_CORETYPE;
    delete env.OPENBLAS_L2_SIZE;
    console.log(`\nscipy RBFInterpolator(neighbors=50, thin_plate_spline, degree 1) against rbfield's local method: N = ${n.toLocaleString("en")}, grid ${side} × ${side}`);
    const out = new Deno.Command("/usr/bin/python3", { args: ["-c", script, dir], env, clearEnv: true, stdout: "piped", stderr: "piped" }).outputSync();
    if (!out.success) {
      console.log(`  scipy unavailable: ${new TextDecoder().decode(out.stderr).trim().split("\n").pop()}`);
      return;
    }
    const timing = JSON.parse(new TextDecoder().decode(out.stdout));
    const values = new Float64Array(Deno.readFileSync(`${dir}/grid.f64`).buffer);
    const spec = { xmin: 0, ymin: 0, xmax: SITE, ymax: SITE, cols: side, rows: side, cell: SITE / side };
    const scipyRmse = gridRmse({ spec, values, crs: { label: "local" } });
    const t0 = performance.now();
    const model: SurfaceModel = await fitSurfaceParallel(points, {});
    const t1 = performance.now();
    const grid = await gridModelParallel(model, gridOptions(side));
    const t2 = performance.now();
    const ours = (t2 - t0) / 1000, theirs = timing.fit + timing.evaluate;
    console.log(table([
      ["", "fit s", "grid s", "total s", "RMSE vs truth"],
      ["rbfield local (auto selection, GCV per patch, LOO)", ((t1 - t0) / 1000).toFixed(2), ((t2 - t1) / 1000).toFixed(2), ours.toFixed(2), gridRmse(grid).toFixed(5)],
      ["scipy neighbors=50 (fixed kernel, interpolating)", timing.fit.toFixed(2), timing.evaluate.toFixed(2), theirs.toFixed(2), scipyRmse.toFixed(5)],
    ]));
    console.log(`  ratio rbfield / scipy: ${(ours / theirs).toFixed(2)}`);
  } finally {
    Deno.removeSync(dir, { recursive: true });
  }
}

/** Global against local with automatic selection, by N: time (one thread) and RMSE against the truth. */
function threshold(): void {
  const rows: string[][] = [["N", "seed", "global s", "local s", "global RMSE", "local RMSE", "local/global RMSE"]];
  for (const n of [500, 1000, 1500, 2000, 3000]) {
    for (const seed of [1, 2]) {
      const points = sitePoints(n, 500 + seed);
      const r = mulberry32(seed);
      const tx = Float64Array.from({ length: 4000 }, () => SITE * (0.02 + 0.96 * r()));
      const ty = Float64Array.from({ length: 4000 }, () => SITE * (0.02 + 0.96 * r()));
      const run = (method: "global" | "local") => {
        const t0 = performance.now();
        const model = fitSurface(points, { method });
        const seconds = (performance.now() - t0) / 1000;
        const ev = makeEvaluator(model);
        let ss = 0;
        for (let i = 0; i < tx.length; i++) ss += (ev.at(tx[i], ty[i]) - truth(tx[i], ty[i])) ** 2;
        return { seconds, rmse: Math.sqrt(ss / tx.length) };
      };
      const g = run("global"), l = run("local");
      rows.push([String(n), String(seed), g.seconds.toFixed(2), l.seconds.toFixed(2), g.rmse.toFixed(5), l.rmse.toFixed(5), (l.rmse / g.rmse).toFixed(3)]);
      console.error(rows[rows.length - 1].join(" "));
    }
  }
  console.log(table(rows));
}

/** Points per patch: time (one thread) and RMSE against the truth, N = 10⁴ and 10⁵. */
function patchSizes(): void {
  const rows: string[][] = [["N", "patchPoints", "patches", "fit s", "RMSE vs truth"]];
  for (const n of [10_000, 100_000]) {
    const points = sitePoints(n, 31);
    const r = mulberry32(9);
    const tx = Float64Array.from({ length: 20000 }, () => SITE * r()), ty = Float64Array.from({ length: 20000 }, () => SITE * r());
    for (const patchPoints of [60, 100, 150, 250]) {
      const t0 = performance.now();
      const model = fitSurface(points, { method: "local", kernel: "thin-plate", trend: "linear", patchPoints });
      const seconds = (performance.now() - t0) / 1000;
      const ev = makeEvaluator(model);
      let ss = 0;
      for (let i = 0; i < tx.length; i++) ss += (ev.at(tx[i], ty[i]) - truth(tx[i], ty[i])) ** 2;
      rows.push([String(n), String(patchPoints), String(model.diagnostics.local!.patches), seconds.toFixed(2), Math.sqrt(ss / tx.length).toFixed(5)]);
      console.error(rows[rows.length - 1].join(" "));
    }
  }
  console.log(table(rows));
}

console.log(`rbfield local-method benchmark; ${navigator.hardwareConcurrency} cores; Deno ${Deno.version.deno}`);
if (args.has("--threshold")) threshold();
else if (args.has("--sizes")) patchSizes();
else {
  await scaling(args.has("--million") ? [10_000, 100_000, 1_000_000] : [10_000, 100_000]);
  if (!args.has("--no-scipy")) await scipyComparison();
}
