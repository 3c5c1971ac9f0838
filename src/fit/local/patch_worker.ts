// Worker for the local method: fits whole blocks of patches, or ranks candidate models on sample
// patches (see local.ts). Every patch is computed by the same code as in the main thread.
import { workerPort } from "../../workers.ts";
import type { KernelGroup } from "../candidate.ts";
import { blockBuffers, fitPatchBlock, type PatchBlock, type PatchData, type PatchGeometry, type PatchModel, rankPatch } from "./patch_fit.ts";

export interface FitJob {
  kind: "fit";
  data: PatchData;
  cu: Float64Array;
  cv: Float64Array;
  radius: Float64Array;
  start: Int32Array;
  index: Int32Array;
  /** Blocks of patch numbers, each fitted in order. */
  blocks: number[][];
  model: PatchModel;
}

export interface RankJob {
  kind: "rank";
  data: PatchData;
  geometries: PatchGeometry[];
  groups: KernelGroup[];
  shapeOpt: "auto" | number;
  smoothing: "gcv" | number;
}

globalThis.addEventListener("message", (e: Event) => {
  const job = (e as MessageEvent<FitJob | RankJob>).data;
  try {
    if (job.kind === "rank") {
      const rows = job.geometries.map((g) => rankPatch(job.data, g, job.groups, job.shapeOpt, job.smoothing));
      workerPort.postMessage({ rows });
      return;
    }
    const geometry = (j: number): PatchGeometry => ({
      cu: job.cu[j],
      cv: job.cv[j],
      radius: job.radius[j],
      members: job.index.subarray(job.start[j], job.start[j + 1]),
    });
    const blocks: PatchBlock[] = job.blocks.map((b) => fitPatchBlock(job.data, geometry, b, job.model));
    workerPort.postMessage({ blocks }, blocks.flatMap(blockBuffers));
  } catch (err) {
    workerPort.postMessage({ error: (err as Error)?.message ?? String(err) });
  }
});
