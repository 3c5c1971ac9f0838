// Parallel gridding: the rows of a grid are split into one block per core and evaluated in Web
// Workers. Each cell is computed by the same code as gridModel, so results are identical.
import type { SurfaceModel } from "../model/model.ts";
import type { GridValues } from "../types.ts";
import { runWorker, workersAvailable } from "../workers.ts";
import { packSurface, surfaceBuffers } from "./evaluate.ts";
import { checkFiniteCells, gridLayout, gridModel, type GridOptions, startGrid } from "./grid.ts";

/** Cells × centres below which one thread is faster than starting workers. */
const PARALLEL_WORK = 2e7;

export async function gridModelParallel(model: SurfaceModel, options: GridOptions = {}, threads = navigator.hardwareConcurrency || 1): Promise<GridValues> {
  const spec = gridLayout(model, options);
  const work = spec.cols * spec.rows * model.points.x.length;
  if (!workersAvailable(threads) || work < PARALLEL_WORK) return gridModel(model, options);
  const { values, mask } = startGrid(model, options);
  const blocks = Math.min(threads, spec.rows);
  const per = Math.ceil(spec.rows / blocks);
  options.progress?.(`gridding ${spec.cols} × ${spec.rows} cells on ${blocks} threads`);
  const jobs: Promise<unknown>[] = [];
  for (let b = 0; b < blocks; b++) {
    const rowStart = b * per, rowEnd = Math.min(spec.rows, rowStart + per);
    if (rowStart >= rowEnd) continue;
    // The model goes as typed arrays (transferred, not copied): the worker needs only its evaluator.
    const surface = packSurface(model);
    const rowsMask = mask ? mask.slice(rowStart * spec.cols, rowEnd * spec.cols) : null;
    const url = new URL("./grid_worker.ts", import.meta.url);
    const transfer = [...surfaceBuffers(surface), ...(rowsMask ? [rowsMask.buffer] : [])];
    jobs.push(runWorker<Float64Array>(url, { surface, spec, rowStart, rowEnd, mask: rowsMask }, transfer).then((block) => values.set(block, rowStart * spec.cols)));
  }
  try {
    await Promise.all(jobs);
  } catch (e) {
    // Workers unavailable in this host (e.g. restricted permissions): compute in this thread.
    options.progress?.(`worker threads unavailable (${(e as Error).message}); gridding in one thread`);
    return gridModel(model, options);
  }
  checkFiniteCells(spec, values, mask);
  return { spec, values, crs: model.crs };
}
