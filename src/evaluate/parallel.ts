// Parallel gridding: the rows of a grid (or of a window of it: a tile) are split into one block per
// core and evaluated in Web Workers. Each cell is computed by the same code as gridModel, so results
// are identical.
import type { SurfaceModel } from "../model/model.ts";
import type { GridSpec, GridValues } from "../types.ts";
import { runWorker, workersAvailable } from "../workers.ts";
import { sortByCell } from "../geometry.ts";
import { evaluatorOf, type PackedSurface, packSurface, surfaceBuffers } from "./evaluate.ts";
import { checkFiniteCells, evaluatePlaces, evaluateRows, gridLayout, gridModel, type GridOptions, type GridWindow, startGrid } from "./grid.ts";

/** Cells × centres below which one thread is faster than starting workers. */
const PARALLEL_WORK = 2e7;

export async function gridModelParallel(model: SurfaceModel, options: GridOptions = {}, threads = navigator.hardwareConcurrency || 1): Promise<GridValues> {
  const spec = gridLayout(model, options);
  const work = spec.cols * spec.rows * model.points.x.length;
  if (!workersAvailable(threads) || work < PARALLEL_WORK) return gridModel(model, options);
  const { values, mask } = startGrid(model, options);
  try {
    await evaluateWindow(() => packSurface(model), spec, { r0: 0, r1: spec.rows, c0: 0, c1: spec.cols }, mask, values, threads, options.progress);
  } catch (e) {
    // Workers unavailable in this host (e.g. restricted permissions): compute in this thread.
    options.progress?.(`worker threads unavailable (${(e as Error).message}); gridding in one thread`);
    return gridModel(model, options);
  }
  checkFiniteCells(spec, values, mask);
  return { spec, values, crs: model.crs };
}

/**
 * Evaluate the cells of a window of a grid into `values` (row-major over the window; masked cells,
 * `mask` over the same window, NaN), its rows split over `threads` workers when there are at least
 * two, else in this thread. `pack` makes the packed surface each worker receives (transferred).
 */
export async function evaluateWindow(
  pack: () => PackedSurface,
  spec: GridSpec,
  w: GridWindow,
  mask: Uint8Array | undefined,
  values: Float64Array,
  threads: number,
  progress?: (message: string) => void,
): Promise<void> {
  const rows = w.r1 - w.r0, width = w.c1 - w.c0;
  if (!workersAvailable(threads) || rows < 2) {
    evaluateRows(evaluatorOf(pack()), spec, w.r0, w.r1, mask, values, undefined, w);
    return;
  }
  const blocks = Math.min(threads, rows);
  const per = Math.ceil(rows / blocks);
  progress?.(`gridding ${width} × ${rows} cells on ${blocks} threads`);
  const jobs: Promise<unknown>[] = [];
  for (let b = 0; b < blocks; b++) {
    const rowStart = w.r0 + b * per, rowEnd = Math.min(w.r1, rowStart + per);
    if (rowStart >= rowEnd) continue;
    // The model goes as typed arrays (transferred, not copied): the worker needs only its evaluator.
    const surface = pack();
    const rowsMask = mask ? mask.slice((rowStart - w.r0) * width, (rowEnd - w.r0) * width) : null;
    const url = new URL("./grid_worker.ts", import.meta.url);
    const transfer = [...surfaceBuffers(surface), ...(rowsMask ? [rowsMask.buffer] : [])];
    const job = { surface, spec, rowStart, rowEnd, c0: w.c0, c1: w.c1, mask: rowsMask };
    jobs.push(runWorker<Float64Array>(url, job, transfer).then((block) => values.set(block, (rowStart - w.r0) * width)));
  }
  await Promise.all(jobs);
}

/**
 * The surface at places (NaN where x or y is not finite), split into one contiguous block per thread
 * (estimates at every reading of a big survey); each value comes from the same code as in one thread.
 * The places are evaluated in the order of a coarse grid's cells (placeOrder), so that neighbouring
 * evaluations meet the same patches (a file's readings may come in any order).
 */
export async function evaluatePlacesParallel(model: SurfaceModel, x: Float64Array, y: Float64Array, threads = navigator.hardwareConcurrency || 1, order = placeOrder(x, y)): Promise<Float64Array> {
  const sx = Float64Array.from(order, (i) => x[i]), sy = Float64Array.from(order, (i) => y[i]);
  const sorted = await evaluateInBlocks(model, sx, sy, threads);
  const values = new Float64Array(x.length);
  order.forEach((i, k) => (values[i] = sorted[k]));
  return values;
}

async function evaluateInBlocks(model: SurfaceModel, x: Float64Array, y: Float64Array, threads: number): Promise<Float64Array> {
  const single = () => evaluatePlaces(evaluatorOf(packSurface(model)), x, y);
  if (!workersAvailable(threads) || x.length < 2 || x.length * model.points.x.length < PARALLEL_WORK) return single();
  const values = new Float64Array(x.length);
  const blocks = Math.min(threads, x.length), per = Math.ceil(x.length / blocks);
  const url = new URL("./grid_worker.ts", import.meta.url);
  try {
    await Promise.all(Array.from({ length: blocks }, (_, b) => {
      const from = b * per, to = Math.min(x.length, from + per);
      const surface = packSurface(model);
      const job = { surface, x: x.slice(from, to), y: y.slice(from, to) };
      return runWorker<Float64Array>(url, job, [...surfaceBuffers(surface), job.x.buffer, job.y.buffer]).then((block) => values.set(block, from));
    }));
  } catch {
    return single();
  }
  return values;
}

/** Places ordered by the cells of a grid of about 16 places a cell (rows of cells, then input order); non-finite places last. */
export function placeOrder(x: Float64Array, y: Float64Array): Int32Array {
  const n = x.length;
  let xmin = Infinity, xmax = -Infinity, ymin = Infinity, ymax = -Infinity;
  for (let i = 0; i < n; i++) {
    if (!(Number.isFinite(x[i]) && Number.isFinite(y[i]))) continue;
    xmin = Math.min(xmin, x[i]), xmax = Math.max(xmax, x[i]), ymin = Math.min(ymin, y[i]), ymax = Math.max(ymax, y[i]);
  }
  const side = Math.max(1, Math.min(4096, Math.round(Math.sqrt(n / 16))));
  const w = (xmax - xmin) / side || 1, h = (ymax - ymin) / side || 1;
  const cellOf = new Int32Array(n);
  for (let i = 0; i < n; i++) {
    const ok = Number.isFinite(x[i]) && Number.isFinite(y[i]);
    cellOf[i] = ok ? Math.min(side - 1, Math.floor((x[i] - xmin) / w)) + side * Math.min(side - 1, Math.floor((y[i] - ymin) / h)) : side * side;
  }
  return sortByCell(cellOf, side * side + 1).order;
}
