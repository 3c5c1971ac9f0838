// deno task bench: speed of rbfield against a reference measured in the same run, as ratios.
//   1. 2,000 noisy points, full automatic selection (--kernel auto) + a 500 × 500 grid, against
//      scipy's RBFInterpolator with a fixed thin-plate kernel, linear drift and fixed smoothing on the
//      same points and grid (scipy does no selection).
//   2. The same fixed model in rbfield (thin-plate, linear drift, scipy's smoothing) against scipy.
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
console.log(`rbfield auto: chose ${auto.kernel}/${auto.drift}, fit+select ${tAutoFit.toFixed(2)} s, grid ${tAutoGrid.toFixed(2)} s`);
// 2. rbfield with the fixed model scipy runs (smoothing: a round value near what GCV picks here).
const smoothing = 1.0;
const [fixed, tFixedFit] = time(() => fitSurface(pts, { kernel: "thin-plate", drift: "linear", smoothing }));
const [gFixed, tFixedGrid] = await timeAsync(() => gridModelParallel(fixed, { cell, extent, mask: "none" }));
console.log(`rbfield fixed thin-plate: fit ${tFixedFit.toFixed(2)} s (includes exact leave-one-out), grid ${tFixedGrid.toFixed(2)} s`);
void gAuto;

let scipy: { scipy: string; fit: number; grid: number; total: number; checksum: number; centre: number } | undefined;
try {
  const out = execFileSync("/usr/bin/python3", [new URL("./scipy_reference.py", import.meta.url).pathname, csv, String(SIDE), String(SIDE), "0", "1000", String(cell), String(smoothing)]);
  scipy = JSON.parse(out.toString().trim().split("\n").at(-1)!);
} catch (e) {
  console.log(`scipy reference unavailable (${(e as Error).message.split("\n")[0]}); install python3-scipy`);
}
const mem = Deno.memoryUsage();
if (scipy) {
  const centre = gFixed.values[(SIDE / 2) * SIDE + SIDE / 2];
  console.log(`scipy ${scipy.scipy} RBFInterpolator fixed thin-plate: fit ${scipy.fit.toFixed(2)} s, grid ${scipy.grid.toFixed(2)} s`);
  console.log(`check: centre cell rbfield ${centre.toFixed(9)} vs scipy ${scipy.centre.toFixed(9)}`);
  const rows = [
    ["rbfield auto selection + grid", tAutoFit + tAutoGrid, scipy.total],
    ["rbfield fixed model + grid", tFixedFit + tFixedGrid, scipy.total],
    ["rbfield grid evaluation only", tFixedGrid, scipy.grid],
  ] as const;
  console.log("\ncase                              rbfield s   scipy s   ratio (rbfield / scipy; target ≤ 1 for the first row)");
  for (const [name, a, b] of rows) console.log(`${name.padEnd(34)}${a.toFixed(2).padStart(8)}${b.toFixed(2).padStart(10)}${(a / b).toFixed(2).padStart(9)}`);
}
console.log(`\nrbfield process memory: rss ${(mem.rss / 2 ** 20).toFixed(0)} MiB, heap ${(mem.heapUsed / 2 ** 20).toFixed(0)} MiB`);
fs.rmSync(dir, { recursive: true, force: true });
