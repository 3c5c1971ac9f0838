// The verbs' workflows as library calls: each reads its inputs, computes, writes its files as one
// step and returns what the CLI prints (text for people, a record for --json) and warnings for
// stderr. The CLI (src/cli.ts) only parses arguments and prints.
import * as fs from "node:fs";
import * as path from "node:path";
import { CAUTION } from "./caution.ts";
import { ExitCode, opt, RbfieldError } from "./errors.ts";
import { gridModelParallel } from "./evaluate/parallel.ts";
import { gridStandardErrorParallel } from "./evaluate/stderr.ts";
import { drawingCell, gridLayout, type GridOptions } from "./evaluate/grid.ts";
import { checkMemory, estimateMemory, memoryAdvice, type MemoryLimit, memoryLimit, methodFor, peakResidentBytes } from "./job/memory.ts";
import type { FitOptions } from "./fit/surface.ts";
import {
  estimateColumns,
  estimateSummaryLines,
  estimateTableParallel,
  estimateWarnings,
  fitPointsFile,
  gridOptionsFor,
  inputJson,
  type PointsSource,
  projectedFrom,
  readGrid,
  readLocations,
  readModel,
  runJob,
  type RunOptions,
} from "./job.ts";
import { modelFiles, type SurfaceModel } from "./model/model.ts";
import type { GridValues } from "./types.ts";
import { isSidecarFile, sidecarPath } from "./model/binary.ts";
import type { MaskFile } from "./read/mask.ts";
import { checkWritableFolder, refuseFolderAsOutput, refuseInputAsOutput, writeFileAtomic, writeFilesAtomic } from "./write/atomic.ts";
import { contourGeoJson } from "./write/contours.ts";
import { chooseLevelRule, describeLevels, type LevelRule } from "./write/levels.ts";
import { crsText } from "./text.ts";
import { describeCrs } from "./crs/crs.ts";
import { mapInputFromGrid, mapInputFromModel, type MapInput, type MapOptions, renderMap } from "./write/map.ts";
import { mapToPdf, mapToPng } from "./write/map/print.ts";
import { renderReport } from "./write/report.ts";
import { estimatesCsv } from "./write/csv.ts";
import { type BandText, bandText, encodeGeoTiff, geoTiffTags } from "./write/geotiff.ts";
import { assembleTiles, gridTile, tileDescription, type TileFile, tileGridId, tileStandardError } from "./evaluate/tiles.ts";
import { contourText, gridText, missedLevelWarnings, modelSummaryLines, pointLabel } from "./write/summary.ts";
import { valueRange } from "./numbers.ts";

/** What a verb hands back to the CLI. */
export interface VerbResult {
  /** The summary for people, ending with the caution. */
  text: string;
  /** The machine-readable summary (--json), with the caution. */
  json: Record<string, unknown>;
  /** Warnings for stderr. */
  warnings: string[];
}

/** The model's figures as --json reports them. */
export function modelJson(model: SurfaceModel): Record<string, unknown> {
  const d = model.diagnostics;
  return {
    method: model.method,
    methodChoice: d.methodChoice ?? null,
    local: d.local ?? null,
    kernel: model.kernel,
    shape: model.shape,
    trend: model.trend,
    lambda: model.lambda,
    edf: d.edf,
    gcv: d.gcv,
    loocvRmse: d.loocvRmse,
    rmse: d.rmse,
    sigma: d.sigma,
    condition: d.condition,
    n: d.n,
    smoothingChoice: d.smoothingChoice,
    shapeChoice: d.shapeChoice,
    transform: model.transform,
    stretch: model.stretch,
    selection: d.selection,
    flaggedLines: d.flags.lines,
    flagged: flaggedPoints(model),
    flagTest: { test: d.flags.test, level: d.flags.level, critical: d.flags.critical },
    robust: d.robust,
    crs: model.crs,
    warnings: d.warnings,
    caution: CAUTION,
  };
}

/** The flagged points with their ids and codes, for --json. */
function flaggedPoints(model: SurfaceModel): { line: number; point: string | null; code: string | null; label: string }[] {
  const at = new Map(model.points.line.map((l, i) => [l, i]));
  const text = (role: string, i: number) => model.points.text?.find((t) => t.role === role)?.values[i] ?? null;
  return model.diagnostics.flags.lines.map((line) => {
    const i = at.get(line);
    return i === undefined
      ? { line, point: null, code: null, label: `line ${line}` }
      : { line, point: text("id", i), code: text("code", i), label: pointLabel(model, i) };
  });
}

