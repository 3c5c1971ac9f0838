// Samples far from all others: a reference sample taken half a kilometre from the site, say. They are
// fitted like every other point, but the default grid extent and the hull mask leave them out
// (README "Isolated samples"), so two far samples do not stretch the mapped area into a corridor.
//
// The rule: join every two samples closer than ISOLATION_SPACINGS times the median nearest-neighbour
// distance (single-linkage groups); a group holding at most ISOLATED_SHARE of the samples (at least
// one sample), and fewer than the largest group, is isolated. Groups rather than single points, so a
// pair of reference samples next to each other is found too. With fewer than MIN_SAMPLES samples the
// typical spacing is not known well enough and no sample is called isolated.
import { medianSpacing, pointIndex } from "../geometry.ts";

/** A sample farther than this many median nearest-neighbour distances from every other group is isolated. */
export const ISOLATION_SPACINGS = 10;
/** Largest share of the samples an isolated group may hold. */
export const ISOLATED_SHARE = 0.05;
/** Fewest samples for which the rule applies. */
export const MIN_SAMPLES = 10;

export interface Isolation {
  /** Indices of the isolated samples, ascending. */
  indices: number[];
  /** For each of them, the distance to the nearest sample outside its group (map units). */
  distances: number[];
  /** Median nearest-neighbour distance and the distance beyond which samples are apart. */
  spacing: number;
  threshold: number;
}

export function isolatedSamples(x: Float64Array, y: Float64Array): Isolation {
  const n = x.length;
  const spacing = n >= 2 ? medianSpacing(x, y) : 0;
  const threshold = ISOLATION_SPACINGS * spacing;
  const none = { indices: [], distances: [], spacing, threshold };
  if (n < MIN_SAMPLES || !(spacing > 0)) return none;
  const index = pointIndex(x, y);
  // Union-find over the pairs closer than the threshold.
  const parent = Int32Array.from({ length: n }, (_, i) => i);
  const find = (i: number): number => {
    while (parent[i] !== i) {
      parent[i] = parent[parent[i]];
      i = parent[i];
    }
    return i;
  };
  const t2 = threshold * threshold;
  for (let i = 0; i < n; i++) {
    const found = index.search(x[i] - threshold, y[i] - threshold, x[i] + threshold, y[i] + threshold);
    for (const j of found) {
      if (j <= i) continue;
      const dx = x[i] - x[j], dy = y[i] - y[j];
      if (dx * dx + dy * dy >= t2) continue;
      const a = find(i), b = find(j);
      if (a !== b) parent[Math.max(a, b)] = Math.min(a, b);
    }
  }
  const size = new Int32Array(n);
  for (let i = 0; i < n; i++) size[find(i)]++;
  let largest = 0;
  for (let i = 0; i < n; i++) largest = Math.max(largest, size[i]);
  const small = Math.max(1, Math.floor(ISOLATED_SHARE * n));
  const indices: number[] = [];
  for (let i = 0; i < n; i++) {
    const s = size[find(i)];
    if (s <= small && s < largest) indices.push(i);
  }
  if (indices.length === 0) return none;
  const distances = indices.map((i) => {
    const root = find(i);
    const [j] = index.neighbors(x[i], y[i], 1, Infinity, (k: number) => find(k) !== root);
    return Math.hypot(x[i] - x[j], y[i] - y[j]);
  });
  return { indices, distances, spacing, threshold };
}
