// The verbs' workflows as library calls: each reads its inputs, computes, writes its files as one
// step and returns what the CLI prints (text for people, a record for --json) and warnings for
// stderr. The CLI (src/cli.ts) only parses arguments and prints.
import * as path from "node:path";
import { CAUTION } from "./caution.ts";
import { ExitCode, opt, RbfieldError } from "./errors.ts";
import { gridModelParallel } from "./evaluate/parallel.ts";
import { gridStandardError } from "./evaluate/stderr.ts";
import type { GridOptions } from "./evaluate/grid.ts";
import type { FitOptions } from "./fit/surface.ts";
import {
  estimateColumns,
  estimateSummaryLines,
  estimateTable,
  estimateWarnings,
  fitPointsFile,
  type PointsSource,
  readGrid,
  readModel,
  runJob,
  type RunOptions,
} from "./job.ts";
import { modelToJson, type SurfaceModel } from "./model/model.ts";
import { readPointTable } from "./read/points.ts";
import { checkWritableFolder, refuseInputAsOutput, writeFileAtomic, writeFilesAtomic } from "./write/atomic.ts";
import { contourGeoJson, defaultInterval } from "./write/contours.ts";
import { mapInputFromGrid, mapInputFromModel, type MapInput, type MapOptions, renderMap } from "./write/map.ts";
import { mapToPdf, mapToPng } from "./write/map/print.ts";
import { estimatesCsv } from "./write/csv.ts";
import { encodeGeoTiff } from "./write/geotiff.ts";
import { fmt, modelSummaryLines } from "./write/summary.ts";

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
    flagTest: { test: d.flags.test, level: d.flags.level, critical: d.flags.critical },
    robust: d.robust,
    crs: model.crs,
    warnings: d.warnings,
    caution: CAUTION,
  };
}

/** Refuse an output that would overwrite an input, and check its folder before long work. */
function prepareOutput(out: string, inputs: string[]): void {
  refuseInputAsOutput(out, inputs);
  checkWritableFolder(out);
}

export async function fitVerb(src: PointsSource, fit: FitOptions, out: string, otherInputs: string[] = []): Promise<VerbResult> {
  prepareOutput(out, [src.file, ...otherInputs]);
  const r = await fitPointsFile(src, fit);
  writeFileAtomic(out, modelToJson(r.model));
  return {
    text: [...r.notes, ...modelSummaryLines(r.model), `Model written to ${out}`, "", CAUTION, ""].join("\n"),
    json: { ...modelJson(r.model), model: out },
    warnings: [],
  };
}

export interface GridVerbOptions {
  model: string;
  out: string;
  /** Also write the standard-error grid here. */
  stderr?: string;
  grid: GridOptions;
  /** Other files read (a mask), which no output may overwrite. */
  otherInputs?: string[];
}

export async function gridVerb(o: GridVerbOptions): Promise<VerbResult> {
  const inputs = [o.model, ...(o.otherInputs ?? [])];
  prepareOutput(o.out, inputs);
  if (o.stderr) prepareOutput(o.stderr, [...inputs, o.out]);
  const model = readModel(o.model);
  const grid = await gridModelParallel(model, o.grid);
  const se = o.stderr ? gridStandardError(model, grid, o.grid.progress) : undefined;
  writeFilesAtomic([[o.out, encodeGeoTiff(grid)], ...(o.stderr && se ? [[o.stderr, encodeGeoTiff(se.grid)] as [string, Uint8Array]] : [])]);
  const s = grid.spec;
  const seLine = o.stderr && se
    ? `Standard error of the estimate written to ${o.stderr}${se.stride > 1 ? ` (computed every ${se.stride} cells and interpolated)` : ""}; ` +
      "a model-based figure, not a survey tolerance\n"
    : "";
  return {
    text: `Grid ${s.cols} × ${s.rows} cells of ${fmt(s.cell)} written to ${o.out} (extent ${s.xmin}, ${s.ymin} to ${s.xmax}, ${s.ymax}; CRS ${grid.crs.label})\n${seLine}\n${CAUTION}\n`,
    json: {
      cols: s.cols,
      rows: s.rows,
      cell: s.cell,
      extent: [s.xmin, s.ymin, s.xmax, s.ymax],
      crs: grid.crs,
      file: o.out,
      stderrFile: o.stderr ?? null,
      stderrStride: se?.stride ?? null,
      caution: CAUTION,
    },
    warnings: [],
  };
}

export interface ContourVerbOptions {
  /** A model file, or a GeoTIFF grid (by its .tif/.tiff ending). */
  input: string;
  out: string;
  interval: number;
  base: number;
  bands: boolean;
  grid: GridOptions;
  otherInputs?: string[];
}

