// Nearest-point searches against their definition: the smallest Math.hypot over every point, by brute
// force (O(N) a query; the definition of a nearest neighbour, nothing from the code under test).
import { describe, expect, it } from "vitest";
import { nearestDistances, nearestPointDistance } from "../src/geometry.ts";
import { gaussian, mulberry32 } from "../src/random.ts";

function bruteNearest(x: Float64Array, y: Float64Array, px: number, py: number, skip = -1): number {
  let best = Infinity;
  for (let i = 0; i < x.length; i++) if (i !== skip) best = Math.min(best, Math.hypot(px - x[i], py - y[i]));
  return best;
}

/** Seeded point sets: even, clustered (the tree's case), a transect (zero height), coincident pairs. */
function designs(): { name: string; x: Float64Array; y: Float64Array }[] {
  const u = mulberry32(41), g = gaussian(mulberry32(42));
  const even = Array.from({ length: 3000 }, () => [1000 * u(), 500 * u()]);
  const clustered = Array.from({ length: 3000 }, (_, i) => (i < 2900 ? [10 + 0.01 * g(), 20 + 0.01 * g()] : [1000 * u(), 1000 * u()]));
  const transect = Array.from({ length: 500 }, () => [300 * u(), 7]);
  const pairs = Array.from({ length: 400 }, (_, i) => (i % 2 ? [Math.floor(i / 2), 3] : [Math.floor(i / 2), 3]));
  return [
    { name: "even", pts: even },
    { name: "clustered", pts: clustered },
    { name: "transect", pts: transect },
    { name: "coincident pairs", pts: pairs },
  ].map(({ name, pts }) => ({ name, x: Float64Array.from(pts, (p) => p[0]), y: Float64Array.from(pts, (p) => p[1]) }));
}

describe("nearest-point searches equal brute force", () => {
  for (const { name, x, y } of designs()) {
    it(`nearestDistances, ${name}`, () => {
      const d = nearestDistances(x, y);
      for (let i = 0; i < x.length; i += 7) expect(d[i]).toBe(bruteNearest(x, y, x[i], y[i], i));
    });
    it(`nearestPointDistance at places inside, on the edge and far outside, ${name}`, () => {
      const near = nearestPointDistance(x, y);
      const u = mulberry32(7);
      let xmin = Infinity, xmax = -Infinity, ymin = Infinity, ymax = -Infinity;
      for (let i = 0; i < x.length; i++) {
        xmin = Math.min(xmin, x[i]), xmax = Math.max(xmax, x[i]), ymin = Math.min(ymin, y[i]), ymax = Math.max(ymax, y[i]);
      }
      const w = xmax - xmin || 1, h = ymax - ymin || 1;
      const places: [number, number][] = [[xmax, ymax], [xmin, ymin], [x[3], y[3]]];
      for (let k = 0; k < 400; k++) places.push([xmin - w + 3 * w * u(), ymin - h + 3 * h * u()]);
      for (const [px, py] of places) expect(near(px, py)).toBe(bruteNearest(x, y, px, py));
    });
  }
  it("a single point and an empty set", () => {
    expect(nearestPointDistance(Float64Array.of(3), Float64Array.of(4))(0, 0)).toBe(5);
    expect(nearestPointDistance(new Float64Array(0), new Float64Array(0))(0, 0)).toBeNaN();
  });
});

describe("the median spacing cleaning measured is the model's", () => {
  it("fitPointsFile hands the isolated-sample search's spacing to the fit: equal to medianSpacing of the points", async () => {
    const { fitPointsFile } = await import("../src/job/points.ts");
    const { medianSpacing } = await import("../src/geometry.ts");
    const file = new URL("../samples/kestrel-ridge-levels.csv", import.meta.url).pathname;
    const fitted = await fitPointsFile({ file, crs: "EPSG:32632" }, { kernel: "thin-plate", trend: "linear" });
    expect(fitted.model.spacing).toBe(medianSpacing(fitted.points.x, fitted.points.y));
    expect(fitted.model.spacing).toBeGreaterThan(0);
  });
});

describe("exactPointLookup", () => {
  it("finds the first point at exactly a place (brute force: the lowest index with equal coordinates), −1 elsewhere", async () => {
    const { exactPointLookup } = await import("../src/geometry.ts");
    const u = mulberry32(5);
    const x = Float64Array.from({ length: 5000 }, (_, i) => (i % 10 === 0 ? 0 : Math.round(1000 * u()) / 4));
    const y = Float64Array.from({ length: 5000 }, (_, i) => (i % 10 === 0 ? -0 : Math.round(1000 * u()) / 4));
    const at = exactPointLookup(x, y);
    const brute = (px: number, py: number) => {
      for (let i = 0; i < x.length; i++) if (x[i] === px && y[i] === py) return i;
      return -1;
    };
    for (let i = 0; i < x.length; i += 3) expect(at(x[i], y[i])).toBe(brute(x[i], y[i]));
    expect(at(0, 0)).toBe(0);
    expect(at(-0, 0)).toBe(0);
    for (let k = 0; k < 300; k++) {
      const px = Math.round(1000 * u()) / 4 + 0.125, py = Math.round(1000 * u()) / 4;
      expect(at(px, py)).toBe(-1);
    }
  });
});
