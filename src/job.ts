// The whole job as library calls: read → clean → fit → evaluate → write. The CLI verbs and the
// demo are thin layers over these functions.
import * as fs from "node:fs";
import * as path from "node:path";
import { cleanPoints, describeCleaning } from "./clean/clean.ts";
import { ExitCode, inputError, opt, RbfieldError } from "./errors.ts";
import { makeEvaluator } from "./evaluate/evaluate.ts";
import { extrapolationNote, FAR_SPACINGS, makeExtrapolationCheck } from "./evaluate/extrapolation.ts";
import { gridModelParallel } from "./evaluate/parallel.ts";
import { type ErrorEstimator, gridStandardError, makeErrorEstimator } from "./evaluate/stderr.ts";
import { type GridOptions, polygonsFromGeoJson, type PolygonRings } from "./evaluate/grid.ts";
import { valueRange } from "./numbers.ts";
import { jsonErrorPlace } from "./json_syntax.ts";
import { contourGeoJson, defaultInterval } from "./write/contours.ts";
import { fileListLines, type RunProducts, RUN_OUTPUTS } from "./write/outputs.ts";
import { mapInputFromModel } from "./write/map.ts";
import { type FitOptions, type FittedModel, fitSurfaceParallelWithFactors } from "./fit/surface.ts";
import { modelFromJson, type SurfaceModel } from "./model/model.ts";
import { decodeGeoTiff } from "./read/geotiff.ts";
import { parseNumber, readPointTable } from "./read/points.ts";
import type { CleanPoints, Crs, GridValues, PointTable } from "./types.ts";
import { checkWritableFolder, ensureFolder, refuseFolderAsOutput, refuseInputAsOutput, writeFilesAtomic } from "./write/atomic.ts";
import { fmt, modelSummaryLines, printableText, summaryText } from "./write/summary.ts";

/** Parse "EPSG:28355" (or "epsg:28355", "28355") or "local". */
export function parseCrs(text: string): Crs {
  const t = text.trim();
  if (/^local$/i.test(t)) return { label: "local site grid (no EPSG code)" };
  const m = /^(?:epsg:)?(\d{4,6})$/i.exec(t);
  if (!m) throw new RbfieldError(`${opt("crs")} must look like EPSG:28355 or be "local", not "${t}"`, ExitCode.usage);
  const epsg = Number(m[1]);
  return { epsg, label: `EPSG:${epsg}` };
}

export interface PointsSource {
  file: string;
  x?: string;
  y?: string;
  z?: string;
  /** "EPSG:NNNN" or "local"; default: the file's own CRS, else local. */
  crs?: string;
  /** Refuse coincident points whose values differ by more than this (default: 5% of the value range). */
  maxSpread?: number;
  mergeConflicts?: boolean;
  /** Column of observation weights (e.g. 1/variance from instrument precision), by name or 1-based position. */
  weight?: string;
  /** "auto" (default: a first row of numbers only is data) or "none" (the first row is data). */
  header?: "auto" | "none";
}

export interface LoadedPoints {
  table: PointTable;
  points: CleanPoints;
  crs: Crs;
  notes: string[];
  /** Observation weights per clean point (sum over merged points), when --weight was given. */
  weights?: Float64Array;
}

/** Weights per clean point from a named column; merged points get the sum of their weights. */
function readWeights(src: PointsSource, table: PointTable, points: CleanPoints): Float64Array {
  const name = src.weight!;
  const lower = name.toLowerCase();
  // By name, or by 1-based position when no column has that exact name (the readers' rule).
  let col = table.columns.findIndex((c) => c.toLowerCase() === lower);
  if (col < 0 && /^[1-9]\d*$/.test(name) && Number(name) <= table.columns.length) col = Number(name) - 1;
  if (col < 0) {
    throw inputError(`no column named "${printableText(name)}" for ${opt("weight")}; columns are ${table.columns.map(printableText).join(", ")}`, {
      file: src.file,
      line: 1,
    });
  }
  const byLine = new Map<number, number>();
  table.rows.forEach((row, i) => {
    const w = parseNumber(row[col] ?? "", table.decimalComma);
    byLine.set(table.lines[i], w);
  });
  const groupOf = new Map<number, number[]>();
  for (const g of points.merged) groupOf.set(g.lines[0], g.lines);
  return Float64Array.from(points.lines, (line) => {
    let total = 0;
    for (const l of groupOf.get(line) ?? [line]) {
      const w = byLine.get(l)!;
      if (!(w > 0) || !Number.isFinite(w)) {
        const cell = printableText(String(table.rows[table.lines.indexOf(l)][col] ?? "")).slice(0, 40);
        throw inputError(`weight "${cell}" in column "${printableText(name)}" must be a positive number; correct it or drop ${opt("weight")}`, {
          file: src.file,
          line: l,
        });
      }
      total += w;
    }
    return total;
  });
}

