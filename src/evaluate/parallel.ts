// Parallel gridding: the rows of a grid are split into one block per core and evaluated in Web
// Workers. Each cell is computed by the same code as gridModel, so results are identical.
import type { SurfaceModel } from "../model/model.ts";
import type { GridValues } from "../types.ts";
import { ExitCode, RbfieldError } from "../errors.ts";
import { gridLayout, gridModel, type GridOptions, polygonMask, validRing } from "./grid.ts";

/** Cells × centres below which one thread is faster than starting workers. */
const PARALLEL_WORK = 2e7;

export async function gridModelParallel(model: SurfaceModel, options: GridOptions = {}, threads = navigator.hardwareConcurrency || 1): Promise<GridValues> {
  const spec = gridLayout(model, options);
  const work = spec.cols * spec.rows * model.points.x.length;
  if (threads < 2 || work < PARALLEL_WORK || typeof Worker === "undefined") return gridModel(model, options);
  const maskOpt = options.mask ?? "hull";
  if (maskOpt === "hull" && !validRing(model.hull)) return gridModel(model, options); // reports the damage
  let mask: Uint8Array | null;
  let values: Float64Array;
  try {
    values = new Float64Array(spec.cols * spec.rows);
    mask = maskOpt === "none" ? null : polygonMask(spec, maskOpt === "hull" ? [[model.hull]] : maskOpt);
  } catch (e) {
    if (!(e instanceof RangeError)) throw e;
    throw new RbfieldError(`not enough memory for a ${spec.cols} × ${spec.rows} grid; choose a larger --cell or a smaller --extent`, ExitCode.usage);
  }
  const blocks = Math.min(threads, spec.rows);
  const per = Math.ceil(spec.rows / blocks);
  options.progress?.(`gridding ${spec.cols} × ${spec.rows} cells on ${blocks} threads`);
  const jobs: Promise<void>[] = [];
  for (let b = 0; b < blocks; b++) {
    const rowStart = b * per, rowEnd = Math.min(spec.rows, rowStart + per);
    if (rowStart >= rowEnd) continue;
    jobs.push(
      new Promise<void>((resolve, reject) => {
        const worker = new Worker(new URL("./grid_worker.ts", import.meta.url).href, { type: "module" });
        worker.onmessage = (e: MessageEvent<Float64Array>) => {
          values.set(e.data, rowStart * spec.cols);
          worker.terminate();
          resolve();
        };
        worker.onerror = (e) => {
          worker.terminate();
          e.preventDefault();
          reject(new Error(`grid worker failed: ${e.message}`));
        };
        worker.postMessage({ model, spec, rowStart, rowEnd, mask: mask ? mask.slice(rowStart * spec.cols, rowEnd * spec.cols) : null });
      }),
    );
  }
  try {
    await Promise.all(jobs);
  } catch (e) {
    // Workers unavailable in this host (e.g. restricted permissions): compute in this thread.
    options.progress?.(`worker threads unavailable (${(e as Error).message}); gridding in one thread`);
    return gridModel(model, options);
  }
  // NaN marks masked cells only: an unmasked value that is not finite is an error, as in gridModel.
  for (let k = 0; k < values.length; k++) {
    if ((!mask || mask[k]) && !Number.isFinite(values[k])) {
      const r = Math.floor(k / spec.cols), c = k % spec.cols;
      throw new RbfieldError(
        `the surface is not a finite number (${values[k]}) at ${spec.xmin + (c + 0.5) * spec.cell}, ${spec.ymax - (r + 0.5) * spec.cell} ` +
          `(cell ${c + 1}, ${r + 1}); the model file may be damaged or the fit unstable: refit the points, with more smoothing if this persists`,
        ExitCode.numerical,
      );
    }
  }
  return { spec, values, crs: model.crs };
}
