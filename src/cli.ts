// rbfield command-line tool: a thin layer over the library (src/mod.ts).
// Usage: deno task rbfield <verb> [options]; every verb has --help.
import { parseArgs } from "node:util";
import { CAUTION } from "./caution.ts";
import { ExitCode, RbfieldError } from "./errors.ts";
import type { GridOptions } from "./evaluate/grid.ts";
import { KERNELS, TRENDS } from "./fit/kernels.ts";
import type { FitOptions } from "./fit/surface.ts";
import { readBreaklines, readMask } from "./job.ts";
import { DUPLICATE_RULES } from "./clean/clean.ts";
import { parseWhere } from "./read/filter.ts";
import type { MaskFile } from "./read/mask.ts";
import { NON_DETECT_RULES } from "./read/nondetects.ts";
import { type ProgressReporter, progressReporter, type TerminalWriter } from "./cli_progress.ts";
import { messageText } from "./text.ts";
import { MODEL_VERSION } from "./model/model.ts";
import type { KernelName, TrendName } from "./types.ts";
import { contourVerb, fitVerb, gridVerb, mapVerb, predictVerb, reportVerb, runVerb, tilesVerb, type VerbResult } from "./verbs.ts";
import { DEFAULT_TILE_SIZE } from "./evaluate/tiles.ts";
import { parseSize } from "./job/memory.ts";
import type { MapOptions } from "./write/map.ts";
import { outputNamesText } from "./write/outputs.ts";

type Spec = Record<string, { type: "string" | "boolean"; multiple?: boolean }>;

