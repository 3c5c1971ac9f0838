// Contours as practitioners ask for them: listed levels, index contours, 3-D lines, log-spaced
// defaults. Outside references, named beside each check: the analytic cone z = distance from a
// centre (the contour at level L is the circle of radius L); the drafting convention that every
// fifth contour counted from the base is an index contour (USGS topographic map symbols); RFC 7946
// §3.1.1 (a position's optional third element is its altitude); the 1, 2, 5 series of round numbers
// (successive ratios 2, 2.5, 2; as on chart and instrument scales).
import { afterAll, describe, expect, it } from "vitest";
import * as fs from "node:fs";
import * as os from "node:os";
import * as path from "node:path";
import { main } from "../src/cli.ts";
import type { GridValues } from "../src/types.ts";
import { contourGeoJson, contourLines } from "../src/write/contours.ts";
import { encodeGeoTiff } from "../src/write/geotiff.ts";
import { chooseLevelRule, indexTest, intervalRule, levelsWithin, listRule } from "../src/write/levels.ts";
import { renderMap } from "../src/write/map.ts";
import { errorOf } from "./helpers.ts";

type Position = number[];
interface LineFeature {
  geometry: { type: string; coordinates: Position[][] };
  properties: { level: number; index: boolean };
}
interface BandFeature {
  geometry: { type: string; coordinates: Position[][] | Position[][][] };
  properties: { lower: number | null; upper: number | null };
}

// Cone z = distance from (X0, Y0), off the lattice nodes; 200 × 200 cells of H = 0.1 (as in contours.test.ts).
const X0 = 0.123, Y0 = -0.071, H = 0.1;
function coneGrid(): GridValues {
  const cols = 200, rows = 200, xmin = -10, ymax = 10;
  const values = new Float64Array(cols * rows);
  for (let r = 0; r < rows; r++) {
    for (let c = 0; c < cols; c++) values[r * cols + c] = Math.hypot(xmin + (c + 0.5) * H - X0, ymax - (r + 0.5) * H - Y0);
  }
  return { spec: { xmin, ymax, xmax: xmin + cols * H, ymin: ymax - rows * H, cell: H, cols, rows }, values, crs: { label: "local site grid" } };
}

/**
 * Every vertex of a contour of the cone at level c lies on the circle of radius c: linear
 * interpolation along an edge of length h overestimates the distance by at most h²/(8c), so
 * vertices lie up to h²/(8c) inside; `slack` covers rounding (and Float32 storage in a GeoTIFF).
 */
function expectOnCircle(lines: Position[][], c: number, slack: number) {
  for (const line of lines) {
    for (const [x, y] of line) {
      const rho = Math.hypot(x - X0, y - Y0);
      expect(rho).toBeLessThanOrEqual(c + slack);
      expect(rho).toBeGreaterThanOrEqual(c - (H * H) / (8 * c) - slack);
    }
  }
}

const tmp = fs.mkdtempSync(path.join(os.tmpdir(), "rbfield-levels-"));
afterAll(() => fs.rmSync(tmp, { recursive: true, force: true }));
const coneTif = path.join(tmp, "cone.tif");
fs.writeFileSync(coneTif, encodeGeoTiff(coneGrid()));

async function cli(args: string[]) {
  let out = "", err = "";
  const code = await main(args, { out: (s) => (out += s), err: (s) => (err += s + "\n") });
  return { code, out, err };
}