/** The files a model or grid input reads: a GeoTIFF alone, a model file with its binary part's path. */
function modelInputs(input: string): string[] {
  return /\.tiff?$/i.test(input) ? [input] : [input, sidecarPath(input)];
}

/** Refuse an output that would overwrite an input, and check its folder before long work. */
function prepareOutput(out: string, inputs: string[]): void {
  refuseInputAsOutput(out, inputs);
  checkWritableFolder(out);
}

export async function fitVerb(src: PointsSource, fit: FitOptions, out: string, otherInputs: string[] = [], maxMemory?: number): Promise<VerbResult> {
  const inputs = [src.file, ...otherInputs];
  prepareOutput(out, inputs);
  // A local model's binary part goes beside the model file (model/binary.ts): it must not overwrite an input either.
  refuseInputAsOutput(sidecarPath(out), inputs);
  refuseFolderAsOutput(sidecarPath(out));
  const limit = memoryLimit(maxMemory);
  let estimate = 0;
  const r = await fitPointsFile(src, fit, (loaded) => {
    const n = loaded.points.x.length;
    const method = methodFor(n, fit.method);
    const e = estimateMemory({ points: n, method, patchPoints: fit.patchPoints, fits: true });
    estimate = e.bytes;
    const local = method === "global" ? estimateMemory({ points: n, method: "local", patchPoints: fit.patchPoints, fits: true }) : undefined;
    checkMemory(e, limit, memoryAdvice(e, { local }));
  });
  const files = modelFiles(out, r.model);
  writeFilesAtomic(files);
  // A binary part left beside the file by an earlier local model (it starts RBFIELDB) belongs to no
  // model now; any other file of that name is left alone.
  if (files.length === 1 && isSidecarFile(sidecarPath(out))) fs.rmSync(sidecarPath(out));
  const data = files[1]?.[0] ?? null;
  return {
    text: [...r.notes, ...modelSummaryLines(r.model, projectedFrom(r.crsChoice)), `Model written to ${out}${data ? ` (its arrays in ${data})` : ""}`, "", CAUTION, ""].join("\n"),
    json: { ...modelJson(r.model), input: inputJson(r, r.model), model: out, modelData: data, memory: memoryJson(estimate, limit) },
    warnings: [],
  };
}

export interface GridVerbOptions {
  model: string;
  out: string;
  /** Also write the standard-error grid here. */
  stderr?: string;
  grid: GridOptions;
  /** Other files read, which no output may overwrite. */
  otherInputs?: string[];
  /** A mask polygon file as read (readMask), brought into the model's CRS. */
  mask?: MaskFile;
  /** Write only this tile of the grid (evaluate/tiles.ts): 0-based column and row, side in cells. */
  tile?: { col: number; row: number; size: number };
  /** Memory limit in bytes (default: half of the machine's memory; job/memory.ts). */
  maxMemory?: number;
}

export async function gridVerb(o: GridVerbOptions): Promise<VerbResult> {
  const inputs = [o.model, sidecarPath(o.model), ...(o.mask ? [o.mask.file] : []), ...(o.otherInputs ?? [])];
  prepareOutput(o.out, inputs);
  if (o.stderr) prepareOutput(o.stderr, [...inputs, o.out]);
  const model = readModel(o.model);
  const masked = await gridOptionsFor(model, o.grid, o.mask);
  const memory = checkGridMemory(model, masked.grid, o.maxMemory, { stderr: Boolean(o.stderr), tile: o.tile });
  if (o.tile) return await tileVerb(o, model, masked, memory);
  const grid = await gridModelParallel(model, masked.grid);
  const se = o.stderr ? await gridStandardErrorParallel(model, grid, o.grid.progress) : undefined;
  writeFilesAtomic([
    [o.out, encodeGeoTiff(grid, { band: bandText(model.source.z, "values") })],
    ...(o.stderr && se ? [[o.stderr, encodeGeoTiff(se.grid, { band: bandText(model.source.z, "standard errors") })] as [string, Uint8Array]] : []),
  ]);
  const s = grid.spec;
  const seLine = o.stderr && se
    ? `Standard error of the estimate written to ${o.stderr}${se.stride > 1 ? ` (computed every ${se.stride} cells and interpolated)` : ""}; ` +
      "a model-based figure, not a survey tolerance\n"
    : "";
  return {
    text: `${masked.notes.map((n) => `${n}\n`).join("")}Grid of ${gridText(s, grid.crs)} written to ${o.out} (CRS ${crsText(grid.crs)})\n${seLine}\n${CAUTION}\n`,
    json: {
      cols: s.cols,
      rows: s.rows,
      cell: s.cell,
      extent: [s.xmin, s.ymin, s.xmax, s.ymax],
      crs: grid.crs,
      file: o.out,
      stderrFile: o.stderr ?? null,
      stderrStride: se?.stride ?? null,
      memory: memory(),
      caution: CAUTION,
    },
    warnings: [],
  };
}

