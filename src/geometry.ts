// Plane geometry of the data: bounding box, median spacing, convex hull. Used by the fit (scaling,
// shape search, the saved extent and hull) and by later stages through the model.
import { convex, featureCollection, point } from "@turf/turf";
import Flatbush from "flatbush";

/** Bounding box of points. */
export function boundingBox(x: ArrayLike<number>, y: ArrayLike<number>): { xmin: number; ymin: number; xmax: number; ymax: number } {
  let xmin = Infinity, xmax = -Infinity, ymin = Infinity, ymax = -Infinity;
  for (let i = 0; i < x.length; i++) {
    xmin = Math.min(xmin, x[i]);
    xmax = Math.max(xmax, x[i]);
    ymin = Math.min(ymin, y[i]);
    ymax = Math.max(ymax, y[i]);
  }
  return { xmin, ymin, xmax, ymax };
}

/** Signed area of a closed ring (shoelace formula; positive when counter-clockwise). */
export function ringArea(ring: ArrayLike<ArrayLike<number>>): number {
  let a = 0;
  for (let i = 0; i + 1 < ring.length; i++) a += ring[i][0] * ring[i + 1][1] - ring[i + 1][0] * ring[i][1];
  return a / 2;
}

/** A spatial index of points for nearest-neighbour queries (flatbush). */
export function pointIndex(x: ArrayLike<number>, y: ArrayLike<number>): Flatbush {
  const index = new Flatbush(Math.max(x.length, 1));
  for (let i = 0; i < x.length; i++) index.add(x[i], y[i], x[i], y[i]);
  if (x.length === 0) index.add(0, 0, 0, 0);
  index.finish();
  return index;
}

/** Median distance from each point to its nearest neighbour (map units). */
export function medianSpacing(x: Float64Array, y: Float64Array): number {
  const n = x.length;
  if (n < 2) return 1;
  const index = pointIndex(x, y);
  const d = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    const [j] = index.neighbors(x[i], y[i], 1, Infinity, (k: number) => k !== i);
    d[i] = Math.hypot(x[i] - x[j], y[i] - y[j]);
  }
  d.sort();
  return d[Math.floor(n / 2)];
}

/** Convex hull as a closed counter-clockwise ring (falls back to the bounding box for < 3 non-collinear points). */
export function convexHullRing(x: Float64Array, y: Float64Array): [number, number][] {
  const pts = [];
  for (let i = 0; i < x.length; i++) pts.push(point([x[i], y[i]]));
  const hull = convex(featureCollection(pts));
  if (hull) {
    const ring = hull.geometry.coordinates[0] as [number, number][];
    // turf returns a closed ring; make it counter-clockwise (positive shoelace area).
    return ringArea(ring) < 0 ? ring.slice().reverse() : ring;
  }
  const { xmin, ymin, xmax, ymax } = boundingBox(x, y);
  return [[xmin, ymin], [xmax, ymin], [xmax, ymax], [xmin, ymax], [xmin, ymin]];
}

/**
 * The stretch (geometric anisotropy, common practice in geostatistics): d = x − x₀ rotated to
 * (along, across) the azimuth θ (clockwise from grid north), the across component multiplied by the
 * factor. One formula for the fit and the evaluator.
 */
export function stretchMap(an: { azimuth: number; factor: number; x0: number; y0: number }): (x: number, y: number, out: Float64Array) => void {
  const th = (an.azimuth * Math.PI) / 180;
  const sn = Math.sin(th), cs = Math.cos(th);
  return (x, y, out) => {
    const dx = x - an.x0, dy = y - an.y0;
    out[0] = dx * sn + dy * cs;
    out[1] = an.factor * (dx * cs - dy * sn);
  };
}

/** Is (x, y) inside the closed ring? Crossing-number test with the half-open rule (common practice). */
export function pointInRing(x: number, y: number, ring: ArrayLike<ArrayLike<number>>): boolean {
  let inside = false;
  for (let i = 0; i + 1 < ring.length; i++) {
    const x1 = ring[i][0], y1 = ring[i][1], x2 = ring[i + 1][0], y2 = ring[i + 1][1];
    if ((y1 <= y && y2 > y) || (y2 <= y && y1 > y)) {
      if (x < x1 + ((y - y1) / (y2 - y1)) * (x2 - x1)) inside = !inside;
    }
  }
  return inside;
}

/** Shortest distance from (x, y) to the edges of a closed ring. */
export function distanceToRing(x: number, y: number, ring: ArrayLike<ArrayLike<number>>): number {
  let best = Infinity;
  for (let i = 0; i + 1 < ring.length; i++) {
    const ax = ring[i][0], ay = ring[i][1], dx = ring[i + 1][0] - ax, dy = ring[i + 1][1] - ay;
    const len2 = dx * dx + dy * dy;
    const t = len2 > 0 ? Math.max(0, Math.min(1, ((x - ax) * dx + (y - ay) * dy) / len2)) : 0;
    best = Math.min(best, Math.hypot(x - ax - t * dx, y - ay - t * dy));
  }
  return best;
}
