// Masks that fit: a --mask polygon sets the default grid extent, a mask in longitude/latitude over
// projected points is projected, and the grid is read back with GDAL's gdalinfo and the projection
// checked with gdaltransform (Debian gdal-bin), not with rbfield's own code.
import { spawnSync } from "node:child_process";
import * as fs from "node:fs";
import * as os from "node:os";
import * as path from "node:path";
import process from "node:process";
import { afterAll, describe, expect, it } from "vitest";
import { booleanPointInPolygon, point, polygon } from "@turf/turf";
import { main } from "../src/cli.ts";
import { mulberry32 } from "./helpers.ts";

const haveGdal = spawnSync("gdalinfo", ["--version"], { encoding: "utf8" }).status === 0;
const skip = !haveGdal && !process.env.CI;

async function cli(args: string[]): Promise<{ code: number; out: string; err: string }> {
  let out = "", err = "";
  const code = await main(args, { out: (s) => (out += s), err: (s) => (err += s + "\n") });
  return { code, out, err };
}

function gdalinfo(file: string) {
  const run = spawnSync("gdalinfo", ["-json", "-stats", file], { encoding: "utf8" });
  expect(run.status, run.stderr).toBe(0);
  return JSON.parse(run.stdout);
}

const tmp = fs.mkdtempSync(path.join(os.tmpdir(), "rbfield-masks-"));
afterAll(() => fs.rmSync(tmp, { recursive: true, force: true }));
const FAST = ["--kernel", "thin-plate", "--trend", "linear", "--quiet"];

describe.skipIf(skip)("masks (gdalinfo, gdaltransform)", () => {
  it("a polygon larger than the data is gridded in full: the extent is the polygon's, every cell has a value", async () => {
    // 40 readings of a plane in a 100 m square; the field boundary is a 400 m square around them.
    const r = mulberry32(5);
    const pts = Array.from({ length: 40 }, () => [1000 + 100 * r(), 2000 + 100 * r()]);
    const file = path.join(tmp, "field.csv");
    fs.writeFileSync(file, "x,y,z\n" + pts.map(([x, y]) => `${x},${y},${10 + 0.01 * x - 0.02 * y}`).join("\n") + "\n");
    const mask = path.join(tmp, "field.geojson");
    fs.writeFileSync(mask, JSON.stringify({ type: "Polygon", coordinates: [[[900, 1900], [1300, 1900], [1300, 2300], [900, 2300], [900, 1900]]] }));
    const model = path.join(tmp, "field.json");
    expect((await cli(["fit", file, "--out", model, "--crs", "local:m", ...FAST])).code).toBe(0);
    const tif = path.join(tmp, "field.tif");
    const g = await cli(["grid", model, "--out", tif, "--cell", "10", "--mask", mask, "--quiet"]);
    expect(g.code, g.err).toBe(0);
    expect(g.out).toContain("in the points' CRS");
    const info = gdalinfo(tif);
    // Pixel-is-area: the origin is the polygon's north-west corner, 40 × 40 cells of 10 m.
    expect(info.geoTransform).toEqual([900, 10, 0, 2300, 0, -10]);
    expect(info.size).toEqual([40, 40]);
    expect(Number(info.bands[0].metadata[""].STATISTICS_VALID_PERCENT)).toBe(100);
    // Without the mask the grid covers the data's bounding box only (as before): fewer cells.
    const plain = path.join(tmp, "plain.tif");
    expect((await cli(["grid", model, "--out", plain, "--cell", "10", "--quiet"])).code).toBe(0);
    expect(gdalinfo(plain).size[0]).toBeLessThanOrEqual(11);
  });

  it("a longitude/latitude mask (GeoJSON without crs: WGS 84, RFC 7946) over UTM points is projected", async () => {
    // The site: 0.02° × 0.01° near Amsterdam; points inside it in WGS 84 / UTM zone 31N (EPSG:32631).
    const ring: [number, number][] = [[4.85, 52.3], [4.87, 52.3], [4.87, 52.31], [4.85, 52.31], [4.85, 52.3]];
    const gdalUtm = (lonlat: [number, number][]) => {
      const run = spawnSync("gdaltransform", ["-s_srs", "EPSG:4326", "-t_srs", "EPSG:32631", "-output_xy"], {
        input: lonlat.map(([lon, lat]) => `${lon} ${lat}`).join("\n") + "\n",
        encoding: "utf8",
      });
      expect(run.status, run.stderr).toBe(0);
      return run.stdout.trim().split("\n").map((l) => l.trim().split(/\s+/).map(Number) as [number, number]);
    };
    const r = mulberry32(6);
    const inside: [number, number][] = Array.from({ length: 50 }, () => [4.852 + 0.016 * r(), 52.301 + 0.008 * r()]);
    const en = gdalUtm(inside);
    const file = path.join(tmp, "site.csv");
    fs.writeFileSync(file, "easting,northing,head\n" + en.map(([e, n]) => `${e.toFixed(3)},${n.toFixed(3)},${(1 + 0.001 * (e - 626000)).toFixed(4)}`).join("\n") + "\n");
    const mask = path.join(tmp, "site.geojson");
    fs.writeFileSync(mask, JSON.stringify({ type: "Feature", properties: {}, geometry: { type: "Polygon", coordinates: [ring] } }));
    const dir = path.join(tmp, "site");
    const run = await cli(["run", file, "--out", dir, "--crs", "EPSG:32631", "--cell", "10", "--mask", mask, ...FAST]);
    expect(run.code, run.err).toBe(0);
    expect(run.out).toContain("in WGS 84 longitude/latitude (no crs member; RFC 7946), projected to EPSG:32631");
    // The default extent: the projected polygon's bounding box (its corners by GDAL), snapped out to 10 m.
    const corners = gdalUtm(ring.slice(0, 4));
    const xs = corners.map((c) => c[0]), ys = corners.map((c) => c[1]);
    const xmin = Math.floor(Math.min(...xs) / 10) * 10, ymax = Math.ceil(Math.max(...ys) / 10) * 10;
    const cols = Math.ceil((Math.max(...xs) - xmin) / 10), rows = Math.ceil((ymax - Math.min(...ys)) / 10);
    const info = gdalinfo(path.join(dir, "surface.tif"));
    expect(info.geoTransform).toEqual([xmin, 10, 0, ymax, 0, -10]);
    expect(info.size).toEqual([cols, rows]);
    // The projected quadrilateral is turned by the grid convergence (about 1.5° here), so slivers along its
    // edges are masked: the share of cell centres inside GDAL's corners, counted with turf's
    // booleanPointInPolygon, is the share gdalinfo finds valid (to its two decimals).
    const quad = polygon([[...corners, corners[0]]]);
    let count = 0;
    for (let r = 0; r < rows; r++) {
      for (let c = 0; c < cols; c++) if (booleanPointInPolygon(point([xmin + 10 * c + 5, ymax - 10 * r - 5]), quad)) count++;
    }
    const valid = Number(info.bands[0].metadata[""].STATISTICS_VALID_PERCENT);
    expect(valid).toBeLessThan(99);
    expect(Math.abs(valid - (100 * count) / (rows * cols))).toBeLessThan(0.02);
  });

  it("a mask that declares its CRS (crs member) is projected from it; points on a local grid refuse it by name", async () => {
    const file = path.join(tmp, "site.csv");
    const mask = path.join(tmp, "declared.geojson");
    // The same site declared as EPSG:4326 in the GeoJSON 2008 crs member.
    fs.writeFileSync(mask, JSON.stringify({
      type: "Polygon",
      crs: { type: "name", properties: { name: "urn:ogc:def:crs:EPSG::4326" } },
      coordinates: [[[4.85, 52.3], [4.87, 52.3], [4.87, 52.31], [4.85, 52.31], [4.85, 52.3]]],
    }));
    const model = path.join(tmp, "site.json");
    expect((await cli(["fit", file, "--out", model, "--crs", "EPSG:32631", ...FAST])).code).toBe(0);
    const g = await cli(["grid", model, "--out", path.join(tmp, "declared.tif"), "--cell", "10", "--mask", mask, "--quiet"]);
    expect(g.code, g.err).toBe(0);
    expect(g.out).toContain("in EPSG:4326 (declared in the file), projected to EPSG:32631");
    const local = path.join(tmp, "local.json");
    expect((await cli(["fit", file, "--out", local, "--crs", "local:m", ...FAST])).code).toBe(0);
    const refused = await cli(["grid", local, "--out", path.join(tmp, "never.tif"), "--mask", mask, "--quiet"]);
    expect(refused.code).toBe(3);
    expect(refused.err).toContain("declared.geojson");
    expect(refused.err).toContain("the mask is in EPSG:4326 (declared in the file) but the points are in local site grid in metres (no EPSG code)");
    expect(fs.existsSync(path.join(tmp, "never.tif"))).toBe(false);
  });
});

