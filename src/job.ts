// The whole job as library calls: read → clean → fit → evaluate → write. The CLI verbs and the
// demo are thin layers over these functions.
import * as fs from "node:fs";
import * as path from "node:path";
import { cleanPoints, describeCleaning } from "./clean/clean.ts";
import { ExitCode, inputError, RbfieldError } from "./errors.ts";
import { makeEvaluator } from "./evaluate/evaluate.ts";
import { gridModel, type GridOptions, niceFloor, polygonsFromGeoJson, type PolygonRings } from "./evaluate/grid.ts";
import { fitSurface, type FitOptions } from "./fit/surface.ts";
import { modelFromJson, modelToJson, type SurfaceModel } from "./model/model.ts";
import { decodeGeoTiff } from "./read/geotiff.ts";
import { parseNumber, readPointTable } from "./read/points.ts";
import type { CleanPoints, Crs, GridValues, PointTable } from "./types.ts";
import { checkWritableFolder, ensureFolder, refuseInputAsOutput, writeFileAtomic } from "./write/atomic.ts";
import { contourBands, contourLevels, contourLines } from "./write/contours.ts";
import { estimatesCsv } from "./write/csv.ts";
import { encodeGeoTiff } from "./write/geotiff.ts";
import { fmt, modelSummaryLines, printableText, summaryText } from "./write/summary.ts";

/** Parse "EPSG:28355" (or "epsg:28355", "28355") or "local". */
export function parseCrs(text: string): Crs {
  const t = text.trim();
  if (/^local$/i.test(t)) return { label: "local site grid (no EPSG code)" };
  const m = /^(?:epsg:)?(\d{4,6})$/i.exec(t);
  if (!m) throw new RbfieldError(`--crs must look like EPSG:28355 or be "local", not "${t}"`, ExitCode.usage);
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
  /** Refuse coincident points whose values differ by more than this (default: no limit). */
  maxSpread?: number;
  mergeConflicts?: boolean;
}

export interface LoadedPoints {
  table: PointTable;
  points: CleanPoints;
  crs: Crs;
  notes: string[];
}

/** Read and clean a points file. */
export async function loadPoints(src: PointsSource): Promise<LoadedPoints> {
  const table = await readPointTable(src.file, { x: src.x, y: src.y, z: src.z });
  // Merge first, then judge conflicts against the limit: given, or 5% of the value range (common practice
  // for "the same shot twice": small differences are instrument noise, large ones a blunder).
  const points = cleanPoints(table, { mergeConflicts: true });
  if (!src.mergeConflicts) {
    let lo = Infinity, hi = -Infinity;
    for (const v of points.z) {
      lo = Math.min(lo, v);
      hi = Math.max(hi, v);
    }
    const limit = src.maxSpread ?? 0.05 * (hi - lo);
    const bad = points.merged.find((g) => g.spread > limit);
    if (bad) {
      throw inputError(
        `coincident points on lines ${bad.lines.join(", ")} have values that differ by ${fmt(bad.spread)}, more than the ` +
          `${src.maxSpread === undefined ? "default limit (5% of the value range)" : "--max-spread limit"} ${fmt(limit)}; ` +
          "correct or remove the wrong one, or use --merge-conflicts to average them",
        { file: src.file, line: bad.lines[0] },
      );
    }
  }
  const crs = src.crs ? parseCrs(src.crs) : table.crs ?? { label: "local site grid (no EPSG code)" };
  const notes = [
    `Columns: x = ${printableText(table.columns[table.xColumn])}, y = ${printableText(table.columns[table.yColumn])}, ` +
    `value = ${printableText(table.columns[table.zColumn])} (${table.columnChoice === "detected" ? "detected from the header; name them with --x --y --z" : "as named"})`,
    `Points: ${points.rowsRead} rows read, ${points.x.length} used`,
    ...describeCleaning(points),
  ];
  return { table, points, crs, notes };
}

