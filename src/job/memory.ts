// Memory: what a job will need at its peak, estimated before the long work starts, against a limit;
// above it the job is refused with advice (exit 2) rather than left to crash. The figures are the
// arrays each stage holds at once, counted from the code (bytes per number below), scaled to the
// resident set size the Linux kernel reports (VmHWM, proc(5); GNU time's maximum resident set size)
// of the command line on Franke's function, so that the estimate is above what was measured and
// within 2× of it for the usual sizes: see DEVELOPERS.md, "Memory", and test/memory.test.ts.
// Measured 2026-12-02 on the 2-core machine with other work running; the engine's garbage collector
// makes a peak vary by up to 30 % between runs of the same job, hence the margins.
import * as fs from "node:fs";
import process from "node:process";
import { ExitCode, opt, RbfieldError } from "../errors.ts";
import { LOCAL_AUTO_POINTS } from "../fit/surface.ts";
import { DEFAULT_PATCH_POINTS } from "../fit/local/local.ts";
import { SPLIT_MIN } from "../fit/tridiag_split.ts";
import type { MethodChoice } from "../fit/options.ts";
import { MAX_DRAWN_POINTS } from "../write/map/sample.ts";
import { CACHE_BYTES as STDERR_CACHE_BYTES } from "../evaluate/local_stderr.ts";

const MiB = 2 ** 20;
const GiB = 2 ** 30;

/**
 * The process before any data: Deno, V8 and rbfield's modules (measured: 116–126 MiB resident for a
 * 100-point fit without worker threads, the PDF and font modules included).
 */
export const BASE_BYTES = 130 * MiB;
/**
 * One worker thread: its own V8 isolate and copy of the modules it imports (measured: 40–45 MiB,
 * a fixed-kernel local fit of 2,000 points peaking at 203–210 MiB on 2 threads).
 */
export const WORKER_BYTES = 45 * MiB;
/**
 * What a worker's heap grows by while it ranks candidates in a fit (automatic kernel and trend: the
 * global method on at most 500 points, the local one on sample patches). Measured: automatic global
 * fits of 500–1,000 points peaked at 264–296 MiB, local ones of 2,000 points at 178–276 MiB, against
 * 203–210 MiB with a fixed kernel; taken as 45 MiB per worker on top of WORKER_BYTES.
 */
export const RANK_WORKER_BYTES = 45 * MiB;
/**
 * Global fit of n points, bytes per n²: the kernel matrix, its copy B reduced to tridiagonal form
 * and the reflectors (8 + 8 + 4), then the leave-one-out Cholesky factor and its inverse. Measured
 * (peak less the process) 25–60 between 1,000 and 3,000 points, falling with n; taken as 40: the
 * whole estimate was 1.07–1.9 × the peak for automatic fits of 500–3,000 points. The standard errors
 * factorise once more (evaluate/null_space.ts: the kernel matrix, then its Cholesky factor, 8 + 8)
 * after the fit's matrices are gone: taken as 40 too. Measured `run --method global` peaks 467, 493
 * and 1,188 MiB at 2,000, 3,000 and 5,000 points against estimates of 626 MiB, 856 MiB and 1.6 GiB.
 */
export const GLOBAL_FIT_PER_N2 = 40;
export const GLOBAL_ERRORS_PER_N2 = 40;
/**
 * From SPLIT_MIN points the reduction, the Cholesky factorisation and the inverse work on a copy of
 * their matrix that the helper thread shares (fit/tridiag_split.ts): 8 more bytes per n². Measured:
 * a 5,000-point global fit peaked at 1,098 MiB with the copies, 834 MiB without.
 */
export const SPLIT_COPY_PER_N2 = 8;
/**
 * Local fit, bytes per point: the prepared data and its copy in each worker, the patches' results
 * (7 numbers per patch member, about 3.5 members per point), the model's arrays and its binary part,
 * and the garbage the engine has not collected yet. Measured (peak less the process and workers)
 * 1.4–2.6 KB per point between 5·10⁴ and 2·10⁵ points (peaks 310–315 MiB at 5·10⁴, 420–565 MiB at
 * 10⁵, 564–566 MiB at 2·10⁵); taken with the model's share as 2,400 + 600. Beyond 2·10⁵ points the
 * garbage weighs less: the whole run's resident set during the fit grew by about 380 bytes a point
 * from 2·10⁵ to 10⁶ (788–905 MiB at 10⁶, bench/run_large.ts), so each point past LOCAL_FIT_KNEE
 * counts LOCAL_FIT_PER_POINT_BEYOND (700, about 1.8 × that).
 */
