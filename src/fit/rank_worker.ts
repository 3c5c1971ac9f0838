// Worker for parallel model selection: scores the kernel groups it is given (see fitSurfaceParallel).
import { type KernelGroup, rankGroup } from "./candidate.ts";
import type { Prepared } from "./prepare.ts";
import { workerPort } from "../workers.ts";

interface Job {
  data: Prepared;
  groups: KernelGroup[];
  shapeOpt: "auto" | number;
  smoothing: "gcv" | number;
}


globalThis.addEventListener("message", (e: Event) => {
  const event = e as MessageEvent<Job>;
  const { data, groups, shapeOpt, smoothing } = event.data;
  try {
    const rows = groups.map((g) => rankGroup(data, g, shapeOpt, smoothing));
    workerPort.postMessage({ rows });
  } catch (e) {
    workerPort.postMessage({ error: (e as Error)?.message ?? String(e) });
  }
});
