// The whole job as library calls: read → clean → fit → evaluate → write. The CLI verbs and the
// demo are thin layers over these functions.
import * as fs from "node:fs";
import * as path from "node:path";
import { cleanPoints, describeCleaning } from "./clean/clean.ts";
import { ISOLATION_SPACINGS, type Isolation, isolatedSamples } from "./clean/isolated.ts";
import { ExitCode, inputError, opt, RbfieldError } from "./errors.ts";
import { makeEvaluator } from "./evaluate/evaluate.ts";
import { extrapolationNote, FAR_SPACINGS, makeExtrapolationCheck } from "./evaluate/extrapolation.ts";
import { gridModelParallel } from "./evaluate/parallel.ts";
import { type ErrorEstimator, gridStandardError, makeErrorEstimator } from "./evaluate/stderr.ts";
import type { GridOptions } from "./evaluate/grid.ts";
import { boundingBox, convexHullRing } from "./geometry.ts";
import { valueRange } from "./numbers.ts";
import { type CrsInfo, describeCrs } from "./crs/crs.ts";
import { type CrsChoice, crsRecord, projectTable, tableCrs } from "./read/project.ts";
import { chooseTextColumns, columnByOption } from "./read/columns.ts";
import { filterRows, type WhereCondition, type WhereResult } from "./read/filter.ts";
import { type MaskFile, maskInCrs, readMaskFile } from "./read/mask.ts";
import { describeLabValues, type LabValues, type NonDetectRule, readLabValues } from "./read/nondetects.ts";
import { contourGeoJson } from "./write/contours.ts";
import { chooseLevelRule } from "./write/levels.ts";
import { formatNumber, formatUncertainty, lengthText } from "./text.ts";
import { fileListLines, type RunProducts, RUN_OUTPUTS } from "./write/outputs.ts";
import { mapInputFromModel } from "./write/map.ts";
import { type FitOptions, type FittedModel, fitSurfaceParallelWithFactors } from "./fit/surface.ts";
import { modelFromJson, type SurfaceModel } from "./model/model.ts";
import { decodeGeoTiff } from "./read/geotiff.ts";
import { parseNumber, readPointTable } from "./read/points.ts";
import type { CleanPoints, Crs, DuplicateRule, GridValues, PointTable, PointText, TextTable } from "./types.ts";
import type { DuplicateGroup, SkippedEntry } from "./write/tables.ts";
import { checkWritableFolder, ensureFolder, refuseFolderAsOutput, refuseInputAsOutput, writeFilesAtomic } from "./write/atomic.ts";
import { contourText, fmt, gridText, modelSummaryLines, pointLabel, printableText, summaryText } from "./write/summary.ts";

export interface PointsSource {
  file: string;
  x?: string;
  y?: string;
  z?: string;
  /** "EPSG:NNNN", "local", "local:m", "local:ft" or "local:usft"; default: the file's own CRS, WGS 84 for
   *  longitude/latitude columns, else a local site grid. */
  crs?: string;
  /** Projected CRS to fit in when the points are geographic (default: the UTM zone of their centre). */
  toCrs?: string;
  /** Point clouds: keep only these ASPRS classes (2 = ground). */
  classes?: number[];
  /** Refuse coincident points whose values differ by more than this (default: 5% of the value range). */
  maxSpread?: number;
  mergeConflicts?: boolean;
  /** Column of observation weights (e.g. 1/variance from instrument precision), by name or 1-based position. */
  weight?: string;
  /** "auto" (default: a first row of numbers only is data) or "none" (the first row is data). */
  header?: "auto" | "none";
  /** Column of point ids (name or 1-based position); default: the first column with an identifier name (id, point, pt …). */
  id?: string;
  /** Column of description codes; default: a column named code, desc or description. */
  code?: string;
  /** Keep only the rows that meet every condition (--where COL=VALUE[,VALUE…]). */
  where?: WhereCondition[];
  /** How non-detects enter the fit: half the detection limit (default), the limit, zero, or omit. */
  nonDetects?: NonDetectRule;
  /** Detection limit of non-detects whose cell and row give none. */
  detectionLimit?: number;
  /** Column of detection limits (default: a column named DL, LOD, MDL …). */
  detectionLimitColumn?: string;
  /** How coincident points become one: mean (default), max, min or first. */
  duplicates?: DuplicateRule;
  /** Keep isolated samples inside the default grid extent and the hull mask (they are fitted either way). */
  keepIsolated?: boolean;
}

