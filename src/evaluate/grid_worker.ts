// Worker for parallel gridding: evaluates a block of grid rows (within columns [c0, c1)) of a packed
// surface, or the surface at a list of places (see parallel.ts).
import type { GridSpec } from "../types.ts";
import { evaluatorOf, type PackedSurface } from "./evaluate.ts";
import { evaluatePlaces, evaluateRows } from "./grid.ts";
import { workerPort } from "../workers.ts";

interface PlacesJob {
  surface: PackedSurface;
  x: Float64Array;
  y: Float64Array;
}

interface Job {
  surface: PackedSurface;
  spec: GridSpec;
  rowStart: number;
  rowEnd: number;
  c0: number;
  c1: number;
  mask: Uint8Array | null;
}

globalThis.addEventListener("message", (e: Event) => {
  const event = e as MessageEvent<Job | PlacesJob>;
  if ("x" in event.data) {
    const { surface, x, y } = event.data;
    const values = evaluatePlaces(evaluatorOf(surface), x, y);
    workerPort.postMessage(values, [values.buffer]);
    return;
  }
  const { surface, spec, rowStart, rowEnd, c0, c1, mask } = event.data;
  const values = new Float64Array((rowEnd - rowStart) * (c1 - c0));
  evaluateRows(evaluatorOf(surface), spec, rowStart, rowEnd, mask, values, undefined, { c0, c1 });
  workerPort.postMessage(values, [values.buffer]);
});
