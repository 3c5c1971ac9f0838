// Helper thread of inverse_split.ts: columns [c0, c1) of X = L⁻¹ into the shared X, then a flag.
import { lowerInverseColumns } from "./linalg.ts";

globalThis.addEventListener("message", (e: Event) => {
  const { l, x, ctl, nb, c0, c1 } = (e as MessageEvent<{ l: SharedArrayBuffer; x: SharedArrayBuffer; ctl: SharedArrayBuffer; nb: number; c0: number; c1: number }>).data;
  const ctrl = new Int32Array(ctl);
  Atomics.store(ctrl, 1, 1);
  try {
    lowerInverseColumns(new Float64Array(l), new Float64Array(x), nb, c0, c1);
    Atomics.store(ctrl, 0, 1);
  } catch {
    Atomics.store(ctrl, 0, 2);
  }
  Atomics.notify(ctrl, 0);
});
