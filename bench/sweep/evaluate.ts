// Run rbfield and R's mgcv (bench/sweep/mgcv_sweep.R, one Rscript call for all cases) on a list of
// cases and compute the accuracy statistics of the sweep. Shared by bench/sweep/run.ts and the tests.
import { spawn, spawnSync } from "node:child_process";
import * as fs from "node:fs";
import * as os from "node:os";
import * as path from "node:path";
import { fileURLToPath } from "node:url";
import { fitSurface } from "../../src/fit/surface.ts";
import { makeEvaluator } from "../../src/evaluate/evaluate.ts";
import { makeErrorEstimator } from "../../src/evaluate/stderr.ts";
import type { CleanPoints } from "../../src/types.ts";
import type { SweepCase } from "./cases.ts";

/** What both fitters need: training data and places to predict. */
export interface FitCase {
  id: string;
  log: boolean;
  train: { x: Float64Array; y: Float64Array; z: Float64Array };
  test: { x: Float64Array; y: Float64Array };
}

export interface RbfieldRun {
  est: Float64Array;
  se: Float64Array;
  kernel: string;
  trend: string;
  /** The fit or the error estimator threw. */
  error?: string;
}

export interface MgcvRun {
  status: string;
  message: string;
  /** Basis dimension mgcv used. */
  k: number;
  est: Float64Array;
  /** Interval est ∓ 1.96 se (log cases: exp(fit ∓ 1.96 se + σ̂²/2)). */
  lo: Float64Array;
  hi: Float64Array;
}

type FitOptions = NonNullable<Parameters<typeof fitSurface>[1]>;

export const FIXED_TP: FitOptions = { kernel: "thin-plate", trend: "linear" };

export function cleanPoints(t: FitCase["train"]): CleanPoints {
  const n = t.x.length;
  return { x: t.x, y: t.y, z: t.z, lines: Array.from({ length: n }, (_, i) => i + 2), skipped: [], merged: [], rowsRead: n };
}

/** Fit with the given options (plus transform "log" for log cases); estimates and standard errors at the test points. */
export function runRbfield(c: FitCase, options: FitOptions): RbfieldRun {
  const m = c.test.x.length;
  const est = new Float64Array(m).fill(NaN), se = new Float64Array(m).fill(NaN);
  try {
    const model = fitSurface(cleanPoints(c.train), { ...options, transform: c.log ? "log" : "none" });
    const ev = makeEvaluator(model), er = makeErrorEstimator(model);
    for (let i = 0; i < m; i++) {
      est[i] = ev.at(c.test.x[i], c.test.y[i]);
      se[i] = er.at(c.test.x[i], c.test.y[i]);
    }
    return { est, se, kernel: model.kernel, trend: model.trend };
  } catch (e) {
    return { est, se, kernel: "-", trend: "-", error: String((e as Error).message ?? e) };
  }
}

/** Does Rscript run and load these packages? */
export function rAvailable(packages: string[]): boolean {
  const expr = `suppressPackageStartupMessages({${packages.map((p) => `library(${p})`).join("; ")}})`;
  return spawnSync("Rscript", ["-e", expr], { encoding: "utf8" }).status === 0;
}

/**
 * Fit every case with mgcv in one Rscript call. k(c) is the basis dimension (null: mgcv's default).
 * Starts R at once and resolves when it has finished, so rbfield can run meanwhile.
 */
