import { describe, expect, it } from "vitest";
import { booleanPointInPolygon, point } from "@turf/turf";
import { contourBands, contourLevels, contourLines } from "../src/write/contours.ts";
import type { Position } from "../src/write/contours.ts";
import { ExitCode, RbfieldError } from "../src/errors.ts";
import type { GridValues } from "../src/types.ts";

/** Grid whose cell (r, c) holds f at its centre (xmin + (c + ½)·cell, ymax − (r + ½)·cell). */
function sampled(
  f: (x: number, y: number) => number,
  cols: number,
  rows: number,
  cell: number,
  xmin: number,
  ymax: number,
): GridValues {
  const values = new Float64Array(cols * rows);
  for (let r = 0; r < rows; r++) {
    for (let c = 0; c < cols; c++) values[r * cols + c] = f(xmin + (c + 0.5) * cell, ymax - (r + 0.5) * cell);
  }
  return {
    spec: { xmin, ymax, xmax: xmin + cols * cell, ymin: ymax - rows * cell, cell, cols, rows },
    values,
    crs: { label: "local site grid" },
  };
}

/** Shoelace formula: signed area, positive for counter-clockwise rings. */
function signedArea(ring: Position[]): number {
  let s = 0;
  for (let i = 0; i + 1 < ring.length; i++) s += ring[i][0] * ring[i + 1][1] - ring[i + 1][0] * ring[i][1];
  return s / 2;
}

function pathLength(line: Position[]): number {
  let s = 0;
  for (let i = 0; i + 1 < line.length; i++) s += Math.hypot(line[i + 1][0] - line[i][0], line[i + 1][1] - line[i][1]);
  return s;
}

/** Pieces of a LineString / MultiLineString geometry. */
function pieces(geometry: { type: string; coordinates: unknown }): Position[][] {
  return geometry.type === "LineString" ? [geometry.coordinates as Position[]] : (geometry.coordinates as Position[][]);
}

/** Polygons of a Polygon / MultiPolygon geometry. */
function polygons(geometry: { type: string; coordinates: unknown }): Position[][][] {
  return geometry.type === "Polygon" ? [geometry.coordinates as Position[][]] : (geometry.coordinates as Position[][][]);
}

function polygonArea(geometry: { type: string; coordinates: unknown }): number {
  let a = 0;
  for (const poly of polygons(geometry)) for (const ring of poly) a += signedArea(ring);
  return a;
}

describe("contourLevels", () => {
  it("gives base + k·interval within [min, max], inclusive, as exact decimals", () => {
    // Decimal arithmetic: 0, 0.1, …, 1.0 (repeated addition would give 0.30000000000000004 etc.).
    expect(contourLevels(0, 1, 0.1)).toEqual([0, 0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9, 1]);
    expect(contourLevels(10, 20, 5)).toEqual([10, 15, 20]);
    expect(contourLevels(-3.7, 12.2, 5, 2)).toEqual([-3, 2, 7, 12]);
    expect(contourLevels(101.3, 101.9, 0.25, 0.05)).toEqual([101.3, 101.55, 101.8]);
    expect(contourLevels(0.5, 0.9, 1)).toEqual([]);
  });

  it("refuses more than 10,000 levels with a usage error naming the fix", () => {
    expect(contourLevels(0, 9_999, 1)).toHaveLength(10_000);
    let caught: unknown;
    try {
      contourLevels(0, 10_000, 1);
    } catch (error) {
      caught = error;
    }
    expect(caught).toBeInstanceOf(RbfieldError);
    expect((caught as RbfieldError).exitCode).toBe(ExitCode.usage);
    expect((caught as RbfieldError).message).toMatch(/larger interval/);
    expect(() => contourLevels(0, 1e300, 1e-300)).toThrow(/larger interval/);
  });

  it("refuses a zero or negative interval", () => {
    expect(() => contourLevels(0, 1, 0)).toThrow(RbfieldError);
    expect(() => contourLevels(0, 1, -1)).toThrow(RbfieldError);
  });
});

// Cone z = distance from (x0, y0), off the lattice nodes; 200 × 200 cells of h = 0.1.
const X0 = 0.123, Y0 = -0.071, H = 0.1;
const cone = sampled((x, y) => Math.hypot(x - X0, y - Y0), 200, 200, H, -10, 10);

