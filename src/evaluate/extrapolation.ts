// Where an estimate is an extrapolation: outside the convex hull of the readings, or far from the
// nearest reading, or far outside the range of the readings. Estimates there rest on the trend and
// the kernel's behaviour away from data rather than on nearby readings (common practice to report).
import { distanceToRing, nearestPointDistance, pointInRing } from "../geometry.ts";
import type { SurfaceModel } from "../model/model.ts";

/** An estimate farther than this many median point spacings from the nearest reading is "far from data". */
export const FAR_SPACINGS = 3;
/**
 * An estimate beyond the readings' range by more than this fraction of the range is "outside the
 * range" (for a model of logarithms, of the range of the logarithms).
 */
export const RANGE_MARGIN = 0.5;

export interface ExtrapolationCheck {
  /** Distance to the nearest reading (map units), whether outside the hull, whether far. */
  at(x: number, y: number): { distance: number; outsideHull: boolean; far: boolean };
  /** Is a value far outside the readings' range? */
  outOfRange(value: number): boolean;
  farDistance: number;
  range: { lo: number; hi: number };
}

export function makeExtrapolationCheck(model: SurfaceModel): ExtrapolationCheck {
  const { x, y, z } = model.points;
  const nearest = nearestPointDistance(Float64Array.from(x), Float64Array.from(y));
  const farDistance = FAR_SPACINGS * model.spacing;
  let lo = Infinity, hi = -Infinity;
  for (const v of z) {
    lo = Math.min(lo, v);
    hi = Math.max(hi, v);
  }
  // Values fitted as logarithms are compared in logarithms: 10⁻⁶ mg/l beside readings of 0.5–50 is
  // as far outside their range as 10⁵ is (a value ≤ 0 cannot come from such a model and is outside).
  const log = model.transform === "log" && lo > 0;
  const scale = log ? Math.log : (v: number) => v;
  const slo = scale(lo), shi = scale(hi);
  const margin = RANGE_MARGIN * (shi - slo);
  const e = model.extent;
  const onEdge = 1e-9 * Math.max(e.xmax - e.xmin, e.ymax - e.ymin, 1e-300);
  return {
    at(px, py) {
      const distance = nearest(px, py);
      // A place on the hull's edge (a reading at a corner, say) counts as inside.
      const outsideHull = !pointInRing(px, py, model.hull) && distanceToRing(px, py, model.hull) > onEdge;
      return { distance, outsideHull, far: distance > farDistance };
    },
    outOfRange: (v) => (log && !(v > 0)) || scale(v) < slo - margin || scale(v) > shi + margin,
    farDistance,
    range: { lo, hi },
  };
}

/** The text of the `extrapolation` column for one estimate ("" when none applies). */
export function extrapolationNote(c: { outsideHull: boolean; far: boolean }, outOfRange: boolean): string {
  const parts: string[] = [];
  if (c.outsideHull) parts.push("outside data hull");
  if (c.far) parts.push("far from data");
  if (outOfRange) parts.push("outside value range");
  return parts.join("; ");
}
