// deno task bench [-- options]: rbfield's speed as ratios against a reference measured in the same
// run (scipy/numpy in one long-lived Python, or d3-contour), never as pass/fail tests. The machine is
// noisy: read the minima and the ratios, not single seconds. See DEVELOPERS.md, "Performance".
//
// Whole jobs (jobs.ts): auto, fixed, fit, grid. Hot kernels (stages.ts): tridiag, loo, evaluator,
// contours, bands, each at several sizes with the growth exponent fitted from the minima.
import { parseArgs } from "node:util";
import type { BenchCase, Context, Options, Prepared } from "./case.ts";
import { exponents, exponentTable, formatSeconds, type Row, resultsTable, sinkValue, writeJson } from "./harness.ts";
import { JOB_CASES } from "./jobs.ts";
import { Reference } from "./reference.ts";
import { STAGE_CASES } from "./stages.ts";

const CASES = [...JOB_CASES, ...STAGE_CASES];
const GROUPS: Record<string, string[]> = {
  all: CASES.map((c) => c.name),
  jobs: JOB_CASES.map((c) => c.name),
  stages: STAGE_CASES.map((c) => c.name),
};

const HELP = `deno task bench [-- options]

  --only LIST        cases or groups, comma-separated (default all)
                     jobs:   ${GROUPS.jobs.join(", ")}
                     stages: ${GROUPS.stages.join(", ")}
  --n LIST           points of the whole jobs (default 2000; env BENCH_N)
  --side N           grid side of the whole jobs, N × N cells (default 500)
  --sizes LIST       n of the tridiag and loo stages, centres of the evaluator (default 500,1000,2000)
  --cells LIST       grid sides of the contours and bands stages (default 250,500,1000)
  --eval-side N      evaluation grid side of the evaluator stage (default 200)
  --reps N           timed repetitions per case and side (default 5)
  --warmup N         untimed runs before them (default 1, at least 1)
  --blas-threads N   OPENBLAS_NUM_THREADS for the Python reference (default: OpenBLAS's own)
  --no-reference     time rbfield only
  --json PATH        where to write the figures (default /tmp/rbfield-bench/results-DATE-TIME.json)

example: deno task bench -- --only fit --n 2000 --reps 3`;

function fail(message: string): never {
  console.error(`bench: ${message}\n\n${HELP}`);
  Deno.exit(2);
}

const STRING_FLAGS = ["only", "n", "side", "sizes", "cells", "eval-side", "reps", "warmup", "blas-threads", "json"];

function parseOptions(args: string[]): Options {
  let values: Record<string, string | boolean | undefined>;
  try {
    ({ values } = parseArgs({
      args,
      options: {
        ...Object.fromEntries(STRING_FLAGS.map((k) => [k, { type: "string" as const }])),
        "no-reference": { type: "boolean" },
        help: { type: "boolean", short: "h" },
      },
      strict: true,
    }));
  } catch (e) {
    fail((e as Error).message);
  }
  if (values.help) {
    console.log(HELP);
    Deno.exit(0);
  }
  const count = (name: string, fallback: number, min = 1): number => {
    const v = values[name];
    if (v === undefined) return fallback;
    const k = Number(v);
    if (!Number.isInteger(k) || k < min) fail(`--${name} must be an integer ≥ ${min}, got ${v}`);
    return k;
  };
  const list = (name: string, fallback: string): number[] => {
    const text = (values[name] as string | undefined) ?? fallback;
    const ks = text.split(",").map((s) => Number(s.trim()));
    if (ks.some((k) => !Number.isInteger(k) || k < 2)) fail(`--${name} must be integers ≥ 2, comma-separated, got ${text}`);
    return ks;
  };
  const only = ((values.only as string | undefined) ?? "all").split(",").map((s) => s.trim()).filter(Boolean).flatMap((name) => {
    if (GROUPS[name]) return GROUPS[name];
    if (CASES.some((c) => c.name === name)) return [name];
    fail(`unknown case ${JSON.stringify(name)}`);
  });
  const stamp = new Date().toISOString().replace(/:/g, "").replace("T", "-").slice(0, 17);
  return {
    only: CASES.map((c) => c.name).filter((name) => only.includes(name)),
    n: list("n", Deno.env.get("BENCH_N") ?? "2000"),
    side: count("side", 500, 2),
    sizes: list("sizes", "500,1000,2000"),
    cells: list("cells", "250,500,1000"),
    evalSide: count("eval-side", 200, 1),
    reps: count("reps", 5),
    warmup: count("warmup", 1, 1),
    blasThreads: values["blas-threads"] === undefined ? undefined : count("blas-threads", 1),
    reference: !values["no-reference"],
    json: (values.json as string | undefined) ?? `/tmp/rbfield-bench/results-${stamp}.json`,
  };
}

function read(path: string): string {
  try {
    return Deno.readTextFileSync(path);
  } catch {
    return "";
  }
}
/** The 1-minute load average (other work on the machine inflates every time). */
const loadAverage = () => Number(read("/proc/loadavg").split(" ")[0]);

