// The command line's options: which verb takes which (option specs for node:util parseArgs), the
// names of the first release refused with their replacements, and the parsers that turn option
// text into the library's typed options, refusing bad values with one line (exit code 2).
import { ExitCode, RbfieldError } from "./errors.ts";
import type { GridOptions } from "./evaluate/grid.ts";
import { KERNELS, TRENDS } from "./fit/kernels.ts";
import type { FitOptions } from "./fit/surface.ts";
import { readBreaklines, readMask } from "./job.ts";
import { DUPLICATE_RULES } from "./clean/clean.ts";
import { parseWhere } from "./read/filter.ts";
import type { MaskFile } from "./read/mask.ts";
import { NON_DETECT_RULES } from "./read/nondetects.ts";
import { messageText } from "./text.ts";
import type { KernelName, TrendName } from "./types.ts";
import { DEFAULT_TILE_SIZE } from "./evaluate/tiles.ts";
import { parseSize } from "./job/memory.ts";
import type { MapOptions } from "./write/map.ts";

export type Spec = Record<string, { type: "string" | "boolean"; multiple?: boolean }>;

export const COMMON: Spec = { help: { type: "boolean" }, json: { type: "boolean" }, debug: { type: "boolean" }, quiet: { type: "boolean" }, "max-memory": { type: "string" } };
export const POINTS: Spec = {
  x: { type: "string" },
  y: { type: "string" },
  z: { type: "string" },
  crs: { type: "string" },
  "to-crs": { type: "string" },
  class: { type: "string" },
  "max-spread": { type: "string" },
  "merge-conflicts": { type: "boolean" },
  weight: { type: "string" },
  header: { type: "string" },
  id: { type: "string" },
  code: { type: "string" },
  where: { type: "string", multiple: true },
  "non-detects": { type: "string" },
  "detection-limit": { type: "string" },
  "detection-limit-column": { type: "string" },
  duplicates: { type: "string" },
  "keep-isolated": { type: "boolean" },
};
export const MODEL: Spec = {
  kernel: { type: "string" },
  shape: { type: "string" },
  trend: { type: "string" },
  smoothing: { type: "string" },
  select: { type: "string" },
  transform: { type: "string" },
  stretch: { type: "string" },
  "flag-level": { type: "string" },
  robust: { type: "boolean" },
  method: { type: "string" },
  "patch-points": { type: "string" },
  breaklines: { type: "string" },
  strings: { type: "string" },
  "string-gap": { type: "string" },
};
export const GRID: Spec = { cell: { type: "string" }, extent: { type: "string" }, mask: { type: "string" }, force: { type: "boolean" } };
export const STDERR: Spec = { stderr: { type: "string" } };
export const TILE: Spec = { tile: { type: "string" }, "tile-size": { type: "string" } };
export const TITLE: Spec = { title: { type: "string" }, date: { type: "string" } };
export const SHEET: Spec = { paper: { type: "string" }, orientation: { type: "string" }, scale: { type: "string" }, relief: { type: "boolean" }, "label-points": { type: "boolean" } };
export const LEVELS: Spec = { interval: { type: "string" }, base: { type: "string" }, levels: { type: "string" } };
export const CONTOUR: Spec = { ...LEVELS, bands: { type: "boolean" }, "3d": { type: "boolean" } };

/** The options each verb takes. */
export const VERB_OPTIONS: Record<string, Spec> = {
  fit: { ...COMMON, ...POINTS, ...MODEL, out: { type: "string" } },
  grid: { ...COMMON, ...GRID, ...STDERR, ...TILE, out: { type: "string" } },
  tiles: { ...COMMON, out: { type: "string" } },
  contour: { ...COMMON, ...GRID, ...CONTOUR, out: { type: "string" } },
  predict: { ...COMMON, x: { type: "string" }, y: { type: "string" }, header: { type: "string" }, crs: { type: "string" }, out: { type: "string" } },
  run: { ...COMMON, ...POINTS, ...MODEL, ...GRID, ...CONTOUR, ...TITLE, out: { type: "string" }, locations: { type: "string" } },
  map: { ...COMMON, ...GRID, ...TITLE, ...SHEET, ...LEVELS, out: { type: "string" } },
  report: { ...COMMON, ...GRID, ...TITLE, ...LEVELS, out: { type: "string" } },
};