describe("--levels: exactly the levels listed (analytic cone)", () => {
  it("contour --levels 2,5,8,50 --3d: one feature per level within the surface, each the circle of its radius, z = level", async () => {
    const out = path.join(tmp, "listed.geojson");
    const r = await cli(["contour", coneTif, "--out", out, "--levels", "8,2,5,50", "--3d", "--quiet", "--json"]);
    expect(r.code, r.err).toBe(0);
    // 50 lies above the cone's highest cell (about 14.1): no line, and not reported as a level.
    expect(JSON.parse(r.out).levels).toEqual([2, 5, 8]);
    const features = JSON.parse(fs.readFileSync(out, "utf8")).features as LineFeature[];
    expect(features.map((f) => f.properties.level)).toEqual([2, 5, 8]);
    for (const f of features) {
      // Each level listed was asked for: every one is an index contour.
      expect(f.properties.index).toBe(true);
      expect(f.geometry.type).toBe("MultiLineString");
      // RFC 7946 §3.1.1: [easting, northing, altitude]; the altitude is the level itself.
      for (const line of f.geometry.coordinates) {
        for (const p of line) {
          expect(p).toHaveLength(3);
          expect(p[2]).toBe(f.properties.level);
        }
      }
      // Float32 cells (GeoTIFF) are within 14·2⁻²⁴ of the cone; the slope is 1, so positions move as much.
      expectOnCircle(f.geometry.coordinates, f.properties.level, H * 1e-6 + 2e-6);
    }
  });

  it("run's library call gives the same lines as contourLines on the levels listed, 2-D unless asked", () => {
    const grid = coneGrid();
    const r = contourGeoJson(grid, listRule([2.5, 7]));
    const fc = JSON.parse(r.text) as { features: LineFeature[] };
    expect(fc.features.map((f) => f.properties)).toEqual([{ level: 2.5, index: true }, { level: 7, index: true }]);
    for (const f of fc.features) {
      for (const line of f.geometry.coordinates) for (const p of line) expect(p).toHaveLength(2);
      expectOnCircle(f.geometry.coordinates, f.properties.level, H * 1e-6);
    }
  });

  it("bands with --levels cover the whole surface: open below the first level and above the last (null bound)", async () => {
    const out = path.join(tmp, "bands.geojson");
    const r = await cli(["contour", coneTif, "--out", out, "--levels", "2,5,8", "--bands", "--quiet"]);
    expect(r.code, r.err).toBe(0);
    const bands = JSON.parse(fs.readFileSync(out, "utf8")).features as BandFeature[];
    expect(bands.map((b) => b.properties)).toEqual([
      { lower: null, upper: 2 },
      { lower: 2, upper: 5 },
      { lower: 5, upper: 8 },
      { lower: 8, upper: null },
    ]);
    // The band below 2 is the disc of radius 2 (cone formula): area π·2², within the bounds of
    // contours.test.ts (chord segments ≤ π·s²/6 with s ≤ √2·h, radial shortfall ≤ πh²/4).
    const disc = bands[0].geometry.coordinates as Position[][];
    let area = 0;
    for (const ring of disc) for (let i = 0; i + 1 < ring.length; i++) area += (ring[i][0] * ring[i + 1][1] - ring[i + 1][0] * ring[i][1]) / 2;
    expect(Math.abs(area - Math.PI * 4)).toBeLessThan(Math.PI * H * H / 3 + Math.PI * H * H / 4 + 1e-4);
  });

  it("--3d with --bands, --levels with --interval, and a bad list are refused as usage errors", async () => {
    const out = path.join(tmp, "refused.geojson");
    const both = await cli(["contour", coneTif, "--out", out, "--levels", "1,2", "--interval", "1", "--quiet"]);
    expect(both.code).toBe(2);
    expect(both.err).toContain("give --interval or --levels, not both");
    const bands3d = await cli(["contour", coneTif, "--out", out, "--3d", "--bands", "--quiet"]);
    expect(bands3d.code).toBe(2);
    expect(bands3d.err).toContain("--3d applies to contour lines");
    const bad = await cli(["contour", coneTif, "--out", out, "--levels", "1,,x", "--quiet"]);
    expect(bad.code).toBe(2);
    expect(bad.err).toContain('--levels must be numbers separated by commas, such as 1,10,100,1000, not "1,,x"');
    expect(fs.existsSync(out)).toBe(false);
  });
});

describe("index contours: every fifth level counted from the base (drafting convention)", () => {
  it("--interval 0.5 --base 0.25: index exactly where (level − base)/interval is a multiple of 5", async () => {
    const out = path.join(tmp, "index.geojson");
    const r = await cli(["contour", coneTif, "--out", out, "--interval", "0.5", "--base", "0.25", "--quiet"]);
    expect(r.code, r.err).toBe(0);
    const features = JSON.parse(fs.readFileSync(out, "utf8")).features as LineFeature[];
    expect(features.length).toBeGreaterThan(20);
    // Count the levels from the base by their own place in the sequence, not by the code's rule.
    for (const f of features) {
      const k = Math.round((f.properties.level - 0.25) / 0.5);
      expect(f.properties.level).toBeCloseTo(0.25 + 0.5 * k, 12);
      expect(f.properties.index).toBe(k % 5 === 0);
    }
    expect(features.filter((f) => f.properties.index).map((f) => f.properties.level)).toEqual([0.25, 2.75, 5.25, 7.75, 10.25, 12.75]);
  });

  it("the map draws heavier exactly the lines the GeoJSON marks as index (one definition)", () => {
    const grid = coneGrid();
    const rule = intervalRule(0.5, 0.25);
    const levels = levelsWithin(rule, 0, 14.2);
    const contours = contourLines(grid, levels, { index: indexTest(rule) });
    const svg = renderMap(
      { grid, contours, levels, rule, title: "Cone", dataFile: "cone.tif", date: "2026-12-02", crs: "local site grid", unit: "", method: "", mapUnit: { name: "m", metres: 1 } },
      { paper: "A4", orientation: "landscape", relief: false, labelPoints: false },
    );
    const group = (id: string) => svg.slice(svg.indexOf(`id="${id}"`), svg.indexOf("</g>", svg.indexOf(`id="${id}"`)));
    const heavy = [...group("index-contours").matchAll(/data-level="([-\d.]+)"/g)].map((m) => Number(m[1]));
    const marked = contours.features.filter((f) => f.properties.index).map((f) => f.properties.level);
    expect(heavy).toEqual(marked);
    expect(heavy.length).toBeGreaterThan(0);
  });
});