describe("contourLines", () => {
  it("cone: level c is one closed ring of length 2πc, every vertex on the circle of radius c", () => {
    for (const c of [2, 5, 8]) {
      const fc = contourLines(cone, [c]);
      expect(fc.features).toHaveLength(1);
      expect(fc.features[0].properties).toEqual({ level: c, index: false });
      const geometry = fc.features[0].geometry;
      // One geometry type for every feature (README): a single ring is a one-part MultiLineString.
      expect(geometry.type).toBe("MultiLineString");
      expect(pieces(geometry)).toHaveLength(1);
      const ring = pieces(geometry)[0];
      expect(ring[0]).toEqual(ring[ring.length - 1]);
      // Vertices: linear interpolation of the distance along an edge of length h overestimates it by
      // at most h²/(8c) (second derivative ≤ 1/c), so vertices lie up to h²/(8c) inside the circle;
      // plus the documented rounding (< h·1e-6).
      for (const [x, y] of ring) {
        const rho = Math.hypot(x - X0, y - Y0);
        expect(rho).toBeLessThanOrEqual(c + H * 1e-6);
        expect(rho).toBeGreaterThanOrEqual(c - (H * H) / (8 * c) - H * 1e-6);
      }
      // Length: chords s ≤ √2·h of a circle fall short by s²/(24c²) relative (≤ h²/(12c²)), and the
      // radial shortfall adds ≤ h²/(8c²); tolerance is the sum of both bounds.
      const relTol = (H * H) / (c * c) * (1 / 12 + 1 / 8);
      expect(Math.abs(pathLength(ring) - 2 * Math.PI * c)).toBeLessThanOrEqual(relTol * 2 * Math.PI * c);
      // Higher ground (outside) on the left: the ring runs clockwise (negative shoelace area ≈ −πc²).
      expect(signedArea(ring)).toBeLessThan(0);
    }
  });

  it("plane z = ax + by: every vertex on the analytic line, within 1e-9 (cell 0.001, rounding cell/1e6)", () => {
    const a = 0.3, b = -0.7;
    const grid = sampled((x, y) => a * x + b * y, 60, 45, 0.001, 144.5, -37.2);
    const levels = [69.4, 69.41, 69.42, 69.437];
    const fc = contourLines(grid, levels);
    expect(fc.features.map((f) => f.properties.level)).toEqual(levels);
    const norm = Math.hypot(a, b);
    for (const feature of fc.features) {
      const lines = pieces(feature.geometry);
      // A straight line across a convex lattice is one open piece.
      expect(lines).toHaveLength(1);
      expect(lines[0][0]).not.toEqual(lines[0][lines[0].length - 1]);
      for (const [x, y] of lines[0]) {
        // Linear interpolation of a linear function is exact; the error left is the rounding
        // to 1e-9 (half a step per coordinate) and floating point.
        expect(Math.abs(a * x + b * y - feature.properties.level) / norm).toBeLessThan(1e-9);
      }
    }
  });

  it("never draws into a masked block, and a line through it breaks in two", () => {
    // z = x on 30 × 20 cells of 10 m; cells rows 6..11, columns 10..15 masked.
    const grid = sampled((x) => x, 30, 20, 10, 1000, 5000);
    const r0 = 6, r1 = 11, c0 = 10, c1 = 15;
    for (let r = r0; r <= r1; r++) for (let c = c0; c <= c1; c++) grid.values[r * 30 + c] = NaN;
    // Masked area: the union of the masked cells (pixel-is-area).
    const inside = (x: number, y: number) =>
      x > 1000 + c0 * 10 && x < 1000 + (c1 + 1) * 10 && y < 5000 - r0 * 10 && y > 5000 - (r1 + 1) * 10;
    const fc = contourLines(grid, [1052, 1127, 1133.3, 1200]);
    expect(fc.features).toHaveLength(4);
    for (const feature of fc.features) {
      for (const line of pieces(feature.geometry)) {
        for (let i = 0; i < line.length; i++) {
          expect(inside(line[i][0], line[i][1])).toBe(false);
          if (i > 0) expect(inside((line[i][0] + line[i - 1][0]) / 2, (line[i][1] + line[i - 1][1]) / 2)).toBe(false);
        }
      }
    }
    // x = 1127 and 1133.3 cross the block (x from 1100 to 1160): two pieces each; the others one.
    expect(fc.features.map((f) => pieces(f.geometry).length)).toEqual([1, 2, 2, 1]);
  });

  it("resolves a saddle by the mean of the four corners", () => {
    // One lattice square, corners NW = 1, NE = 0, SW = 0, SE = 1 (mean 0.5), cell 1, centres at
    // x ∈ {0.5, 1.5}, y ∈ {1.5, 0.5}. Crossings of level L on each edge by linear interpolation.
    const grid: GridValues = {
      spec: { xmin: 0, ymin: 0, xmax: 2, ymax: 2, cell: 1, cols: 2, rows: 2 },
      values: new Float64Array([1, 0, 0, 1]),
      crs: { label: "local site grid" },
    };
    const sorted = (lines: Position[][]) => lines.map((l) => [...l].sort((p, q) => p[0] - q[0] || p[1] - q[1])).sort();
    // L = 0.4 < mean: the high corners connect through the centre; segments cut off NE and SW.
    // From NW = 1 to NE = 0 the level 0.4 is 0.6 of the way: x = 1.1 on the north edge; likewise
    // y = 1.1 on the east edge, y = 0.9 on the west edge, x = 0.9 on the south edge.
    const low = contourLines(grid, [0.4]).features[0].geometry;
    expect(sorted(pieces(low))).toEqual(sorted([[[1.1, 1.5], [1.5, 1.1]], [[0.5, 0.9], [0.9, 0.5]]]));
    // L = 0.6 > mean: the low corners connect; segments cut off NW and SE.
    // Crossings: north x = 0.9, west y = 1.1, east y = 0.9, south x = 1.1.
    const high = contourLines(grid, [0.6]).features[0].geometry;
    expect(sorted(pieces(high))).toEqual(sorted([[[0.9, 1.5], [0.5, 1.1]], [[1.5, 0.9], [1.1, 0.5]]]));
  });

  it("is deterministic", () => {
    const levels = contourLevels(0, 14, 0.5);
    expect(JSON.stringify(contourLines(cone, levels))).toBe(JSON.stringify(contourLines(cone, levels)));
  });
});