export const LOCAL_FIT_PER_POINT = 2400;
export const LOCAL_FIT_KNEE = 200_000;
export const LOCAL_FIT_PER_POINT_BEYOND = 700;
/** The model held in memory, bytes per point: a local model's arrays (about 12 numbers per point and 3 per patch member), a global one's. */
const LOCAL_MODEL_PER_POINT = 600;
const GLOBAL_MODEL_PER_POINT = 120;
/** A patch's own work per worker (kernel matrix, reduction, leave-one-out: about 40 bytes per n², patches of up to 2 × patchPoints). */
const PATCH_WORK_PER_N2 = 40;
/**
 * The local method's standard errors: each thread keeps patch factors (8·n² bytes per patch, about
 * 5,600 bytes per point over all patches) up to STDERR_CACHE_BYTES (evaluate/local_stderr.ts), and a
 * packed copy of the model (5 numbers per patch member: 140 bytes per point). Factors dropped from
 * the cache stay in the heap until the collector runs: a thread's share was measured up to 2.2 × the
 * cache's bound (a 2·10⁵-point model's error grid peaked at 1,330 MiB on 2 threads), taken as 2.5 ×.
 */
const LOCAL_ERRORS_PER_POINT = 5600;
const STDERR_CACHE_PEAK = 2.5 * STDERR_CACHE_BYTES;
const PACKED_ERRORS_PER_POINT = 140;
/**
 * Bytes per grid cell: a grid alone — values (8), mask (1), the workers' blocks (8), the GeoTIFF (4):
 * measured 17, taken as 20 — with standard errors 12 more (their values and GeoTIFF); a run's grid,
 * standard errors, contour lines, bands and the map's relief image, measured about 180 at 10⁶ cells,
 * taken as 200.
 */
export const GRID_PER_CELL = 20;
export const GRID_ERRORS_PER_CELL = 12;
export const RUN_PER_CELL = 200;
/**
 * The run's map (map.pdf) and report draw at most MAX_DRAWN_POINTS survey points (an even sample
 * above that): the PDF conversion of the map took about 45 KB per drawn point and the report 7 KB,
 * 52 KB per drawn point. Every point still has its estimate, standard error and note, its rows in
 * residuals.csv and estimates.csv (written in pieces as they are made) and its leave-one-out residual
 * in the report's histogram: RUN_PER_POINT bytes. Measured at 10⁶ points: the writing stage's resident
 * set rose 300–360 MiB above the stage before, the map and report included (bench/run_large.ts).
 */
export const MAP_PER_POINT = 52 * 1024;
export const RUN_PER_POINT = 400;
/** When nothing says how much memory the machine has. */
export const FALLBACK_LIMIT = 4 * GiB;
/** Share of the machine's memory a job may plan to use by default. */
export const DEFAULT_SHARE = 0.5;

/** One part of an estimate, for the message. */
export interface MemoryPart {
  what: string;
  bytes: number;
  /** What the part belongs to, for the advice (memoryAdvice). */
  kind: "process" | "model" | "global" | "local" | "errors" | "grid" | "map";
}

export interface MemoryEstimate {
  /** Peak bytes: the parts summed. */
  bytes: number;
  /** The largest part and its size, for the message, e.g. "global fit of 12,000 points (…): 4.3 GiB". */
  what: string;
  largest: MemoryPart["kind"];
  parts: MemoryPart[];
}

/** Which method a fit of n points will use (as fitSurface chooses it). */
export function methodFor(n: number, asked: MethodChoice | undefined): "global" | "local" {
  const method = asked ?? "auto";
  return method === "auto" ? (n > LOCAL_AUTO_POINTS ? "local" : "global") : method;
}

export interface JobSize {
  /** Points fitted (or in the model). */
  points: number;
  method: "global" | "local";
  patchPoints?: number;
  /** Grid cells, when the job grids. */
  cells?: number;
  /** The job computes standard errors on the grid (grid --stderr, run). */
  stderr?: boolean;
  /** The job is a whole run (contours, bands, map, report besides the grid). */
  run?: boolean;
  /** The job fits (else the model is read). */
  fits?: boolean;
  /**
   * A run whose local fit computes the error grid itself (no breaklines: FitOptions.errorPlaces):
   * only estimates between readings factorise patches, in this thread alone.
   */
  errorsFromFit?: boolean;
  threads?: number;
}

/**
 * The peak memory of a job, from its size: the process, the model, and each stage's arrays, summed
 * (the stages of a run keep what they made until the files are written, and the engine does not give
 * freed memory back at once).
 */
