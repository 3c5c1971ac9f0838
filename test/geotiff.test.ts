import { afterAll, describe, expect, it } from "vitest";
import { spawnSync } from "node:child_process";
import { mkdtempSync, rmSync, writeFileSync } from "node:fs";
import { tmpdir } from "node:os";
import { join } from "node:path";
import process from "node:process";
import { writeArrayBuffer } from "geotiff";
import { type BandText, bandText, encodeGeoTiff, geoTiffTags } from "../src/write/geotiff.ts";
import { decodeGeoTiff } from "../src/read/geotiff.ts";
import { ExitCode, RbfieldError } from "../src/errors.ts";
import type { Crs, GridValues } from "../src/types.ts";

// A 4-column, 3-row grid with one masked cell; values chosen so Float32 rounding matters for some.
function sampleGrid(crs: Crs, opts: { xmin?: number; ymax?: number; cell?: number } = {}): GridValues {
  const cols = 4, rows = 3;
  const cell = opts.cell ?? 25;
  const xmin = opts.xmin ?? 500_000;
  const ymax = opts.ymax ?? 5_800_100;
  const values = new Float64Array([
    10.5, 11.25, 12.1, 13.7,
    9.75, NaN, 14.2, 15.0,
    8.0, 8.5, 16.3, -2.125,
  ]);
  return {
    spec: { xmin, ymax, xmax: xmin + cols * cell, ymin: ymax - rows * cell, cell, cols, rows },
    values,
    crs,
  };
}

const MGA55: Crs = { epsg: 28355, label: "EPSG:28355" };
const WGS84: Crs = { epsg: 4326, label: "EPSG:4326" };
const LOCAL: Crs = { label: "local site grid" };

/** Expected Float32 value of each cell (IEEE 754 single rounding, which Math.fround implements). */
function asFloat32(values: Float64Array): number[] {
  return Array.from(values, (v) => (Number.isNaN(v) ? NaN : Math.fround(v)));
}

