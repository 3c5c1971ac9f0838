// A small benchmark harness (after mourner/flatbush's bench.js): warm-up runs that are not timed,
// N timed repetitions, every result kept so nothing can be optimised away, minimum and mean ± sd,
// and the ratio of minima and of means against a reference measured in the same run. The subject
// and the reference alternate (ABBA order), so drift on a noisy machine falls on both alike.
// Read the minimum first: on a shared machine noise only ever adds time.
import { peakResidentBytes } from "../src/job/memory.ts";

/** One run's time in seconds and its result. */
export interface Timed<T> {
  seconds: number;
  value: T;
}
/** Something to time: returns its own time (in-process work via `timed`, or a timed reference). */
export type Runner<T> = () => Promise<Timed<T>>;

/** Time an in-process function, sync or async, with performance.now(). */
export function timed<T>(f: () => T | Promise<T>): Runner<T> {
  return async () => {
    const t0 = performance.now();
    const value = await f();
    return { seconds: (performance.now() - t0) / 1000, value };
  };
}

export interface Stats {
  reps: number;
  min: number;
  mean: number;
  /** Sample standard deviation (0 for one repetition). */
  sd: number;
  times: number[];
}

export function summarise(times: number[]): Stats {
  const reps = times.length;
  const mean = times.reduce((a, b) => a + b, 0) / reps;
  const sd = reps > 1 ? Math.sqrt(times.reduce((a, t) => a + (t - mean) ** 2, 0) / (reps - 1)) : 0;
  return { reps, min: Math.min(...times), mean, sd, times };
}

// Every result is folded into this number, which the run prints: no result is dead code.
let sink = 0;
/** Fold a result into the sink (cheaply: a number, an array's length and first entry, a key count). */
export function consume(value: unknown): void {
  let d = 0;
  if (typeof value === "number") d = value;
  else if (ArrayBuffer.isView(value)) d = (value as Float64Array).length + Number((value as Float64Array)[0] ?? 0);
  else if (Array.isArray(value)) d = value.length;
  else if (value && typeof value === "object") d = Object.keys(value).length;
  if (Number.isFinite(d)) sink = (sink + d) % 1e9;
}
export function sinkValue(): number {
  return sink;
}

export interface MeasureOptions {
  reps: number;
  warmup: number;
}

export interface Pair<A, B> {
  subject: Stats;
  reference?: Stats;
  /** Results of the last runs, kept for checks. */
  subjectValue: A;
  referenceValue?: B;
}

/**
 * Warm up and time `subject`, then (given the subject's warm-up result, e.g. the model it chose)
 * build the reference, warm it up, and time both alternately.
 */
export async function measurePair<A, B>(
  subject: Runner<A>,
  makeReference: ((warm: A) => Promise<Runner<B> | undefined>) | undefined,
  { reps, warmup }: MeasureOptions,
): Promise<Pair<A, B>> {
  let a = await subject();
  consume(a.value);
  for (let i = 1; i < warmup; i++) consume((a = await subject()).value);
  const reference = await makeReference?.(a.value);
  let b: Timed<B> | undefined;
  if (reference) for (let i = 0; i < Math.max(warmup, 1); i++) consume((b = await reference()).value);
  const ta: number[] = [], tb: number[] = [];
  const runA = async () => {
    a = await subject();
    consume(a.value);
    ta.push(a.seconds);
  };
  const runB = async () => {
    b = await reference!();
    consume(b.value);
    tb.push(b.seconds);
  };
  for (let i = 0; i < reps; i++) {
    // ABBA: A B, B A, A B, … so neither side always runs first.
    if (!reference) await runA();
    else if (i % 2 === 0) (await runA(), await runB());
    else (await runB(), await runA());
  }
  return {
    subject: summarise(ta),
    reference: reference ? summarise(tb) : undefined,
    subjectValue: a.value,
    referenceValue: b?.value,
  };
}

/** One row of the results: a case at one size. */
export interface Row {
  case: string;
  title: string;
  sizeName: string;
  size: number;
  subject: Stats;
  referenceLabel?: string;
  reference?: Stats;
  check?: string;
}

export const ratioOfMinima = (r: Row) => (r.reference ? r.subject.min / r.reference.min : undefined);
export const ratioOfMeans = (r: Row) => (r.reference ? r.subject.mean / r.reference.mean : undefined);