const COMMON: Spec = { help: { type: "boolean" }, json: { type: "boolean" }, debug: { type: "boolean" }, quiet: { type: "boolean" }, "max-memory": { type: "string" } };
const POINTS: Spec = {
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
const MODEL: Spec = {
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
const GRID: Spec = { cell: { type: "string" }, extent: { type: "string" }, mask: { type: "string" }, force: { type: "boolean" } };
const STDERR: Spec = { stderr: { type: "string" } };
const TILE: Spec = { tile: { type: "string" }, "tile-size": { type: "string" } };
const TITLE: Spec = { title: { type: "string" }, date: { type: "string" } };
const SHEET: Spec = { paper: { type: "string" }, orientation: { type: "string" }, scale: { type: "string" }, relief: { type: "boolean" }, "label-points": { type: "boolean" } };
const LEVELS: Spec = { interval: { type: "string" }, base: { type: "string" }, levels: { type: "string" } };
const CONTOUR: Spec = { ...LEVELS, bands: { type: "boolean" }, "3d": { type: "boolean" } };

const POINTS_HELP = `  --x COL --y COL --z COL   columns to use, by name or 1-based position (default: detected from
                            header names such as x/easting/e, y/northing/n, z/elevation/level/value)
  --header auto|none        auto (default): a first row of numbers only is data, not a header;
                            none: the first row is data (columns are then named 1, 2, …)
  --crs CRS                 coordinate reference system of the points: EPSG:NNNN, or local,
                            local:m, local:ft, local:usft for a site grid (default: the file's own;
                            WGS 84 for lat/lon columns or plain GeoJSON; else a local site grid)
  --to-crs EPSG:NNNN        projected CRS to fit in when the points are latitude/longitude (default:
                            the UTM zone of their centre)
  --class C[,C…]            point clouds (LAS/LAZ): keep only these ASPRS classes (2 = ground)
  --id COL --code COL       point id and description code columns, named in residuals.csv and the
                            blunder flags (default: the first column named id/point/pt/name/station…;
                            a column named code/desc/description)
  --where COL=V[,V…]        keep only rows whose column holds one of the values (ignoring case), e.g.
                            --where code=GS for ground shots; repeat for several columns
  --non-detects RULE        how values below the detection limit ("<0.5", "ND", "n.n.", "0.5 U") enter
                            the fit: half (default) the limit, limit, zero, or omit (see README)
  --detection-limit DL      the limit of non-detects written without one ("ND", "<DL")
  --detection-limit-column COL  column of detection limits (default: a column named DL, LOD, MDL …)
  --duplicates RULE         coincident points become one by their mean (default), max, min or first
  --max-spread DZ           refuse coincident points whose values differ by more than DZ
  --merge-conflicts         merge such points anyway and report them
  --keep-isolated           keep samples far from all others (more than 10 median spacings) inside
                            the default grid extent and the hull mask (they are fitted either way)
  --weight COL              observation weights (e.g. 1/variance from instrument precision)`;
const MODEL_HELP = `  --kernel K                auto|${KERNELS.join("|")}
                            (default auto: tries every kernel with the trends it supports; see --select)
  --shape auto|NUMBER       shape ε in 1/map units for gaussian and the multiquadrics (default auto:
                            chosen by GCV)
  --trend T                 polynomial trend: auto|${TRENDS.join("|")} (default auto with
                            --kernel auto, else linear; thin-plate needs linear or more, multiquadric
                            constant or more)
  --smoothing gcv|NUMBER    λ added to the kernel matrix diagonal (0 interpolates; default gcv)
  --select one-se|loocv|gcv how --kernel auto chooses: one-se (default) the simplest candidate whose
                            leave-one-out error is within one standard error of the best; loocv the
                            smallest leave-one-out RMSE; gcv the smallest GCV score
  --transform none|log      log: fit ln z for positive, skewed readings; estimates back-transformed
                            with the lognormal bias correction exp(f + σ²/2)
  --stretch AZIMUTH:FACTOR  the surface varies FACTOR (≥ 1) times more slowly along AZIMUTH
                            (degrees clockwise from grid north) than across it, e.g. 45:3 along
                            a valley or a buried channel
  --flag-level ALPHA        false-alarm rate of the blunder test for the whole survey (default 0.05;
                            Pope's tau test on studentised leave-one-out residuals, iterated)
  --robust                  refit with blunders down-weighted (Tukey's biweight, iterated; λ by GCV)
  --method auto|global|local  fitting method (default auto: the local method above 2,000 points,
                            else the global one); global takes at most 5,000 points
  --patch-points N          local method: points per patch (default 150; more is more accurate
                            and slower)
  --breaklines FILE         GeoJSON LineString/MultiLineString: with z on every vertex the surface
                            passes through the line and may change slope across it; without z the
                            line is a barrier (a fault) the surface may jump across (local method)
  --strings COL=CODE[,CODE…]  join shots with these codes in column COL, in file order, into 3-D
                            breaklines (a string ends where another code comes between or at a gap)
  --string-gap DIST         largest distance between consecutive shots of a string (default: 5 ×
                            the median spacing along the code's strings)`;
const GRID_HELP = `  --cell SIZE               cell size in map units (default: half the median point spacing,
                            at least 200 cells along the longer side, rounded to 1, 2, 2.5 or 5·10ᵏ)
  --extent XMIN,YMIN,XMAX,YMAX  outer edges of the grid (default: the data's bounding box, or the
                            mask polygons' with --mask FILE)
  --mask hull|none|FILE     hull: the data's convex hull (default); FILE: GeoJSON polygons to keep
                            (in their declared CRS, WGS 84 longitude/latitude, or the points' CRS)
  --force                   allow grids above 100 million cells`;
const STDERR_HELP = `  --stderr FILE.tif         also write the standard error of the estimate as a second GeoTIFF
                            (model-based, not a survey tolerance; see README)`;
const TILE_HELP = `  --tile COL,ROW            write only this tile of the grid: N × N cells (--tile-size), counted
                            from 0 at the north-west corner, the last ones cut at the grid's edge;
                            computed from the part of the model that reaches it (with --stderr, its
                            standard errors too). Give every tile the same --cell, --extent and
                            --mask; 'rbfield tiles' puts them together, byte for byte the whole grid
  --tile-size N             tile side in cells (default ${DEFAULT_TILE_SIZE})`;
const TITLE_HELP = `  --title TEXT              title of the map (and of the report)
  --date YYYY-MM-DD         date in the title block (default today, UTC; give it for byte-identical
                            outputs on another day)`;
const LEVELS_HELP = `  --interval DZ             contour interval (default: a round number giving about ten levels;
                            after --transform log, log-spaced levels 1, 2, 5 × 10ᵏ)
  --base Z0                 a level that is a contour (default 0); every fifth level from it is an
                            index contour
  --levels L1,L2,…          contour exactly these levels instead (e.g. thresholds 1,10,100,1000;
                            each is an index contour)`;
const COMMON_HELP = `  --max-memory SIZE         refuse work whose estimated peak memory is larger (default: half of the
                            machine's memory); e.g. 8GiB, 512MiB, 2G: K, M, G, T and KiB, MiB, GiB,
                            TiB are powers of 1024; kB, MB, GB, TB powers of 1000
  --json                    print a machine-readable JSON summary on stdout
  --quiet                   no progress on stderr (otherwise a bar when stderr is a terminal,
                            else one line per step)
  --debug                   show a stack trace on internal errors
  --help                    this help`;

const HELP: Record<string, string> = {
  main: `rbfield — surfaces from scattered survey points by radial-basis-function regression

Usage: deno task rbfield <verb> [options]

Verbs:
  fit POINTS --out MODEL          fit a surface to points and save the model
  grid MODEL --out FILE.tif       evaluate the surface on a georeferenced grid (GeoTIFF)
  contour MODEL|FILE.tif --out FILE.geojson                contour lines or filled bands
  predict MODEL LOCATIONS.csv --out FILE.csv                estimates at listed places
  tiles TILE.tif… --out FILE.tif  put tiles written by 'grid --tile' together into the whole grid
  map MODEL|FILE.tif --out FILE.pdf|.svg|.png              a contour map to print
  report MODEL --out FILE.html    a self-contained report: maps, GCV curve, residuals, flags, model
  run POINTS --out DIR            the whole job: model, grid, contours, estimates, map, report, summary

'deno task rbfield <verb> --help' shows each verb's options.
Exit codes: 0 success, 1 internal error, 2 bad command line, 3 bad input data,
4 file cannot be read or written, 5 the data cannot support the model asked for.

${CAUTION}
`,
  fit: `Usage: deno task rbfield fit POINTS --out MODEL [options]

Reads POINTS (CSV, TSV, semicolon or whitespace text with a header row, or GeoJSON points), fits
an RBF surface with polynomial trend, chooses the smoothing by generalized cross-validation and
writes the model file (JSON, format rbfield-model version ${MODEL_VERSION}).

${POINTS_HELP}
${MODEL_HELP}
${COMMON_HELP}
`,
  grid: `Usage: deno task rbfield grid MODEL --out FILE.tif [options]

Evaluates a saved model on a regular grid and writes a single-band Float32 GeoTIFF (cells are
areas; nodata -9999 for masked cells; CRS keys from the model's EPSG code).

${GRID_HELP}
${STDERR_HELP}
${TILE_HELP}
${COMMON_HELP}
`,
  tiles: `Usage: deno task rbfield tiles TILE.tif [TILE.tif …] --out FILE.tif [options]

Puts the tiles written by 'grid MODEL --tile COL,ROW' together into the whole grid: the same bytes
as 'grid MODEL' without --tile. Every tile of the grid must be given once, in any order; each tile
says where it belongs. Value tiles and standard-error tiles (--stderr) are put together separately.
Tiles of another model, extent, cell, mask or tile size are refused. For example:

  for t in 0,0 1,0 0,1 1,1; do
    deno task rbfield grid site.rbfield.json --cell 0.5 --tile $t --tile-size 2048 --out tile-$t.tif
  done
  deno task rbfield tiles tile-*.tif --out surface.tif

${COMMON_HELP}
`,
  contour: `Usage: deno task rbfield contour MODEL|FILE.tif --out FILE.geojson [options]

Contour lines as GeoJSON MultiLineString features, one per level, with the properties "level" and
"index" (true for index contours); with --bands, filled polygons between consecutive levels with
"lower" and "upper". Coordinates stay in the grid's CRS. From a MODEL, a grid is made first (grid
options apply).

${LEVELS_HELP}
  --bands                   filled bands instead of lines
  --3d                      lines with the level as a third coordinate [x, y, level]
${GRID_HELP}
${COMMON_HELP}
`,
  predict: `Usage: deno task rbfield predict MODEL LOCATIONS.csv --out FILE.csv [options]

Keeps every column of LOCATIONS and adds the columns "estimate" and "std_error" (the model-based
standard error of the estimate; RFC 4180 CSV). Rows without usable coordinates get empty cells
and are reported.

  --x COL --y COL           coordinate columns, by name or 1-based position (default: detected
                            from the header; lat/lon columns are taken as WGS 84 and projected)
  --crs CRS                 CRS of the locations when not the model's (e.g. EPSG:4326)
  --header auto|none        auto (default): a first row of numbers only is data; none: no header
${COMMON_HELP}
`,
  run: `Usage: deno task rbfield run POINTS --out DIR [options]

The whole job: fit, grid, contours and bands, estimates and a summary, written into DIR as
${outputNamesText()}.

${POINTS_HELP}
${MODEL_HELP}
${GRID_HELP}
${LEVELS_HELP}
  --3d                      contours.geojson with the level as a third coordinate [x, y, level]
  --locations FILE.csv      places to estimate at (default: the input points)
${TITLE_HELP}
${COMMON_HELP}
`,
  map: `Usage: deno task rbfield map MODEL|FILE.tif --out FILE.svg|FILE.pdf|FILE.png [options]

A contour map to print: index contours (every fifth) heavier and labelled, survey points and
possible blunders, the data outline, scale bar, north arrow, coordinate ticks, a legend and a title
block with the method and the caution. PDF and SVG stay vector. From a MODEL, a grid is made first
(grid options apply).

${LEVELS_HELP}
  --paper P                 A4|A3|A1|letter|tabloid (default A4)
  --orientation O           landscape|portrait (default landscape)
  --scale N                 print at 1:N (default: the largest round scale that fits the sheet)
  --relief                  colour relief with hillshade under the contours (default: lines only)
  --label-points            print each survey point's value beside it
${TITLE_HELP}
${GRID_HELP}
${COMMON_HELP}
`,
  report: `Usage: deno task rbfield report MODEL --out FILE.html [options]

The report of a saved model as one self-contained HTML file that opens in any browser with no
network: the contour map with relief, the standard-error map, the GCV curve over λ with the choice
marked, the candidate ranking, leave-one-out residuals (histogram, reading against estimate), the
points flagged, the model table with the rows skipped or merged when fitting, warnings and the
caution: the same page as run's report.html. The grid options make the maps' grid, as for 'grid'.

${LEVELS_HELP}
${TITLE_HELP}
${GRID_HELP}
${COMMON_HELP}
`,
};

/** Options renamed since the first release, and what to write instead. */
const RENAMED: Record<string, string> = {
  drift: "--trend (none|constant|linear|quadratic|auto)",
  anisotropy: "--stretch AZIMUTH:FACTOR (e.g. 45:3)",
  "flag-threshold": "--flag-level ALPHA (the blunder test's false-alarm rate, e.g. 0.05)",
};

function methodOption(v: Record<string, unknown>): FitOptions["method"] {
  const method = (v.method as string | undefined) ?? "auto";
  if (method !== "auto" && method !== "global" && method !== "local") throw usage(`--method must be auto, global or local, not "${method}"`);
  return method;
}

function patchPointsOption(v: Record<string, unknown>): number | undefined {
  const p = num(v["patch-points"] as string | undefined, "patch-points");
  if (p !== undefined && !(Number.isInteger(p) && p >= 3)) throw usage("--patch-points must be a whole number ≥ 3, such as 150");
  return p;
}

function tileOption(v: Record<string, unknown>): { col: number; row: number; size: number } | undefined {
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

function maxMemoryOption(v: Record<string, unknown>): number | undefined {
  const text = v["max-memory"] as string | undefined;
  if (text === undefined) return undefined;
  const bytes = parseSize(text);
  if (bytes === undefined) throw usage(`--max-memory must be a size such as 8GiB, 512MiB or 2G, not "${messageText(text, 20)}"`);
  return bytes;
}

function classOption(v: Record<string, unknown>): number[] | undefined {
  const text = v.class as string | undefined;
  if (text === undefined) return undefined;
  const classes = text.split(",").map((t) => Number(t.trim()));
  if (!classes.every((c) => Number.isInteger(c) && c >= 0 && c <= 255)) throw usage(`--class must be ASPRS class numbers 0–255, e.g. 2 or 2,9, not "${text}"`);
  return classes;
}

function dateOption(v: Record<string, unknown>): string | undefined {
  const d = v.date as string | undefined;
  if (d !== undefined && !(/^\d{4}-\d{2}-\d{2}$/.test(d) && !Number.isNaN(Date.parse(`${d}T00:00:00Z`)))) {
    throw usage(`--date must be a date as YYYY-MM-DD, not "${d}"`);
  }
  return d;
}

const PAPERS = ["A4", "A3", "A1", "letter", "tabloid"] as const;

function sheetOptions(v: Record<string, unknown>): MapOptions {
  const paper = (v.paper as string | undefined) ?? "A4";
  if (!(PAPERS as readonly string[]).includes(paper)) throw usage(`--paper must be one of ${PAPERS.join(", ")}, not "${paper}"`);
  const orientation = (v.orientation as string | undefined) ?? "landscape";
  if (orientation !== "landscape" && orientation !== "portrait") throw usage(`--orientation must be landscape or portrait, not "${orientation}"`);
  const scaleText = v.scale as string | undefined;
  const scale = scaleText === undefined ? undefined : num(scaleText.replace(/^1:/, ""), "scale");
  if (scale !== undefined && !(scale > 0)) throw usage(`--scale must be a positive number (1:N), not "${scaleText}"`);
  return { paper: paper as MapOptions["paper"], orientation, scale, relief: Boolean(v.relief), labelPoints: Boolean(v["label-points"]) };
}

function levelsOption(v: Record<string, unknown>): number[] | undefined {
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
function levelOptions(v: Record<string, unknown>): { interval?: number; base?: number; levels?: number[] } {
  return { interval: num(v.interval as string | undefined, "interval"), base: num(v.base as string | undefined, "base"), levels: levelsOption(v) };
}

function headerOption(v: Record<string, unknown>): "auto" | "none" | undefined {
  const h = v.header as string | undefined;
  if (h !== undefined && h !== "auto" && h !== "none") throw usage(`--header must be auto or none, not "${h}"`);
  return h as "auto" | "none" | undefined;
}

/** The command-line flag of a library option (camelCase → --kebab-case; a few differ). */
function flagOf(option: string): string {
  const special: Record<string, string> = { weights: "--weight", shapeOpt: "--shape", threeD: "--3d" };
  return special[option] ?? `--${option.replace(/[A-Z]/g, (c) => `-${c.toLowerCase()}`)}`;
}

function usage(message: string): RbfieldError {
  return new RbfieldError(message, ExitCode.usage);
}

function num(value: string | undefined, name: string): number | undefined {
  if (value === undefined) return undefined;
  const v = Number(value);
  if (value.trim() === "" || !Number.isFinite(v)) throw usage(`--${name} must be a number, not "${value}"`);
  return v;
}

function fitOptions(v: Record<string, unknown>): FitOptions {
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

function gridOptions(v: Record<string, unknown>): Omit<GridOptions, "progress"> {
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
function maskOption(v: Record<string, unknown>): MaskFile | undefined {
  const mask = v.mask as string | undefined;
  return mask === undefined || mask === "hull" || mask === "none" ? undefined : readMask(mask);
}

function choice<T extends string>(v: Record<string, unknown>, name: string, allowed: readonly T[]): T | undefined {
  const value = v[name] as string | undefined;
  if (value !== undefined && !(allowed as readonly string[]).includes(value)) {
    throw usage(`--${name} must be ${allowed.slice(0, -1).join(", ")} or ${allowed.at(-1)}, not "${messageText(value, 20)}"`);
  }
  return value as T | undefined;
}

function pointsSource(file: string, v: Record<string, unknown>) {
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
function stringsOption(v: Record<string, unknown>): { column: string; codes: string[] } | undefined {
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

interface Io {
  out: (s: string) => void;
  /** One line on stderr. */
  err: (s: string) => void;
  /** Stderr when it is a terminal: progress is then a bar redrawn in place (src/cli_progress.ts). */
  terminal?: TerminalWriter;
}

/** Run the CLI with arguments; returns the exit code. */
export async function main(args: string[], io: Io): Promise<number> {
  const verb = args[0];
  const debug = args.includes("--debug");
  let reporter: ProgressReporter | undefined;
  try {
    if (verb === undefined || verb === "--help" || verb === "-h" || verb === "help") {
      io.out(HELP.main);
      return verb === undefined ? ExitCode.usage : 0;
    }
    if (!(verb in HELP) || verb === "main") throw usage(`unknown verb "${verb}"; verbs: fit, grid, contour, predict, map, report, run, tiles (see --help)`);
    const specs: Record<string, Spec> = {
      fit: { ...COMMON, ...POINTS, ...MODEL, out: { type: "string" } },
      grid: { ...COMMON, ...GRID, ...STDERR, ...TILE, out: { type: "string" } },
      tiles: { ...COMMON, out: { type: "string" } },
      contour: { ...COMMON, ...GRID, ...CONTOUR, out: { type: "string" } },
      predict: { ...COMMON, x: { type: "string" }, y: { type: "string" }, header: { type: "string" }, crs: { type: "string" }, out: { type: "string" } },
      run: { ...COMMON, ...POINTS, ...MODEL, ...GRID, ...CONTOUR, ...TITLE, out: { type: "string" }, locations: { type: "string" } },
      map: { ...COMMON, ...GRID, ...TITLE, ...SHEET, ...LEVELS, out: { type: "string" } },
      report: { ...COMMON, ...GRID, ...TITLE, ...LEVELS, out: { type: "string" } },
    };
    // "--base -5": join a value option with a following negative number so it is not read as an option.
    const rest: string[] = [];
    const argv = args.slice(1);
    for (let i = 0; i < argv.length; i++) {
      const a = argv[i];
      const name = a.startsWith("--") && !a.includes("=") ? a.slice(2) : undefined;
      if (name && specs[verb][name]?.type === "string" && i + 1 < argv.length && /^-[\d.]/.test(argv[i + 1])) {
        rest.push(`${a}=${argv[++i]}`);
      } else rest.push(a);
    }
    // Option names of the first release, refused with the name that replaced them.
    for (const a of rest) {
      const name = a.startsWith("--") ? a.slice(2).split("=")[0] : undefined;
      if (name && name in RENAMED) throw usage(`--${name} is now ${RENAMED[name]} (see 'deno task rbfield ${verb} --help')`);
    }
    let parsed;
    try {
      parsed = parseArgs({ args: rest, options: specs[verb], allowPositionals: true, strict: true });
    } catch (e) {
      throw usage(`${verb}: ${(e as Error).message.split("\n")[0]} (see 'deno task rbfield ${verb} --help')`);
    }
    const v = parsed.values as Record<string, unknown>;
    const pos = parsed.positionals;
    if (v.help) {
      io.out(HELP[verb]);
      return 0;
    }
    reporter = progressReporter({ quiet: Boolean(v.quiet), terminal: io.terminal, line: io.err });
    const progress = reporter.progress;
    const wantPositionals = verb === "predict" ? 2 : 1;
    if (verb === "tiles" ? pos.length === 0 : pos.length !== wantPositionals) {
      throw usage(`${verb} takes ${verb === "tiles" ? "one or more tile files" : wantPositionals === 2 ? "MODEL and LOCATIONS" : "one input file"}, got ${pos.length} (see 'deno task rbfield ${verb} --help')`);
    }
    const out = v.out as string | undefined;
    if (!out) throw usage(`${verb} needs --out (see 'deno task rbfield ${verb} --help')`);
    const mask = maskOption(v);
    let result: VerbResult;
    const maxMemory = maxMemoryOption(v);
    if (verb === "fit") result = await fitVerb(pointsSource(pos[0], v), { ...fitOptions(v), progress }, out, [], maxMemory);
    else if (verb === "grid") {
      result = await gridVerb({ model: pos[0], out, stderr: v.stderr as string | undefined, grid: { ...gridOptions(v), progress }, mask, tile: tileOption(v), maxMemory });
    } else if (verb === "tiles") {
      result = await tilesVerb({ tiles: pos, out, maxMemory });
    } else if (verb === "contour") {
      result = await contourVerb({
        input: pos[0],
        out,
        ...levelOptions(v),
        bands: Boolean(v.bands),
        threeD: Boolean(v["3d"]),
        grid: { ...gridOptions(v), progress },
        mask,
        maxMemory,
      });
    } else if (verb === "report") {
      result = await reportVerb({
        model: pos[0],
        out,
        ...levelOptions(v),
        title: v.title as string | undefined,
        date: dateOption(v),
        grid: { ...gridOptions(v), progress },
        mask,
        maxMemory,
      });
    } else if (verb === "map") {
      result = await mapVerb({
        input: pos[0],
        out,
        ...levelOptions(v),
        title: v.title as string | undefined,
        date: dateOption(v),
        sheet: sheetOptions(v),
        grid: { ...gridOptions(v), progress },
        mask,
        maxMemory,
      });
    } else if (verb === "predict") {
      result = await predictVerb({
        model: pos[0],
        locations: pos[1],
        out,
        x: v.x as string | undefined,
        y: v.y as string | undefined,
        header: headerOption(v),
        crs: v.crs as string | undefined,
        progress,
        maxMemory,
      });
    } else {
      result = await runVerb({
        ...pointsSource(pos[0], v),
        outDir: out,
        fit: fitOptions(v),
        grid: gridOptions(v),
        ...levelOptions(v),
        threeD: Boolean(v["3d"]),
        locations: v.locations as string | undefined,
        mask,
        title: v.title as string | undefined,
        date: dateOption(v),
        progress,
        maxMemory,
      });
    }
    reporter.clear();
    for (const w of result.warnings) io.err(`rbfield: warning: ${w}`);
    io.out(v.json ? JSON.stringify(result.json, null, 2) + "\n" : result.text);
    return 0;
  } catch (e) {
    reporter?.clear();
    if (e instanceof RbfieldError) {
      io.err(`rbfield: ${e.messageFor(flagOf).split("\n")[0]}`);
      return e.exitCode;
    }
    io.err(`rbfield: internal error: ${(e as Error)?.message ?? String(e)}${debug ? "" : " (run with --debug for details)"}`);
    if (debug) io.err(String((e as Error)?.stack ?? e));
    return ExitCode.internal;
  } finally {
    reporter?.clear();
  }
}

function writeAll(stream: { writeSync(p: Uint8Array): number }, text: string): void {
  let bytes = new TextEncoder().encode(text);
  while (bytes.length > 0) bytes = bytes.subarray(stream.writeSync(bytes));
}

/** Stderr as a terminal for the progress bar; its width from the console size when known. */
function stderrTerminal(): TerminalWriter {
  return {
    write: (s) => writeAll(Deno.stderr, s),
    get columns() {
      try {
        return Deno.consoleSize().columns;
      } catch {
        return 80;
      }
    },
  };
}

if (import.meta.main) {
  const code = await main(Deno.args, {
    out: (s) => writeAll(Deno.stdout, s),
    err: (s) => writeAll(Deno.stderr, s + "\n"),
    terminal: Deno.stderr.isTerminal() ? stderrTerminal() : undefined,
  });
  Deno.exit(code);
}
