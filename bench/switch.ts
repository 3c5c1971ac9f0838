// Where `--method auto` switches from the global method to the local one: both methods on the same
// seeded cases of the default-accuracy sweep (bench/sweep/cases.ts: uniform, clustered, transect and
// gridded designs; plane, bump, Franke and ridge surfaces; no noise or 10 % noise; log-normal
// readings), at N points, against the true surface at 300–400 test points inside the data's hull.
// Printed: RMSE local / global per design and noise, overall mean, 90th percentile and maximum, the
// coverage of the truth by ±1.96 standard errors (noisy cases), and the fit times.
//
//   npx -y deno@2 run -A bench/switch.ts              N = 1,000 and 2,000 (the global fits at 2,000 take ~30 s each)
//   npx -y deno@2 run -A bench/switch.ts --n 1500     one size
import { parseArgs } from "node:util";
import { DESIGNS, makeCase, SURFACES, type SweepCase } from "./sweep/cases.ts";
import { quantile, rmse, runRbfield } from "./sweep/evaluate.ts";

const { values } = parseArgs({ args: Deno.args, options: { n: { type: "string" } } });
const sizes = values.n ? [Number(values.n)] : [1000, 2000];

interface Row {
  id: string;
  n: number;
  design: string;
  noise: string;
  ratio: number;
  global: { rmse: number; seconds: number; cover: number; count: number };
  local: { rmse: number; seconds: number; cover: number; count: number };
}

function side(c: SweepCase, method: "global" | "local") {
  const t0 = performance.now();
  const r = runRbfield(c, { method });
  const seconds = (performance.now() - t0) / 1000;
  if (r.error) throw new Error(`${c.id} ${method}: ${r.error}`);
  let cover = 0, count = 0;
  if (c.noise !== "none") {
    c.test.truth.forEach((t, i) => {
      count++;
      if (Math.abs(r.est[i] - t) <= 1.96 * r.se[i]) cover++;
    });
  }
  // Both floored at 1e-6 of the truth's range, as in the sweep (exact cases: a plane).
  let lo = Infinity, hi = -Infinity;
  for (const t of c.test.truth) lo = Math.min(lo, t), hi = Math.max(hi, t);
  return { rmse: Math.max(rmse(r.est, c.test.truth), 1e-6 * (hi - lo)), seconds, cover, count };
}

const rows: Row[] = [];
for (const n of sizes) {
  const cases: SweepCase[] = [];
  DESIGNS.forEach((d, di) => {
    SURFACES.forEach((s, si) => {
      for (const noise of ["none", "large"] as const) cases.push(makeCase(d, s, noise, n, (di + si) % 2 ? "projected" : "local", false));
    });
    cases.push(makeCase(d, "bump", "large", n, di % 2 ? "projected" : "local", true));
  });
  for (const c of cases) {
    const g = side(c, "global"), l = side(c, "local");
    rows.push({ id: c.id, n, design: c.design, noise: c.log ? "log" : c.noise, ratio: l.rmse / g.rmse, global: g, local: l });
    console.error(`${c.id.padEnd(40)} global ${g.rmse.toExponential(3)} (${g.seconds.toFixed(1)} s)  local ${l.rmse.toExponential(3)} (${l.seconds.toFixed(1)} s)  ratio ${(l.rmse / g.rmse).toFixed(3)}`);
  }
}

const geo = (a: number[]) => Math.exp(a.reduce((s, v) => s + Math.log(v), 0) / a.length);
console.log(`Local against global method on the sweep's designs (${rows.length} cases; RMSE against the truth)`);
console.log("N      design     noise  cases  local/global RMSE: geometric mean  max");
for (const n of sizes) {
  for (const design of DESIGNS) {
    for (const noise of ["none", "large", "log"]) {
      const g = rows.filter((r) => r.n === n && r.design === design && r.noise === noise).map((r) => r.ratio);
      if (g.length) console.log(`${String(n).padEnd(6)} ${design.padEnd(10)} ${noise.padEnd(6)} ${String(g.length).padStart(5)}  ${geo(g).toFixed(3).padStart(31)}  ${Math.max(...g).toFixed(3)}`);
    }
  }
}
for (const n of sizes) {
  const r = rows.filter((x) => x.n === n);
  const ratios = r.map((x) => x.ratio);
  const cover = (k: "global" | "local") => r.reduce((s, x) => s + x[k].cover, 0) / Math.max(1, r.reduce((s, x) => s + x[k].count, 0));
  const secs = (k: "global" | "local") => r.reduce((s, x) => s + x[k].seconds, 0) / r.length;
  console.log(
    `N = ${n}: local/global RMSE geometric mean ${geo(ratios).toFixed(3)}, median ${quantile(ratios, 0.5).toFixed(3)}, p90 ${quantile(ratios, 0.9).toFixed(3)}, max ${Math.max(...ratios).toFixed(3)}; ` +
      `coverage ±1.96 se global ${cover("global").toFixed(3)}, local ${cover("local").toFixed(3)}; mean fit + estimates time global ${secs("global").toFixed(2)} s, local ${secs("local").toFixed(2)} s (one thread)`,
  );
}
console.log("\nWorst 6 cases by local/global:");
for (const r of [...rows].sort((a, b) => b.ratio - a.ratio).slice(0, 6)) console.log(`  ${r.id.padEnd(40)} ${r.ratio.toFixed(3)}  (global ${r.global.rmse.toExponential(3)}, local ${r.local.rmse.toExponential(3)})`);
