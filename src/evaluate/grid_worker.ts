// Worker for parallel gridding: evaluates a block of grid rows of a packed surface (see parallel.ts).
import type { GridSpec } from "../types.ts";
import { evaluatorOf, type PackedSurface } from "./evaluate.ts";
import { evaluateRows } from "./grid.ts";
import { workerPort } from "../workers.ts";

interface Job {
  surface: PackedSurface;
  spec: GridSpec;
  rowStart: number;
  rowEnd: number;
  mask: Uint8Array | null;
}


globalThis.addEventListener("message", (e: Event) => {
  const event = e as MessageEvent<Job>;
  const { surface, spec, rowStart, rowEnd, mask } = event.data;
  const values = new Float64Array((rowEnd - rowStart) * spec.cols);
  evaluateRows(evaluatorOf(surface), spec, rowStart, rowEnd, mask, values);
  workerPort.postMessage(values, [values.buffer]);
});