export interface LoadedPoints {
  table: PointTable;
  points: CleanPoints;
  crs: Crs;
  notes: string[];
  /** Observation weights per clean point (summed over points merged by their mean), when --weight was given. */
  weights?: Float64Array;
  /** The point id and code columns (indices into the table's columns; -1 for none). */
  idColumn: number;
  codeColumn: number;
  /** What --where kept and dropped (null without it). */
  where: WhereResult | null;
  /** Non-detects and qualifiers found in the value column. */
  lab: LabValues;
  /** Samples far from all others. */
  isolation: Isolation;
  /** Every skipped row and every merged group, with point ids (skipped.csv, duplicates.csv, --json). */
  input: { skipped: SkippedEntry[]; duplicates: DuplicateGroup[] };
  /** The CRS decision, for the summary. */
  crsChoice: CrsChoice;
  /** How coincident points were merged. */
  duplicateRule: DuplicateRule;
}

/**
 * Weights per clean point from a named column; a point merged by the mean gets the sum of its rows'
 * weights, one merged by max, min or first the weight of the row it keeps.
 */
function readWeights(src: PointsSource, table: PointTable, points: CleanPoints): Float64Array {
  const name = src.weight!;
  const col = columnByOption(table.columns, name, "weight", { file: src.file, line: 1 });
  const byLine = new Map<number, number>();
  table.rows.forEach((row, i) => {
    const w = parseNumber(row[col] ?? "", table.decimalComma);
    byLine.set(table.lines[i], w);
  });
  const groupOf = new Map<number, number[]>();
  for (const g of points.merged) if (g.rule === "mean") groupOf.set(g.line, g.lines);
  return Float64Array.from(points.lines, (line) => {
    let total = 0;
    for (const l of groupOf.get(line) ?? [line]) {
      const w = byLine.get(l)!;
      if (!(w > 0) || !Number.isFinite(w)) {
        const cell = printableText(String(table.rows[table.lines.indexOf(l)][col] ?? "")).slice(0, 40);
        throw inputError(`weight "${cell}" in column "${printableText(table.columns[col])}" must be a positive number; correct it or drop ${opt("weight")}`, {
          file: src.file,
          line: l,
        });
      }
      total += w;
    }
    return total;
  });
}

/** The summary's line about the coordinates: the CRS, its unit, and the projection when there was one. */
export function crsNote(c: CrsChoice): string {
  const unit = (i: CrsInfo) => (i.unit === null || i.unit === undefined ? "unit not stated" : i.unit === "degree" ? "degrees" : UNIT_WORDS[i.unit]);
  const name = (i: CrsInfo) => (i.epsg !== undefined ? `${i.label} (${printableText(i.name)})` : i.label);
  return c.source === c.target
    ? `Coordinates: ${name(c.target)}, ${unit(c.target)}${c.how === "as given" ? "" : `; ${c.how}`}`
    : `Coordinates: ${name(c.source)} (${c.how}), projected to ${name(c.target)}, ${unit(c.target)}, before fitting`;
}

const UNIT_WORDS = { metre: "metres", foot: "feet", "US survey foot": "US survey feet" } as const;

/** The text of a cell without surrounding spaces ("" for no row or no column). */
function cellOf(table: PointTable, row: number | undefined, j: number): string {
  return row === undefined || j < 0 ? "" : (table.rows[row]?.[j] ?? "").trim();
}

