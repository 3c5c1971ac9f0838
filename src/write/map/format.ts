// Round steps for scale bars, ticks and legends (1, 2, 5 × 10^k), and the range of a grid's values.
// Number text itself (fixed decimals, significant digits, the minus sign) lives in src/text.ts.

/** The largest 1, 2 or 5 × 10^k not above v (v > 0). */
export function roundStepBelow(v: number): number {
  const k = Math.floor(Math.log10(v));
  // 10^k as a decimal literal (10 ** -3 is 0.0010000000000000002, which would print badly).
  const base = Number(`1e${k}`);
  const f = v / base;
  // A hair of tolerance so 5 × 10^k computed as 4.999999 still counts as 5.
  const m = f >= 5 - 1e-9 ? 5 : f >= 2 - 1e-9 ? 2 : 1;
  return Number(`${m}e${k}`);
}

/** Smallest and largest value of the unmasked cells (lo > hi when every cell is masked). */
export function finiteRange(values: ArrayLike<number>): [number, number] {
  let lo = Infinity, hi = -Infinity;
  for (let i = 0; i < values.length; i++) {
    // NaN (masked) fails both comparisons.
    if (values[i] < lo) lo = values[i];
    if (values[i] > hi) hi = values[i];
  }
  return [lo, hi];
}