export function estimateMemory(job: JobSize): MemoryEstimate {
  const threads = Math.max(1, job.threads ?? (navigator.hardwareConcurrency || 1));
  const n = job.points;
  const workers = threads >= 2 ? threads : 0;
  const count = n.toLocaleString("en");
  const parts: MemoryPart[] = [
    { what: "the process and its worker threads", bytes: BASE_BYTES + workers * (WORKER_BYTES + (job.fits ? RANK_WORKER_BYTES : 0)), kind: "process" },
    { what: "the model", bytes: (job.method === "global" ? GLOBAL_MODEL_PER_POINT : LOCAL_MODEL_PER_POINT) * n, kind: "model" },
  ];
  const errors = Boolean(job.stderr || job.run);
  if (job.method === "global") {
    const perN2 = (errors ? GLOBAL_ERRORS_PER_N2 : job.fits ? GLOBAL_FIT_PER_N2 : 0) + (n >= SPLIT_MIN ? SPLIT_COPY_PER_N2 : 0);
    if (perN2) {
      const what = job.fits ? "global fit" : "the global model's factors";
      parts.push({ what: `${what} of ${count} points (${fmtBytes(8 * n * n)} per ${count} × ${count} matrix)`, bytes: perN2 * n * n, kind: "global" });
    }
  } else {
    const p = job.patchPoints ?? DEFAULT_PATCH_POINTS;
    if (job.fits) {
      const perPoints = LOCAL_FIT_PER_POINT * Math.min(n, LOCAL_FIT_KNEE) + LOCAL_FIT_PER_POINT_BEYOND * Math.max(0, n - LOCAL_FIT_KNEE);
      parts.push({ what: `local fit of ${count} points`, bytes: perPoints + PATCH_WORK_PER_N2 * (2 * p) ** 2 * Math.max(workers, 1), kind: "local" });
    }
    if (errors) {
      const threadsFactorising = job.errorsFromFit ? 1 : Math.max(workers, 1);
      const bytes = threadsFactorising * (Math.min(LOCAL_ERRORS_PER_POINT * n, STDERR_CACHE_PEAK) + PACKED_ERRORS_PER_POINT * n);
      parts.push({ what: `the standard errors' patch factors`, bytes, kind: "errors" });
    }
  }
  if (job.cells !== undefined) {
    const perCell = job.run ? RUN_PER_CELL : GRID_PER_CELL + (job.stderr ? GRID_ERRORS_PER_CELL : 0);
    parts.push({ what: `a grid of ${job.cells.toLocaleString("en")} cells`, bytes: perCell * job.cells, kind: "grid" });
  }
  if (job.run) {
    const drawn = Math.min(n, MAX_DRAWN_POINTS);
    parts.push({ what: `the map and report (${drawn.toLocaleString("en")} points drawn) and the tables of ${count} points`, bytes: MAP_PER_POINT * drawn + RUN_PER_POINT * n, kind: "map" });
  }
  const bytes = parts.reduce((t, q) => t + q.bytes, 0);
  const largest = parts.slice(1).reduce((a, q) => (q.bytes > a.bytes ? q : a), parts[1]);
  return { bytes, what: `${largest.what}: ${fmtBytes(largest.bytes)}`, largest: largest.kind, parts };
}

/**
 * What to do instead, by the part that drives an estimate: the local method for a global fit (with
 * what it would need: `local`), larger cells or tiles for a grid, the verbs without a map for a run's
 * map. Raising the limit is always offered (checkMemory).
 */
export function memoryAdvice(e: MemoryEstimate, o: { local?: MemoryEstimate; tiles?: boolean; run?: boolean } = {}): string[] {
  switch (e.largest) {
    case "global":
      return o.local ? [`use ${opt("method")} local (about ${fmtBytes(o.local.bytes)})`] : [];
    case "grid":
      return [`choose a larger ${opt("cell")} or a smaller ${opt("extent")}` + (o.tiles ? `, or write the grid in tiles (${opt("tile")})` : "")];
    case "map":
      return ["run fit, grid and contour instead, which draw no map"];
    default:
      return [];
  }
}

export interface MemoryLimit {
  bytes: number;
  /** Where the limit comes from, for the message: "--max-memory", or the share of the machine's memory. */
  source: string;
  /** Given by the user (--max-memory). */
  given: boolean;
}

/** Is a Deno permission granted (without asking: a query never prompts)? */
function granted(descriptor: Deno.PermissionDescriptor): boolean {
  try {
    return Deno.permissions.querySync(descriptor).state === "granted";
  } catch {
    return false;
  }
}

function readNumber(file: string, pattern: RegExp): number | undefined {
  if (!granted({ name: "read", path: file })) return undefined;
  try {
    const m = pattern.exec(fs.readFileSync(file, "utf8"));
    return m ? Number(m[1]) : undefined;
  } catch {
    return undefined;
  }
}

/**
 * The machine's memory as this process may use it: Deno.systemMemoryInfo() when the sys permission
 * is granted (the command line asks for --allow-sys=systemMemoryInfo: Deno reads /proc only with
 * --allow-all), else MemTotal from /proc/meminfo where readable,
 * and a smaller cgroup limit (containers: /sys/fs/cgroup/memory.max, or memory.limit_in_bytes of
 * cgroup v1). Undefined when none of these is readable.
 */
