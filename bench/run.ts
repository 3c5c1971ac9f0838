// deno task bench: speed of rbfield against a reference measured in the same run, as ratios.
//   1. 2,000 noisy points, full automatic selection (--kernel auto) + a 500 × 500 grid, against
//      scipy's RBFInterpolator with the kernel, shape, trend and smoothing rbfield chose, fixed (scipy
//      does no selection), on the same points and grid.
//   2. A fixed thin-plate model (linear trend, smoothing 1) in both.
// The machine is noisy: read the ratios, not the seconds. Nothing here is a pass/fail test.
import { execFileSync } from "node:child_process";
import * as fs from "node:fs";
import * as os from "node:os";
import * as path from "node:path";
import { fitSurface, fitSurfaceParallel } from "../src/fit/surface.ts";
import { gridModelParallel } from "../src/evaluate/parallel.ts";
import type { CleanPoints } from "../src/types.ts";
import { mulberry32 } from "../src/random.ts";

const N = Number(Deno.env.get("BENCH_N") ?? 2000);
const SIDE = 500;

// Invented benchmark data: a smooth field on a 1 km square with Gaussian noise (seeded).
function makeData(n: number): CleanPoints {
  const u = mulberry32(424242);
  const x = new Float64Array(n), y = new Float64Array(n), z = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    x[i] = 1000 * u();
    y[i] = 1000 * u();
    const g = Math.sqrt(-2 * Math.log(1 - u())) * Math.cos(2 * Math.PI * u());
    z[i] = 50 + 3 * Math.sin(x[i] / 150) + 2 * Math.cos(y[i] / 200) + 0.5 * Math.exp(-((x[i] - 600) ** 2 + (y[i] - 400) ** 2) / 2e4) + 0.05 * g;
  }
  return { x, y, z, lines: Array.from({ length: n }, (_, i) => i + 2), skipped: [], merged: [], rowsRead: n };
}

const pts = makeData(N);
const dir = fs.mkdtempSync(path.join(os.tmpdir(), "rbfield-bench-"));
const csv = path.join(dir, "points.csv");
fs.writeFileSync(csv, "x,y,z\n" + Array.from(pts.x, (x, i) => `${x},${pts.y[i]},${pts.z[i]}`).join("\n") + "\n");
const cell = 1000 / SIDE;
const extent: [number, number, number, number] = [0, 0, 1000, 1000];

function time<T>(f: () => T): [T, number] {
  const t0 = performance.now();
  const r = f();
  return [r, (performance.now() - t0) / 1000];
}

async function timeAsync<T>(f: () => Promise<T>): Promise<[T, number]> {
  const t0 = performance.now();
  const r = await f();
  return [r, (performance.now() - t0) / 1000];
}

console.log(`rbfield benchmark: ${N} noisy points, ${SIDE} × ${SIDE} grid, ${os.cpus().length} cores`);
// 1. rbfield with full automatic selection.
const [auto, tAutoFit] = await timeAsync(() => fitSurfaceParallel(pts, { kernel: "auto" }));
const [gAuto, tAutoGrid] = await timeAsync(() => gridModelParallel(auto, { cell, extent, mask: "none" }));
console.log(`rbfield auto: chose ${auto.kernel}/${auto.trend}, fit+select ${tAutoFit.toFixed(2)} s, grid ${tAutoGrid.toFixed(2)} s`);
// 2. rbfield with the fixed model scipy runs (smoothing: a round value near what GCV picks here).
const smoothing = 1.0;
const [fixed, tFixedFit] = time(() => fitSurface(pts, { kernel: "thin-plate", trend: "linear", smoothing }));
const [gFixed, tFixedGrid] = await timeAsync(() => gridModelParallel(fixed, { cell, extent, mask: "none" }));
console.log(`rbfield fixed thin-plate: fit ${tFixedFit.toFixed(2)} s (includes exact leave-one-out), grid ${tFixedGrid.toFixed(2)} s`);

interface ScipyTiming {
  scipy: string;
  fit: number;
  grid: number;
  total: number;
  checksum: number;
  centre: number;
}
function scipyRun(smoothingValue: number, kernel: string, epsilon: number, degree: number): ScipyTiming | undefined {
  try {
    const out = execFileSync("/usr/bin/python3", [
      new URL("./scipy_reference.py", import.meta.url).pathname,
      csv,
      String(SIDE),
      String(SIDE),
      "0",
      "1000",
      String(cell),
      String(smoothingValue),
      kernel,
      String(epsilon),
      String(degree),
    ]);
    return JSON.parse(out.toString().trim().split("\n").at(-1)!);
  } catch (e) {
    console.log(`scipy reference unavailable (${(e as Error).message.split("\n")[0]}); install python3-scipy`);
    return undefined;
  }
}
// scipy's names for rbfield's kernels (scipy's multiquadric is negated, like rbfield's).
const SCIPY_KERNEL: Record<string, string> = {
  "thin-plate": "thin_plate_spline",
  gaussian: "gaussian",
  multiquadric: "multiquadric",
  "inverse-multiquadric": "inverse_multiquadric",
};
const DEGREE: Record<string, number> = { none: -1, constant: 0, linear: 1, quadratic: 2 };
// 1. scipy with the kernel, shape, trend and smoothing rbfield's selection chose, fixed.
const scipyChosen = scipyRun(auto.lambda, SCIPY_KERNEL[auto.kernel], auto.shape ?? 1, DEGREE[auto.trend]);
// 2. scipy with the fixed thin-plate model.
const scipy = scipyRun(smoothing, "thin_plate_spline", 1, 1);
const mem = Deno.memoryUsage();
if (scipy && scipyChosen) {
  const centre = gFixed.values[(SIDE / 2) * SIDE + SIDE / 2];
  const centreAuto = gAuto.values[(SIDE / 2) * SIDE + SIDE / 2];
  console.log(`scipy ${scipy.scipy} RBFInterpolator, ${auto.kernel} as chosen, fixed: fit ${scipyChosen.fit.toFixed(2)} s, grid ${scipyChosen.grid.toFixed(2)} s`);
  console.log(`scipy ${scipy.scipy} RBFInterpolator, thin-plate, fixed: fit ${scipy.fit.toFixed(2)} s, grid ${scipy.grid.toFixed(2)} s`);
  console.log(`check: centre cell, chosen model: rbfield ${centreAuto.toFixed(9)} vs scipy ${scipyChosen.centre.toFixed(9)}`);
  console.log(`check: centre cell, thin-plate:   rbfield ${centre.toFixed(9)} vs scipy ${scipy.centre.toFixed(9)}`);
  const rows = [
    ["auto selection + grid vs scipy, chosen model fixed", tAutoFit + tAutoGrid, scipyChosen.total],
    ["fixed thin-plate + grid vs scipy thin-plate", tFixedFit + tFixedGrid, scipy.total],
    ["thin-plate grid evaluation only", tFixedGrid, scipy.grid],
  ] as const;
  console.log("\ncase                                                rbfield s   scipy s   ratio (target ≤ 1 for the first row)");
  for (const [name, a, b] of rows) console.log(`${name.padEnd(52)}${a.toFixed(2).padStart(8)}${b.toFixed(2).padStart(10)}${(a / b).toFixed(2).padStart(9)}`);
}
console.log(`\nrbfield process memory: rss ${(mem.rss / 2 ** 20).toFixed(0)} MiB, heap ${(mem.heapUsed / 2 ** 20).toFixed(0)} MiB`);
fs.rmSync(dir, { recursive: true, force: true });
