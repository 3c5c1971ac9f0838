// Householder tridiagonalisation of a large symmetric matrix on two threads: the global method's
// O(N³) step. Each step's two O(m²) loops — p = A₂₂v and the rank-2 update of the trailing block —
// are split by rows between this thread and one helper worker (tridiag_worker.ts) that shares the
// matrix and the vectors (SharedArrayBuffer), handing over with Atomics.wait/notify. The split row
// depends on m alone and the helper's partial p is added to this thread's in a fixed order, so the
// numbers are the same whether a helper runs or this thread does both parts (no worker threads:
// same bits). GVL Alg. 8.3.1 as in tridiagonalize (linalg.ts), whose row kernels both threads use.
import { choleskyColumn, choleskyUpdateRows, householderSteps, lowerMatvecRows, lowerRank2Rows, type Reflector, reflectorUpdateVector } from "./linalg.ts";
import { workersAvailable } from "../workers.ts";

/**
 * Matrix side from which tridiagonalize splits its steps. Measured on multiquadric kernel matrices
 * (2 cores): 1,000 one thread 0.25 s, two 0.28 s (the helper's start); 1,200 0.43 / 0.38 s; 1,500
 * 0.82 / 0.65 s; 2,000 1.90 / 1.26 s; 3,000 6.0 / 3.7 s.
 */
export const SPLIT_MIN = 1200;
/** Trailing sizes below this are done here alone (a hand-over and its answer cost about 50 µs). */
const HAND_OVER_MIN = 400;
/** A helper that does not answer within this long is taken as gone (a step takes milliseconds). */
const HELPER_TIMEOUT_MS = 60_000;
/** A helper not started within this long (its module not loaded) is given up: this thread does both parts. */
const START_TIMEOUT_MS = 10_000;

/** Control words of the shared Int32Array. */
export const CTRL = { command: 0, ack: 1, kind: 2, start: 3, m: 4, ready: 5 } as const;
export const KIND = { matvec: 1, update: 2, stop: 3, cholesky: 4 } as const;

/** First row of the second part: the lower triangle's work (row i weighs i) halved, a multiple of 4. */
export function splitRow(m: number): number {
  return Math.min(m, 4 * Math.round(m / Math.SQRT2 / 4));
}

/** The shared vectors of a split tridiagonalisation: v, w and the helper's partial p, n each. */
export function sharedVectors(buffer: SharedArrayBuffer, n: number): { v: Float64Array; w: Float64Array; pw: Float64Array } {
  return { v: new Float64Array(buffer, 0, n), w: new Float64Array(buffer, 8 * n, n), pw: new Float64Array(buffer, 16 * n, n) };
}

/** Start the helper and wait until it has the shared buffers; null when workers are unavailable. */
function startHelper(mat: SharedArrayBuffer, vec: SharedArrayBuffer, ctl: SharedArrayBuffer, n: number): Worker | null {
  if (!workersAvailable(navigator.hardwareConcurrency || 1)) return null;
  const ctrl = new Int32Array(ctl);
  let worker: Worker;
  try {
    worker = new Worker(new URL("./tridiag_worker.ts", import.meta.url).href, { type: "module" });
    worker.postMessage({ mat, vec, ctl, n });
  } catch {
    return null;
  }
  const t0 = Date.now();
  while (Atomics.load(ctrl, CTRL.ready) !== 1) {
    if (Date.now() - t0 > START_TIMEOUT_MS) {
      worker.terminate();
      return null;
    }
    Atomics.wait(ctrl, CTRL.ready, 0, 50);
  }
  return worker;
}

