// Reading a points file (columns, CRS and projection, filter, lab values, cleaning, weights), fitting it,
// and reading models, masks and grids: the first half of every job.
import * as fs from "node:fs";
import * as path from "node:path";
import { cleanPoints, describeCleaning } from "../clean/clean.ts";
import { ISOLATION_SPACINGS, type Isolation, isolatedSamples } from "../clean/isolated.ts";
import { ExitCode, inputError, opt, RbfieldError } from "../errors.ts";
import type { GridOptions } from "../evaluate/grid.ts";
import { evaluateModel } from "../evaluate/evaluate.ts";
import { boundingBox, convexHullRing } from "../geometry.ts";
import { valueRange } from "../numbers.ts";
import { type CrsInfo } from "../crs/crs.ts";
import { type CrsChoice, crsRecord, projectTable, tableCrs } from "../read/project.ts";
import { chooseTextColumns, columnByOption } from "../read/columns.ts";
import { isCodeName, normalizeName } from "../read/names.ts";
import { filterRows, type WhereCondition, type WhereResult } from "../read/filter.ts";
import { type MaskFile, maskInCrs, readMaskFile } from "../read/mask.ts";
import { type BreaklineFile, breaklinesInCrs, readBreaklineFile, selfCrossing } from "../read/breaklines.ts";
import { stringsFromCodes } from "../clean/strings.ts";
import { describeLabValues, type LabValues, type NonDetectRule, readLabValues } from "../read/nondetects.ts";
import { decimalsOf, formatNumber, lengthText } from "../text.ts";
import { type FitOptions, type FittedModel, fitSurfaceParallelWithPlaces } from "../fit/surface.ts";
import { modelFromJson, type SurfaceModel } from "../model/model.ts";
import { sidecarPath } from "../model/binary.ts";
import { decodeGeoTiff } from "../read/geotiff.ts";
import { readPointTable } from "../read/points.ts";
import { cellNumber, cellText, cellTexts } from "../read/table.ts";
import type { CleanPoints, Crs, DuplicateRule, GridValues, PointTable, PointText, TextTable } from "../types.ts";
import type { DuplicateGroup, SkippedEntry } from "../write/tables.ts";
import { fmt, pointLabel, printableText } from "../write/summary.ts";

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
  /** Breaklines (--breaklines FILE), read before any long work (read/breaklines.ts). */
  breaklines?: BreaklineFile;
  /** Coded strings (--strings COL=CODE[,CODE…]): shots of these codes joined into 3-D breaklines (clean/strings.ts). */
  strings?: { column: string; codes: string[] };
  /** Largest distance between consecutive shots of a string (default: 5 × the median along the code's strings). */
  stringGap?: number;
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
  const groupOf = new Map<number, number[]>();
  for (const g of points.merged) if (g.rule === "mean") groupOf.set(g.rows[0], g.rows);
  return Float64Array.from(points.rows ?? [], (row) => {
    let total = 0;
    for (const r of groupOf.get(row) ?? [row]) {
      const w = cellNumber(table, r, col);
      if (!(w > 0) || !Number.isFinite(w)) {
        const cell = printableText(cellText(table, r, col)).slice(0, 40);
        throw inputError(`weight "${cell}" in column "${printableText(table.columns[col])}" must be a positive number; correct it or drop ${opt("weight")}`, {
          file: src.file,
          line: table.lines[r],
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

/** The CRS the input's coordinates were projected from ("EPSG:4326"), or undefined when they were fitted as given. */
export function projectedFrom(c: CrsChoice): string | undefined {
  return c.source === c.target ? undefined : c.source.label;
}

const UNIT_WORDS = { metre: "metres", foot: "feet", "US survey foot": "US survey feet" } as const;

/** The text of a table's cells without surrounding spaces ("" for no row or no column). */
function cellsOf(table: PointTable): (row: number | undefined, j: number) => string {
  const text = cellTexts(table);
  return (row, j) => (row === undefined || j < 0 ? "" : text(row, j).trim());
}

/**
 * A difference of readings (a duplicate group's spread) to the most decimals the readings were
 * written with: 19.7 − 18.8 is 0.9000000000000004 in binary floating point, and no reading written
 * with one decimal can differ by more than one decimal's worth (IEEE 754 rounding; common practice).
 */
function atInputDecimals(v: number, values: ArrayLike<number>): number {
  let d = 0;
  for (let i = 0; i < values.length; i++) d = Math.max(d, decimalsOf(values[i]));
  return Number(v.toFixed(d));
}

/**
 * The column of --strings COL=…: by name or 1-based position (columnByOption); a code-column name
 * ("code", "desc" …) that no column has is the code column (--code, or the one found by its name),
 * so `--code 5 --strings code=KT,CH` works on a file without a header row.
 */
function stringsColumn(table: PointTable, src: PointsSource, codeColumn: number): number {
  const wanted = src.strings!.column;
  const place = { file: src.file, line: 1 };
  if (codeColumn >= 0 && isCodeName(wanted) && !table.columns.some((c) => normalizeName(c) === normalizeName(wanted))) return codeColumn;
  return columnByOption(table.columns, wanted, "strings", place);
}

/** Read and clean a points file; `progress` hears how much of the file has been read. */
export async function loadPoints(src: PointsSource, progress?: FitOptions["progress"]): Promise<LoadedPoints> {
  const read = await readPointTable(src.file, { x: src.x, y: src.y, z: src.z, header: src.header, classes: src.classes, progress });
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
  // Shots on coded strings at one position keep their own levels (vertical faces): one key per code.
  let faceKey: ((row: number) => string) | undefined;
  if (src.strings) {
    const col = stringsColumn(table, src, codeColumn);
    const want = new Set(src.strings.codes.map((c) => c.trim().toLowerCase()));
    faceKey = (row) => {
      const c = cellText(table, row, col).trim().toLowerCase();
      return want.has(c) ? c : "";
    };
  }
  const points = cleanPoints(table, { mergeConflicts: true, minPoints: 3, duplicates: src.duplicates, faceKey });
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
  const cell = cellsOf(table);
  const idOf = (row: number | undefined) => cell(row, idColumn);
  let rowOfLine: Map<number, number> | undefined;
  const rowOf = (r: { row?: number; line: number }) => r.row ?? (rowOfLine ??= new Map(table.lines.map((l, i) => [l, i]))).get(r.line);
  const input = {
    skipped: points.skipped.map((r) => ({ line: r.line, point: idOf(rowOf(r)), reason: r.reason })),
    duplicates: points.merged.map((g, k) => ({
      group: k + 1,
      rule: g.rule,
      x: g.x,
      y: g.y,
      members: g.lines.map((line, m) => ({ line, point: idOf(g.rows[m]), value: g.values[m] })),
      value: g.value,
      line: g.line,
      spread: atInputDecimals(g.spread, g.values),
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
    `Points: ${rowsRead.toLocaleString("en")} rows read${filter}, ${points.x.length.toLocaleString("en")} used`,
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
  const cell = cellsOf(table);
  const cells = (j: number) => rows.map((r) => cell(r, j));
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
export function isolationNotes(loaded: LoadedPoints, model: SurfaceModel, keep: boolean): string[] {
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

/**
 * The model's `source`: the file and its x, y and value column names. A file without a header row
 * names its columns "1", "2", …, which read badly in titles and legends ("4 surface"): there the
 * coordinates are "column 3" and the value "value (column 4)" (README "Points").
 */
export function sourceNames(file: string, t: PointTable): SurfaceModel["source"] {
  const base = path.basename(file);
  if (t.hasHeader !== false) return { file: base, x: t.columns[t.xColumn], y: t.columns[t.yColumn], z: t.columns[t.zColumn] };
  return { file: base, x: `column ${t.xColumn + 1}`, y: `column ${t.yColumn + 1}`, z: `value (column ${t.zColumn + 1})` };
}

/** Read, clean and fit; `beforeFit` sees the clean points first (the memory check before the long work). */
export async function fitPointsFile(src: PointsSource, fit: FitOptions = {}, beforeFit?: (loaded: LoadedPoints) => void): Promise<LoadedPoints & FittedModel & { breaklineNotes: string[] }> {
  const loaded = await loadPoints(src, fit.progress);
  beforeFit?.(loaded);
  const t = loaded.table;
  const { lines: breaklines, notes: breaklineNotes } = await breaklinesFor(src, loaded);
  loaded.notes.push(...breaklineNotes);
  let fitted: FittedModel;
  try {
    fitted = await fitSurfaceParallelWithPlaces(loaded.points, {
      ...fit,
      // The isolated-sample search measured the same points' median spacing.
      spacing: loaded.isolation.spacing,
      ...(breaklines.length ? { breaklines } : {}),
      weights: loaded.weights,
      crs: loaded.crs,
      source: sourceNames(src.file, t),
    });
  } catch (e) {
    // Fit-stage problems concern the points file: name it.
    if (e instanceof RbfieldError && !e.place) throw new RbfieldError(e.template, e.exitCode, { file: src.file }, e.option);
    throw e;
  }
  const model = fitted.model;
  const texts = pointTexts(loaded);
  if (texts.length) model.points.text = texts;
  nonDetectChecks(model, loaded.lab);
  // The rows cleaning skipped or merged travel with the model: the report of a saved model lists them.
  const pts = loaded.points;
  model.cleaning = {
    rowsRead: pts.rowsRead,
    skipped: pts.skipped.map((r) => ({ line: r.line, reason: r.reason })),
    merged: pts.merged.map((g) => ({ lines: g.lines, x: g.x, y: g.y, spread: g.spread, value: g.value })),
  };
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
  return { ...loaded, ...fitted, breaklineNotes };
}

/**
 * The breaklines of a fit: the file's lines brought into the points' CRS, then the coded strings;
 * the summary's lines about them go to loaded.notes.
 */
async function breaklinesFor(src: PointsSource, loaded: LoadedPoints): Promise<{ lines: NonNullable<FitOptions["breaklines"]>; notes: string[] }> {
  const out: NonNullable<FitOptions["breaklines"]> = [];
  const notes: string[] = [];
  const { points, table } = loaded;
  if (src.breaklines) {
    const { lines, note } = await breaklinesInCrs(src.breaklines, loaded.crs, boundingBox(points.x, points.y));
    out.push(...lines);
    notes.push(note);
  }
  if (src.strings) {
    const col = stringsColumn(table, src, loaded.codeColumn);
    const codes = (points.rows ?? []).map((r) => cellText(table, r, col));
    const res = stringsFromCodes(points, codes, src.strings.codes, src.stringGap);
    for (const s of res.strings) {
      const c = selfCrossing(s.x, s.y);
      if (c) {
        throw inputError(
          `string ${printableText(s.name)} (lines ${s.firstLine}–${s.lastLine}) crosses itself between the shots on lines ${points.lines[s.points[c[0]]]} and ` +
            `${points.lines[s.points[c[1]]]}; give the shots another code or split the string with ${opt("stringGap")}`,
          { file: src.file, line: points.lines[s.points[c[1]]] },
        );
      }
    }
    const gapText = res.gaps.map((g) => `${printableText(g.code)} ${Number.isFinite(g.gap) ? lengthText(g.gap, loaded.crs) : "none"}`).join(", ");
    notes.push(
      `Strings: ${res.strings.length} from codes ${src.strings.codes.map(printableText).join(", ")} in column ${printableText(src.strings.column)} ` +
        `(${res.strings.reduce((a, s) => a + s.points.length, 0)} shots; split at gaps above ${gapText}${res.gaps[0]?.given ? ", as given" : ", 5 × the median spacing along each code"})` +
        (res.single.length ? `; ${res.single.length} single shots left out of the strings (lines ${res.single.slice(0, 5).join(", ")}${res.single.length > 5 ? ", …" : ""})` : ""),
    );
    for (const s of res.strings) {
      notes.push(`  string ${printableText(s.name)}: ${s.points.length} shots, ${lengthText(s.length, loaded.crs)} long, lines ${s.firstLine}–${s.lastLine}`);
    }
    out.push(...res.strings.map((s) => ({ name: `string ${s.name}`, x: s.x, y: s.y, z: s.z })));
  }
  return { lines: out, notes };
}

/**
 * Non-detects enter the fit as substitutes (half the limit by default), not as readings, so the
 * blunder test does not apply to them: a non-detect is never listed as a possible blunder (the advice
 * "check it in the field book, correct or remove it" would remove a clean well). What matters at a
 * non-detect is whether the surface there exceeds its detection limit — the surface then spreads
 * readings into a place measured clean — and the model's warnings say where (the summary, the
 * report and --json show them).
 */
export function nonDetectChecks(model: SurfaceModel, lab: LabValues): void {
  const entered = new Map(lab.nonDetects.filter((d) => d.value !== null && d.limit !== null).map((d) => [d.line, d.limit!]));
  if (entered.size === 0) return;
  const flags = model.diagnostics.flags;
  flags.lines = flags.lines.filter((line) => !entered.has(line));
  const pts = model.points;
  const at = pts.line.map((line, i) => (entered.has(line) ? i : -1)).filter((i) => i >= 0);
  if (at.length === 0) return;
  const estimates = evaluateModel(model, at.map((i) => pts.x[i]), at.map((i) => pts.y[i]));
  const above = at.filter((i, k) => estimates[k] > entered.get(pts.line[i])!);
  const note = `non-detects are substitutes, not readings: they are not tested as possible blunders`;
  model.diagnostics.warnings.push(
    above.length
      ? `the surface exceeds the detection limit at ${above.length} of ${at.length} non-detects (${above.slice(0, 10).map((i) => pointLabel(model, i)).join("; ")}${above.length > 10 ? "; …" : ""}): it spreads higher readings into places measured clean; ${note}`
      : `the surface stays below the detection limit at all ${at.length} non-detects; ${note}`,
  );
}

/** The input rows as --json reports them: columns, filter, skipped rows, merged groups, non-detects, isolated samples. */
export function inputJson(loaded: LoadedPoints, model: SurfaceModel): Record<string, unknown> {
  const { table, lab } = loaded;
  const cell = cellsOf(table);
  const idOf = (row: number | undefined) => cell(row, loaded.idColumn);
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

/** Read a model file (and, for a version 3 file, its binary part beside it: sidecarPath). */
export function readModel(file: string): SurfaceModel {
  let text: string;
  try {
    text = fs.readFileSync(file, "utf8");
  } catch {
    throw new RbfieldError("cannot read the model file (missing or not readable); give the file written by 'rbfield fit'", ExitCode.io, { file });
  }
  const sidecar = sidecarPath(file);
  return modelFromJson(text, file, {
    file: sidecar,
    read() {
      try {
        return fs.readFileSync(sidecar);
      } catch {
        throw new RbfieldError(
          `cannot read the model's binary part (missing or not readable); keep it beside ${path.basename(file)} under this name, as 'rbfield fit' wrote them`,
          ExitCode.io,
          { file: sidecar },
        );
      }
    },
  });
}

/** Read a breakline file (GeoJSON LineString/MultiLineString) and the CRS it declares. */
export function readBreaklines(file: string): BreaklineFile {
  return readBreaklineFile(file);
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
