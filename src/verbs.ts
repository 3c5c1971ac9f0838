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
  gridOptionsFor,
  inputJson,
  type PointsSource,
  readGrid,
  readLocations,
  readModel,
  runJob,
  type RunOptions,
} from "./job.ts";
import { modelToJson, type SurfaceModel } from "./model/model.ts";
import type { MaskFile } from "./read/mask.ts";
import { checkWritableFolder, refuseInputAsOutput, writeFileAtomic, writeFilesAtomic } from "./write/atomic.ts";
import { contourGeoJson } from "./write/contours.ts";
import { chooseLevelRule, describeLevels, type LevelRule } from "./write/levels.ts";
import { crsText } from "./text.ts";
import { mapInputFromGrid, mapInputFromModel, type MapInput, type MapOptions, renderMap } from "./write/map.ts";
import { mapToPdf, mapToPng } from "./write/map/print.ts";
import { estimatesCsv } from "./write/csv.ts";
import { encodeGeoTiff } from "./write/geotiff.ts";
import { contourText, gridText, modelSummaryLines, pointLabel } from "./write/summary.ts";

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
    json: { ...modelJson(r.model), input: inputJson(r, r.model), model: out },
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
}

export async function gridVerb(o: GridVerbOptions): Promise<VerbResult> {
  const inputs = [o.model, ...(o.mask ? [o.mask.file] : []), ...(o.otherInputs ?? [])];
  prepareOutput(o.out, inputs);
  if (o.stderr) prepareOutput(o.stderr, [...inputs, o.out]);
  const model = readModel(o.model);
  const masked = await gridOptionsFor(model, o.grid, o.mask);
  const grid = await gridModelParallel(model, masked.grid);
  const se = o.stderr ? gridStandardError(model, grid, o.grid.progress) : undefined;
  writeFilesAtomic([[o.out, encodeGeoTiff(grid)], ...(o.stderr && se ? [[o.stderr, encodeGeoTiff(se.grid)] as [string, Uint8Array]] : [])]);
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
      caution: CAUTION,
    },
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
}

export async function contourVerb(o: ContourVerbOptions): Promise<VerbResult> {
  prepareOutput(o.out, [o.input, ...(o.mask ? [o.mask.file] : []), ...(o.otherInputs ?? [])]);
  const isTiff = /\.tiff?$/i.test(o.input);
  if (o.threeD && o.bands) throw new RbfieldError(`${opt("threeD")} applies to contour lines; filled bands lie between two levels`, ExitCode.usage);
  const model = isTiff ? undefined : readModel(o.input);
  const grid = model ? await gridModelParallel(model, (await gridOptionsFor(model, o.grid, o.mask)).grid) : await readGrid(o.input);
  const rule = chooseLevelRule(o, grid.values, model?.transform);
  const r = contourGeoJson(grid, rule, { bands: o.bands, threeD: o.threeD, progress: o.grid.progress });
  writeFileAtomic(o.out, r.text);
  const what = o.bands ? `${r.features} filled bands between contours` : `Contour lines${o.threeD ? " with the level as z" : ""}`;
  return {
    text: `${what} (${contourText(rule, r.levels.length)}) written to ${o.out}; ` +
      `coordinates in the grid's CRS: ${crsText(grid.crs)}\n\n${CAUTION}\n`,
    json: { levels: r.levels, levelRule: rule, bands: o.bands, threeD: Boolean(o.threeD), file: o.out, caution: CAUTION },
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
  /** CRS of the locations when it is not the model's (e.g. EPSG:4326 for latitude/longitude). */
  crs?: string;
  progress?: (message: string, fraction?: number) => void;
}

export async function predictVerb(o: PredictVerbOptions): Promise<VerbResult> {
  prepareOutput(o.out, [o.model, o.locations]);
  const model = readModel(o.model);
  const table = await readLocations(o.locations, model, { x: o.x, y: o.y, header: o.header, crs: o.crs });
  o.progress?.(`estimates and standard errors at ${table.rows.length} places`);
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
}

/** The interval of an interval rule (--json's "interval"), else null. */
function intervalOf(rule: LevelRule): number | null {
  return rule.kind === "interval" ? rule.interval : null;
}

/** A printable contour map of a model or a grid: SVG, PDF (vector) or PNG, by the output's ending. */
export async function mapVerb(o: MapVerbOptions): Promise<VerbResult> {
  const format = /\.(svg|pdf|png)$/i.exec(o.out)?.[1].toLowerCase();
  if (!format) throw new RbfieldError(`the map is written as .svg, .pdf or .png (by the ending of ${opt("out")}), not "${o.out}"`, ExitCode.usage);
  prepareOutput(o.out, [o.input, ...(o.mask ? [o.mask.file] : []), ...(o.otherInputs ?? [])]);
  const date = o.date ?? new Date().toISOString().slice(0, 10);
  const isTiff = /\.tiff?$/i.test(o.input);
  let input: MapInput;
  if (isTiff) {
    const grid = await readGrid(o.input);
    const rule = chooseLevelRule(o, grid.values);
    input = mapInputFromGrid(grid, { rule, title: o.title ?? path.basename(o.input), dataFile: path.basename(o.input), date });
  } else {
    const model = readModel(o.input);
    const grid = await gridModelParallel(model, (await gridOptionsFor(model, o.grid, o.mask)).grid);
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

export async function runVerb(o: RunOptions): Promise<VerbResult> {
  const r = await runJob(o);
  return { text: r.summary, json: { ...modelJson(r.model), input: r.input, files: r.files }, warnings: r.warnings };
}
