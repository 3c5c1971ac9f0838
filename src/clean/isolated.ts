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
  // Union-find over the pairs closer than the threshold.
  const parent = Int32Array.from({ length: n }, (_, i) => i);
  const find = (i: number): number => {
    while (parent[i] !== i) {
      parent[i] = parent[parent[i]];
      i = parent[i];
    }
    return i;
  };
  const union = (i: number, j: number) => {
    const a = find(i), b = find(j);
    if (a !== b) parent[Math.max(a, b)] = Math.min(a, b);
  };
  const t2 = threshold * threshold;
  // Square cells of side threshold/2: two points in one cell are closer than the threshold (the
  // diagonal is threshold/√2), and a pair closer than it lies in cells at most two apart. So every
  // cell's points are one group at once, and a pair of cells is searched only while their groups
  // differ, stopping at the first close pair: linear in N for evenly spread data.
  const side = threshold / 2;
  let xmin = Infinity, ymin = Infinity, xmax = -Infinity, ymax = -Infinity;
  for (let i = 0; i < n; i++) {
    xmin = Math.min(xmin, x[i]), xmax = Math.max(xmax, x[i]);
    ymin = Math.min(ymin, y[i]), ymax = Math.max(ymax, y[i]);
  }
  const cols = Math.floor((xmax - xmin) / side) + 1, rows = Math.floor((ymax - ymin) / side) + 1;
  // Occupied cells only (sparse data over a large box would make a full lattice too large).
  const cellOf = new Float64Array(n);
  for (let i = 0; i < n; i++) cellOf[i] = Math.floor((y[i] - ymin) / side) * cols + Math.floor((x[i] - xmin) / side);
  const order = Array.from({ length: n }, (_, i) => i).sort((a, b) => cellOf[a] - cellOf[b] || a - b);
  const cells = new Map<number, { from: number; to: number }>();
  for (let k = 0; k < n;) {
    let e = k + 1;
    while (e < n && cellOf[order[e]] === cellOf[order[k]]) e++;
    cells.set(cellOf[order[k]], { from: k, to: e });
    for (let m = k + 1; m < e; m++) union(order[k], order[m]);
    k = e;
  }
  for (const [id, a] of cells) {
    const r = Math.floor(id / cols), c = id - r * cols;
    for (let dr = 0; dr <= 2; dr++) {
      for (let dc = -2; dc <= 2; dc++) {
        if (dr === 0 && dc <= 0) continue; // each pair of cells once
        if (r + dr >= rows || c + dc < 0 || c + dc >= cols) continue;
        const b = cells.get(id + dr * cols + dc);
        if (!b) continue;
        if (find(order[a.from]) === find(order[b.from])) continue;
        search: for (let p = a.from; p < a.to; p++) {
          const i = order[p];
          for (let q = b.from; q < b.to; q++) {
            const j = order[q];
            const dx = x[i] - x[j], dy = y[i] - y[j];
            if (dx * dx + dy * dy < t2) {
              union(i, j);
              break search;
            }
          }
        }
      }
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
  const index = pointIndex(x, y);
  const distances = indices.map((i) => {
    const root = find(i);
    const [j] = index.neighbors(x[i], y[i], 1, Infinity, (k: number) => find(k) !== root);
    return Math.hypot(x[i] - x[j], y[i] - y[j]);
  });
  return { indices, distances, spacing, threshold };
}
