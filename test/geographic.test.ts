// Coordinates as they arrive: latitude/longitude are projected before fitting, feet are carried to
// the GeoTIFF. Outside references: GDAL's gdaltransform and gdalinfo (Debian gdal-bin).
import { spawnSync } from "node:child_process";
import * as fs from "node:fs";
import * as os from "node:os";
import * as path from "node:path";
import process from "node:process";
import { describe, expect, it } from "vitest";
import { main } from "../src/cli.ts";
import { mulberry32 } from "../src/random.ts";

const haveGdal = spawnSync("gdaltransform", ["--version"], { encoding: "utf8" }).status === 0;
const skip = !haveGdal && !process.env.CI;

async function cli(args: string[]): Promise<{ code: number; out: string; err: string }> {
  let out = "", err = "";
  const code = await main(args, { out: (s) => (out += s), err: (s) => (err += s + "\n") });
  return { code, out, err };
}

/** lon/lat → UTM zone 31N by GDAL (the reference projection). */
function gdalUtm(lonlat: [number, number][]): [number, number][] {
  const run = spawnSync("gdaltransform", ["-s_srs", "EPSG:4326", "-t_srs", "EPSG:32631", "-output_xy"], {
    input: lonlat.map(([lon, lat]) => `${lon} ${lat}`).join("\n") + "\n",
    encoding: "utf8",
  });
  expect(run.status, run.stderr).toBe(0);
  return run.stdout.trim().split("\n").map((l) => l.trim().split(/\s+/).map(Number) as [number, number]);
}

describe.skipIf(skip)("latitude/longitude in, projected surface out (gdaltransform, gdalinfo)", () => {
  const tmp = fs.mkdtempSync(path.join(os.tmpdir(), "rbfield-geo-"));
  // A plane in UTM zone 31N coordinates, z = 10 + 0.002·(E − 626000) − 0.001·(N − 5796000), sampled at
  // random places near Amsterdam given as latitude/longitude; GDAL's projection gives the truth.
  const r = mulberry32(52);
  const lonlat: [number, number][] = Array.from({ length: 80 }, () => [4.85 + 0.015 * r(), 52.3 + 0.01 * r()]);
  const plane = ([e, n]: [number, number]) => 10 + 0.002 * (e - 626000) - 0.001 * (n - 5796000);

  it("fits in the UTM zone of the data's centre and recovers the plane at latitude/longitude places", async () => {
    const en = gdalUtm(lonlat);
    const pts = path.join(tmp, "heads.csv");
    fs.writeFileSync(pts, "lat,lon,head\n" + lonlat.map(([lon, lat], i) => `${lat.toFixed(9)},${lon.toFixed(9)},${plane(en[i]).toFixed(9)}`).join("\n") + "\n");
    const places: [number, number][] = [[4.856, 52.304], [4.861, 52.307], [4.852, 52.309]];
    const locs = path.join(tmp, "places.csv");
    fs.writeFileSync(locs, "name,lat,lon\n" + places.map(([lon, lat], i) => `P${i},${lat},${lon}`).join("\n") + "\n");
    const out = path.join(tmp, "run");
    const r1 = await cli(["run", pts, "--out", out, "--kernel", "thin-plate", "--trend", "linear", "--locations", locs, "--quiet"]);
    expect(r1.code, r1.err).toBe(0);
    expect(r1.out).toContain("projected to EPSG:32631 (WGS 84 / UTM zone 31N)");
    // The model's CRS is the result of that projection, said so beside it (not "CRS EPSG:32631" alone
    // under "Coordinates: EPSG:4326 …").
    expect(r1.out).toContain("Input: heads.csv (x = lon, y = lat, value = head); CRS EPSG:32631 (projected from EPSG:4326)");
    const truth = gdalUtm(places).map(plane);
    const rows = fs.readFileSync(path.join(out, "estimates.csv"), "utf8").trim().split("\r\n").slice(1);
    rows.forEach((row, i) => {
      const estimate = Number(row.split(",")[3]);
      // The plane's slope is 0.002 per metre: GDAL and proj4 agree to 1 mm, so 2e-6 in the value.
      expect(Math.abs(estimate - truth[i])).toBeLessThan(1e-5);
    });
    const info = JSON.parse(spawnSync("gdalinfo", ["-json", path.join(out, "surface.tif")], { encoding: "utf8" }).stdout);
    expect(info.coordinateSystem.wkt).toContain('ID["EPSG",32631]');
    expect(info.coordinateSystem.wkt).toContain('LENGTHUNIT["metre",1]');
    // What the band holds, as GDAL reads it (GDAL_METADATA, role "description").
    expect(info.bands[0].description).toBe("head");
    const se = JSON.parse(spawnSync("gdalinfo", ["-json", path.join(out, "stderr.tif")], { encoding: "utf8" }).stdout);
    expect(se.bands[0].description).toBe("standard error of head");
  });

  it("a local grid in feet carries the foot to the GeoTIFF (ProjLinearUnitsGeoKey)", async () => {
    const pts = path.join(tmp, "feet.csv");
    const rr = mulberry32(3);
    fs.writeFileSync(pts, "x,y,z\n" + Array.from({ length: 40 }, () => `${1000 * rr()},${1000 * rr()},${100 + rr()}`).join("\n") + "\n");
    const out = path.join(tmp, "feet.tif");
    const model = path.join(tmp, "feet.json");
    expect((await cli(["fit", pts, "--crs", "local:ft", "--out", model, "--kernel", "thin-plate", "--quiet"])).code).toBe(0);
    expect((await cli(["grid", model, "--out", out, "--cell", "10", "--quiet"])).code).toBe(0);
    const info = spawnSync("gdalinfo", [out], { encoding: "utf8" }).stdout;
    expect(info).toMatch(/LENGTHUNIT\["foot",0\.3048/);
  });

  it("degrees are never fitted as metres: a geographic --to-crs is refused", async () => {
    const pts = path.join(tmp, "heads.csv");
    const r2 = await cli(["fit", pts, "--out", path.join(tmp, "m.json"), "--to-crs", "EPSG:4258", "--quiet"]);
    expect(r2.code).toBe(2);
    expect(r2.err).toMatch(/geographic: give a projected CRS/);
  });
});