describe("log-spaced default levels after --transform log (1, 2, 5 series)", () => {
  it("values from 0.3 to 4700 fitted as logs get 1, 2, 5 × 10ᵏ, index contours at the powers of ten", () => {
    const values = new Float64Array([0.3, 12, 4700, NaN]);
    const rule = chooseLevelRule({}, values, "log");
    const levels = levelsWithin(rule, 0.3, 4700);
    expect(levels).toEqual([0.5, 1, 2, 5, 10, 20, 50, 100, 200, 500, 1000, 2000]);
    // Successive ratios of the 1, 2, 5 series: ×2, ×2.5, ×2, repeating.
    levels.slice(1).forEach((v, i) => expect(v / levels[i]).toBeCloseTo([2, 2.5, 2][(i + 2) % 3], 12));
    expect(levels.filter(indexTest(rule))).toEqual([1, 10, 100, 1000]);
  });

  it("a range of many decades takes the powers of ten alone; a narrow one, or a fit without logs, an interval", () => {
    const wide = chooseLevelRule({}, new Float64Array([0.002, 3e6]), "log");
    expect(levelsWithin(wide, 0.002, 3e6)).toEqual([0.01, 0.1, 1, 10, 100, 1000, 10000, 100000, 1000000]);
    expect(chooseLevelRule({}, new Float64Array([84.3, 93.7]), "log")).toEqual({ kind: "interval", interval: 0.5, base: 0 });
    expect(chooseLevelRule({}, new Float64Array([0.3, 4700]), "none").kind).toBe("interval");
    expect(errorOf(() => chooseLevelRule({ levels: [1, 2], base: 5 }, new Float64Array([0, 3]))).message).toMatch(/applies to/);
  });

  it("contour of a model fitted with --transform log, no interval given: levels of the 1, 2, 5 series", async () => {
    // Invented log-normal readings: ln z a plane over 30 jittered places, from about 0.5 to 400.
    const rows = ["x,y,conc"];
    for (let i = 0; i < 30; i++) {
      const x = (i % 6) * 20 + ((i * 7) % 5), y = Math.floor(i / 6) * 20 + ((i * 3) % 4);
      rows.push(`${x},${y},${Math.exp(-0.7 + 0.05 * x + 0.03 * y).toFixed(4)}`);
    }
    const points = path.join(tmp, "conc.csv"), model = path.join(tmp, "conc.rbfield.json"), out = path.join(tmp, "conc.geojson");
    fs.writeFileSync(points, rows.join("\n") + "\n");
    expect((await cli(["fit", points, "--out", model, "--transform", "log", "--kernel", "thin-plate", "--quiet"])).code).toBe(0);
    const r = await cli(["contour", model, "--out", out, "--cell", "2", "--quiet", "--json"]);
    expect(r.code, r.err).toBe(0);
    const levels = JSON.parse(r.out).levels as number[];
    expect(levels.length).toBeGreaterThanOrEqual(6);
    for (const v of levels) expect(String(v)).toMatch(/^(0\.0*)?[125]0*$/);
    expect(r.out).not.toMatch(/"interval"/);
  });
});

describe("listed levels the readings cross but the surface does not reach", () => {
  // Smoothing lowers peaks (a regression surface does not pass through its readings; common
  // practice to show exceedances beside a smoothed map). The surface's range is given here, so the
  // rule is checked alone: readings 10…30 and one peak of 52.8 under a surface whose top is 45.9.
  it("warns for a level above the surface's top that a reading reaches, naming the reading", async () => {
    const { fitSurface } = await import("../src/fit/surface.ts");
    const { missedLevelWarnings } = await import("../src/write/summary.ts");
    const n = 30;
    const x = Float64Array.from({ length: n }, (_, i) => (i % 6) * 10), y = Float64Array.from({ length: n }, (_, i) => Math.floor(i / 6) * 10);
    const z = Float64Array.from({ length: n }, (_, i) => (i === 14 ? 52.8 : 10 + (20 * i) / n));
    const model = fitSurface({ x, y, z, lines: Array.from({ length: n }, (_, i) => i + 2), skipped: [], merged: [], rowsRead: n }, { kernel: "thin-plate" });
    const surface = { lo: 9, hi: 45.9 };
    const w = missedLevelWarnings(model, listRule([5, 11.3, 50, 60]), surface);
    expect(w).toHaveLength(1);
    expect(w[0]).toMatch(/^level 50 is above the surface's highest value \(45\.9\), but 1 reading reaches it \(line 16: 52\.8\)/);
    // Below the surface's lowest value with a reading there too.
    expect(missedLevelWarnings(model, listRule([10.2]), { lo: 10.5, hi: 45.9 })[0]).toMatch(/^level 10\.2 is below the surface's lowest value \(10\.5\), but 1 reading falls to it \(line 2: 10\)/);
    // An interval's levels come from the surface's range: nothing to say.
    expect(missedLevelWarnings(model, intervalRule(5), surface)).toEqual([]);
  });
});
