// Worker for parallel gridding: evaluates a block of grid rows of a model (see parallel.ts).
import type { SurfaceModel } from "../model/model.ts";
import type { GridSpec } from "../types.ts";
import { makeEvaluator } from "./evaluate.ts";
import { evaluateRows } from "./grid.ts";

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
  const values = new Float64Array((rowEnd - rowStart) * spec.cols);
  evaluateRows(makeEvaluator(model), spec, rowStart, rowEnd, mask, values);
  port.postMessage(values, [values.buffer]);
});
