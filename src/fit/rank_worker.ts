// Worker for parallel model selection: scores the kernel groups it is given (see fitSurfaceParallel).
import { type KernelGroup, rankGroup } from "./candidate.ts";
import type { Prepared } from "./prepare.ts";

interface Job {
  data: Prepared;
  groups: KernelGroup[];
  shapeOpt: "auto" | number;
  smoothing: "gcv" | number;
}

/** The worker's side of postMessage (this module runs inside a Web Worker). */
const port = globalThis as unknown as { postMessage(message: unknown, transfer?: Transferable[]): void };

globalThis.addEventListener("message", (e: Event) => {
  const event = e as MessageEvent<Job>;
  const { data, groups, shapeOpt, smoothing } = event.data;
  try {
    const rows = groups.map((g) => rankGroup(data, g, shapeOpt, smoothing));
    port.postMessage({ rows });
  } catch (e) {
    port.postMessage({ error: (e as Error)?.message ?? String(e) });
  }
});
