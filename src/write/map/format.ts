// Numbers as printed on maps and in reports: a fixed number of decimals (no 5712401.300000001), a
// true minus sign (U+2212) in text, and round steps (1, 2, 5 × 10^k) for scale bars and ticks.
import { formatNumber } from "../../text.ts";

/** The minus sign for printed numbers (U+2212): as wide as a digit's neighbours expect, unlike "-". */
export const MINUS = "\u2212";

/** Decimals needed to print every multiple of `step` exactly (0.5 → 1, 0.25 → 2, 10 → 0; at most 12). */
export function decimalsOf(step: number): number {
  if (!Number.isFinite(step) || step === 0) return 0;
  // Shortest round-trip text of the step, so 0.1 counts as one decimal, not 0.1000000000000000055….
  const [mantissa, exponent] = String(Math.abs(step)).split("e");
  const dot = mantissa.indexOf(".");
  const fraction = dot < 0 ? 0 : mantissa.length - dot - 1;
  return Math.min(12, Math.max(0, fraction - (exponent ? Number(exponent) : 0)));
}

/** v with exactly `decimals` decimals; −0 prints as 0; negative numbers use `minus`. */
export function formatFixed(v: number, decimals: number, minus = MINUS): string {
  if (!Number.isFinite(v)) return "";
  const text = Math.abs(v).toFixed(Math.min(20, Math.max(0, decimals)));
  const zero = /^[0.]*$/.test(text);
  return v < 0 && !zero ? minus + text : text;
}

/** v to `digits` significant digits, shortest form (λ, RMSE, GCV …); typographic minus. */
export function formatSignificant(v: number, digits = 4): string {
  const text = formatNumber(v, digits);
  return text.startsWith("-") ? MINUS + text.slice(1) : text;
}

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