export function runMgcv(cases: FitCase[], k: (c: FitCase) => number | null): Promise<{ runs: Map<string, MgcvRun>; log: string }> {
  const dir = fs.mkdtempSync(path.join(os.tmpdir(), "rbfield-mgcv-"));
  const num = (v: number) => (Number.isFinite(v) ? String(v) : "NA");
  fs.writeFileSync(path.join(dir, "cases.csv"), "id,log,k\n" + cases.map((c) => `${c.id},${c.log ? "TRUE" : "FALSE"},${k(c) ?? "NA"}`).join("\n") + "\n");
  const rows = ["id,set,x,y,z"];
  for (const c of cases) {
    for (let i = 0; i < c.train.x.length; i++) rows.push(`${c.id},train,${num(c.train.x[i])},${num(c.train.y[i])},${num(c.train.z[i])}`);
    for (let i = 0; i < c.test.x.length; i++) rows.push(`${c.id},test,${num(c.test.x[i])},${num(c.test.y[i])},NA`);
  }
  fs.writeFileSync(path.join(dir, "points.csv"), rows.join("\n") + "\n");
  // R writes to files, not pipes: the caller may block the event loop while R runs.
  const out = fs.openSync(path.join(dir, "stdout"), "w"), err = fs.openSync(path.join(dir, "stderr"), "w");
  const script = fileURLToPath(new URL("./mgcv_sweep.R", import.meta.url));
  const child = spawn("Rscript", [script, dir], { stdio: ["ignore", out, err] });
  return new Promise((resolve, reject) => {
    child.on("error", reject);
    child.on("close", (code) => {
      fs.closeSync(out), fs.closeSync(err);
      const read = (f: string) => fs.readFileSync(path.join(dir, f), "utf8");
      if (code !== 0) {
        const msg = read("stderr");
        fs.rmSync(dir, { recursive: true, force: true });
        return reject(new Error(`Rscript mgcv_sweep.R exited with ${code}: ${msg}`));
      }
      const runs = new Map<string, MgcvRun>();
      for (const line of read("mgcv-cases.csv").trim().split("\n").slice(1)) {
        const [id, status, kk, , , ...message] = line.split(",");
        const m = cases.find((c) => c.id === id)!.test.x.length;
        const nan = () => new Float64Array(m).fill(NaN);
        runs.set(id, { status, message: message.join(",").replace(/^"|"$/g, ""), k: Number(kk), est: nan(), lo: nan(), hi: nan() });
      }
      for (const line of read("mgcv.csv").trim().split("\n").slice(1)) {
        const [id, i, est, lo, hi] = line.split(",");
        const r = runs.get(id)!;
        r.est[Number(i)] = Number(est);
        r.lo[Number(i)] = Number(lo);
        r.hi[Number(i)] = Number(hi);
      }
      const log = read("stdout").trim();
      fs.rmSync(dir, { recursive: true, force: true });
      resolve({ runs, log });
    });
  });
}

export function rmse(est: ArrayLike<number>, truth: ArrayLike<number>): number {
  let s = 0;
  for (let i = 0; i < truth.length; i++) s += (est[i] - truth[i]) ** 2;
  return Math.sqrt(s / truth.length);
}

/** Quantile, Hyndman & Fan (1996) definition 7 (R's default): linear between order statistics. */
export function quantile(values: number[], p: number): number {
  const v = values.filter((x) => !Number.isNaN(x)).sort((a, b) => a - b);
  if (v.length === 0) return NaN;
  const h = (v.length - 1) * p, lo = Math.floor(h);
  return lo + 1 < v.length ? v[lo] + (h - lo) * (v[lo + 1] - v[lo]) : v[lo];
}

export interface CaseResult {
  c: SweepCase;
  rmseDefault: number;
  rmseTp: number;
  rmseMgcv: number;
  ratioDefault: number;
  ratioTp: number;
  kernel: string;
  trend: string;
  rbError?: string;
  mgcvStatus: string;
  mgcvMessage: string;
  /** Test points whose truth lies within est ± 1.96 se (rbfield default) / mgcv's interval. */
  coverDefault: number;
  coverMgcv: number;
  /** Standard errors at the test points: negative, non-finite, and whether all are zero. */
  seNegative: number;
  seNonFinite: number;
  seAllZero: boolean;
}

/** RMSE ratio a/b, both floored at 1e-6 of the truth's range: smaller differences are rounding, not accuracy. */
function ratio(a: number, b: number, truth: Float64Array): number {
  let lo = Infinity, hi = -Infinity;
  for (const t of truth) lo = Math.min(lo, t), hi = Math.max(hi, t);
  const floor = 1e-6 * (hi - lo);
  return Math.max(a, floor) / Math.max(b, floor);
}

export interface SweepRun {
  results: CaseResult[];
  rbfieldSeconds: number;
  rLog: string;
}

