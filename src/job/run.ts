// The whole job on a points file into an output folder: fit, grid, contours, estimates, standard
// errors, map, report, summary — every file of RUN_OUTPUTS written as one step.
import * as fs from "node:fs";
import * as path from "node:path";
import { makeExtrapolationCheck } from "../evaluate/extrapolation.ts";
import { gridModelParallel } from "../evaluate/parallel.ts";
import { errorLattice, type ErrorEstimator, gridStandardErrorParallel, latticePlaces, makeErrorEstimator, placesMatch } from "../evaluate/stderr.ts";
import { valueRange } from "../numbers.ts";
import { type MaskFile } from "../read/mask.ts";
import { drawingView, gridLayout, type GridOptions } from "../evaluate/grid.ts";
import type { GridSpec } from "../types.ts";
import { boundingBox } from "../geometry.ts";
import { checkMemory, estimateMemory, fmtBytes, memoryAdvice, type MemoryEstimate, memoryLimit, methodFor, peakResidentBytes } from "./memory.ts";
import { contourGeoJson } from "../write/contours.ts";
import { chooseLevelRule } from "../write/levels.ts";
import { fileListLines, type RunProducts, RUN_OUTPUTS } from "../write/outputs.ts";
import { mapInputFromModel } from "../write/map.ts";
import { type FitOptions } from "../fit/surface.ts";
import { encodeModel, type SurfaceModel, usesSidecar } from "../model/model.ts";
import { checkWritableFolder, ensureFolder, fileBatch, refuseFolderAsOutput, refuseInputAsOutput } from "../write/atomic.ts";
import { contourText, fmt, gridText, missedLevelWarnings, modelSummaryLines, summaryText } from "../write/summary.ts";
import { fitPointsFile, gridOptionsFor, inputJson, isolationNotes, type LoadedPoints, pointNotes, type PointsSource, projectedFrom } from "./points.ts";
import { estimateColumns, estimateSummaryLines, estimateTableParallel, estimateWarnings, readLocations, standardErrorLines } from "./estimates.ts";

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
  /** Memory limit in bytes (default: half of the machine's memory; job/memory.ts). */
  maxMemory?: number;
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
  /** The memory estimate, the limit it was checked against, and the peak resident set measured at the end (null where unreadable). */
  memory: MemoryReport;
}