/**
 * Check before gridding that the grid (or tile) fits the memory limit; returns what --json reports
 * (called at the end, so the peak measured includes the work).
 */
function checkGridMemory(
  model: SurfaceModel,
  grid: GridOptions,
  maxMemory: number | undefined,
  o: { stderr?: boolean; tile?: { col: number; row: number; size: number }; extra?: number },
): () => Record<string, unknown> {
  const spec = gridLayout(model, o.tile ? { ...grid, force: true } : grid);
  const cells = o.tile ? Math.min(spec.cols, o.tile.size) * Math.min(spec.rows, o.tile.size) : spec.cols * spec.rows;
  const limit = memoryLimit(maxMemory);
  const e = estimateMemory({ points: model.points.x.length, method: model.method, cells, stderr: o.stderr });
  if (o.extra) e.bytes += o.extra;
  checkMemory(e, limit, memoryAdvice(e, { tiles: !o.tile }));
  return () => memoryJson(e.bytes, limit);
}

/** What --json says about memory: the estimate, the limit and where it comes from, the peak resident set measured (null where unreadable). */
function memoryJson(estimate: number, limit: MemoryLimit): Record<string, unknown> {
  return { estimate, limit: limit.bytes, limitSource: limit.source, peak: peakResidentBytes() };
}

/** grid --tile: one tile of the grid, computed from the part of the model that reaches it. */
async function tileVerb(o: GridVerbOptions, model: SurfaceModel, masked: { grid: GridOptions; notes: string[] }, memory: () => Record<string, unknown>): Promise<VerbResult> {
  const t = await gridTile(model, masked.grid, o.tile!);
  const se = o.stderr ? await tileStandardError(model, t) : undefined;
  // The model file's bytes, the layout and the mask identify the grid (tileGridId): tiles of another model or mask are refused when put together.
  let modelBytes: Uint8Array;
  try {
    modelBytes = fs.readFileSync(o.model);
  } catch {
    throw new RbfieldError("cannot read the model file (missing or not readable)", ExitCode.io, { file: o.model });
  }
  const id = tileGridId(modelBytes, t.whole, masked.grid.mask);
  writeFilesAtomic([
    [o.out, encodeGeoTiff(t.grid, { description: tileDescription(t, "values", id), band: bandText(model.source.z, "values") })],
    ...(o.stderr && se
      ? [[o.stderr, encodeGeoTiff(se.grid, { description: tileDescription(t, "standard errors", id), band: bandText(model.source.z, "standard errors") })] as [string, Uint8Array]]
      : []),
  ]);
  const w = t.window, s = t.grid.spec;
  const from = t.patches === null ? `all ${t.points.toLocaleString("en")} points` : `${t.patches.toLocaleString("en")} patches holding ${t.points.toLocaleString("en")} of ${model.points.x.length.toLocaleString("en")} points`;
  const seLine = o.stderr && se
    ? `Standard error of the estimate for the tile written to ${o.stderr}${se.stride > 1 ? ` (computed every ${se.stride} cells of the whole grid and interpolated)` : ""}\n`
    : "";
  return {
    text: `${masked.notes.map((n) => `${n}\n`).join("")}Tile ${t.col},${t.row} of ${t.tiles.cols} × ${t.tiles.rows} (columns ${w.c0 + 1}–${w.c1}, rows ${w.r0 + 1}–${w.r1} ` +
      `of the ${t.whole.cols} × ${t.whole.rows} grid) written to ${o.out}; computed from ${from}\n${seLine}` +
      `Put the tiles together with 'rbfield tiles TILE.tif … --out GRID.tif'\n\n${CAUTION}\n`,
    json: {
      tile: { col: t.col, row: t.row, size: t.size, tiles: t.tiles, columns: [w.c0, w.c1], rows: [w.r0, w.r1] },
      grid: { cols: t.whole.cols, rows: t.whole.rows, cell: t.whole.cell, extent: [t.whole.xmin, t.whole.ymin, t.whole.xmax, t.whole.ymax] },
      cols: s.cols,
      rows: s.rows,
      extent: [s.xmin, s.ymin, s.xmax, s.ymax],
      patches: t.patches,
      points: t.points,
      crs: t.grid.crs,
      file: o.out,
      stderrFile: o.stderr ?? null,
      stderrStride: se?.stride ?? null,
      memory: memory(),
      caution: CAUTION,
    },
    warnings: [],
  };
}

