// A run's big tables as jobs for a worker thread (tables_worker.ts) or this one: residuals.csv and
// estimates.csv from just the numbers they are made of. Kept apart from outputs.ts so that the
// worker loads the table writers alone, not the map and report renderers. Only residuals.csv goes to
// a worker (workerTable): estimates.csv repeats the input's cells as written, which the reader keeps
// beside its typed columns in a WeakMap (read/table.ts) that a copy to another thread loses.
import type { SurfaceModel } from "../model/model.ts";
import type { PointTable } from "../types.ts";
import type { TextPieces } from "./atomic.ts";
import { estimatesCsvPieces } from "./csv.ts";
import { residualsCsvPieces } from "./residuals.ts";

/** What a run's products (outputs.ts, RunProducts) hold for its tables. */
interface TableSources {
  model: SurfaceModel;
  estimates: { table: PointTable; columns: { name: string; values: Float64Array | number[] | string[]; digits?: number }[] };
}

/**
 * A run's big tables as a job for a worker thread (tables_worker.ts): what residuals.csv and
 * estimates.csv are made from, without the rest of the run's products (each table's own numbers are
 * copied to the worker once).
 */
export type TableJob =
  | { key: "residuals"; model: Pick<SurfaceModel, "transform" | "points" | "fitted" | "loo" | "looStandardised"> & { diagnostics: Pick<SurfaceModel["diagnostics"], "flags"> } }
  | { key: "estimates"; table: PointTable; columns: TableSources["estimates"]["columns"] };

/** The table job of an output key, or null for the outputs drawn or written in this thread. */
export function tableJob(key: string, p: TableSources): TableJob | null {
  const m = p.model;
  if (key === "residuals") {
    return { key, model: { transform: m.transform, points: m.points, fitted: m.fitted, loo: m.loo, looStandardised: m.looStandardised, diagnostics: { flags: m.diagnostics.flags } } };
  }
  if (key === "estimates") return { key, table: p.estimates.table, columns: p.estimates.columns };
  return null;
}

/** Outputs a worker thread can write (see the top of this file). */
export function workerTable(key: string): boolean {
  return key === "residuals";
}

/** A table job's text (the same pieces as the outputs' own render). */
export function tablePieces(job: TableJob): TextPieces {
  return job.key === "residuals" ? residualsCsvPieces(job.model as SurfaceModel) : estimatesCsvPieces(job.table, job.columns);
}

