// Worker for the local method: fits whole blocks of patches, or ranks candidate models on sample
// patches (see local.ts). Every patch is computed by the same code as in the main thread.
import { workerPort } from "../../workers.ts";
import type { KernelGroup } from "../candidate.ts";
import { blockBuffers, fitPatchBlock, type PatchBlock, type PatchData, type PatchGeometry, type PatchModel, type PatchPlaces, rankPatch } from "./patch_fit.ts";

/** Posted once to each fitting worker: the data and the patch layout. */
export interface FitSetup {
  kind: "setup";
  data: PatchData;
  cu: Float64Array;
  cv: Float64Array;
  radius: Float64Array;
  start: Int32Array;
  index: Int32Array;
  model: PatchModel;
  /** Nodes of the standard-error lattice, when the fit computes the errors there (FitOptions.errorPlaces). */
  places?: PatchPlaces;
}

/** Then, one at a time: blocks of patch numbers, each fitted in order. */
export interface FitTask {
  kind: "fit";
  blocks: number[][];
}

export interface RankJob {
  kind: "rank";
  data: PatchData;
  geometries: PatchGeometry[];
  groups: KernelGroup[];
  shapeOpt: "auto" | number;
  smoothing: "gcv" | number;
}

let setup: FitSetup | null = null;

globalThis.addEventListener("message", (e: Event) => {
  const job = (e as MessageEvent<FitSetup | FitTask | RankJob>).data;
  try {
    if (job.kind === "setup") {
      setup = job;
      return;
    }
    if (job.kind === "rank") {
      const rows = job.geometries.map((g) => rankPatch(job.data, g, job.groups, job.shapeOpt, job.smoothing));
      workerPort.postMessage({ rows });
      return;
    }
    const s = setup!;
    const geometry = (j: number): PatchGeometry => ({
      cu: s.cu[j],
      cv: s.cv[j],
      radius: s.radius[j],
      members: s.index.subarray(s.start[j], s.start[j + 1]),
    });
    const blocks: PatchBlock[] = job.blocks.map((b) => fitPatchBlock(s.data, geometry, b, s.model, s.places));
    workerPort.postMessage({ blocks }, blocks.flatMap(blockBuffers));
  } catch (err) {
    workerPort.postMessage({ error: (err as Error)?.message ?? String(err) });
  }
});
