// X = L⁻¹ of a large lower-triangular factor on two threads: the columns of X are independent, so a
// helper worker (inverse_worker.ts) computes columns [c, nb) while this thread computes [0, c),
// sharing L and X (SharedArrayBuffer) and handing over once with Atomics. Each entry's operations
// are those of one thread (lowerInverseColumns), so the bits do not depend on the helper.
import { lowerInverseColumns } from "./linalg.ts";
import { SPLIT_MIN } from "./tridiag_split.ts";
import { workersAvailable } from "../workers.ts";

/** A helper that does not finish within this long is taken as gone. */
const HELPER_TIMEOUT_MS = 120_000;
/** A helper that has not started within this long (its module not loaded) is given up. */
const START_TIMEOUT_MS = 10_000;

/**
 * The first column of the helper's block: column j costs about (nb − j)²/2, so [0, c) holds half the
 * work when (nb − c)³ = nb³/2.
 */
export function splitColumn(nb: number): number {
  return Math.round(nb * (1 - Math.cbrt(0.5)));
}

/**
 * X = L⁻¹ (row-major nb × nb); on two threads from SPLIT_MIN (`useHelper: false`: this thread alone,
 * the same bits). `info.threads` tells how many threads did the work.
 */
export function lowerInverse(l: Float64Array, nb: number, useHelper = true, info: { threads?: number } = {}): Float64Array {
  info.threads = 1;
  if (nb < SPLIT_MIN) {
    const x = new Float64Array(nb * nb);
    lowerInverseColumns(l, x, nb, 0, nb);
    return x;
  }
  const lShared = new Float64Array(new SharedArrayBuffer(8 * nb * nb));
  lShared.set(l.subarray(0, nb * nb));
  const x = new Float64Array(new SharedArrayBuffer(8 * nb * nb));
  const ctl = new SharedArrayBuffer(8);
  // ctrl[0]: 1 when the helper is done, 2 when it failed; ctrl[1]: 1 once it has started.
  const ctrl = new Int32Array(ctl);
  const c = splitColumn(nb);
  let helper: Worker | null = null;
  if (useHelper && workersAvailable(navigator.hardwareConcurrency || 1)) {
    try {
      helper = new Worker(new URL("./inverse_worker.ts", import.meta.url).href, { type: "module" });
      helper.postMessage({ l: lShared.buffer, x: x.buffer, ctl, nb, c0: c, c1: nb });
    } catch {
      helper = null;
    }
  }
  try {
    lowerInverseColumns(lShared, x, nb, 0, c);
    if (helper) {
      const t0 = Date.now();
      while (Atomics.load(ctrl, 0) === 0) {
        const waited = Date.now() - t0;
        if (waited > HELPER_TIMEOUT_MS || (waited > START_TIMEOUT_MS && Atomics.load(ctrl, 1) === 0)) break;
        Atomics.wait(ctrl, 0, 0, 200);
      }
      if (Atomics.load(ctrl, 0) !== 1) {
        helper.terminate();
        helper = null;
        x.fill(0, 0, nb * nb);
        lowerInverseColumns(lShared, x, nb, 0, c);
      }
    }
    if (!helper) lowerInverseColumns(lShared, x, nb, c, nb);
    else info.threads = 2;
  } finally {
    helper?.terminate();
  }
  return x;
}