describe("a mask whose CRS needs a datum-shift grid rbfield does not bundle", () => {
  it("is refused naming the mask file, --mask and the grid (WGS 84 → OSGB36 needs OSTN15: Ordnance Survey, 'A guide to coordinate systems in Great Britain')", async () => {
    // Points on the British National Grid (EPSG:27700) near Trafalgar Square; a WGS 84 mask (no crs member) over them.
    const r = mulberry32(27700);
    const file = path.join(tmp, "bng.csv");
    fs.writeFileSync(file, "easting,northing,level\n" + Array.from({ length: 20 }, () => `${(530000 + 100 * r()).toFixed(2)},${(180300 + 100 * r()).toFixed(2)},${(20 + r()).toFixed(3)}`).join("\n") + "\n");
    const mask = path.join(tmp, "bng-mask.geojson");
    fs.writeFileSync(mask, JSON.stringify({ type: "Polygon", coordinates: [[[-0.13, 51.507], [-0.125, 51.507], [-0.125, 51.51], [-0.13, 51.51], [-0.13, 51.507]]] }));
    const dir = path.join(tmp, "bng-run");
    const run = await cli(["run", file, "--out", dir, "--crs", "EPSG:27700", "--mask", mask, ...FAST]);
    expect(run.code).not.toBe(0);
    expect(run.err.trim().split("\n")).toHaveLength(1);
    expect(run.err).toContain(`${mask}: the --mask file is in WGS 84 longitude/latitude`);
    expect(run.err).toMatch(/OSTN15/);
    expect(run.err).toContain("give the mask in EPSG:27700");
    expect(fs.existsSync(dir)).toBe(false);
  });
});
