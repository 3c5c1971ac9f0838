// Worker for parallel gridding: evaluates a block of grid rows of a model (see parallel.ts).
import type { SurfaceModel } from "../model/model.ts";
import type { GridSpec } from "../types.ts";
import { makeEvaluator } from "./evaluate.ts";

interface Job {
  model: SurfaceModel;
  spec: GridSpec;
  rowStart: number;
  rowEnd: number;
  mask: Uint8Array | null;
}

/** The worker's side of postMessage (this module runs inside a Web Worker). */
const port = globalThis as unknown as { postMessage(message: unknown, transfer?: Transferable[]): void };

globalThis.addEventListener("message", (e: Event) => {
  const event = e as MessageEvent<Job>;
  const { model, spec, rowStart, rowEnd, mask } = event.data;
  const ev = makeEvaluator(model);
  const values = new Float64Array((rowEnd - rowStart) * spec.cols);
  for (let r = rowStart; r < rowEnd; r++) {
    const yc = spec.ymax - (r + 0.5) * spec.cell;
    for (let c = 0; c < spec.cols; c++) {
      const k = (r - rowStart) * spec.cols + c;
      values[k] = mask && !mask[k] ? NaN : ev.at(spec.xmin + (c + 0.5) * spec.cell, yc);
    }
  }
  port.postMessage(values, [values.buffer]);
});
