// Small facts about numbers that several stages share: the range of values, round numbers, and the
// limits of what rbfield accepts, which cleaning applies to input and the model reader to model files.

/**
 * Largest coordinate magnitude accepted, in map units. At 1e15 a double resolves only 0.125 units
 * (IEEE 754 binary64 has 53 significant bits) and no survey coordinate system comes near it (the
 * Earth's circumference is 4e7 m); such numbers are a wrong column or wrong units.
 */
export const COORDINATE_LIMIT = 1e15;
/**
 * Largest value magnitude accepted: grids are written as Float32 GeoTIFFs, whose largest finite
 * number is about 3.4e38 (IEEE 754 binary32), and sums of squares of values must stay finite.
 */
export const VALUE_LIMIT = 1e38;

/** Smallest and largest value, NaN (masked cells) left out; lo > hi when there is none. */
export function valueRange(values: ArrayLike<number>): { lo: number; hi: number } {
  let lo = Infinity, hi = -Infinity;
  for (let i = 0; i < values.length; i++) {
    const v = values[i];
    if (Number.isNaN(v)) continue;
    if (v < lo) lo = v;
    if (v > hi) hi = v;
  }
  return { lo, hi };
}

/** Largest "nice" number (1, 2, 2.5 or 5 × 10ᵏ) not above v. */
export function niceFloor(v: number): number {
  const k = Math.floor(Math.log10(v));
  const base = Math.pow(10, k);
  const f = v / base;
  const step = f >= 5 ? 5 : f >= 2.5 ? 2.5 : f >= 2 ? 2 : 1;
  return step * base;
}