/** rbfield default (and, if asked, fixed thin-plate + linear trend) and mgcv (k = min(30, N)) on every case. */
export async function runSweep(cases: SweepCase[], opts: { thinPlate: boolean; progress?: (s: string) => void }): Promise<SweepRun> {
  const mgcv = runMgcv(cases, (c) => Math.min(30, c.train.x.length));
  mgcv.catch(() => {}); // awaited below; avoids an unhandled rejection while rbfield runs
  const t0 = performance.now();
  const partial = cases.map((c, j) => {
    opts.progress?.(`rbfield ${j + 1}/${cases.length} ${c.id}`);
    return { c, def: runRbfield(c, {}), tp: opts.thinPlate ? runRbfield(c, FIXED_TP) : undefined };
  });
  const rbfieldSeconds = (performance.now() - t0) / 1000;
  const { runs, log } = await mgcv;
  const results = partial.map(({ c, def, tp }): CaseResult => {
    const mg = runs.get(c.id)!;
    const truth = c.test.truth;
    const rmseDefault = rmse(def.est, truth), rmseMgcv = rmse(mg.est, truth);
    const rmseTp = tp ? rmse(tp.est, truth) : NaN;
    let coverDefault = 0, coverMgcv = 0, seNegative = 0, seNonFinite = 0, zeros = 0;
    for (let i = 0; i < truth.length; i++) {
      const se = def.se[i];
      if (Math.abs(def.est[i] - truth[i]) <= 1.96 * se) coverDefault++;
      if (truth[i] >= mg.lo[i] && truth[i] <= mg.hi[i]) coverMgcv++;
      if (se < 0) seNegative++;
      if (!Number.isFinite(se)) seNonFinite++;
      if (se === 0) zeros++;
    }
    return {
      c,
      rmseDefault,
      rmseTp,
      rmseMgcv,
      ratioDefault: ratio(rmseDefault, rmseMgcv, truth),
      ratioTp: ratio(rmseTp, rmseMgcv, truth),
      kernel: def.kernel,
      trend: def.trend,
      rbError: def.error ?? tp?.error,
      mgcvStatus: mg.status,
      mgcvMessage: mg.message,
      coverDefault,
      coverMgcv,
      seNegative,
      seNonFinite,
      seAllZero: zeros === truth.length,
    };
  });
  return { results, rbfieldSeconds, rLog: log };
}

export interface Summary {
  cases: number;
  /** Cases with an mgcv fit (the ratios are over these). */
  compared: number;
  meanRatio: number;
  p90Ratio: number;
  maxRatio: number;
  meanTp: number;
  p90Tp: number;
  maxTp: number;
  /** Pooled over every test point of every noisy case in the group: share whose truth lies in the interval. */
  coverDefault: number;
  coverMgcv: number;
  noisyPoints: number;
  /** Cases with a negative, non-finite or all-zero standard error, or an rbfield error. */
  seBad: number;
  rbErrors: number;
  /** "kernel/trend" the default chose → number of cases. */
  chosen: Map<string, number>;
}

const mean = (v: number[]) => (v.length ? v.reduce((a, b) => a + b, 0) / v.length : NaN);

export function isNoisy(c: SweepCase): boolean {
  return c.log || c.noise !== "none";
}

export function summarise(rows: CaseResult[]): Summary {
  const ok = rows.filter((r) => r.mgcvStatus === "ok" && !r.rbError);
  const rd = ok.map((r) => r.ratioDefault), rt = ok.map((r) => r.ratioTp).filter((v) => !Number.isNaN(v));
  let hitD = 0, hitM = 0, pts = 0;
  for (const r of rows.filter((r) => isNoisy(r.c))) {
    hitD += r.coverDefault;
    hitM += r.coverMgcv;
    pts += r.c.test.truth.length;
  }
  const chosen = new Map<string, number>();
  for (const r of rows) chosen.set(`${r.kernel}/${r.trend}`, (chosen.get(`${r.kernel}/${r.trend}`) ?? 0) + 1);
  return {
    cases: rows.length,
    compared: ok.length,
    meanRatio: mean(rd),
    p90Ratio: quantile(rd, 0.9),
    maxRatio: rd.length ? Math.max(...rd) : NaN,
    meanTp: mean(rt),
    p90Tp: quantile(rt, 0.9),
    maxTp: rt.length ? Math.max(...rt) : NaN,
    coverDefault: pts ? hitD / pts : NaN,
    coverMgcv: pts ? hitM / pts : NaN,
    noisyPoints: pts,
    seBad: rows.filter((r) => r.rbError || r.seNegative || r.seNonFinite || r.seAllZero).length,
    rbErrors: rows.filter((r) => r.rbError).length,
    chosen,
  };
}

/** The groupings of the report: by N, design, surface, noise (log or not) and coordinates. */
export const GROUPINGS: [string, (c: SweepCase) => string][] = [
  ["N", (c) => `N=${c.n}`],
  ["design", (c) => c.design],
  ["surface", (c) => c.surface],
  ["noise", (c) => (c.log ? `log ${c.noise} (s=${c.noise === "small" ? 0.1 : 0.3})` : `${c.noise}`)],
  ["coordinates", (c) => c.coords],
];

export function groupBy(rows: CaseResult[], key: (c: SweepCase) => string): [string, CaseResult[]][] {
  const groups = new Map<string, CaseResult[]>();
  for (const r of rows) {
    const k = key(r.c);
    if (!groups.has(k)) groups.set(k, []);
    groups.get(k)!.push(r);
  }
  // Numeric labels (N=8, N=12 …) in numeric order, others in order of first appearance.
  const collator = new Intl.Collator("en", { numeric: true });
  return [...groups.entries()].sort((a, b) => (/^N=/.test(a[0]) ? collator.compare(a[0], b[0]) : 0));
}
