// The even sample of survey points drawn on maps and charts (src/write/map/sample.ts). Thinning
// point symbols so they stay legible is cartographic generalisation (common practice); the checks
// are geometric: every survey point lies near a drawn one, dense clusters do not dominate, every
// flagged point is drawn, and the same points give the same sample.
import { describe, expect, it } from "vitest";
import { evenSample } from "../src/write/map/sample.ts";
import { mulberry32 } from "./helpers.ts";

function clustered(n: number, seed: number) {
  // 90 % of the points in the south-west 10 % × 10 % corner, the rest over the whole 1 km site.
  const u = mulberry32(seed);
  const x = new Float64Array(n), y = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    const dense = u() < 0.9;
    x[i] = (dense ? 100 : 1000) * u();
    y[i] = (dense ? 100 : 1000) * u();
  }
  return { x, y };
}

describe("evenSample", () => {
  it("keeps every point up to the limit", () => {
    expect(evenSample([1, 2, 3], [1, 2, 3], () => false, 3)).toEqual([0, 1, 2]);
  });

  it("covers the site: every point within one bin diagonal of a drawn point, clusters not dominating", () => {
    const n = 100_000, max = 2000;
    const { x, y } = clustered(n, 5);
    const shown = evenSample(x, y, () => false, max);
    expect(shown.length).toBeLessThanOrEqual(max + 100);
    // Bin side s with (1000/s)² ≈ max; the farthest a point can be from its bin's drawn point is s·√2.
    const s = Math.sqrt((1000 * 1000) / max);
    const cell = new Map<string, number[]>();
    for (const i of shown) {
      const k = `${Math.floor(x[i] / s)},${Math.floor(y[i] / s)}`;
      cell.set(k, [...(cell.get(k) ?? []), i]);
    }
    let worst = 0;
    for (let i = 0; i < n; i += 7) {
      let best = Infinity;
      const cx = Math.floor(x[i] / s), cy = Math.floor(y[i] / s);
      for (let dx = -2; dx <= 2; dx++) {
        for (let dy = -2; dy <= 2; dy++) {
          for (const j of cell.get(`${cx + dx},${cy + dy}`) ?? []) best = Math.min(best, Math.hypot(x[i] - x[j], y[i] - y[j]));
        }
      }
      worst = Math.max(worst, best);
    }
    expect(worst).toBeLessThanOrEqual(s * Math.SQRT2 * 1.05);
    // The corner holds 90 % of the points but 1 % of the area: about 1 % of the drawn points.
    const inCorner = shown.filter((i) => x[i] < 100 && y[i] < 100).length / shown.length;
    expect(inCorner).toBeLessThan(0.05);
  });

  it("draws every flagged point, and gives the same sample for the same points", () => {
    const { x, y } = clustered(20_000, 9);
    const flagged = (i: number) => i % 997 === 0;
    const a = evenSample(x, y, flagged, 500);
    for (let i = 0; i < x.length; i += 997) expect(a).toContain(i);
    expect(evenSample(x, y, flagged, 500)).toEqual(a);
    expect([...a].sort((p, q) => p - q)).toEqual(a);
  });
});