/** Read and clean a points file. */
export async function loadPoints(src: PointsSource): Promise<LoadedPoints> {
  const read = await readPointTable(src.file, { x: src.x, y: src.y, z: src.z, header: src.header, classes: src.classes });
  // The code filter first: rows it drops are neither skipped nor fitted.
  const filtered = src.where?.length ? filterRows(read, src.where) : undefined;
  const table: TextTable = filtered?.table ?? read;
  const { id: idColumn, code: codeColumn } = chooseTextColumns(table, { id: src.id, code: src.code });
  // Non-detects and qualified values become numbers (or stay out, with their reason) before cleaning.
  const lab = readLabValues(table, { nonDetects: src.nonDetects, detectionLimit: src.detectionLimit, detectionLimitColumn: src.detectionLimitColumn });
  // Geographic coordinates are projected before anything else sees them (read/project.ts).
  const crsChoice = await tableCrs(table, src.crs, src.toCrs);
  await projectTable(table, crsChoice);
  // Merge first, then judge conflicts against the limit: given, or 5% of the value range (common practice
  // for "the same shot twice": small differences are instrument noise, large ones a blunder).
  const points = cleanPoints(table, { mergeConflicts: true, minPoints: 3, duplicates: src.duplicates });
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
  const crs = crsRecord(crsChoice.target);
  const weights = src.weight ? readWeights(src, table, points) : undefined;
  const idOf = (row: number | undefined) => cellOf(table, row, idColumn);
  const rowOfLine = new Map(table.lines.map((l, i) => [l, i]));
  const input = {
    skipped: points.skipped.map((r) => ({ line: r.line, point: idOf(r.row ?? rowOfLine.get(r.line)), reason: r.reason })),
    duplicates: points.merged.map((g, k) => ({
      group: k + 1,
      rule: g.rule,
      x: g.x,
      y: g.y,
      members: g.lines.map((line, m) => ({ line, point: idOf(g.rows[m]), value: g.values[m] })),
      value: g.value,
      line: g.line,
      spread: g.spread,
      rpd: g.rpd,
    })),
  };
  const loaded: LoadedPoints = {
    table,
    points,
    crs,
    notes: [],
    weights,
    idColumn,
    codeColumn,
    where: filtered?.result ?? null,
    lab,
    isolation: isolatedSamples(points.x, points.y),
    input,
    crsChoice,
    duplicateRule: src.duplicates ?? "mean",
  };
  loaded.notes = pointNotes(loaded, src, false);
  return loaded;
}

/**
 * The summary's lines about the points: columns, CRS, rows read and used, the code filter, skipped and
 * merged rows, non-detects and qualifiers, weights. `files`: a run, whose skipped.csv and
 * duplicates.csv list every row.
 */
export function pointNotes(loaded: LoadedPoints, src: PointsSource, files: boolean): string[] {
  const { table, points, where, lab } = loaded;
  const name = (j: number) => (table.hasHeader === false ? `column ${j + 1}` : printableText(table.columns[j]));
  const texts = [
    ...(loaded.idColumn >= 0 ? [`point id = ${name(loaded.idColumn)}`] : []),
    ...(loaded.codeColumn >= 0 ? [`code = ${name(loaded.codeColumn)}`] : []),
  ];
  const columns = table.hasHeader === false
    ? `Columns: x = column ${table.xColumn + 1}, y = column ${table.yColumn + 1}, value = column ${table.zColumn + 1} (the file has no header row; named by position)`
    : `Columns: x = ${name(table.xColumn)}, y = ${name(table.yColumn)}, value = ${name(table.zColumn)} ` +
      `(${table.columnChoice === "detected" ? "detected from the header; name them with --x --y --z" : "as named"})`;
  const rowsRead = points.rowsRead + (where?.dropped ?? 0);
  const filter = where
    ? `, ${where.dropped} dropped by --where ${where.conditions.map((c) => `${printableText(c.column)}=${c.values.map(printableText).join(",")}`).join(" --where ")}`
    : "";
  const cleaning = describeCleaning(points);
  if (files) {
    if (points.skipped.length) cleaning[0] += "; every skipped row in skipped.csv";
    if (points.merged.length) cleaning[cleaning.length - 1] += "; every group in duplicates.csv";
  }
  const notes = [
    `${columns}${texts.length ? `; ${texts.join(", ")}` : ""}`,
    crsNote(loaded.crsChoice),
    `Points: ${rowsRead} rows read${filter}, ${points.x.length} used`,
    ...cleaning,
    ...describeLabValues(lab, files ? "in column qualifier of residuals.csv" : "with the points in the model file"),
  ];
  if (loaded.weights) notes.push(`Weights: column ${printableText(src.weight!)} (normalised to mean 1; ${loaded.duplicateRule === "mean" ? "merged points add their weights" : "a merged point has the weight of the row it keeps"})`);
  return notes;
}