/** What each verb takes before its options, for the example in optionElsewhere. */
const VERB_INPUTS: Record<string, string> = {
  fit: "POINTS", grid: "MODEL", tiles: "TILE…", contour: "MODEL", predict: "MODEL LOCATIONS", run: "POINTS", map: "MODEL", report: "MODEL",
};

/**
 * The one line for an option parseArgs refused: an option the verb does not take but another verb
 * does says which verb takes it, with an example ("run: --scale is an option of 'map', not of
 * 'run': deno task rbfield map MODEL --scale 500 --out …"); other refusals keep parseArgs's first
 * sentence. `args`: the verb's arguments, for the value given with the option.
 */
export function optionError(verb: string, args: string[], error: Error): RbfieldError {
  const message = error.message.split("\n")[0];
  const help = (v: string) => `(see 'deno task rbfield ${v} --help')`;
  const unknown = /^Unknown option '(-{1,2})([^']*)'/.exec(message);
  if (!unknown) return usage(`${verb}: ${message} ${help(verb)}`);
  const name = unknown[2];
  const flag = `${unknown[1]}${messageText(name, 40)}`;
  const takers = Object.keys(VERB_OPTIONS).filter((v) => v !== verb && Object.hasOwn(VERB_OPTIONS[v], name));
  if (unknown[1] !== "--" || takers.length === 0) return usage(`${verb}: unknown option ${flag} ${help(verb)}`);
  const at = args.findIndex((a) => a === `--${name}` || a.startsWith(`--${name}=`));
  const given = at < 0 ? undefined : args[at].includes("=") ? args[at].slice(args[at].indexOf("=") + 1) : args[at + 1];
  const value = VERB_OPTIONS[takers[0]][name].type === "string" ? ` ${given !== undefined && !given.startsWith("--") ? messageText(given, 20) : "VALUE"}` : "";
  const quoted = takers.map((v) => `'${v}'`);
  const of = quoted.length === 1 ? quoted[0] : `${quoted.slice(0, -1).join(", ")} and ${quoted.at(-1)}`;
  return usage(
    `${verb}: ${flag} is an option of ${of}, not of '${verb}': deno task rbfield ${takers[0]} ${VERB_INPUTS[takers[0]]} ${flag}${value} --out … ${help(takers[0])}`,
  );
}

/** Options renamed since the first release, and what to write instead. */
export const RENAMED: Record<string, string> = {
  drift: "--trend (none|constant|linear|quadratic|auto)",
  anisotropy: "--stretch AZIMUTH:FACTOR (e.g. 45:3)",
  "flag-threshold": "--flag-level ALPHA (the blunder test's false-alarm rate, e.g. 0.05)",
};

export function methodOption(v: Record<string, unknown>): FitOptions["method"] {
  const method = (v.method as string | undefined) ?? "auto";
  if (method !== "auto" && method !== "global" && method !== "local") throw usage(`--method must be auto, global or local, not "${method}"`);
  return method;
}

export function patchPointsOption(v: Record<string, unknown>): number | undefined {
  const p = num(v["patch-points"] as string | undefined, "patch-points");
  if (p !== undefined && !(Number.isInteger(p) && p >= 3)) throw usage("--patch-points must be a whole number ≥ 3, such as 150");
  return p;
}