describe("contourBands", () => {
  const levels = [2, 5, 8];
  const bands = contourBands(cone, levels);

  it("cone: band [a, b) is an annulus of area π(b² − a²)", () => {
    expect(bands.features.map((f) => f.properties)).toEqual([{ lower: 2, upper: 5 }, { lower: 5, upper: 8 }]);
    for (const feature of bands.features) {
      const { lower, upper } = feature.properties;
      expect(feature.geometry.type).toBe("Polygon");
      const [outer, hole, ...rest] = feature.geometry.coordinates as Position[][];
      expect(rest).toHaveLength(0);
      // Same vertex bounds as for lines: up to h²/(8c) inside the circle, plus rounding.
      for (const [ring, c] of [[outer, upper], [hole, lower]] as const) {
        for (const [x, y] of ring) {
          const rho = Math.hypot(x - X0, y - Y0);
          expect(rho).toBeLessThanOrEqual(c + H * 1e-6);
          expect(rho).toBeGreaterThanOrEqual(c - (H * H) / (8 * c) - H * 1e-6);
        }
      }
      // Area of each circle: chord segments lose ≤ π·s²/6 with s ≤ √2·h, the radial shortfall
      // ≤ 2πc·h²/(8c) = πh²/4; two circles per band.
      const tol = 2 * (Math.PI * H * H / 3 + Math.PI * H * H / 4);
      expect(Math.abs(polygonArea(feature.geometry) - Math.PI * (upper ** 2 - lower ** 2))).toBeLessThan(tol);
    }
  });

  it("RFC 7946 §3.1.6: exterior rings counter-clockwise, holes clockwise; valid structure (§3.1.6, §3.1.7)", () => {
    expect(bands.type).toBe("FeatureCollection");
    for (const feature of bands.features) {
      expect(feature.type).toBe("Feature");
      expect(["Polygon", "MultiPolygon"]).toContain(feature.geometry.type);
      for (const poly of polygons(feature.geometry)) {
        expect(poly.length).toBeGreaterThan(0);
        poly.forEach((ring, i) => {
          // A linear ring is closed and has at least four positions.
          expect(ring.length).toBeGreaterThanOrEqual(4);
          expect(ring[0]).toEqual(ring[ring.length - 1]);
          for (const p of ring) {
            expect(p).toHaveLength(2);
            expect(Number.isFinite(p[0]) && Number.isFinite(p[1])).toBe(true);
          }
          if (i === 0) expect(signedArea(ring)).toBeGreaterThan(0);
          else expect(signedArea(ring)).toBeLessThan(0);
        });
      }
    }
  });

  it("all bands together cover the region between the lowest and highest level", () => {
    const total = bands.features.reduce((s, f) => s + polygonArea(f.geometry), 0);
    const tol = 2 * (Math.PI * H * H / 3 + Math.PI * H * H / 4);
    expect(Math.abs(total - Math.PI * (8 ** 2 - 2 ** 2))).toBeLessThan(tol);
  });

  it("masked block: outside every band; band areas add up to the unmasked lattice area between the levels", () => {
    // Plane z = x on 40 × 30 cells of 2 m (centres x = 101 … 179); linear interpolation is exact, so
    // band [a, b) is the strip a ≤ x < b across the lattice (height (rows − 1)·cell = 58 m).
    const cols = 40, rows = 30, cell = 2;
    const grid = sampled((x) => x, cols, rows, cell, 100, 800);
    // Masked cells: rows 10..14, columns 15..19 (5 × 5), centres x = 131 … 139, all inside [120, 150).
    const r0 = 10, r1 = 14, c0 = 15, c1 = 19;
    for (let r = r0; r <= r1; r++) for (let c = c0; c <= c1; c++) grid.values[r * cols + c] = NaN;
    const fc = contourBands(grid, [110, 120, 150, 170]);
    expect(fc.features.map((f) => f.properties)).toEqual([
      { lower: 110, upper: 120 },
      { lower: 120, upper: 150 },
      { lower: 150, upper: 170 },
    ]);
    const height = (rows - 1) * cell;
    // Documented rule: bands end at the last valid cell centres; a lattice square with one masked
    // corner keeps its half (the triangle of the valid centres), squares with two or more masked
    // corners are out. Around a 5 × 5 masked block: 6 × 6 squares touched, 4 corner squares keep a
    // half, so (36 − 2)·cell² is excluded, all of it inside the [120, 150) strip.
    const excluded = (6 * 6 - 2) * cell * cell;
    const areas = fc.features.map((f) => polygonArea(f.geometry));
    expect(areas[0]).toBeCloseTo(10 * height, 6);
    expect(areas[1]).toBeCloseTo(30 * height - excluded, 6);
    expect(areas[2]).toBeCloseTo(20 * height, 6);
    expect(areas.reduce((s, a) => s + a, 0)).toBeCloseTo(60 * height - excluded, 6);

    // No point inside a masked cell (pixel-is-area) lies in any band (turf point-in-polygon).
    for (let r = r0; r <= r1; r++) {
      for (let c = c0; c <= c1; c++) {
        for (const [fx, fy] of [[0.5, 0.5], [0.02, 0.02], [0.98, 0.02], [0.02, 0.98], [0.98, 0.98]]) {
          const p = point([100 + (c + fx) * cell, 800 - (r + fy) * cell]);
          for (const f of fc.features) expect(booleanPointInPolygon(p, f as never)).toBe(false);
        }
      }
    }
  });

  it("levels spanning all values: the bands tile the whole lattice, even with nodes on levels and saddles", () => {
    // Integers 0..4 from a fixed linear congruential sequence: many nodes exactly on a level.
    let seed = 7;
    const cols = 30, rows = 25, cell = 3;
    const grid = sampled(() => {
      seed = (seed * 1103515245 + 12345) % 2147483648;
      return Math.floor((seed / 2147483648) * 5);
    }, cols, rows, cell, 0, 0);
    const fc = contourBands(grid, [0, 1, 2, 3, 4, 5]);
    const total = fc.features.reduce((s, f) => s + polygonArea(f.geometry), 0);
    // Lattice of cell centres: (cols − 1) × (rows − 1) squares of cell².
    expect(total).toBeCloseTo((cols - 1) * (rows - 1) * cell * cell, 6);
  });

  it("is deterministic", () => {
    expect(JSON.stringify(contourBands(cone, levels))).toBe(JSON.stringify(bands));
  });
});