describe("encodeGeoTiff / decodeGeoTiff round trip", () => {
  for (const crs of [MGA55, WGS84, LOCAL]) {
    it(`keeps grid, values, mask and CRS (${crs.label})`, async () => {
      const grid = crs === WGS84 ? sampleGrid(crs, { xmin: 144.9, ymax: -37.8, cell: 0.001 }) : sampleGrid(crs);
      const back = await decodeGeoTiff(encodeGeoTiff(grid), "mem.tif");
      expect(back.spec).toEqual(grid.spec);
      // Stored as Float32 (the file format), masked cells back as NaN.
      expect(Array.from(back.values)).toEqual(asFloat32(grid.values));
      expect(back.crs.epsg).toBe(crs.epsg);
      if (crs.epsg === undefined) expect(back.crs.label).toBe("local site grid");
    });
  }

  it("uses another nodata value when asked", async () => {
    const grid = sampleGrid(MGA55);
    const back = await decodeGeoTiff(encodeGeoTiff(grid, { nodata: -32768 }), "mem.tif");
    expect(Number.isNaN(back.values[5])).toBe(true);
    expect(back.values.filter(Number.isNaN).length).toBe(1);
  });

  it("is deterministic byte for byte", () => {
    const a = encodeGeoTiff(sampleGrid(MGA55));
    const b = encodeGeoTiff(sampleGrid(MGA55));
    expect(a).toEqual(b);
    // TIFF 6.0 §2: big-endian header "MM", 42.
    expect(Array.from(a.subarray(0, 4))).toEqual([0x4d, 0x4d, 0, 42]);
  });

  it("the band text: the value's name without its bracketed unit, the unit apart (README 'Points': units in brackets)", async () => {
    expect(bandText("Level (m)", "values")).toEqual({ description: "Level", unit: "m" });
    expect(bandText("nitrate [mg/L]", "standard errors")).toEqual({ description: "standard error of nitrate", unit: "mg/L" });
    expect(bandText("nitrate_mgL", "values")).toEqual({ description: "nitrate_mgL" });
    // A file without a header row: "value (column 4)" holds no unit.
    expect(bandText("value (column 4)", "values")).toEqual({ description: "value (column 4)" });
    // Read back as written, and the same inputs give the same bytes (tiles put together rely on it).
    const band = bandText("head (m)", "values");
    const a = encodeGeoTiff(sampleGrid(MGA55), { band });
    expect((await geoTiffTags(a)).band).toEqual(band);
    expect(encodeGeoTiff(sampleGrid(MGA55), { band })).toEqual(a);
    expect((await geoTiffTags(encodeGeoTiff(sampleGrid(MGA55)))).band).toBeUndefined();
  });

  it("long texts in every tag still fit the fixed header, never written broken (TIFF 6.0 §2: every IFD value at its offset)", async () => {
    const grid = sampleGrid({ label: "L".repeat(300) });
    // A tile's description (about 100 characters) and a long band text fit beside a long local CRS label.
    const tile = "rbfield tile 12,3 of 20 x 20; tile size 1024; grid 20000 x 20000; standard errors; grid id 0123abcd";
    const fits = await geoTiffTags(encodeGeoTiff(grid, { description: tile, band: { description: "B".repeat(300), unit: "U".repeat(50) } }));
    expect(fits.description).toBe(tile);
    expect(fits.band).toEqual({ description: "B".repeat(60), unit: "U".repeat(16) });
    expect(fits.crs.label).toBe("L".repeat(200));
    // Texts at every limit leave the band text no room: it is left out, the rest is intact.
    const bytes = encodeGeoTiff(grid, { description: "D".repeat(300), band: { description: "B".repeat(300), unit: "U".repeat(50) } });
    const tags = await geoTiffTags(bytes);
    expect(tags.description).toBe("D".repeat(200));
    expect(tags.band).toBeUndefined();
    expect(tags.crs.label).toBe("L".repeat(200));
    expect(Array.from((await decodeGeoTiff(bytes, "mem.tif")).values)).toEqual(asFloat32(grid.values));
  });

  it("refuses a nodata value Float32 cannot hold exactly, and real values equal to nodata", () => {
    expect(() => encodeGeoTiff(sampleGrid(MGA55), { nodata: 0.1 })).toThrow(RbfieldError);
    const grid = sampleGrid(MGA55);
    grid.values[0] = -9999;
    expect(() => encodeGeoTiff(grid)).toThrow(/nodata/);
  });
});

