// A spatially even sample of survey points for drawing: a map or chart of a million points shows
// ink, not points, and costs memory and time in every renderer. Above `max` points the data's
// bounding box is cut into about `max` square bins and each bin keeps its first point in file order;
// points flagged as possible blunders are always kept. Deterministic: the same points give the same
// sample.

/** Most survey points drawn on a map or in a chart. */
export const MAX_DRAWN_POINTS = 2000;

/**
 * Indices of the points to draw, ascending: all of them up to `max`, else the first point of each
 * bin of a square lattice of about `max` bins over the bounding box, plus every `keep(i)` point.
 */
export function evenSample(
  x: ArrayLike<number>,
  y: ArrayLike<number>,
  keep: (i: number) => boolean = () => false,
  max = MAX_DRAWN_POINTS,
): number[] {
  const n = x.length;
  if (n <= max) return Array.from({ length: n }, (_, i) => i);
  let xmin = Infinity, xmax = -Infinity, ymin = Infinity, ymax = -Infinity;
  for (let i = 0; i < n; i++) {
    if (x[i] < xmin) xmin = x[i];
    if (x[i] > xmax) xmax = x[i];
    if (y[i] < ymin) ymin = y[i];
    if (y[i] > ymax) ymax = y[i];
  }
  const w = xmax - xmin || 1, h = ymax - ymin || 1;
  // Square bins of side s with (w/s)(h/s) ≈ max.
  const s = Math.sqrt((w * h) / max) || 1;
  const cols = Math.max(1, Math.ceil(w / s)), rows = Math.max(1, Math.ceil(h / s));
  const taken = new Uint8Array(cols * rows);
  const out: number[] = [];
  for (let i = 0; i < n; i++) {
    const c = Math.min(cols - 1, Math.floor((x[i] - xmin) / s));
    const r = Math.min(rows - 1, Math.floor((y[i] - ymin) / s));
    const b = r * cols + c;
    if (!taken[b]) {
      taken[b] = 1;
      out.push(i);
    } else if (keep(i)) out.push(i);
  }
  return out;
}