/** Read and clean a points file. */
export async function loadPoints(src: PointsSource): Promise<LoadedPoints> {
  const table = await readPointTable(src.file, { x: src.x, y: src.y, z: src.z, header: src.header });
  // Merge first, then judge conflicts against the limit: given, or 5% of the value range (common practice
  // for "the same shot twice": small differences are instrument noise, large ones a blunder).
  const points = cleanPoints(table, { mergeConflicts: true, minPoints: 3 });
  if (!src.mergeConflicts) {
    const { lo, hi } = valueRange(points.z);
    const limit = src.maxSpread ?? 0.05 * (hi - lo);
    const bad = points.merged.find((g) => g.spread > limit);
    if (bad) {
      throw inputError(
        `coincident points on lines ${bad.lines.join(", ")} have values that differ by ${fmt(bad.spread)}, more than the ` +
          `${src.maxSpread === undefined ? "default limit (5% of the value range)" : `${opt("maxSpread")} limit`} ${fmt(limit)}; ` +
          `correct or remove the wrong one, or use ${opt("mergeConflicts")} to average them`,
        { file: src.file, line: bad.lines[0] },
      );
    }
  }
  const crs = src.crs ? parseCrs(src.crs) : table.crs ?? { label: "local site grid (no EPSG code)" };
  const notes = [
    table.hasHeader === false
      ? `Columns: x = column ${table.xColumn + 1}, y = column ${table.yColumn + 1}, value = column ${table.zColumn + 1} (the file has no header row; named by position)`
      : `Columns: x = ${printableText(table.columns[table.xColumn])}, y = ${printableText(table.columns[table.yColumn])}, ` +
        `value = ${printableText(table.columns[table.zColumn])} (${table.columnChoice === "detected" ? "detected from the header; name them with --x --y --z" : "as named"})`,
    `Points: ${points.rowsRead} rows read, ${points.x.length} used`,
    ...describeCleaning(points),
  ];
  const weights = src.weight ? readWeights(src, table, points) : undefined;
  if (weights) notes.push(`Weights: column ${printableText(src.weight!)} (normalised to mean 1; merged points add their weights)`);
  return { table, points, crs, notes, weights };
}

/** Read, clean and fit. */
export async function fitPointsFile(src: PointsSource, fit: FitOptions = {}): Promise<LoadedPoints & FittedModel> {
  const loaded = await loadPoints(src);
  const t = loaded.table;
  let fitted: FittedModel;
  try {
    fitted = await fitSurfaceParallelWithFactors(loaded.points, {
      ...fit,
      weights: loaded.weights,
      crs: loaded.crs,
      source: { file: path.basename(src.file), x: t.columns[t.xColumn], y: t.columns[t.yColumn], z: t.columns[t.zColumn] },
    });
  } catch (e) {
    // Fit-stage problems concern the points file: name it.
    if (e instanceof RbfieldError && !e.place) throw new RbfieldError(e.template, e.exitCode, { file: src.file }, e.option);
    throw e;
  }
  return { ...loaded, ...fitted };
}

/** Read a model file. */
export function readModel(file: string): SurfaceModel {
  let text: string;
  try {
    text = fs.readFileSync(file, "utf8");
  } catch {
    throw new RbfieldError("cannot read the model file (missing or not readable); give the file written by 'rbfield fit'", ExitCode.io, { file });
  }
  return modelFromJson(text, file);
}