export interface TilesVerbOptions {
  /** Tile GeoTIFFs written by grid --tile. */
  tiles: string[];
  out: string;
  maxMemory?: number;
}

/** Put tiles written by grid --tile together into the whole grid (byte-identical to gridding it whole). */
export async function tilesVerb(o: TilesVerbOptions): Promise<VerbResult> {
  prepareOutput(o.out, o.tiles);
  // The tiles' cells, read and assembled (8 bytes each, twice) and written (4): from the files' sizes.
  const limit = memoryLimit(o.maxMemory);
  let cells = 0;
  for (const file of o.tiles) {
    try {
      cells += fs.statSync(file).size / 4;
    } catch { /* readGrid names a missing file */ }
  }
  const estimate = estimateMemory({ points: 0, method: "global", cells: 3 * cells / 2 });
  checkMemory(estimate, limit, []);
  const files: TileFile[] = [];
  // The band text of the tiles (the grid's own: what the values are and their unit) goes on the whole grid.
  let band: BandText | undefined;
  for (const file of o.tiles) {
    const grid = await readGrid(file);
    let tags;
    try {
      tags = await geoTiffTags(fs.readFileSync(file));
    } catch (e) {
      throw new RbfieldError(`cannot read the GeoTIFF tags (${(e as Error).message})`, ExitCode.input, { file });
    }
    files.push({ file, grid: { ...grid, crs: tags.crs }, description: tags.description });
    band ??= tags.band;
  }
  const grid = assembleTiles(files);
  writeFileAtomic(o.out, encodeGeoTiff(grid, band ? { band } : {}));
  const s = grid.spec;
  // The summary names the cell in the CRS's unit, as 'grid' does (the GeoTIFF keys give the EPSG code only).
  const named = grid.crs.epsg !== undefined ? await describeCrs(grid.crs.epsg).catch(() => grid.crs) : grid.crs;
  return {
    text: `${o.tiles.length} tiles put together: grid of ${gridText(s, named)} written to ${o.out} (CRS ${crsText(named)})\n\n${CAUTION}\n`,
    json: { tiles: o.tiles.length, cols: s.cols, rows: s.rows, cell: s.cell, extent: [s.xmin, s.ymin, s.xmax, s.ymax], crs: grid.crs, file: o.out, memory: memoryJson(estimate.bytes, limit), caution: CAUTION },
    warnings: [],
  };
}

export interface ContourVerbOptions {
  /** A model file, or a GeoTIFF grid (by its .tif/.tiff ending). */
  input: string;
  out: string;
  /** Contour interval; default about ten levels (log-spaced 1, 2, 5 × 10ᵏ for a log-transformed model). */
  interval?: number;
  base?: number;
  /** Levels listed instead of an interval. */
  levels?: number[];
  bands: boolean;
  /** Lines with the level as a third coordinate. */
  threeD?: boolean;
  grid: GridOptions;
  otherInputs?: string[];
  /** A mask polygon file as read (readMask); applies when the input is a model. */
  mask?: MaskFile;
  maxMemory?: number;
}