/** What --json says about memory. */
export interface MemoryReport {
  estimate: number;
  limit: number;
  limitSource: string;
  peak: number | null;
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

/** The grid a run will make, from the clean points (as the fit will set the model's extent and spacing); undefined with a mask file and no extent (its polygons set the extent). */
function plannedGrid(loaded: LoadedPoints, opts: RunOptions): GridSpec | undefined {
  if (opts.mask && !opts.grid?.extent) return undefined;
  const iso = new Set(opts.keepIsolated ? [] : loaded.isolation.indices);
  const keep = (a: Float64Array) => (iso.size ? a.filter((_, i) => !iso.has(i)) : a);
  const extent = boundingBox(keep(loaded.points.x), keep(loaded.points.y));
  // The layout's own checks (the cell limit, an extent that misses the data) apply here already.
  return gridLayout({ extent, spacing: loaded.isolation.spacing } as SurfaceModel, { ...opts.grid, mask: opts.grid?.mask === "none" ? "none" : "hull" });
}

async function runInto(opts: RunOptions, files: Record<string, string>, inputs: string[]): Promise<RunResult> {
  for (const f of Object.values(files)) {
    refuseInputAsOutput(f, inputs);
    refuseFolderAsOutput(f);
  }
  checkWritableFolder(files.model);

  opts.progress?.(`reading ${opts.file}`);
  const limit = memoryLimit(opts.maxMemory);
  let estimate: MemoryEstimate | undefined;
  // The local fit computes each patch's standard error at the error grid's lattice while it holds the
  // patch's factors (FitOptions.errorPlaces), so the error grid factorises nothing again; the grid
  // is planned from the clean points, and checked against the real one below (placesMatch).
  let planned: GridSpec | undefined;
  let points = 0;
  const errorPlaces = (work: number) => (planned ? latticePlaces(planned, errorLattice(planned, { work }, points)) : undefined);
  const fitted = await fitPointsFile(opts, { ...opts.fit, progress: opts.progress, errorPlaces }, (loaded) => {
    planned = plannedGrid(loaded, opts);
    points = loaded.points.x.length;
    const cells = planned ? planned.cols * planned.rows : undefined;
    // Before the long work: the whole run's peak from the points and the grid they will get.
    const n = loaded.points.x.length;
    const method = methodFor(n, opts.fit?.method);
    // The fit computes the error grid when the grid is planned now and there are no breaklines (errorPlaces).
    const errorsFromFit = planned !== undefined && !opts.breaklines && !opts.strings;
    estimate = estimateMemory({ points: n, method, patchPoints: opts.fit?.patchPoints, cells, fits: true, run: true, errorsFromFit });
    opts.progress?.(`memory: about ${fmtBytes(estimate.bytes)} needed at the peak, limit ${fmtBytes(limit.bytes)}`);
    const local = method === "global" ? estimateMemory({ points: n, method: "local", patchPoints: opts.fit?.patchPoints, cells, fits: true, run: true, errorsFromFit }) : undefined;
    checkMemory(estimate, limit, memoryAdvice(estimate, { local }));
  });
  const model = fitted.model;
  const locTable = opts.locations ? await readLocations(opts.locations, model, { x: opts.x, y: opts.y, header: opts.header, crs: opts.crs }) : fitted.table;
  const masked = await gridOptionsFor(model, { ...opts.grid, progress: opts.progress }, opts.mask);
  // The grid's size is now known exactly (a mask file's extent included): check again before gridding.
  const layout = gridLayout(model, masked.grid);
  const gridEstimate = estimateMemory({ points: model.points.x.length, method: model.method, cells: layout.cols * layout.rows, run: true, errorsFromFit: fitted.places !== undefined });
  checkMemory(gridEstimate, limit, memoryAdvice(gridEstimate));
  opts.progress?.("gridding");
  const grid = await gridModelParallel(model, masked.grid);
  const rule = chooseLevelRule(opts, grid.values, model.transform);
  const missed = missedLevelWarnings(model, rule, valueRange(grid.values));
  const lines = contourGeoJson(grid, rule, { threeD: opts.threeD, progress: opts.progress });
  const bands = contourGeoJson(grid, rule, { bands: true, progress: opts.progress });
  opts.progress?.("standard errors");
  // One error estimator serves the estimates table and the error grid (a local fit's errors at the
  // lattice nodes it planned, when the grid's lattice is that one).
  let errorEstimator: ErrorEstimator | undefined = makeErrorEstimator(model, fitted.places);
  if (fitted.places && !placesMatch(fitted.places, grid.spec, errorEstimator, model.points.x.length)) errorEstimator = makeErrorEstimator(model);
  const est = await estimateTableParallel(model, locTable, errorEstimator);
  const errors = await gridStandardErrorParallel(model, grid, opts.progress, errorEstimator);
  // Its packed copy of the model and its caches (hundreds of MB at 10⁶ points) are not needed again.
  errorEstimator = undefined;
  const seRange = valueRange(errors.grid.values);
  const gridRange = valueRange(grid.values);
  const check = makeExtrapolationCheck(model);

  // The model as written; a global model has no binary part, so the run writes no model.rbfield.bin.
  const sidecar = usesSidecar(model);
  const written = Object.fromEntries(Object.entries(files).filter(([key]) => key !== "modelData" || sidecar));
  const s = grid.spec;
  let maskedCells = 0;
  for (const v of grid.values) if (Number.isNaN(v)) maskedCells++;
  const summary = summaryText("rbfield run summary", [
    [...pointNotes(fitted, opts, true), ...isolationNotes(fitted, model, Boolean(opts.keepIsolated)), ...fitted.breaklineNotes],
    modelSummaryLines(model, projectedFrom(fitted.crsChoice)),
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
      ...missed.map((w) => `WARNING: ${w}`),
      ...estimateSummaryLines(est, model),
    ],
    fileListLines(written),
  ]);
  const date = opts.date ?? new Date().toISOString().slice(0, 10);
  const products: RunProducts = {
    model,
    modelFiles: encodeModel(model, path.basename(files.modelData)),
    grid,
    stderrGrid: errors.grid,
    contours: lines.text,
    bands: bands.text,
    estimates: { table: locTable, columns: estimateColumns(est) },
    summary,
    input: fitted.input,
    // The map and the report draw the grid as a sheet can show it (drawingView; the files keep every cell).
    map: mapInputFromModel(model, drawingView(grid), { rule, title: opts.title, date }),
    report: {
      stderrGrid: errors.grid,
      stderrDrawing: drawingView(errors.grid),
      stderrNote: errors.stride > 1 ? `computed every ${errors.stride} cells and interpolated` : undefined,
      cleaning: { rowsRead: fitted.points.rowsRead, skipped: fitted.points.skipped, merged: fitted.points.merged },
      warnings: [...estimateWarnings(est), ...missed],
      title: opts.title ?? `${model.source.z} surface, ${model.source.file}`,
      date,
    },
    date,
  };
  // Each file goes to a temporary file as soon as it is made (its text need not be kept: a 10⁶-point
  // run's tables are hundreds of MB); all are renamed over their targets once every one is written.
  const batch = fileBatch();
  try {
    for (const [i, o] of RUN_OUTPUTS.entries()) {
      opts.progress?.("writing the map, the report and the other files", i / RUN_OUTPUTS.length);
      const data = await o.render(products);
      if (data !== null) batch.add(files[o.key], data);
      // The model's bytes are on disk now (the sidecar is about 100 bytes a point): let them go.
      if (o.key === "modelData") products.modelFiles = { json: "", binary: null };
    }
  } catch (e) {
    batch.abort();
    throw e;
  }
  batch.commit();
  // A binary part left by an earlier local run in this folder belongs to no model now.
  if (!sidecar) fs.rmSync(files.modelData, { force: true });
  const memory = { estimate: Math.max(estimate?.bytes ?? 0, gridEstimate.bytes), limit: limit.bytes, limitSource: limit.source, peak: peakResidentBytes() };
  return { model, files: written, summary, warnings: [...estimateWarnings(est), ...missed], input: inputJson(fitted, model), memory };
}