/** Read a mask polygon file (GeoJSON Polygon/MultiPolygon). */
export function readMask(file: string): PolygonRings[] {
  let text: string;
  try {
    text = fs.readFileSync(file, "utf8");
  } catch {
    throw new RbfieldError("cannot read the mask file (missing or not readable)", ExitCode.io, { file });
  }
  let data: unknown;
  const body = text.replace(/^\uFEFF/, "");
  try {
    data = JSON.parse(body);
  } catch (e) {
    const { line, column } = jsonErrorPlace(body, e);
    throw new RbfieldError("the mask file is not valid GeoJSON; give Polygon or MultiPolygon features", ExitCode.input, { file, line, column });
  }
  return polygonsFromGeoJson(data, file);
}

/** Read a GeoTIFF grid file. */
export async function readGrid(file: string): Promise<GridValues> {
  let bytes: Uint8Array;
  try {
    bytes = fs.readFileSync(file);
  } catch {
    throw new RbfieldError("cannot read the grid file (missing or not readable)", ExitCode.io, { file });
  }
  return await decodeGeoTiff(bytes, file);
}

/** Estimates at the rows of a locations table, with their standard errors and extrapolation marks. */
export interface EstimateTable {
  estimates: Float64Array;
  stdErrors: Float64Array | null;
  /** Distance from each location to the nearest reading (map units). */
  nearest: Float64Array;
  /** The `extrapolation` column: "", or "outside data hull", "far from data", "outside value range" joined by "; ". */
  notes: string[];
  /** Input lines of rows without usable coordinates (their cells are left empty). */
  unusable: number[];
  /** Input lines of the rows outside the hull, far from data, or out of range. */
  outsideHull: number[];
  farFromData: number[];
  outOfRange: number[];
}

/**
 * Estimates (and standard errors) at the rows of a locations table. Rows without usable x, y (or
 * so far away that the estimate is not a finite number) get empty cells and are listed in `unusable`.
 */
export function estimateTable(
  model: SurfaceModel,
  table: PointTable,
  se: ErrorEstimator | null = makeErrorEstimator(model),
): EstimateTable {
  const ev = makeEvaluator(model);
  const check = makeExtrapolationCheck(model);
  const rows = table.rows.length;
  const est = new Float64Array(rows);
  const err = se ? new Float64Array(rows) : null;
  const nearest = new Float64Array(rows).fill(NaN);
  const notes: string[] = new Array(rows).fill("");
  const out: EstimateTable = { estimates: est, stdErrors: err, nearest, notes, unusable: [], outsideHull: [], farFromData: [], outOfRange: [] };
  table.rows.forEach((row, i) => {
    const x = parseNumber(row[table.xColumn] ?? "", table.decimalComma);
    const y = parseNumber(row[table.yColumn] ?? "", table.decimalComma);
    const value = Number.isFinite(x) && Number.isFinite(y) ? ev.at(x, y) : NaN;
    const line = table.lines[i];
    if (!Number.isFinite(value)) {
      est[i] = NaN;
      if (err) err[i] = NaN;
      out.unusable.push(line);
      return;
    }
    est[i] = value;
    if (err && se) err[i] = se.at(x, y);
    const c = check.at(x, y);
    const wild = check.outOfRange(value);
    nearest[i] = c.distance;
    notes[i] = extrapolationNote(c, wild);
    if (c.outsideHull) out.outsideHull.push(line);
    if (c.far) out.farFromData.push(line);
    if (wild) out.outOfRange.push(line);
  });
  return out;
}

/** The columns added to an estimates table. */
export function estimateColumns(est: EstimateTable) {
  const cols: { name: string; values: Float64Array | string[]; digits?: number }[] = [{ name: "estimate", values: est.estimates }];
  if (est.stdErrors) cols.push({ name: "std_error", values: est.stdErrors });
  cols.push({ name: "nearest_reading", values: est.nearest, digits: 6 }, { name: "extrapolation", values: est.notes });
  return cols;
}

/** Summary lines about a standard-error grid, with the reason when it is zero everywhere. */
export function standardErrorLines(range: { lo: number; hi: number }, stride: number): string[] {
  if (!(range.hi >= range.lo)) return ["Standard error of the surface: no unmasked cell"];
  const line = `Standard error of the surface: ${fmt(range.lo)} to ${fmt(range.hi)} inside the mask` +
    (stride > 1 ? ` (computed every ${stride} cells and interpolated)` : "") + "; a model-based figure, not a survey tolerance";
  if (range.hi > 0) return [line];
  return [line, "  it is zero because the readings lie exactly on the trend (for example a plane): the model sees no variation to be unsure of"];
}