export function tileOption(v: Record<string, unknown>): { col: number; row: number; size: number } | undefined {
  const text = v.tile as string | undefined;
  const sizeText = v["tile-size"] as string | undefined;
  if (text === undefined) {
    if (sizeText !== undefined) throw usage("--tile-size goes with --tile COL,ROW");
    return undefined;
  }
  const parts = text.split(",").map((t) => (/^\s*\d+\s*$/.test(t) ? Number(t) : NaN));
  if (parts.length !== 2 || !parts.every(Number.isSafeInteger)) throw usage(`--tile must be COL,ROW, whole numbers from 0 (e.g. 0,0 or 3,2), not "${messageText(text, 20)}"`);
  const size = sizeText === undefined ? DEFAULT_TILE_SIZE : Number(sizeText);
  if (!(Number.isSafeInteger(size) && size >= 1 && /^\s*\d+\s*$/.test(sizeText ?? "1"))) throw usage(`--tile-size must be a whole number of cells ≥ 1, such as 1024, not "${messageText(sizeText ?? "", 20)}"`);
  return { col: parts[0], row: parts[1], size };
}

export function maxMemoryOption(v: Record<string, unknown>): number | undefined {
  const text = v["max-memory"] as string | undefined;
  if (text === undefined) return undefined;
  const bytes = parseSize(text);
  if (bytes === undefined) throw usage(`--max-memory must be a size such as 8GiB, 512MiB or 2G, not "${messageText(text, 20)}"`);
  return bytes;
}

export function classOption(v: Record<string, unknown>): number[] | undefined {
  const text = v.class as string | undefined;
  if (text === undefined) return undefined;
  const classes = text.split(",").map((t) => Number(t.trim()));
  if (!classes.every((c) => Number.isInteger(c) && c >= 0 && c <= 255)) throw usage(`--class must be ASPRS class numbers 0–255, e.g. 2 or 2,9, not "${text}"`);
  return classes;
}

export function dateOption(v: Record<string, unknown>): string | undefined {
  const d = v.date as string | undefined;
  if (d !== undefined && !(/^\d{4}-\d{2}-\d{2}$/.test(d) && !Number.isNaN(Date.parse(`${d}T00:00:00Z`)))) {
    throw usage(`--date must be a date as YYYY-MM-DD, not "${d}"`);
  }
  return d;
}

export const PAPERS = ["A4", "A3", "A1", "letter", "tabloid"] as const;

export function sheetOptions(v: Record<string, unknown>): MapOptions {
  const given = (v.paper as string | undefined) ?? "A4";
  // Paper names in any case (a3, A3, Letter): the canonical spelling of the one that matches.
  const paper = PAPERS.find((p) => p.toLowerCase() === given.trim().toLowerCase());
  if (paper === undefined) throw usage(`--paper must be one of ${PAPERS.join(", ")} (any case), not "${messageText(given, 20)}"`);
  const orientation = ((v.orientation as string | undefined) ?? "landscape").trim().toLowerCase();
  if (orientation !== "landscape" && orientation !== "portrait") throw usage(`--orientation must be landscape or portrait, not "${orientation}"`);
  const scaleText = v.scale as string | undefined;
  const scale = scaleText === undefined ? undefined : num(scaleText.replace(/^1:/, ""), "scale");
  if (scale !== undefined && !(scale > 0)) throw usage(`--scale must be a positive number (1:N), not "${scaleText}"`);
  return { paper, orientation, scale, relief: Boolean(v.relief), labelPoints: Boolean(v["label-points"]) };
}

export function levelsOption(v: Record<string, unknown>): number[] | undefined {
  const text = v.levels as string | undefined;
  if (text === undefined) return undefined;
  const parts = text.split(",").map((t) => t.trim());
  const levels = parts.map(Number);
  if (parts.some((t) => t === "") || !levels.every(Number.isFinite)) {
    throw usage(`--levels must be numbers separated by commas, such as 1,10,100,1000, not "${messageText(text)}"`);
  }
  return levels;
}