/** The shared matrix, vectors and helper of a split computation, and the hand-over to the helper. */
function sharedWork(aIn: Float64Array, n: number, useHelper: boolean) {
  const mat = new SharedArrayBuffer(8 * n * n), vec = new SharedArrayBuffer(24 * n), ctl = new SharedArrayBuffer(32);
  const a = new Float64Array(mat);
  a.set(aIn.subarray(0, n * n));
  const { v, w, pw } = sharedVectors(vec, n);
  const ctrl = new Int32Array(ctl);
  const helper = useHelper ? startHelper(mat, vec, ctl, n) : null;
  let command = 0;
  const handOver = (kind: number, start: number, m: number) => {
    ctrl[CTRL.kind] = kind;
    ctrl[CTRL.start] = start;
    ctrl[CTRL.m] = m;
    Atomics.store(ctrl, CTRL.command, ++command);
    Atomics.notify(ctrl, CTRL.command);
  };
  const awaitHelper = () => {
    const t0 = Date.now();
    for (let seen = Atomics.load(ctrl, CTRL.ack); seen !== command; seen = Atomics.load(ctrl, CTRL.ack)) {
      if (Date.now() - t0 > HELPER_TIMEOUT_MS) throw new Error("the helper thread of a split factorisation stopped answering");
      Atomics.wait(ctrl, CTRL.ack, seen, 1000);
    }
  };
  const stop = () => {
    if (helper) {
      handOver(KIND.stop, 0, 0);
      helper.terminate();
    }
  };
  return { a, v, w, pw, helper, handOver, awaitHelper, stop };
}

/**
 * tridiagonalize with each step's loops split by rows (see the top of this file); `aIn` is not
 * changed. `useHelper: false` does both parts in this thread (the same numbers; for tests).
 */
export function tridiagonalizeSplit(aIn: Float64Array, n: number, useHelper = true): { d: Float64Array; e: Float64Array; reflectors: Reflector[]; threads: number } {
  const { a, v, w, pw, helper, handOver, awaitHelper, stop } = sharedWork(aIn, n, useHelper);
  const pa = new Float64Array(n);
  let result: { d: Float64Array; e: Float64Array; reflectors: Reflector[] };
  try {
    result = householderSteps(a, n, (start, m, hv, beta) => {
      v.set(hv);
      const split = splitRow(m);
      const helped = helper !== null && m >= HAND_OVER_MIN;
      // p = A₂₂v: rows [0, split) here into pa, rows [split, m) into pw (by the helper when it runs).
      if (helped) handOver(KIND.matvec, start, m);
      pa.fill(0, 0, m);
      lowerMatvecRows(a, n, start, v, 0, split, pa);
      if (helped) awaitHelper();
      else {
        pw.fill(0, 0, m);
        lowerMatvecRows(a, n, start, v, split, m, pw);
      }
      for (let i = 0; i < m; i++) w[i] = pa[i] + pw[i];
      reflectorUpdateVector(w, v, m, beta);
      // A₂₂ ← A₂₂ − v wᵀ − w vᵀ: rows [0, split) here, [split, m) by the helper.
      if (helped) handOver(KIND.update, start, m);
      lowerRank2Rows(a, n, start, v, w, 0, split);
      if (helped) awaitHelper();
      else lowerRank2Rows(a, n, start, v, w, split, m);
    });
  } finally {
    stop();
  }
  return { ...result, threads: helper ? 2 : 1 };
}

/**
 * cholesky (linalg.ts) with each column's trailing update split by rows between this thread and the
 * helper: rows k+1 … of the update are independent and every entry is updated once per column, so
 * the factor has the bits of one thread. In place, like cholesky; false when A is not positive
 * definite. `info.threads` tells how many threads did the work.
 */
export function choleskySplit(aIn: Float64Array, n: number, useHelper = true, info: { threads?: number } = {}): boolean {
  const { a, v: col, helper, handOver, awaitHelper, stop } = sharedWork(aIn, n, useHelper);
  info.threads = helper ? 2 : 1;
  let ok = true;
  try {
    for (let k = 0; k < n && ok; k++) {
      if (!choleskyColumn(a, n, k, col)) {
        ok = false;
        break;
      }
      const m = n - k - 1, split = k + 1 + splitRow(m);
      const helped = helper !== null && m >= HAND_OVER_MIN;
      if (helped) handOver(KIND.cholesky, k, n);
      choleskyUpdateRows(a, n, k, col, k + 1, split);
      if (helped) awaitHelper();
      else choleskyUpdateRows(a, n, k, col, split, n);
    }
  } finally {
    stop();
  }
  aIn.set(a);
  return ok;
}