describe("decodeGeoTiff refuses what it cannot represent", () => {
  async function rejection(bytes: Uint8Array): Promise<RbfieldError> {
    try {
      await decodeGeoTiff(bytes, "survey/dem.tif");
    } catch (error) {
      expect(error).toBeInstanceOf(RbfieldError);
      return error as RbfieldError;
    }
    throw new Error("decodeGeoTiff accepted the file");
  }
  // Files built directly with geotiff.js's writer, independent of encodeGeoTiff.
  function tiffWith(meta: Record<string, unknown>): Uint8Array {
    const data = new Float32Array([1, 2, 3, 4, 5, 6]);
    return new Uint8Array(
      writeArrayBuffer(data, { width: 3, height: 2, ProjectedCSTypeGeoKey: 28355, GTModelTypeGeoKey: 1, ...meta }),
    );
  }

  it("a file that is not a TIFF", async () => {
    const error = await rejection(new TextEncoder().encode("x,y,z\n1,2,3\n"));
    expect(error.exitCode).toBe(ExitCode.input);
    expect(error.message).toContain("survey/dem.tif");
    expect(error.message).toMatch(/not a TIFF/);
  });

  it("a rotated grid (ModelTransformation with rotation terms, OGC GeoTIFF 1.1 §B.6)", async () => {
    const c = Math.cos(0.3), s = Math.sin(0.3);
    const error = await rejection(tiffWith({
      ModelTransformation: [10 * c, -10 * s, 0, 1000, 10 * s, -10 * c, 0, 2000, 0, 0, 0, 0, 0, 0, 0, 1],
    }));
    expect(error.message).toContain("survey/dem.tif");
    expect(error.message).toMatch(/rotated or sheared/);
  });

  it("non-square cells", async () => {
    const error = await rejection(tiffWith({ ModelPixelScale: [10, 5, 0], ModelTiepoint: [0, 0, 0, 1000, 2000, 0] }));
    expect(error.message).toContain("survey/dem.tif");
    expect(error.message).toMatch(/not square/);
  });

  it("pixel-is-point tie point is a cell centre (OGC GeoTIFF 1.1 raster space, PixelIsPoint)", async () => {
    const grid = await decodeGeoTiff(
      tiffWith({ GTRasterTypeGeoKey: 2, ModelPixelScale: [10, 10, 0], ModelTiepoint: [0, 0, 0, 1000, 2000, 0] }),
      "t.tif",
    );
    // Raster (0, 0) is the first cell's centre, so the grid corner is half a cell to the north-west.
    expect(grid.spec).toEqual({ xmin: 995, ymax: 2005, xmax: 1025, ymin: 1985, cell: 10, cols: 3, rows: 2 });
  });

  it("accepts an axis-aligned ModelTransformation", async () => {
    const grid = await decodeGeoTiff(
      tiffWith({ ModelTransformation: [10, 0, 0, 1000, 0, -10, 0, 2000, 0, 0, 0, 0, 0, 0, 0, 1] }),
      "t.tif",
    );
    expect(grid.spec).toEqual({ xmin: 1000, ymax: 2000, xmax: 1030, ymin: 1980, cell: 10, cols: 3, rows: 2 });
  });
});

// ---- Cross-check with GDAL (gdalinfo from Debian gdal-bin) ----

function findGdalinfo(): boolean {
  const probe = spawnSync("gdalinfo", ["--version"], { encoding: "utf8" });
  return probe.status === 0;
}
const haveGdal = findGdalinfo();
const skipGdal = !haveGdal && !process.env.CI;
if (skipGdal) console.warn("gdalinfo not found: GDAL cross-checks skipped (they fail instead when CI is set)");

// deno-lint-ignore no-explicit-any
type GdalInfo = any;