/** --interval, --base and --levels as the verbs take them. */
export function levelOptions(v: Record<string, unknown>): { interval?: number; base?: number; levels?: number[] } {
  return { interval: num(v.interval as string | undefined, "interval"), base: num(v.base as string | undefined, "base"), levels: levelsOption(v) };
}

export function headerOption(v: Record<string, unknown>): "auto" | "none" | undefined {
  const h = v.header as string | undefined;
  if (h !== undefined && h !== "auto" && h !== "none") throw usage(`--header must be auto or none, not "${h}"`);
  return h as "auto" | "none" | undefined;
}

/** The command-line flag of a library option (camelCase → --kebab-case; a few differ). */
export function flagOf(option: string): string {
  const special: Record<string, string> = { weights: "--weight", shapeOpt: "--shape", threeD: "--3d" };
  return special[option] ?? `--${option.replace(/[A-Z]/g, (c) => `-${c.toLowerCase()}`)}`;
}

export function usage(message: string): RbfieldError {
  return new RbfieldError(message, ExitCode.usage);
}

export function num(value: string | undefined, name: string): number | undefined {
  if (value === undefined) return undefined;
  const v = Number(value);
  if (value.trim() === "" || !Number.isFinite(v)) throw usage(`--${name} must be a number, not "${value}"`);
  return v;
}

export function fitOptions(v: Record<string, unknown>): FitOptions {
  const kernel = (v.kernel as string | undefined) ?? "auto";
  if (kernel !== "auto" && !KERNELS.includes(kernel as KernelName)) throw usage(`--kernel must be auto or one of ${KERNELS.join(", ")}, not "${kernel}"`);
  const trend = (v.trend as string | undefined) ?? (kernel === "auto" ? "auto" : "linear");
  if (trend !== "auto" && !TRENDS.includes(trend as TrendName)) throw usage(`--trend must be auto or one of ${TRENDS.join(", ")}, not "${trend}"`);
  const shapeText = (v.shape as string | undefined) ?? "auto";
  const shape = shapeText === "auto" ? "auto" as const : num(shapeText, "shape")!;
  if (shape !== "auto" && !(shape > 0)) throw usage(`--shape must be a positive number or auto, not "${shapeText}"`);
  const smText = (v.smoothing as string | undefined) ?? "gcv";
  const smoothing = smText === "gcv" ? "gcv" as const : num(smText, "smoothing")!;
  if (smoothing !== "gcv" && !(smoothing >= 0)) throw usage(`--smoothing must be gcv or a number ≥ 0, not "${smText}"`);
  const select = (v.select as string | undefined) ?? "one-se";
  if (select !== "one-se" && select !== "gcv" && select !== "loocv") throw usage(`--select must be one-se, loocv or gcv, not "${select}"`);
  const transform = (v.transform as string | undefined) ?? "none";
  if (transform !== "none" && transform !== "log") throw usage(`--transform must be none or log, not "${transform}"`);
  let stretch: FitOptions["stretch"];
  if (v.stretch !== undefined) {
    const parts = String(v.stretch).split(":").map((t) => (t.trim() === "" ? NaN : Number(t.trim())));
    if (parts.length !== 2 || !parts.every(Number.isFinite) || !(parts[1] >= 1)) {
      throw usage(`--stretch must be AZIMUTH:FACTOR with FACTOR ≥ 1 (e.g. 45:3), not "${v.stretch}"`);
    }
    stretch = { azimuth: parts[0], factor: parts[1] };
  }
  const flagLevel = num(v["flag-level"] as string | undefined, "flag-level");
  if (flagLevel !== undefined && !(flagLevel > 0 && flagLevel < 1)) throw usage("--flag-level must be a number between 0 and 1, such as 0.05");
  return {
    kernel: kernel as FitOptions["kernel"],
    trend: trend as FitOptions["trend"],
    shape,
    smoothing,
    select: select as FitOptions["select"],
    transform,
    stretch,
    flagLevel,
    robust: Boolean(v.robust),
    method: methodOption(v),
    patchPoints: patchPointsOption(v),
  };
}