/** Read, clean and fit. */
export async function fitPointsFile(src: PointsSource, fit: FitOptions = {}): Promise<LoadedPoints & { model: SurfaceModel }> {
  const loaded = await loadPoints(src);
  const t = loaded.table;
  const model = fitSurface(loaded.points, {
    ...fit,
    crs: loaded.crs,
    source: { file: path.basename(src.file), x: t.columns[t.xColumn], y: t.columns[t.yColumn], z: t.columns[t.zColumn] },
  });
  return { ...loaded, model };
}

/** Read a model file. */
export function readModel(file: string): SurfaceModel {
  let text: string;
  try {
    text = fs.readFileSync(file, "utf8");
  } catch {
    throw new RbfieldError(`${file}: cannot read the model file (missing or not readable)`, ExitCode.io, { file });
  }
  return modelFromJson(text, file);
}

/** Read a mask polygon file (GeoJSON Polygon/MultiPolygon). */
export function readMask(file: string): PolygonRings[] {
  let text: string;
  try {
    text = fs.readFileSync(file, "utf8");
  } catch {
    throw new RbfieldError(`${file}: cannot read the mask file`, ExitCode.io, { file });
  }
  let data: unknown;
  try {
    data = JSON.parse(text.replace(/^\uFEFF/, ""));
  } catch {
    throw new RbfieldError(`${file}: the mask file is not valid GeoJSON`, ExitCode.input, { file });
  }
  return polygonsFromGeoJson(data, file);
}

/** A sensible contour interval: a nice number giving about ten levels over the range. */
export function defaultInterval(grid: GridValues): number {
  let lo = Infinity, hi = -Infinity;
  for (const v of grid.values) {
    if (Number.isNaN(v)) continue;
    lo = Math.min(lo, v);
    hi = Math.max(hi, v);
  }
  return hi > lo ? niceFloor((hi - lo) / 10) : 1;
}

/** Contour a grid into a GeoJSON text. */
export function contourGeoJson(grid: GridValues, interval: number, base = 0, bands = false): { text: string; levels: number[] } {
  if (!(interval > 0) || !Number.isFinite(interval)) throw new RbfieldError(`--interval must be a positive number, not ${interval}`, ExitCode.usage);
  let lo = Infinity, hi = -Infinity;
  for (const v of grid.values) {
    if (Number.isNaN(v)) continue;
    lo = Math.min(lo, v);
    hi = Math.max(hi, v);
  }
  if (!(hi >= lo)) throw new RbfieldError("the grid has no unmasked cells to contour", ExitCode.input);
  const levels = contourLevels(lo, hi, interval, base);
  const fc = bands ? contourBands(grid, contourLevels(lo - interval, hi + interval, interval, base)) : contourLines(grid, levels);
  // RFC 7946 dropped the "crs" member and assumes WGS 84; rbfield keeps the points' CRS (see README),
  // so it names that CRS the way GDAL and most GIS still read it (the 2008 GeoJSON "crs" member).
  const out = grid.crs.epsg === undefined ? fc : { type: fc.type, crs: { type: "name", properties: { name: `urn:ogc:def:crs:EPSG::${grid.crs.epsg}` } }, features: fc.features };
  return { text: JSON.stringify(out) + "\n", levels };
}

/** Read a GeoTIFF grid file. */
export async function readGrid(file: string): Promise<GridValues> {
  let bytes: Uint8Array;
  try {
    bytes = fs.readFileSync(file);
  } catch {
    throw new RbfieldError(`${file}: cannot read the grid file`, ExitCode.io, { file });
  }
  return await decodeGeoTiff(bytes, file);
}

/** Estimates at the rows of a locations table (rows without usable x, y get an empty estimate). */
export function estimateTable(model: SurfaceModel, table: PointTable): { estimates: Float64Array; unusable: number[] } {
  const ev = makeEvaluator(model);
  const est = new Float64Array(table.rows.length);
  const unusable: number[] = [];
  table.rows.forEach((row, i) => {
    const x = parseNumber(row[table.xColumn] ?? "", table.decimalComma);
    const y = parseNumber(row[table.yColumn] ?? "", table.decimalComma);
    if (Number.isFinite(x) && Number.isFinite(y)) est[i] = ev.at(x, y);
    else {
      est[i] = NaN;
      unusable.push(table.lines[i]);
    }
  });
  return { estimates: est, unusable };
}