describe.skipIf(skipGdal)("GeoTIFF as read by GDAL's gdalinfo", () => {
  const dir = mkdtempSync(join(tmpdir(), "rbfield-gdal-"));
  afterAll(() => rmSync(dir, { recursive: true, force: true }));

  function gdalinfo(grid: GridValues, name: string, options?: { nodata?: number; band?: BandText }): GdalInfo {
    const file = join(dir, name);
    writeFileSync(file, encodeGeoTiff(grid, options));
    const run = spawnSync("gdalinfo", ["-json", "-stats", file], { encoding: "utf8" });
    expect(run.error, "gdalinfo must be installed (Debian gdal-bin)").toBeUndefined();
    expect(run.status, run.stderr).toBe(0);
    return JSON.parse(run.stdout);
  }

  // Statistics of the valid cells, computed here from the input array.
  function expectedStats(values: Float64Array) {
    const valid = asFloat32(values).filter((v) => !Number.isNaN(v));
    const mean = valid.reduce((s, v) => s + v, 0) / valid.length;
    return { min: Math.min(...valid), max: Math.max(...valid), mean, validPercent: (100 * valid.length) / values.length };
  }

  it("projected grid EPSG:28355 with a masked cell", () => {
    const grid = sampleGrid(MGA55);
    const info = gdalinfo(grid, "mga55.tif");
    const { spec } = grid;
    expect(info.size).toEqual([spec.cols, spec.rows]);
    // GDAL geotransform: origin at the north-west corner, negative y pixel size (pixel-is-area).
    expect(info.geoTransform).toEqual([spec.xmin, spec.cell, 0, spec.ymax, 0, -spec.cell]);
    expect(info.metadata[""].AREA_OR_POINT).toBe("Area");
    const wkt: string = info.coordinateSystem.wkt;
    expect(wkt).toMatch(/^PROJCRS\[/);
    expect(wkt).toMatch(/ID\["EPSG",28355\]\]\s*$/);
    const band = info.bands[0];
    expect(band.type).toBe("Float32");
    expect(band.noDataValue).toBe(-9999);
    // The JSON min/max/mean are rounded to 3 decimals; the STATISTICS_* metadata keeps ~15 digits.
    const stats = band.metadata[""];
    const want = expectedStats(grid.values);
    expect(Number(stats.STATISTICS_MINIMUM)).toBeCloseTo(want.min, 10);
    expect(Number(stats.STATISTICS_MAXIMUM)).toBeCloseTo(want.max, 10);
    expect(Number(stats.STATISTICS_MEAN)).toBeCloseTo(want.mean, 10);
    expect(Number(stats.STATISTICS_VALID_PERCENT)).toBeCloseTo(want.validPercent, 1);
  });

  it("writes a chosen nodata value", () => {
    const info = gdalinfo(sampleGrid(MGA55), "nodata.tif", { nodata: -32768 });
    expect(info.bands[0].noDataValue).toBe(-32768);
    expect(Number(info.bands[0].metadata[""].STATISTICS_MINIMUM)).toBe(-2.125);
  });

  it("geographic grid EPSG:4326", () => {
    const grid = sampleGrid(WGS84, { xmin: 144.9, ymax: -37.8, cell: 0.001 });
    const info = gdalinfo(grid, "wgs84.tif");
    expect(info.geoTransform).toEqual([144.9, 0.001, 0, -37.8, 0, -0.001]);
    const wkt: string = info.coordinateSystem.wkt;
    expect(wkt).toMatch(/^GEOGCRS\[/);
    expect(wkt).toMatch(/ID\["EPSG",4326\]\]\s*$/);
  });

  it("names what the band holds and its unit (GDAL_METADATA roles description and unittype, GDAL's GTiff driver)", () => {
    const info = gdalinfo(sampleGrid(MGA55), "band.tif", { band: bandText("Level (m)", "values") });
    expect(info.bands[0].description).toBe("Level");
    expect(info.bands[0].unit).toBe("m");
    const se = gdalinfo(sampleGrid(MGA55), "band-se.tif", { band: bandText("Level (m)", "standard errors") });
    expect(se.bands[0].description).toBe("standard error of Level");
    expect(se.bands[0].unit).toBe("m");
    // The statistics are still those of the cells: the tag changes no value.
    expect(Number(info.bands[0].metadata[""].STATISTICS_MINIMUM)).toBe(-2.125);
  });

  it("keeps a unit beyond ASCII and XML's special characters as GDAL reads them (µg/l, <b>, quotes)", () => {
    // XML 1.0 numeric character references and entities, decoded by GDAL's XML parser.
    const info = gdalinfo(sampleGrid(MGA55), "band-ug.tif", { band: { description: "a <b> \"c\"", unit: "µg/l" } });
    expect(info.bands[0].description).toBe("a <b> \"c\"");
    expect(info.bands[0].unit).toBe("µg/l");
  });

  it("local site grid has no EPSG:4326 (geotiff.js's default) or any EPSG CRS", () => {
    const grid = sampleGrid(LOCAL);
    const info = gdalinfo(grid, "local.tif");
    expect(info.geoTransform).toEqual([grid.spec.xmin, 25, 0, grid.spec.ymax, 0, -25]);
    const wkt: string = info.coordinateSystem?.wkt ?? "";
    expect(wkt).not.toMatch(/4326/);
    expect(wkt).not.toMatch(/WGS 84/);
    expect(wkt).not.toMatch(/^(PROJCRS|GEOGCRS)\[/);
  });
});