export function machineMemory(): { bytes: number; source: string } | undefined {
  let total: number | undefined;
  let source = "";
  if (granted({ name: "sys", kind: "systemMemoryInfo" })) {
    try {
      total = Deno.systemMemoryInfo().total;
      source = "this machine's";
    } catch { /* not on this platform */ }
  }
  if (!(total! > 0)) {
    const kb = readNumber("/proc/meminfo", /^MemTotal:\s+(\d+)\s+kB/m);
    if (kb !== undefined && kb > 0) {
      total = kb * 1024;
      source = "this machine's";
    }
  }
  const cgroup = readNumber("/sys/fs/cgroup/memory.max", /^(\d+)\s*$/) ?? readNumber("/sys/fs/cgroup/memory/memory.limit_in_bytes", /^(\d+)\s*$/);
  if (cgroup !== undefined && cgroup > 0 && (!(total! > 0) || cgroup < total!)) {
    total = cgroup;
    source = "this container's";
  }
  return total! > 0 ? { bytes: total!, source } : undefined;
}

/** The memory limit: `given` (bytes, --max-memory), else DEFAULT_SHARE of the machine's memory, else FALLBACK_LIMIT. */
export function memoryLimit(given?: number): MemoryLimit {
  if (given !== undefined) return { bytes: given, source: `${opt("maxMemory")} ${fmtBytes(given)}`, given: true };
  const machine = machineMemory();
  if (!machine) return { bytes: FALLBACK_LIMIT, source: `the default ${fmtBytes(FALLBACK_LIMIT)} (this machine's memory is not readable here)`, given: false };
  return { bytes: DEFAULT_SHARE * machine.bytes, source: `half of ${machine.source} ${fmtBytes(machine.bytes)}`, given: false };
}

/**
 * Refuse a job whose estimate exceeds the limit: one line with the estimate, what drives it, the
 * limit and what to do (`advice`, e.g. "use {method} local"), exit code 2.
 */
export function checkMemory(estimate: MemoryEstimate, limit: MemoryLimit, advice: string[] = []): void {
  if (estimate.bytes <= limit.bytes) return;
  const raise = `raise the limit with ${opt("maxMemory")} ${fmtBytes(Math.ceil(estimate.bytes / (GiB / 4)) * (GiB / 4), true)}`;
  throw new RbfieldError(
    `this needs about ${fmtBytes(estimate.bytes)} of memory at its peak (${estimate.what}), more than the limit of ${limit.bytes === 0 ? "0" : fmtBytes(limit.bytes)} ` +
      `(${limit.source}); ${[...advice, raise].join(", or ")}`,
    ExitCode.usage,
  );
}

/** A size as people write it: 512MiB, 8GiB, 8G, 2.5GB, 1e9 (bytes). K, M, G, T and KiB… are powers of 1024; kB, MB, GB, TB powers of 1000. */
export function parseSize(text: string): number | undefined {
  const m = /^\s*(\d+(?:\.\d+)?(?:e\d+)?)\s*([kKmMgGtT]?)(i?)([bB]?)\s*$/.exec(text);
  if (!m) return undefined;
  const value = Number(m[1]);
  const letter = m[2].toUpperCase();
  if (!letter && (m[3] || m[4] === "b")) return undefined;
  const power = " KMGT".indexOf(letter || " ");
  const decimal = letter !== "" && m[3] === "" && m[4] !== "";
  const bytes = value * (decimal ? 1000 : 1024) ** power;
  return Number.isFinite(bytes) && bytes > 0 ? Math.round(bytes) : undefined;
}

/** Bytes for people: "730 MiB", "2.5 GiB"; `compact` writes "2.5GiB" (an option value). */
export function fmtBytes(bytes: number, compact = false): string {
  const sep = compact ? "" : " ";
  if (bytes >= GiB) return `${Number((bytes / GiB).toPrecision(bytes >= 10 * GiB ? 3 : 2))}${sep}GiB`;
  return `${Math.max(1, Math.round(bytes / MiB))}${sep}MiB`;
}

/**
 * The largest resident set of this process so far: getrusage's ru_maxrss (node:process
 * resourceUsage().maxRSS, in KiB on Linux; no permission needed), else VmHWM of /proc/self/status
 * (Linux, where readable), else null.
 */
export function peakResidentBytes(): number | null {
  try {
    const kib = process.resourceUsage().maxRSS;
    if (Number.isFinite(kib) && kib > 0) return kib * 1024;
  } catch { /* not on this platform */ }
  const kb = readNumber("/proc/self/status", /^VmHWM:\s+(\d+)\s+kB/m);
  return kb === undefined ? null : kb * 1024;
}