export async function contourVerb(o: ContourVerbOptions): Promise<VerbResult> {
  prepareOutput(o.out, [...modelInputs(o.input), ...(o.mask ? [o.mask.file] : []), ...(o.otherInputs ?? [])]);
  const isTiff = /\.tiff?$/i.test(o.input);
  if (o.threeD && o.bands) throw new RbfieldError(`${opt("threeD")} applies to contour lines; filled bands lie between two levels`, ExitCode.usage);
  const model = isTiff ? undefined : readModel(o.input);
  const gridOpts = model ? (await gridOptionsFor(model, o.grid, o.mask)).grid : undefined;
  if (model) checkGridMemory(model, gridOpts!, o.maxMemory, {});
  const grid = model ? await gridModelParallel(model, gridOpts) : await readGrid(o.input);
  const rule = chooseLevelRule(o, grid.values, model?.transform);
  const r = contourGeoJson(grid, rule, { bands: o.bands, threeD: o.threeD, progress: o.grid.progress });
  writeFileAtomic(o.out, r.text);
  const missed = model ? missedLevelWarnings(model, rule, valueRange(grid.values)) : [];
  const what = o.bands ? `${r.features} filled bands between contours` : `Contour lines${o.threeD ? " with the level as z" : ""}`;
  return {
    text: `${what} (${contourText(rule, r.levels.length)}) written to ${o.out}; ` +
      `coordinates in the grid's CRS: ${crsText(grid.crs)}\n\n${CAUTION}\n`,
    json: { levels: r.levels, levelRule: rule, bands: o.bands, threeD: Boolean(o.threeD), file: o.out, warnings: missed, caution: CAUTION },
    warnings: missed,
  };
}

export interface PredictVerbOptions {
  model: string;
  locations: string;
  out: string;
  x?: string;
  y?: string;
  header?: "auto" | "none";
  /** CRS of the locations when it is not the model's (e.g. EPSG:4326 for latitude/longitude). */
  crs?: string;
  progress?: (message: string, fraction?: number) => void;
  maxMemory?: number;
}

export async function predictVerb(o: PredictVerbOptions): Promise<VerbResult> {
  prepareOutput(o.out, [o.model, sidecarPath(o.model), o.locations]);
  const model = readModel(o.model);
  // The standard errors refactorise the model (a global model's N² matrices; a local model's patches).
  const memory = memoryLimit(o.maxMemory);
  const estimate = estimateMemory({ points: model.points.x.length, method: model.method, stderr: true });
  checkMemory(estimate, memory, []);
  const table = await readLocations(o.locations, model, { x: o.x, y: o.y, header: o.header, crs: o.crs });
  o.progress?.(`estimates and standard errors at ${table.rows.length} places`);
  const est = await estimateTableParallel(model, table);
  writeFileAtomic(o.out, estimatesCsv(table, estimateColumns(est)));
  return {
    text: [...estimateSummaryLines(est, model), `Written to ${o.out}`, "", CAUTION, ""].join("\n"),
    json: {
      rows: table.lines.length,
      unusableLines: est.unusable,
      outsideHullLines: est.outsideHull,
      farFromDataLines: est.farFromData,
      outOfRangeLines: est.outOfRange,
      file: o.out,
      memory: memoryJson(estimate.bytes, memory),
      caution: CAUTION,
    },
    // Empty or all-zero standard errors never pass without a reason on stderr.
    warnings: estimateWarnings(est),
  };
}

/**
 * A model's grid made only to be drawn (map, report): the mask applied, no finer than the sheet
 * shows unless a cell is given (drawingCell), checked against the memory limit first.
 */
async function drawingGrid(model: SurfaceModel, o: { grid: GridOptions; mask?: MaskFile; maxMemory?: number }, stderr: boolean): Promise<GridValues> {
  const masked = (await gridOptionsFor(model, o.grid, o.mask)).grid;
  const gridOpts = { ...masked, cell: masked.cell ?? drawingCell(model, masked) };
  checkGridMemory(model, gridOpts, o.maxMemory, { stderr });
  return await gridModelParallel(model, gridOpts);
}

export interface MapVerbOptions {
  /** A model file, or a GeoTIFF grid (by its .tif/.tiff ending). */
  input: string;
  /** FILE.svg, FILE.pdf or FILE.png (by its ending). */
  out: string;
  /** Contour interval (default: a round number giving about ten levels; log-spaced for a log-transformed model). */
  interval?: number;
  base?: number;
  /** Levels listed instead of an interval. */
  levels?: number[];
  title?: string;
  /** Date printed in the title block, YYYY-MM-DD (default today, UTC). */
  date?: string;
  sheet: MapOptions;
  grid: GridOptions;
  otherInputs?: string[];
  /** A mask polygon file as read (readMask); applies when the input is a model. */
  mask?: MaskFile;
  maxMemory?: number;
}

/** The interval of an interval rule (--json's "interval"), else null. */
function intervalOf(rule: LevelRule): number | null {
  return rule.kind === "interval" ? rule.interval : null;
}