export async function contourVerb(o: ContourVerbOptions): Promise<VerbResult> {
  prepareOutput(o.out, [o.input, ...(o.otherInputs ?? [])]);
  const isTiff = /\.tiff?$/i.test(o.input);
  const grid = isTiff ? await readGrid(o.input) : await gridModelParallel(readModel(o.input), o.grid);
  const r = contourGeoJson(grid, o.interval, o.base, o.bands);
  writeFileAtomic(o.out, r.text);
  const what = o.bands ? `${r.features} filled bands` : `contour lines at ${r.features} levels`;
  return {
    text: `${what[0].toUpperCase()}${what.slice(1)} (interval ${fmt(o.interval)}) written to ${o.out}; coordinates in the grid's CRS (${grid.crs.label})\n\n${CAUTION}\n`,
    json: { levels: r.levels, bands: o.bands, file: o.out, caution: CAUTION },
    warnings: [],
  };
}

export interface PredictVerbOptions {
  model: string;
  locations: string;
  out: string;
  x?: string;
  y?: string;
  header?: "auto" | "none";
}

export async function predictVerb(o: PredictVerbOptions): Promise<VerbResult> {
  prepareOutput(o.out, [o.model, o.locations]);
  const model = readModel(o.model);
  const table = await readPointTable(o.locations, { x: o.x, y: o.y, needValue: false, header: o.header });
  const est = estimateTable(model, table);
  writeFileAtomic(o.out, estimatesCsv(table, estimateColumns(est)));
  return {
    text: [...estimateSummaryLines(est, model), `Written to ${o.out}`, "", CAUTION, ""].join("\n"),
    json: {
      rows: table.rows.length,
      unusableLines: est.unusable,
      outsideHullLines: est.outsideHull,
      farFromDataLines: est.farFromData,
      outOfRangeLines: est.outOfRange,
      file: o.out,
      caution: CAUTION,
    },
    // Empty or all-zero standard errors never pass without a reason on stderr.
    warnings: estimateWarnings(est),
  };
}

export interface MapVerbOptions {
  /** A model file, or a GeoTIFF grid (by its .tif/.tiff ending). */
  input: string;
  /** FILE.svg, FILE.pdf or FILE.png (by its ending). */
  out: string;
  /** Contour interval (default: a round number giving about ten levels). */
  interval?: number;
  base: number;
  title?: string;
  /** Date printed in the title block, YYYY-MM-DD (default today, UTC). */
  date?: string;
  sheet: MapOptions;
  grid: GridOptions;
  otherInputs?: string[];
}

/** A printable contour map of a model or a grid: SVG, PDF (vector) or PNG, by the output's ending. */
export async function mapVerb(o: MapVerbOptions): Promise<VerbResult> {
  const format = /\.(svg|pdf|png)$/i.exec(o.out)?.[1].toLowerCase();
  if (!format) throw new RbfieldError(`the map is written as .svg, .pdf or .png (by the ending of ${opt("out")}), not "${o.out}"`, ExitCode.usage);
  prepareOutput(o.out, [o.input, ...(o.otherInputs ?? [])]);
  const date = o.date ?? new Date().toISOString().slice(0, 10);
  const isTiff = /\.tiff?$/i.test(o.input);
  let input: MapInput;
  if (isTiff) {
    const grid = await readGrid(o.input);
    const interval = o.interval ?? defaultInterval(grid);
    input = mapInputFromGrid(grid, { interval, base: o.base, title: o.title ?? path.basename(o.input), dataFile: path.basename(o.input), date });
  } else {
    const model = readModel(o.input);
    const grid = await gridModelParallel(model, o.grid);
    input = mapInputFromModel(model, grid, { interval: o.interval ?? defaultInterval(grid), base: o.base, title: o.title, date });
  }
  const svg = renderMap(input, o.sheet);
  const bytes = format === "svg" ? svg : format === "pdf" ? await mapToPdf(svg, { creationDate: new Date(`${date}T00:00:00Z`) }) : await mapToPng(svg);
  writeFileAtomic(o.out, bytes);
  const sheet = `${o.sheet.paper} ${o.sheet.orientation}${o.sheet.scale ? `, 1:${o.sheet.scale}` : ", fitted to the sheet"}`;
  return {
    text: `Map (${sheet}; contours every ${fmt(input.interval)}) written to ${o.out}\n\n${CAUTION}\n`,
    json: { file: o.out, format, paper: o.sheet.paper, orientation: o.sheet.orientation, scale: o.sheet.scale ?? null, interval: input.interval, caution: CAUTION },
    warnings: [],
  };
}

export async function runVerb(o: RunOptions): Promise<VerbResult> {
  const r = await runJob(o);
  return { text: r.summary, json: { ...modelJson(r.model), files: r.files }, warnings: r.warnings };
}