export function gridOptions(v: Record<string, unknown>): Omit<GridOptions, "progress"> {
  const opts: Omit<GridOptions, "progress"> = {};
  opts.cell = num(v.cell as string | undefined, "cell");
  if (opts.cell !== undefined && !(opts.cell > 0)) throw usage("--cell must be a positive number");
  if (v.extent !== undefined) {
    const parts = String(v.extent).split(",").map((s) => Number(s.trim()));
    if (parts.length !== 4 || !parts.every(Number.isFinite)) throw usage(`--extent must be XMIN,YMIN,XMAX,YMAX, not "${v.extent}"`);
    opts.extent = parts as [number, number, number, number];
  }
  const mask = (v.mask as string | undefined) ?? "hull";
  opts.mask = mask === "hull" || mask === "none" ? mask : undefined;
  opts.force = Boolean(v.force);
  return opts;
}

/** The --mask file, read (and refused for its syntax) before any long work; undefined for hull or none. */
export function maskOption(v: Record<string, unknown>): MaskFile | undefined {
  const mask = v.mask as string | undefined;
  return mask === undefined || mask === "hull" || mask === "none" ? undefined : readMask(mask);
}

export function choice<T extends string>(v: Record<string, unknown>, name: string, allowed: readonly T[]): T | undefined {
  const value = v[name] as string | undefined;
  if (value !== undefined && !(allowed as readonly string[]).includes(value)) {
    throw usage(`--${name} must be ${allowed.slice(0, -1).join(", ")} or ${allowed.at(-1)}, not "${messageText(value, 20)}"`);
  }
  return value as T | undefined;
}

export function pointsSource(file: string, v: Record<string, unknown>) {
  return {
    file,
    x: v.x as string | undefined,
    y: v.y as string | undefined,
    z: v.z as string | undefined,
    crs: v.crs as string | undefined,
    toCrs: v["to-crs"] as string | undefined,
    classes: classOption(v),
    maxSpread: num(v["max-spread"] as string | undefined, "max-spread"),
    mergeConflicts: Boolean(v["merge-conflicts"]),
    weight: v.weight as string | undefined,
    header: headerOption(v),
    id: v.id as string | undefined,
    code: v.code as string | undefined,
    where: ((v.where as string[] | undefined) ?? []).map(parseWhere),
    nonDetects: choice(v, "non-detects", NON_DETECT_RULES),
    detectionLimit: num(v["detection-limit"] as string | undefined, "detection-limit"),
    detectionLimitColumn: v["detection-limit-column"] as string | undefined,
    duplicates: choice(v, "duplicates", DUPLICATE_RULES),
    keepIsolated: Boolean(v["keep-isolated"]),
    // Read now, so that a bad breakline file is refused before any long work.
    breaklines: v.breaklines === undefined ? undefined : readBreaklines(v.breaklines as string),
    strings: stringsOption(v),
    stringGap: num(v["string-gap"] as string | undefined, "string-gap"),
  };
}

/** --strings COL=CODE[,CODE…]. */
export function stringsOption(v: Record<string, unknown>): { column: string; codes: string[] } | undefined {
  const text = v.strings as string | undefined;
  if (text === undefined) {
    if (v["string-gap"] !== undefined) throw usage("--string-gap needs --strings COL=CODE[,CODE…]");
    return undefined;
  }
  const at = text.indexOf("=");
  const column = at > 0 ? text.slice(0, at).trim() : "";
  const codes = at > 0 ? text.slice(at + 1).split(",").map((c) => c.trim()).filter((c) => c !== "") : [];
  if (column === "" || codes.length === 0) throw usage(`--strings must be COL=CODE[,CODE…] (e.g. code=KT,CH,BT), not "${messageText(text, 40)}"`);
  return { column, codes };
}

