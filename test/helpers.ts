// Shared test data makers: seeded points and Franke's 1982 test function.
import type { CleanPoints } from "../src/types.ts";
import { mulberry32 } from "../src/random.ts";
import { RbfieldError } from "../src/errors.ts";

export { mulberry32 };

export function makePoints(n: number, seed: number, f: (x: number, y: number) => number, x0 = 0, y0 = 0, size = 1): CleanPoints {
  const r = mulberry32(seed);
  const x = new Float64Array(n), y = new Float64Array(n), z = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    x[i] = x0 + size * r();
    y[i] = y0 + size * r();
    z[i] = f(x[i], y[i]);
  }
  return { x, y, z, lines: Array.from({ length: n }, (_, i) => i + 2), skipped: [], merged: [], rowsRead: n };
}

/** Franke's test function (Franke 1982, Math. Comp.; formula as commonly reproduced, from memory). */
export function franke(x: number, y: number): number {
  return 0.75 * Math.exp(-((9 * x - 2) ** 2 + (9 * y - 2) ** 2) / 4) +
    0.75 * Math.exp(-((9 * x + 1) ** 2) / 49 - (9 * y + 1) / 10) +
    0.5 * Math.exp(-((9 * x - 7) ** 2 + (9 * y - 3) ** 2) / 4) -
    0.2 * Math.exp(-((9 * x - 4) ** 2) - (9 * y - 7) ** 2);
}


/** Run fn and return the RbfieldError it throws (fails the test if it throws nothing or another error). */
export function errorOf(fn: () => unknown): RbfieldError {
  try {
    fn();
  } catch (e) {
    if (e instanceof RbfieldError) return e;
    throw e;
  }
  throw new Error("expected an RbfieldError");
}