/** What machine this is: cores, processor, memory, load (for the table's header and DEVELOPERS.md). */
function machine(): { nproc: number; cpu: string; memTotalMiB: number; memAvailableMiB: number; loadAtStart: number; deno: string; v8: string } {
  const cpu = /^model name\s*:\s*(.*)$/m.exec(read("/proc/cpuinfo"))?.[1] ?? Deno.build.arch;
  const mem = read("/proc/meminfo");
  const kib = (key: string) => Number(new RegExp(`^${key}:\\s*(\\d+)`, "m").exec(mem)?.[1] ?? NaN);
  return {
    nproc: navigator.hardwareConcurrency,
    cpu,
    memTotalMiB: Math.round(kib("MemTotal") / 1024),
    memAvailableMiB: Math.round(kib("MemAvailable") / 1024),
    loadAtStart: loadAverage(),
    deno: Deno.version.deno,
    v8: Deno.version.v8,
  };
}

// `deno task bench -- --only fit` hands the script a leading "--".
const options = parseOptions(Deno.args[0] === "--" ? Deno.args.slice(1) : Deno.args);
const host = machine();
const started = new Date();
const ref = options.reference ? await Reference.start({ blasThreads: options.blasThreads }) : undefined;
const ctx: Context = { options, ref, tmp: await Deno.makeTempDir({ prefix: "rbfield-bench-" }) };

const ran = (names: string[]) => names.some((name) => options.only.includes(name));
const header = [
  `rbfield benchmark ${started.toISOString()}`,
  `machine: ${host.nproc} cores, ${host.cpu}, ${host.memTotalMiB} MiB memory (${host.memAvailableMiB} MiB available), load average ${host.loadAtStart}; Deno ${host.deno}, V8 ${host.v8}`,
  ref
    ? `reference: Python ${ref.info.python}, numpy ${ref.info.numpy}, scipy ${ref.info.scipy}; BLAS ${ref.blasLine()}`
    : "reference: none (numpy/scipy ratios left out)",
  `cases: ${options.only.join(", ")}; ${options.warmup} warm-up + ${options.reps} timed runs each, rbfield and reference alternating`,
  `sizes: ${
    [
      ran(GROUPS.jobs) && `jobs n=${options.n.join(",")} with a ${options.side} × ${options.side} grid`,
      ran(["tridiag", "loo", "evaluator"]) && `tridiag/loo/evaluator n=${options.sizes.join(",")} (evaluator on ${options.evalSide} × ${options.evalSide} points)`,
      ran(["contours", "bands"]) && `contours/bands sides ${options.cells.join(",")}`,
    ].filter(Boolean).join("; ")
  }`,
];
console.log(header.join("\n"));

const rows: Row[] = [];
const errors: { case: string; size: number; error: string }[] = [];
for (const c of options.only.map((name) => CASES.find((k) => k.name === name)!) as BenchCase[]) {
  for (const size of c.sizes(options)) {
    const label = `${c.name} ${c.sizeName}=${size}`;
    console.error(`… ${label}: ${c.title}`);
    let prep: Prepared | undefined;
    try {
      prep = await c.prepare(size, ctx);
      const m = await prep.measure({ reps: options.reps, warmup: options.warmup });
      const row: Row = { case: c.name, title: c.title, sizeName: c.sizeName, size, subject: m.subject, referenceLabel: m.reference ? prep.referenceLabel : undefined, reference: m.reference, check: m.check };
      rows.push(row);
      console.error(
        `  rbfield min ${formatSeconds(m.subject.min)}` +
          (m.reference ? `, ${prep.referenceLabel} min ${formatSeconds(m.reference.min)}, ratio ${(m.subject.min / m.reference.min).toFixed(2)}` : ""),
      );
    } catch (e) {
      const error = (e as Error).message.split("\n")[0];
      errors.push({ case: c.name, size, error });
      console.error(`  skipped: ${error}`);
    } finally {
      await prep?.done?.().catch(() => undefined);
    }
  }
}

const expected = Object.fromEntries(CASES.map((c) => [c.name, c.expected]));
const growth = exponents(rows, expected);
const mem = Deno.memoryUsage();
console.log(`\n${resultsTable(rows)}`);
console.log("\nratios are rbfield / reference (below 1: rbfield faster); min ratio = ratio of the minima, mean ratio = ratio of the means");
console.log("\nwhat each case times:");
for (const c of CASES.filter((k) => rows.some((r) => r.case === k.name))) console.log(`  ${c.name.padEnd(10)} ${c.title}`);
if (rows.some((r) => r.check)) {
  console.log("\nchecks (same inputs, same results):");
  for (const r of rows.filter((r) => r.check)) console.log(`  ${r.case} ${r.sizeName}=${r.size}: ${r.check}`);
}
if (growth.length) console.log(`\ngrowth exponents (time ∝ size^k, least squares on log minima):\n${exponentTable(growth)}`);
for (const e of errors) console.log(`\nnot measured: ${e.case} size ${e.size}: ${e.error}`);
console.log(`\nload average at the end ${loadAverage()}; run took ${((Date.now() - started.getTime()) / 1000).toFixed(0)} s`);
console.log(`rbfield process memory at the end: rss ${(mem.rss / 2 ** 20).toFixed(0)} MiB, heap ${(mem.heapUsed / 2 ** 20).toFixed(0)} MiB; results consumed: ${sinkValue().toFixed(3)}`);

await writeJson(options.json, {
  date: started.toISOString(),
  seconds: (Date.now() - started.getTime()) / 1000,
  machine: { ...host, loadAtEnd: loadAverage() },
  reference: ref?.info ?? null,
  options,
  rows,
  exponents: growth,
  errors,
});
console.log(`figures written to ${options.json} (not for committing)`);
await ref?.close();
await Deno.remove(ctx.tmp, { recursive: true });
if (errors.length) Deno.exitCode = 1;
