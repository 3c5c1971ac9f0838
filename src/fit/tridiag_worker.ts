// Helper thread of tridiag_split.ts: waits on the shared control words and does the second part of
// each step (rows [splitRow(m), m)) of p = A₂₂v or of the rank-2 update, or of a Cholesky column's
// trailing update, with the same row kernels.
import { choleskyUpdateRows, lowerMatvecRows, lowerRank2Rows } from "./linalg.ts";
import { CTRL, KIND, sharedVectors, splitRow } from "./tridiag_split.ts";

globalThis.addEventListener("message", (e: Event) => {
  const { mat, vec, ctl, n } = (e as MessageEvent<{ mat: SharedArrayBuffer; vec: SharedArrayBuffer; ctl: SharedArrayBuffer; n: number }>).data;
  const a = new Float64Array(mat);
  const { v, w, pw } = sharedVectors(vec, n);
  const ctrl = new Int32Array(ctl);
  Atomics.store(ctrl, CTRL.ready, 1);
  Atomics.notify(ctrl, CTRL.ready);
  for (let seen = 0;;) {
    while (Atomics.load(ctrl, CTRL.command) === seen) Atomics.wait(ctrl, CTRL.command, seen, 1000);
    seen = Atomics.load(ctrl, CTRL.command);
    const kind = ctrl[CTRL.kind], start = ctrl[CTRL.start], m = ctrl[CTRL.m];
    if (kind === KIND.stop) break;
    if (kind === KIND.cholesky) {
      // Column `start` (k) of a Cholesky factorisation of order m (n): rows k + 1 + splitRow(n − k − 1) … n − 1.
      const k = start;
      choleskyUpdateRows(a, n, k, v, k + 1 + splitRow(m - k - 1), m);
      Atomics.store(ctrl, CTRL.ack, seen);
      Atomics.notify(ctrl, CTRL.ack);
      continue;
    }
    const split = splitRow(m);
    if (kind === KIND.matvec) {
      pw.fill(0, 0, m);
      lowerMatvecRows(a, n, start, v, split, m, pw);
    } else lowerRank2Rows(a, n, start, v, w, split, m);
    Atomics.store(ctrl, CTRL.ack, seen);
    Atomics.notify(ctrl, CTRL.ack);
  }
});