/** The text columns kept with the fitted points (model `points.text`, residuals.csv): id, code, other texts, qualifier, limit. */
function pointTexts(loaded: LoadedPoints): PointText[] {
  const { table, points, lab } = loaded;
  const rows = points.rows ?? [];
  const cells = (j: number) => rows.map((r) => cellOf(table, r, j));
  // A file without a header row names its columns "1", "2", …: the outputs call them point, code, column N.
  const headless = table.hasHeader === false;
  const out: PointText[] = [];
  if (loaded.idColumn >= 0) out.push({ name: headless ? "point" : table.columns[loaded.idColumn], role: "id", values: cells(loaded.idColumn) });
  if (loaded.codeColumn >= 0) out.push({ name: headless ? "code" : table.columns[loaded.codeColumn], role: "code", values: cells(loaded.codeColumn) });
  (table.data ?? []).forEach((col, j) => {
    if (col.kind === "text" && j !== loaded.idColumn && j !== loaded.codeColumn) {
      out.push({ name: headless ? `column ${j + 1}` : col.name, role: "text", values: cells(j) });
    }
  });
  const qualifiers = rows.map((r) => lab.qualifier[r] ?? "");
  if (qualifiers.some((q) => q !== "")) out.push({ name: "qualifier", role: "qualifier", values: qualifiers });
  const limits = rows.map((r) => formatNumber(lab.limit[r], 10));
  if (limits.some((l) => l !== "")) out.push({ name: "detection_limit", role: "detection limit", values: limits });
  return out;
}

/** The summary's lines about isolated samples (after the fit, which gives the point labels). */
function isolationNotes(loaded: LoadedPoints, model: SurfaceModel, keep: boolean): string[] {
  const iso = loaded.isolation;
  const k = iso.indices.length;
  if (k === 0) return [];
  const shown = iso.indices.slice(0, 5).map((i, m) => `${pointLabel(model, i)} ${lengthText(iso.distances[m], model.crs)} away`);
  return [
    `Isolated samples: ${k} more than ${ISOLATION_SPACINGS} median spacings (${lengthText(iso.threshold, model.crs)}) from the rest: ` +
    `${shown.join("; ")}${k > 5 ? `; and ${k - 5} more` : ""}; fitted, but ` +
    (keep ? "kept inside the default grid extent and the hull mask (--keep-isolated)" : "left out of the default grid extent and the hull mask (--keep-isolated keeps them in)"),
  ];
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
  const model = fitted.model;
  const texts = pointTexts(loaded);
  if (texts.length) model.points.text = texts;
  // Isolated samples are fitted, but the saved extent and hull (the default grid and mask) leave them out.
  const iso = loaded.isolation.indices;
  if (iso.length && !src.keepIsolated) {
    const out = new Set(iso);
    const keep = (a: Float64Array) => a.filter((_, i) => !out.has(i));
    const x = keep(loaded.points.x), y = keep(loaded.points.y);
    model.extent = boundingBox(x, y);
    model.hull = convexHullRing(x, y);
  }
  loaded.notes.push(...isolationNotes(loaded, model, Boolean(src.keepIsolated)));
  return { ...loaded, ...fitted };
}