/** Warnings for stderr: rows left empty, standard errors that are zero everywhere, estimates far out of range. */
export function estimateWarnings(est: EstimateTable): string[] {
  const out: string[] = [];
  const lines = (l: number[]) => `${l.slice(0, 5).join(", ")}${l.length > 5 ? ", …" : ""}`;
  if (est.unusable.length) out.push(`${est.unusable.length} rows without usable coordinates have empty estimate and std_error cells (lines ${lines(est.unusable)})`);
  if (est.stdErrors && est.stdErrors.length > est.unusable.length && est.stdErrors.every((v) => !(v > 0))) {
    out.push("every std_error is 0: the readings lie exactly on the trend, so the model sees no variation to be unsure of");
  }
  if (est.outOfRange.length) out.push(`${est.outOfRange.length} estimates lie far outside the range of the readings (lines ${lines(est.outOfRange)})`);
  return out;
}

/** Summary lines about estimates: how many, which rows were unusable, which are extrapolations. */
export function estimateSummaryLines(est: EstimateTable, model: SurfaceModel): string[] {
  const lines = (l: number[]) => `line${l.length === 1 ? "" : "s"} ${l.slice(0, 5).join(", ")}${l.length > 5 ? ", …" : ""}`;
  const nu = est.unusable.length;
  const out = [
    `Estimates: ${est.estimates.length - nu} locations` +
    (nu ? `; ${nu} ${nu === 1 ? "row" : "rows"} without usable coordinates left empty (${lines(est.unusable)})` : ""),
  ];
  if (est.outsideHull.length || est.farFromData.length) {
    // The worst place: the largest distance to the nearest reading.
    let worst = -1;
    est.nearest.forEach((d, i) => {
      if (!Number.isNaN(d) && (worst < 0 || d > est.nearest[worst])) worst = i;
    });
    out.push(
      `  extrapolated: ${est.outsideHull.length} outside the data hull, ${est.farFromData.length} farther than ` +
        `${fmt(FAR_SPACINGS)} point spacings (${fmt(FAR_SPACINGS * model.spacing)} map units) from the nearest reading` +
        (worst >= 0 ? `; the farthest is ${fmt(est.nearest[worst])} map units away` : "") +
        " (column extrapolation); such estimates rest on the trend, not on nearby readings",
    );
  }
  if (est.outOfRange.length) {
    out.push(
      `WARNING: ${est.outOfRange.length} ${est.outOfRange.length === 1 ? "estimate lies" : "estimates lie"} far outside the range of the readings (${lines(est.outOfRange)}); ` +
        "do not rely on them without more readings nearby",
    );
  }
  return out;
}

export interface RunOptions extends PointsSource {
  outDir: string;
  fit?: FitOptions;
  grid?: Omit<GridOptions, "progress">;
  /** Contour interval; default about ten levels over the range. */
  interval?: number;
  base?: number;
  /** Locations to estimate at (CSV); default: the input points themselves. */
  locations?: string;
  /** Other files read by this run (e.g. a mask), which no output may overwrite. */
  otherInputs?: string[];
  /** Title of the map and the report (default: the value column and the points file). */
  title?: string;
  /** Date printed on the map and the report, YYYY-MM-DD (default today, UTC). */
  date?: string;
  progress?: (message: string) => void;
}

export interface RunResult {
  model: SurfaceModel;
  /** Output key → path (see RUN_OUTPUTS). */
  files: Record<string, string>;
  summary: string;
  /** Warnings for stderr (rows left empty, standard errors that are all zero, wild estimates). */
  warnings: string[];
}

