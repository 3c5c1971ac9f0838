// deno task sweep [-- --size test|full]: rbfield's default fit and a fixed thin-plate + linear trend
// fit against R's mgcv (gam, bs = "tp", k = min(30, N), GCV.Cp) on the seeded cases of
// bench/sweep/cases.ts (default size "full"). Prints the grouped table, the Markdown version and
// the 10 worst cases. A report, not a pass/fail test (test/sweep.test.ts asserts the targets).
import { sweepCases } from "./cases.ts";
import { rAvailable, runSweep, summarise } from "./evaluate.ts";
import { markdownTable, problemCases, textTable, worstCases } from "./report.ts";

const i = Deno.args.indexOf("--size");
const size = i >= 0 ? Deno.args[i + 1] : "full";
if (size !== "test" && size !== "full") throw new Error(`--size must be test or full, not ${size}`);
if (!rAvailable(["mgcv"])) {
  console.error("Rscript with mgcv is needed (Debian r-cran-mgcv)");
  Deno.exit(1);
}

const t0 = performance.now();
const cases = sweepCases(size);
const run = await runSweep(cases, { thinPlate: true, progress: (s) => Deno.stderr.writeSync(new TextEncoder().encode(`\r${s.padEnd(70)}`)) });
const wall = (performance.now() - t0) / 1000;
Deno.stderr.writeSync(new TextEncoder().encode("\r".padEnd(72) + "\r"));
const s = summarise(run.results);

console.log(`Sweep "${size}": ${cases.length} cases, ${cases.reduce((a, c) => a + c.test.x.length, 0)} test points`);
console.log(`wall ${wall.toFixed(1)} s; rbfield (default + thin-plate fits, estimates, standard errors) ${run.rbfieldSeconds.toFixed(1)} s; R ran alongside: ${run.rLog}`);
console.log(
  "Ratios are RMSE against the truth at the test points, rbfield / mgcv (both floored at 1e-6 of the truth's range);\n" +
    "cover = share of test points of the noisy cases whose truth lies within ±1.96 se (mgcv: its interval; log cases\n" +
    "exp(fit ∓ 1.96 se + σ̂²/2)), pooled; se bad = cases with a negative, NaN or all-zero standard error or a failed fit.\n",
);
console.log(textTable(run.results));
console.log(`\nOverall: default/mgcv mean ${s.meanRatio.toFixed(3)}, p90 ${s.p90Ratio.toFixed(3)}, max ${s.maxRatio.toFixed(3)}; ` +
  `thin-plate/mgcv mean ${s.meanTp.toFixed(3)}; coverage default ${s.coverDefault.toFixed(3)}, mgcv ${s.coverMgcv.toFixed(3)} ` +
  `(${s.noisyPoints} test points); se problems in ${s.seBad} cases; mgcv fitted ${s.compared} of ${s.cases}`);
console.log("\n10 worst cases by default/mgcv RMSE ratio:");
console.log(worstCases(run.results));
const problems = problemCases(run.results);
console.log(`\nFailures and bad standard errors:${problems ? "\n" + problems : " none"}`);
console.log("\nMarkdown:\n");
console.log(markdownTable(run.results));