/** Seconds with a unit that keeps three significant figures. */
export function formatSeconds(s: number): string {
  if (s >= 100) return `${s.toFixed(0)} s`;
  if (s >= 1) return `${s.toPrecision(3)} s`;
  if (s >= 1e-3) return `${(s * 1e3).toPrecision(3)} ms`;
  return `${(s * 1e6).toPrecision(3)} µs`;
}
const meanSd = (s: Stats) => `${formatSeconds(s.mean)} ± ${formatSeconds(s.sd)}`;

/** An aligned text table: first column left-aligned, the others right-aligned. */
export function alignedTable(header: string[], body: string[][]): string {
  const widths = header.map((h, j) => Math.max(h.length, ...body.map((r) => (r[j] ?? "").length)));
  const line = (cells: string[]) => cells.map((c, j) => (j === 0 ? c.padEnd(widths[j]) : c.padStart(widths[j]))).join("  ").trimEnd();
  return [line(header), widths.map((w) => "-".repeat(w)).join("  "), ...body.map(line)].join("\n");
}

export function resultsTable(rows: Row[]): string {
  const header = ["case", "size", "rbfield min", "rbfield mean ± sd", "reference", "ref min", "ref mean ± sd", "min ratio", "mean ratio"];
  const body = rows.map((r) => [
    r.case,
    `${r.sizeName}=${r.size}`,
    formatSeconds(r.subject.min),
    meanSd(r.subject),
    r.referenceLabel ?? "–",
    r.reference ? formatSeconds(r.reference.min) : "–",
    r.reference ? meanSd(r.reference) : "–",
    ratioOfMinima(r)?.toFixed(2) ?? "–",
    ratioOfMeans(r)?.toFixed(2) ?? "–",
  ]);
  return alignedTable(header, body);
}

/** Least-squares slope of log(time) against log(size): time ∝ size^slope. */
export function growthExponent(sizes: number[], times: number[]): number | undefined {
  if (sizes.length < 2 || new Set(sizes).size < 2) return undefined;
  const x = sizes.map(Math.log), y = times.map(Math.log);
  const mx = x.reduce((a, b) => a + b, 0) / x.length, my = y.reduce((a, b) => a + b, 0) / y.length;
  let sxy = 0, sxx = 0;
  for (let i = 0; i < x.length; i++) {
    sxy += (x[i] - mx) * (y[i] - my);
    sxx += (x[i] - mx) ** 2;
  }
  return sxy / sxx;
}

export interface Exponent {
  case: string;
  sizeName: string;
  sizes: number[];
  subject?: number;
  reference?: number;
  expected?: string;
}

/** Growth exponents (from the minima) of every case measured at two or more sizes. */
export function exponents(rows: Row[], expected: Record<string, string | undefined>): Exponent[] {
  const byCase = Map.groupBy(rows, (r) => r.case);
  const out: Exponent[] = [];
  for (const [name, rs] of byCase) {
    const sizes = rs.map((r) => r.size);
    if (new Set(sizes).size < 2) continue;
    const refs = rs.filter((r) => r.reference);
    out.push({
      case: name,
      sizeName: rs[0].sizeName,
      sizes,
      subject: growthExponent(sizes, rs.map((r) => r.subject.min)),
      reference: refs.length === rs.length ? growthExponent(sizes, refs.map((r) => r.reference!.min)) : undefined,
      expected: expected[name],
    });
  }
  return out;
}

export function exponentTable(list: Exponent[]): string {
  return alignedTable(
    ["case", "sizes", "rbfield exponent", "reference exponent", "expected"],
    list.map((e) => [e.case, `${e.sizeName}=${e.sizes.join(",")}`, e.subject?.toFixed(2) ?? "–", e.reference?.toFixed(2) ?? "–", e.expected ?? "–"]),
  );
}

/** Write the figures as JSON (for comparing runs; never committed). */
export async function writeJson(path: string, data: unknown): Promise<void> {
  const dir = path.replace(/\/[^/]*$/, "");
  if (dir && dir !== path) await Deno.mkdir(dir, { recursive: true });
  await Deno.writeTextFile(path, JSON.stringify(data, null, 1) + "\n");
}

/** Peak resident set of this process so far, MiB (peakResidentBytes of src/job/memory.ts); NaN where unknown. */
export function peakRss(): number {
  const bytes = peakResidentBytes();
  return bytes === null ? NaN : bytes / 2 ** 20;
}
