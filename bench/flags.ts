// False alarms of the blunder test on clean data: seeded surveys of Franke's (1982) function with
// Gaussian noise (invented data), default options, counting the surveys that raise any flag. Pope's
// tau test at a 5% survey-wide level should flag about 5 surveys of 100 when the model fits.
//   deno run -A bench/flags.ts [N=5000] [surveys=100]
// Measured 2026-12-02 (2-core machine): N = 5,000 (the local method), 3 of 100 surveys flagged, 2.0 s
// per survey. test/defaults.test.ts checks 15 and 500 points on every run.
import { fitSurface } from "../src/fit/surface.ts";
import { gaussian, mulberry32 } from "../src/random.ts";
import { franke } from "../test/helpers.ts";

const N = Number(Deno.args[0] ?? 5000), surveys = Number(Deno.args[1] ?? 100);
let flaggedSurveys = 0, flags = 0;
const t0 = performance.now();
for (let seed = 1; seed <= surveys; seed++) {
  const r = mulberry32(7000 + seed), g = gaussian(mulberry32(9000 + seed));
  const x = new Float64Array(N), y = new Float64Array(N), z = new Float64Array(N);
  for (let i = 0; i < N; i++) {
    x[i] = 1000 * r();
    y[i] = 1000 * r();
    z[i] = 100 + 10 * franke(x[i] / 1000, y[i] / 1000) + 0.05 * g();
  }
  const model = fitSurface({ x, y, z, lines: Array.from({ length: N }, (_, i) => i + 2), skipped: [], merged: [], rowsRead: N });
  if (model.diagnostics.flags.lines.length) flaggedSurveys++;
  flags += model.diagnostics.flags.lines.length;
  if (seed % 10 === 0 || seed === surveys) {
    console.log(`${seed} surveys of ${N} points (${model.method} method): ${flaggedSurveys} raised a flag, ${flags} flags in all; ${((performance.now() - t0) / 1000 / seed).toFixed(1)} s per survey`);
  }
}