/** The whole job on a points file into an output folder (files: RUN_OUTPUTS). */
export async function runJob(opts: RunOptions): Promise<RunResult> {
  const out = opts.outDir;
  const files = Object.fromEntries(RUN_OUTPUTS.map((o) => [o.key, path.join(out, o.file)]));
  const inputs = [opts.file, ...(opts.locations ? [opts.locations] : []), ...(opts.otherInputs ?? [])];
  const created = !fs.existsSync(out);
  ensureFolder(out);
  try {
    return await runInto(opts, files, inputs);
  } catch (e) {
    // Leave no empty folder behind when this run made it.
    if (created) {
      try {
        fs.rmdirSync(out);
      } catch { /* not empty or already gone */ }
    }
    throw e;
  }
}

async function runInto(opts: RunOptions, files: Record<string, string>, inputs: string[]): Promise<RunResult> {
  for (const f of Object.values(files)) {
    refuseInputAsOutput(f, inputs);
    refuseFolderAsOutput(f);
  }
  checkWritableFolder(files.model);

  opts.progress?.(`reading ${opts.file}`);
  const fitted = await fitPointsFile(opts, { ...opts.fit, progress: opts.progress });
  const model = fitted.model;
  const locTable = opts.locations ? await readPointTable(opts.locations, { x: opts.x, y: opts.y, needValue: false, header: opts.header }) : fitted.table;
  opts.progress?.("gridding");
  const grid = await gridModelParallel(model, { ...opts.grid, progress: opts.progress });
  const interval = opts.interval ?? defaultInterval(grid);
  const lines = contourGeoJson(grid, interval, opts.base ?? 0, false);
  const bands = contourGeoJson(grid, interval, opts.base ?? 0, true);
  opts.progress?.("standard errors");
  // One error estimator serves the estimates table and the error grid, from the fit's own factors.
  const errorEstimator = makeErrorEstimator(model, fitted.factors);
  const est = estimateTable(model, locTable, errorEstimator);
  const errors = gridStandardError(model, grid, opts.progress, errorEstimator);
  const seRange = valueRange(errors.grid.values);
  const gridRange = valueRange(grid.values);
  const check = makeExtrapolationCheck(model);

  const s = grid.spec;
  let masked = 0;
  for (const v of grid.values) if (Number.isNaN(v)) masked++;
  const summary = summaryText("rbfield run summary", [
    fitted.notes,
    modelSummaryLines(model),
    [
      `Grid: ${s.cols} × ${s.rows} cells of ${fmt(s.cell)} map units, extent ${s.xmin}, ${s.ymin} to ${s.xmax}, ${s.ymax} (outer cell edges); ${masked} cells masked`,
      `Grid values from ${fmt(gridRange.lo)} to ${fmt(gridRange.hi)} (readings from ${fmt(check.range.lo)} to ${fmt(check.range.hi)})`,
      ...(check.outOfRange(gridRange.lo) || check.outOfRange(gridRange.hi)
        ? ["WARNING: the grid reaches far outside the range of the readings; look at the cells far from readings before using them"]
        : []),
      ...standardErrorLines(seRange, errors.stride),
      `Contours: interval ${fmt(interval)}, ${lines.levels.length} levels; bands between them`,
      ...estimateSummaryLines(est, model),
    ],
    fileListLines(files),
  ]);
  const date = opts.date ?? new Date().toISOString().slice(0, 10);
  const products: RunProducts = {
    model,
    grid,
    stderrGrid: errors.grid,
    contours: lines.text,
    bands: bands.text,
    estimates: { table: locTable, columns: estimateColumns(est) },
    summary,
    map: mapInputFromModel(model, grid, { interval, base: opts.base ?? 0, title: opts.title, date }),
    report: {
      stderrGrid: errors.grid,
      stderrNote: errors.stride > 1 ? `computed every ${errors.stride} cells and interpolated` : undefined,
      cleaning: { rowsRead: fitted.points.rowsRead, skipped: fitted.points.skipped, merged: fitted.points.merged },
      warnings: estimateWarnings(est),
      title: opts.title ?? `${model.source.z} surface, ${model.source.file}`,
      date,
    },
    date,
  };
  opts.progress?.("writing the map, the report and the other files");
  const rendered = await Promise.all(RUN_OUTPUTS.map(async (o): Promise<[string, string | Uint8Array]> => [files[o.key], await o.render(products)]));
  // Everything is computed; write all files as one step (temporary files, then renames).
  writeFilesAtomic(rendered);
  return { model, files, summary, warnings: estimateWarnings(est) };
}
