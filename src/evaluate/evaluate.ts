// The surface interface: from any model, an evaluator (value), through the method that made it.
// Gridding, contours, estimates, maps and the report use only these functions and never ask which
// method made the surface. A new method adds its pack and evaluator here (see DEVELOPERS.md).
import type { SurfaceModel } from "../model/model.ts";
import { type Evaluator, globalEvaluator, packedBuffers, packGlobal, type PackedGlobal } from "./global.ts";
import { localBuffers, localEvaluator, type PackedLocal, packLocal } from "./local.ts";

export type { Evaluator } from "./global.ts";

/** A model as typed arrays and a few numbers: what a worker thread receives. */
export type PackedSurface = PackedGlobal | PackedLocal;

export function packSurface(model: SurfaceModel): PackedSurface {
  switch (model.method) {
    case "global":
      return packGlobal(model);
    case "local":
      return packLocal(model);
  }
}

/** The transferable buffers of a packed surface. */
export function surfaceBuffers(p: PackedSurface): ArrayBuffer[] {
  switch (p.method) {
    case "global":
      return packedBuffers(p);
    case "local":
      return localBuffers(p);
  }
}

/** The evaluator of a packed surface (the same code in the main thread and in workers). */
export function evaluatorOf(p: PackedSurface): Evaluator {
  switch (p.method) {
    case "global":
      return globalEvaluator(p);
    case "local":
      return localEvaluator(p);
  }
}

export function makeEvaluator(model: SurfaceModel): Evaluator {
  return evaluatorOf(packSurface(model));
}

/** Estimates of a model at map coordinates. */
export function evaluateModel(model: SurfaceModel, x: ArrayLike<number>, y: ArrayLike<number>): Float64Array {
  return makeEvaluator(model).many(x, y);
}
