// Estimates at places: the locations table in the model's CRS, estimates with standard errors and
// extrapolation marks, and what the summary and stderr say about them.
import { ExitCode, RbfieldError } from "../errors.ts";
import { makeEvaluator } from "../evaluate/evaluate.ts";
import { evaluatePlacesParallel, placeOrder } from "../evaluate/parallel.ts";
import { extrapolationNote, FAR_SPACINGS, makeExtrapolationCheck } from "../evaluate/extrapolation.ts";
import { type ErrorEstimator, errorsAt, makeErrorEstimator } from "../evaluate/stderr.ts";
import { describeCrs } from "../crs/crs.ts";
import { projectTable } from "../read/project.ts";
import { formatUncertainty, lengthText } from "../text.ts";
import { type SurfaceModel } from "../model/model.ts";
import { parseNumber, readPointTable } from "../read/points.ts";
import type { PointTable } from "../types.ts";
import { fmt } from "../write/summary.ts";

/** A table's coordinate column as numbers: the typed values, or the cells parsed for a hand-made table. */
export function coordinateColumn(table: PointTable, j: number): Float64Array {
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
 * `values`, when given, are the surface at the rows already (evaluatePlacesParallel, the same numbers);
 * `order`, the rows' placeOrder when the caller has it.
 */
export function estimateTable(
  model: SurfaceModel,
  table: PointTable,
  se: ErrorEstimator | null = makeErrorEstimator(model),
  values?: Float64Array,
  order?: Int32Array,
): EstimateTable {
  const ev = values ? undefined : makeEvaluator(model);
  const check = makeExtrapolationCheck(model);
  const rows = table.lines.length;
  const est = new Float64Array(rows);
  const err = se ? new Float64Array(rows) : null;
  const nearest = new Float64Array(rows).fill(NaN);
  const notes: string[] = new Array(rows).fill("");
  const out: EstimateTable = { estimates: est, stdErrors: err, nearest, notes, unusable: [], outsideHull: [], farFromData: [], outOfRange: [] };
  // The typed coordinates (projected into the model's CRS where they were given in another).
  const xs = coordinateColumn(table, table.xColumn), ys = coordinateColumn(table, table.yColumn);
  // Standard errors in the order of a coarse grid's cells (placeOrder): a local model's estimator keeps
  // the patches it factorised in a bounded cache, which places in file order would keep evicting
  // (20,000 random places at 10⁵ points: 20 s in file order).
  const seAt = se ? new Float64Array(rows) : null;
  if (se && seAt) {
    const usable = Int32Array.from(order ?? placeOrder(xs, ys)).filter((i) => Number.isFinite(xs[i]) && Number.isFinite(ys[i]));
    const out = new Float64Array(usable.length);
    errorsAt(se, Float64Array.from(usable, (i) => xs[i]), Float64Array.from(usable, (i) => ys[i]), out);
    seAt.fill(NaN);
    usable.forEach((i, r) => (seAt[i] = out[r]));
  }
  table.lines.forEach((_line, i) => {
    const x = xs[i], y = ys[i];
    const value = values ? values[i] : Number.isFinite(x) && Number.isFinite(y) ? ev!.at(x, y) : NaN;
    const line = table.lines[i];
    if (!Number.isFinite(value)) {
      est[i] = NaN;
      if (err) err[i] = NaN;
      out.unusable.push(line);
      return;
    }
    est[i] = value;
    if (err && seAt) err[i] = seAt[i];
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
    `Estimates: ${(est.estimates.length - nu).toLocaleString("en")} locations` +
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

/** estimateTable with the surface evaluated in worker threads (evaluatePlacesParallel) for big tables. */
export async function estimateTableParallel(model: SurfaceModel, table: PointTable, se: ErrorEstimator | null = makeErrorEstimator(model)): Promise<EstimateTable> {
  const x = coordinateColumn(table, table.xColumn), y = coordinateColumn(table, table.yColumn);
  const order = placeOrder(x, y);
  return estimateTable(model, table, se, await evaluatePlacesParallel(model, x, y, undefined, order), order);
}