/** A printable contour map of a model or a grid: SVG, PDF (vector) or PNG, by the output's ending. */
export async function mapVerb(o: MapVerbOptions): Promise<VerbResult> {
  const format = /\.(svg|pdf|png)$/i.exec(o.out)?.[1].toLowerCase();
  if (!format) throw new RbfieldError(`the map is written as .svg, .pdf or .png (by the ending of ${opt("out")}), not "${o.out}"`, ExitCode.usage);
  prepareOutput(o.out, [...modelInputs(o.input), ...(o.mask ? [o.mask.file] : []), ...(o.otherInputs ?? [])]);
  const date = o.date ?? new Date().toISOString().slice(0, 10);
  const isTiff = /\.tiff?$/i.test(o.input);
  let input: MapInput;
  if (isTiff) {
    const grid = await readGrid(o.input);
    const rule = chooseLevelRule(o, grid.values);
    input = mapInputFromGrid(grid, { rule, title: o.title ?? path.basename(o.input), dataFile: path.basename(o.input), date });
  } else {
    const model = readModel(o.input);
    const grid = await drawingGrid(model, o, false);
    input = mapInputFromModel(model, grid, { rule: chooseLevelRule(o, grid.values, model.transform), title: o.title, date });
  }
  o.grid.progress?.(`drawing the map${format === "svg" ? "" : ` and writing it as ${format.toUpperCase()}`}`);
  const svg = renderMap(input, o.sheet);
  const bytes = format === "svg" ? svg : format === "pdf" ? await mapToPdf(svg, { creationDate: new Date(`${date}T00:00:00Z`) }) : await mapToPng(svg);
  writeFileAtomic(o.out, bytes);
  const sheet = `${o.sheet.paper} ${o.sheet.orientation}${o.sheet.scale ? `, 1:${o.sheet.scale}` : ", fitted to the sheet"}`;
  return {
    text: `Map (${sheet}; contours ${describeLevels(input.rule, "", "-").levels}) written to ${o.out}\n\n${CAUTION}\n`,
    json: {
      file: o.out,
      format,
      paper: o.sheet.paper,
      orientation: o.sheet.orientation,
      scale: o.sheet.scale ?? null,
      interval: intervalOf(input.rule),
      levelRule: input.rule,
      caution: CAUTION,
    },
    warnings: [],
  };
}

/** The report of a saved model (report verb): the same page as run's report.html; `out` is FILE.html. */
export type ReportVerbOptions = Omit<MapVerbOptions, "input" | "sheet"> & { model: string };

/**
 * The HTML report of a saved model: its surface map and standard-error map gridded as `grid` would,
 * the GCV curve, ranking, residuals, flags and the model table with the rows skipped or merged when
 * the model was fitted (the model file's `cleaning`).
 */
export async function reportVerb(o: ReportVerbOptions): Promise<VerbResult> {
  if (!/\.html?$/i.test(o.out)) throw new RbfieldError(`the report is written as .html (by the ending of ${opt("out")}), not "${o.out}"`, ExitCode.usage);
  prepareOutput(o.out, [...modelInputs(o.model), ...(o.mask ? [o.mask.file] : []), ...(o.otherInputs ?? [])]);
  const date = o.date ?? new Date().toISOString().slice(0, 10);
  const model = readModel(o.model);
  o.grid.progress?.("gridding");
  const grid = await drawingGrid(model, o, true);
  o.grid.progress?.("standard errors");
  const errors = await gridStandardErrorParallel(model, grid, o.grid.progress);
  const rule = chooseLevelRule(o, grid.values, model.transform);
  o.grid.progress?.("writing the report");
  const html = renderReport({
    model,
    map: mapInputFromModel(model, grid, { rule, title: o.title, date }),
    stderrGrid: errors.grid,
    stderrNote: errors.stride > 1 ? `computed every ${errors.stride} cells and interpolated` : undefined,
    title: o.title ?? `${model.source.z} surface, ${model.source.file}`,
    date,
  });
  writeFileAtomic(o.out, html);
  return {
    text: `Report (contours ${describeLevels(rule, "", "-").levels}) written to ${o.out}\n\n${CAUTION}\n`,
    json: { file: o.out, interval: intervalOf(rule), levelRule: rule, caution: CAUTION },
    warnings: [],
  };
}

export async function runVerb(o: RunOptions): Promise<VerbResult> {
  const r = await runJob(o);
  return { text: r.summary, json: { ...modelJson(r.model), input: r.input, files: r.files, memory: r.memory }, warnings: r.warnings };
}