/** Per-point residual table (CSV text): input line, position, value, fitted value, leave-one-out residual. */
export function residualsCsv(model: SurfaceModel): string {
  const lines = ["line,x,y,value,fitted,residual,loo_residual"];
  const p = model.points;
  for (let i = 0; i < p.x.length; i++) {
    lines.push([p.line[i], p.x[i], p.y[i], p.z[i], fmt(model.fitted[i], 10), fmt(p.z[i] - model.fitted[i], 6), fmt(model.loo[i], 6)].join(","));
  }
  return lines.join("\r\n") + "\r\n";
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
  progress?: (message: string) => void;
}

export interface RunResult {
  model: SurfaceModel;
  files: Record<string, string>;
  summary: string;
}

/** The whole job on a points file into an output folder. */
export async function runJob(opts: RunOptions): Promise<RunResult> {
  const out = opts.outDir;
  const files = {
    model: path.join(out, "model.rbfield.json"),
    surface: path.join(out, "surface.tif"),
    contours: path.join(out, "contours.geojson"),
    bands: path.join(out, "bands.geojson"),
    estimates: path.join(out, "estimates.csv"),
    residuals: path.join(out, "residuals.csv"),
    summary: path.join(out, "summary.txt"),
  };
  const inputs = [opts.file, ...(opts.locations ? [opts.locations] : [])];
  ensureFolder(out);
  for (const f of Object.values(files)) refuseInputAsOutput(f, inputs);
  checkWritableFolder(files.model);

  opts.progress?.(`reading ${opts.file}`);
  const fitted = await fitPointsFile(opts, { ...opts.fit, progress: opts.progress });
  const model = fitted.model;
  const locTable = opts.locations ? await readPointTable(opts.locations, { x: opts.x, y: opts.y, needValue: false }) : fitted.table;
  opts.progress?.("gridding");
  const grid = gridModel(model, { ...opts.grid, progress: opts.progress });
  const interval = opts.interval ?? defaultInterval(grid);
  const lines = contourGeoJson(grid, interval, opts.base ?? 0, false);
  const bands = contourGeoJson(grid, interval, opts.base ?? 0, true);
  const est = estimateTable(model, locTable);

  const s = grid.spec;
  let masked = 0;
  for (const v of grid.values) if (Number.isNaN(v)) masked++;
  const summary = summaryText("rbfield run summary", [
    fitted.notes,
    modelSummaryLines(model),
    [
      `Grid: ${s.cols} × ${s.rows} cells of ${fmt(s.cell)} map units, extent ${s.xmin}, ${s.ymin} to ${s.xmax}, ${s.ymax} (outer cell edges); ${masked} cells masked`,
      `Contours: interval ${fmt(interval)}, ${lines.levels.length} levels; bands between them`,
      `Estimates: ${est.estimates.length - est.unusable.length} locations` +
      (est.unusable.length ? `; ${est.unusable.length} rows without usable coordinates (lines ${est.unusable.slice(0, 5).join(", ")})` : ""),
    ],
    [
      "Files:",
      `  model      ${files.model}`,
      `  grid       ${files.surface}`,
      `  contours   ${files.contours}`,
      `  bands      ${files.bands}`,
      `  estimates  ${files.estimates}`,
      `  residuals  ${files.residuals}`,
      `  summary    ${files.summary}`,
    ],
  ]);
  // Everything is computed; now write, each file atomically.
  writeFileAtomic(files.model, modelToJson(model));
  writeFileAtomic(files.surface, encodeGeoTiff(grid));
  writeFileAtomic(files.contours, lines.text);
  writeFileAtomic(files.bands, bands.text);
  writeFileAtomic(files.estimates, estimatesCsv(locTable, [{ name: "estimate", values: est.estimates }]));
  writeFileAtomic(files.residuals, residualsCsv(model));
  writeFileAtomic(files.summary, summary);
  return { model, files, summary };
}