/** The input rows as --json reports them: columns, filter, skipped rows, merged groups, non-detects, isolated samples. */
export function inputJson(loaded: LoadedPoints, model: SurfaceModel): Record<string, unknown> {
  const { table, lab } = loaded;
  const idOf = (row: number | undefined) => cellOf(table, row, loaded.idColumn);
  return {
    columns: {
      x: table.columns[table.xColumn],
      y: table.columns[table.yColumn],
      value: table.columns[table.zColumn],
      id: loaded.idColumn >= 0 ? table.columns[loaded.idColumn] : null,
      code: loaded.codeColumn >= 0 ? table.columns[loaded.codeColumn] : null,
    },
    rowsRead: loaded.points.rowsRead + (loaded.where?.dropped ?? 0),
    pointsUsed: loaded.points.x.length,
    where: loaded.where,
    skipped: loaded.input.skipped,
    duplicates: { rule: loaded.duplicateRule, groups: loaded.input.duplicates },
    nonDetects: {
      rule: lab.rule,
      limitColumn: lab.limitColumn,
      values: lab.nonDetects.map((d) => ({ line: d.line, point: idOf(d.row), cell: d.cell, limit: d.limit, value: d.value })),
    },
    qualifiers: lab.qualified.map((q) => ({ line: q.line, point: idOf(q.row), qualifier: q.qualifier })),
    isolated: {
      threshold: loaded.isolation.threshold,
      medianSpacing: loaded.isolation.spacing,
      points: loaded.isolation.indices.map((i, m) => ({ line: model.points.line[i], point: idOf(loaded.points.rows?.[i]), distance: loaded.isolation.distances[m] })),
    },
  };
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

/** Read a mask polygon file (GeoJSON Polygon/MultiPolygon) and the CRS it declares. */
export function readMask(file: string): MaskFile {
  return readMaskFile(file);
}

/**
 * Grid options for a model: a mask file's polygons brought into the model's CRS (read/mask.ts) and
 * the sentence saying how; other options as given.
 */
export async function gridOptionsFor<G extends GridOptions>(model: SurfaceModel, grid: G, mask?: MaskFile): Promise<{ grid: G; notes: string[] }> {
  if (!mask) return { grid, notes: [] };
  const { polygons, note } = await maskInCrs(mask, model.crs, model.extent);
  return { grid: { ...grid, mask: polygons, maskFile: mask.file }, notes: [note] };
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

/** A table's coordinate column as numbers: the typed values, or the cells parsed for a hand-made table. */
function coordinateColumn(table: PointTable, j: number): Float64Array {
  const col = table.data?.[j];
  if (col && col.kind === "number") return col.values;
  return Float64Array.from(table.rows, (row) => parseNumber(row[j] ?? "", table.decimalComma));
}

/**
 * Read a locations file and bring its coordinates into the model's CRS: the locations are in `crs`
 * when given, else in WGS 84 when their columns are longitude/latitude, else in the model's own CRS.
 * Local grids in different units are refused (nothing relates them).
 */
export async function readLocations(file: string, model: SurfaceModel, opts: { x?: string; y?: string; header?: "auto" | "none"; crs?: string }): Promise<PointTable> {
  const table = await readPointTable(file, { x: opts.x, y: opts.y, needValue: false, header: opts.header });
  const given = opts.crs ?? (table.chosenBy?.x === "longitude" ? "EPSG:4326" : table.crs?.epsg !== undefined ? `EPSG:${table.crs.epsg}` : undefined);
  if (given === undefined) return table;
  const source = await describeCrs(given);
  const modelCrs = model.crs.epsg !== undefined ? await describeCrs(model.crs.epsg) : undefined;
  if (!modelCrs) {
    if (source.kind !== "local" || (source.unit && model.crs.unit && source.unit !== model.crs.unit)) {
      throw new RbfieldError(
        `the locations are in ${source.label} but the model is in ${model.crs.label}; give the locations in the model's coordinates`,
        ExitCode.input,
        { file },
      );
    }
    return table;
  }
  if (source.epsg === modelCrs.epsg) return table;
  await projectTable(table, { source, target: modelCrs, how: "as given" });
  return table;
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
  // The typed coordinates (projected into the model's CRS where they were given in another).
  const xs = coordinateColumn(table, table.xColumn), ys = coordinateColumn(table, table.yColumn);
  table.rows.forEach((_row, i) => {
    const x = xs[i], y = ys[i];
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
  const line = `Standard error of the surface: ${formatUncertainty(range.lo)} to ${formatUncertainty(range.hi)} inside the mask` +
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
        `${fmt(FAR_SPACINGS)} point spacings (${lengthText(FAR_SPACINGS * model.spacing, model.crs)}) from the nearest reading` +
        (worst >= 0 ? `; the farthest is ${lengthText(est.nearest[worst], model.crs)} away` : "") +
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
  /** Contour interval; default about ten levels over the range (log-spaced for log fits). */
  interval?: number;
  base?: number;
  /** Contour levels listed instead of an interval (e.g. thresholds 1, 10, 100, 1000). */
  levels?: number[];
  /** Contour lines with the level as a third coordinate. */
  threeD?: boolean;
  /** Locations to estimate at (CSV); default: the input points themselves. */
  locations?: string;
  /** Other files read by this run (e.g. a mask), which no output may overwrite. */
  otherInputs?: string[];
  /** A mask polygon file as read (readMask): projected into the points' CRS when it is in another. */
  mask?: MaskFile;
  /** Title of the map and the report (default: the value column and the points file). */
  title?: string;
  /** Date printed on the map and the report, YYYY-MM-DD (default today, UTC). */
  date?: string;
  /** Progress of long steps: a message and, where a loop knows it, the fraction done. */
  progress?: (message: string, fraction?: number) => void;
}

export interface RunResult {
  model: SurfaceModel;
  /** Output key → path (see RUN_OUTPUTS). */
  files: Record<string, string>;
  summary: string;
  /** Warnings for stderr (rows left empty, standard errors that are all zero, wild estimates). */
  warnings: string[];
  /** The input rows for --json (inputJson). */
  input: Record<string, unknown>;
}

/** The whole job on a points file into an output folder (files: RUN_OUTPUTS). */
export async function runJob(opts: RunOptions): Promise<RunResult> {
  const out = opts.outDir;
  const files = Object.fromEntries(RUN_OUTPUTS.map((o) => [o.key, path.join(out, o.file)]));
  const inputs = [opts.file, ...(opts.locations ? [opts.locations] : []), ...(opts.mask ? [opts.mask.file] : []), ...(opts.otherInputs ?? [])];
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
  const locTable = opts.locations ? await readLocations(opts.locations, model, { x: opts.x, y: opts.y, header: opts.header, crs: opts.crs }) : fitted.table;
  const masked = await gridOptionsFor(model, { ...opts.grid, progress: opts.progress }, opts.mask);
  opts.progress?.("gridding");
  const grid = await gridModelParallel(model, masked.grid);
  const rule = chooseLevelRule(opts, grid.values, model.transform);
  const lines = contourGeoJson(grid, rule, { threeD: opts.threeD, progress: opts.progress });
  const bands = contourGeoJson(grid, rule, { bands: true, progress: opts.progress });
  opts.progress?.("standard errors");
  // One error estimator serves the estimates table and the error grid, from the fit's own factors.
  const errorEstimator = makeErrorEstimator(model, fitted.factors);
  const est = estimateTable(model, locTable, errorEstimator);
  const errors = gridStandardError(model, grid, opts.progress, errorEstimator);
  const seRange = valueRange(errors.grid.values);
  const gridRange = valueRange(grid.values);
  const check = makeExtrapolationCheck(model);

  const s = grid.spec;
  let maskedCells = 0;
  for (const v of grid.values) if (Number.isNaN(v)) maskedCells++;
  const summary = summaryText("rbfield run summary", [
    [...pointNotes(fitted, opts, true), ...isolationNotes(fitted, model, Boolean(opts.keepIsolated))],
    modelSummaryLines(model),
    [
      ...masked.notes,
      `Grid: ${gridText(s, model.crs)}; ${maskedCells} cells masked`,
      `Grid values from ${fmt(gridRange.lo)} to ${fmt(gridRange.hi)} (readings from ${fmt(check.range.lo)} to ${fmt(check.range.hi)})`,
      ...(check.outOfRange(gridRange.lo) || check.outOfRange(gridRange.hi)
        ? ["WARNING: the grid reaches far outside the range of the readings; look at the cells far from readings before using them"]
        : []),
      ...standardErrorLines(seRange, errors.stride),
      ...(model.method === "local" ? ["  local method: the standard error blends the patches' own (an upper bound on the blended estimate's)"] : []),
      `Contours: ${contourText(rule, lines.levels.length)}; bands between them`,
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
    input: fitted.input,
    map: mapInputFromModel(model, grid, { rule, title: opts.title, date }),
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
  const rendered: [string, string | Uint8Array][] = [];
  for (const [i, o] of RUN_OUTPUTS.entries()) {
    opts.progress?.("writing the map, the report and the other files", i / RUN_OUTPUTS.length);
    rendered.push([files[o.key], await o.render(products)]);
  }
  // Everything is computed; write all files as one step (temporary files, then renames).
  writeFilesAtomic(rendered);
  return { model, files, summary, warnings: estimateWarnings(est), input: inputJson(fitted, model) };
}
