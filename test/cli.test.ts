// End-to-end checks of the command-line tool on small files made here; outputs are read back with
// independent tools where one exists (GDAL's gdalinfo, Debian package gdal-bin).
import { RUN_OUTPUTS } from "../src/write/outputs.ts";
import { afterAll, describe, expect, it } from "vitest";
import { execFileSync } from "node:child_process";
import * as fs from "node:fs";
import * as os from "node:os";
import * as path from "node:path";
import { main } from "../src/cli.ts";
import { sheetOptions } from "../src/cli_options.ts";

async function cli(args: string[]) {
  let out = "", err = "";
  const code = await main(args, { out: (s) => (out += s), err: (s) => (err += s + "\n") });
  return { code, out, err };
}

function hasGdal(): boolean {
  try {
    execFileSync("gdalinfo", ["--version"]);
    return true;
  } catch {
    return false;
  }
}

const tmp = fs.mkdtempSync(path.join(os.tmpdir(), "rbfield-cli-"));
// A plane z = 10 + 0.02 x − 0.01 y sampled on a jittered lattice (analytic surface).
const rows = ["id,easting,northing,level"];
let k = 0;
for (let i = 0; i < 8; i++) for (let j = 0; j < 8; j++) {
  const x = 1000 + 10 * i + ((i * 7 + j * 3) % 5) * 0.7, y = 2000 + 10 * j + ((i * 2 + j * 5) % 5) * 0.6;
  rows.push(`${k++},${x},${y},${(10 + 0.02 * x - 0.01 * y).toFixed(6)}`);
}
const pointsFile = path.join(tmp, "plane.csv");
fs.writeFileSync(pointsFile, rows.join("\n") + "\n");

afterAll(() => fs.rmSync(tmp, { recursive: true, force: true }));

describe("rbfield CLI", () => {
  it("fit --json prints the required keys and writes a model", async () => {
    const model = path.join(tmp, "plane.model.json");
    const r = await cli(["fit", pointsFile, "--out", model, "--crs", "EPSG:32632", "--kernel", "thin-plate", "--json", "--quiet"]);
    expect(r.code).toBe(0);
    const j = JSON.parse(r.out);
    for (const key of ["kernel", "shape", "trend", "lambda", "edf", "gcv", "loocvRmse", "n"]) expect(j).toHaveProperty(key);
    expect(j.n).toBe(64);
    expect(j.kernel).toBe("thin-plate");
    // A plane lies in the linear trend space: leave-one-out errors vanish (RBF polynomial precision).
    expect(j.loocvRmse).toBeLessThan(1e-8);
    expect(fs.existsSync(model)).toBe(true);
  });

  it("grid writes a GeoTIFF that GDAL reads with the intended origin, cell, CRS and nodata", async () => {
    const model = path.join(tmp, "plane.model.json");
    const tif = path.join(tmp, "plane.tif");
    const r = await cli(["grid", model, "--out", tif, "--cell", "2", "--extent", "1000,2000,1080,2080", "--quiet"]);
    expect(r.code).toBe(0);
    if (!hasGdal()) {
      if (process.env.CI) throw new Error("gdalinfo is required in CI");
      return;
    }
    const info = JSON.parse(execFileSync("gdalinfo", ["-json", "-stats", tif]).toString());
    // Pixel-is-area geotransform: origin at the outer north-west corner (OGC GeoTIFF 1.1).
    expect(info.geoTransform).toEqual([1000, 2, 0, 2080, 0, -2]);
    expect(info.size).toEqual([40, 40]);
    expect(JSON.stringify(info.coordinateSystem)).toContain('ID[\\"EPSG\\",32632]');
    const band = info.bands[0];
    expect(band.type).toBe("Float32");
    expect(band.noDataValue).toBe(-9999);
    // Hull mask: corners outside the jittered lattice are nodata, so valid cells are fewer than 1600.
    expect(Number(band.metadata[""].STATISTICS_VALID_PERCENT)).toBeLessThan(100);
    // Values of the plane at cell centres inside the data: within [min, max] of the plane over the extent.
    expect(band.minimum).toBeGreaterThan(10 + 0.02 * 1000 - 0.01 * 2080 - 1e-3);
    expect(band.maximum).toBeLessThan(10 + 0.02 * 1080 - 0.01 * 2000 + 1e-3);
  });

  it("predict keeps the input columns and adds an estimate equal to the plane (analytic)", async () => {
    const model = path.join(tmp, "plane.model.json");
    const locs = path.join(tmp, "locs.csv");
    fs.writeFileSync(locs, 'name,x,y\n"A, north",1030.5,2040.25\nB,1051,2062\n');
    const out = path.join(tmp, "est.csv");
    const r = await cli(["predict", model, locs, "--out", out, "--quiet"]);
    expect(r.code).toBe(0);
    const lines = fs.readFileSync(out, "utf8").split("\r\n");
    expect(lines[0]).toBe("name,x,y,estimate,std_error,nearest_reading,extrapolation");
    expect(lines[1].startsWith('"A, north",1030.5,2040.25,')).toBe(true);
    const cells = lines[1].split(",");
    const est = Number(cells.at(-4));
    // Exact data on a plane: the readings lie on the trend, so the model-based standard error is 0.
    expect(Number(cells.at(-3))).toBeLessThan(1e-6);
    expect(Math.abs(est - (10 + 0.02 * 1030.5 - 0.01 * 2040.25))).toBeLessThan(1e-8);
  });

  it("contour writes LineStrings with a numeric level; bands have lower and upper", async () => {
    const model = path.join(tmp, "plane.model.json");
    const out = path.join(tmp, "c.geojson");
    expect((await cli(["contour", model, "--out", out, "--interval", "0.2", "--quiet"])).code).toBe(0);
    const fc = JSON.parse(fs.readFileSync(out, "utf8"));
    expect(fc.type).toBe("FeatureCollection");
    expect(fc.features.length).toBeGreaterThan(0);
    for (const f of fc.features) {
      expect(["LineString", "MultiLineString"]).toContain(f.geometry.type);
      expect(typeof f.properties.level).toBe("number");
    }
    const bandsOut = path.join(tmp, "b.geojson");
    expect((await cli(["contour", path.join(tmp, "plane.tif"), "--out", bandsOut, "--interval", "0.2", "--bands", "--quiet"])).code).toBe(0);
    const bands = JSON.parse(fs.readFileSync(bandsOut, "utf8"));
    for (const f of bands.features) {
      expect(["Polygon", "MultiPolygon"]).toContain(f.geometry.type);
      expect(f.properties.upper - f.properties.lower).toBeCloseTo(0.2, 9);
    }
  });

  it("run writes every output and the summary carries the caution", async () => {
    const dir = path.join(tmp, "job");
    const r = await cli(["run", pointsFile, "--out", dir, "--quiet"]);
    expect(r.code).toBe(0);
    // Every file of the one list of outputs, and nothing else (the global method writes no binary model part).
    expect(fs.readdirSync(dir).sort()).toEqual(RUN_OUTPUTS.filter((o) => !o.optional).map((o) => o.file).sort());
    expect(r.out).toMatch(/does not replace a survey by a licensed surveyor/);
    if (hasGdal()) {
      // GDAL takes a "summary.txt" beside a GeoTIFF for satellite (ALOS) metadata; the run folder must
      // hold nothing GDAL mistakes for part of the grid (gdalinfo lists the files it reads).
      const info = JSON.parse(execFileSync("gdalinfo", ["-json", path.join(dir, "surface.tif")]).toString());
      expect(info.files).toEqual([path.join(dir, "surface.tif")]);
    }
    expect(fs.readFileSync(path.join(dir, "run-summary.txt"), "utf8")).toMatch(/CAUTION/);
  });

  it("errors are one line with a non-zero exit code and no output file", async () => {
    const out = path.join(tmp, "never.json");
    const bad = path.join(tmp, "bad.csv");
    fs.writeFileSync(bad, "x,y,z\n1,2,3\n4,5,6,7\n");
    const r = await cli(["fit", bad, "--out", out]);
    expect(r.code).toBe(3);
    expect(r.err.trim().split("\n")).toHaveLength(1);
    expect(r.err).toMatch(/bad\.csv, line 3, column 7/);
    expect(fs.existsSync(out)).toBe(false);
    expect((await cli(["fit", pointsFile, "--out", pointsFile])).code).toBe(4);
    expect((await cli(["fit", pointsFile, "--out", out, "--kernel", "spline"])).code).toBe(2);
    expect((await cli(["frobnicate"])).code).toBe(2);
  });

  it("model options reach the fit: --transform log, --weight, --stretch, --select, --flag-level", async () => {
    // Concentrations exp(plane) are reproduced exactly in log space (analytic); weights and
    // the stretch are recorded in the model; the selection ranks by leave-one-out RMSE.
    const conc = ["x,y,conc,w"];
    for (let i = 0; i < 30; i++) {
      const x = (i * 37) % 100, y = (i * 53) % 97;
      conc.push(`${x},${y},${Math.exp(1 + 0.01 * x - 0.02 * y).toFixed(12)},${1 + (i % 3)}`);
    }
    const file = path.join(tmp, "conc.csv");
    fs.writeFileSync(file, conc.join("\n") + "\n");
    const out = path.join(tmp, "conc.json");
    const r = await cli([
      "fit", file, "--out", out, "--z", "conc", "--transform", "log", "--weight", "w", "--stretch", "30:2",
      "--select", "loocv", "--flag-level", "0.01", "--json", "--quiet",
    ]);
    expect(r.code, r.err).toBe(0);
    const j = JSON.parse(r.out);
    expect(j.transform).toBe("log");
    expect(j.stretch.azimuth).toBe(30);
    expect(j.stretch.factor).toBe(2);
    expect(j.selection.by).toBe("loocv");
    const model = JSON.parse(fs.readFileSync(out, "utf8"));
    expect(model.points.weight).toHaveLength(30);
    expect(model.diagnostics.flags.level).toBe(0.01);
    expect(j.flagTest.level).toBe(0.01);
    const locs = path.join(tmp, "conc-locs.csv");
    fs.writeFileSync(locs, "x,y\n50,40\n");
    const est = path.join(tmp, "conc-est.csv");
    expect((await cli(["predict", out, locs, "--out", est, "--quiet"])).code).toBe(0);
    const value = Number(fs.readFileSync(est, "utf8").split("\r\n")[1].split(",")[2]);
    expect(Math.abs(value - Math.exp(1 + 0.5 - 0.8)) / Math.exp(0.7)).toBeLessThan(1e-6);
    const bad = await cli(["fit", file, "--out", out, "--stretch", "30", "--quiet"]);
    expect(bad.code).toBe(2);
    expect(bad.err).toContain("--stretch must be AZIMUTH:FACTOR");
  });

  it("every verb has --help", async () => {
    for (const verb of ["fit", "grid", "contour", "predict", "run"]) {
      const r = await cli([verb, "--help"]);
      expect(r.code).toBe(0);
      expect(r.out).toMatch(new RegExp(`Usage: deno task rbfield ${verb}`));
    }
  });
});

describe("option text people type (common practice: paper names are written A3, a3 or Letter alike)", () => {
  it("--paper takes any case and gives the canonical name; --orientation too; other names are refused", () => {
    expect(sheetOptions({ paper: "a3" }).paper).toBe("A3");
    expect(sheetOptions({ paper: "Letter" }).paper).toBe("letter");
    expect(sheetOptions({ paper: "TABLOID", orientation: "Portrait" })).toMatchObject({ paper: "tabloid", orientation: "portrait" });
    expect(() => sheetOptions({ paper: "a5" })).toThrow(/--paper must be one of A4, A3, A1, letter, tabloid/);
  });

  it("an option of another verb says which verb takes it, in one line (exit 2, nothing written)", async () => {
    const out = path.join(tmp, "scale-run");
    const r = await cli(["run", pointsFile, "--scale", "500", "--out", out]);
    expect(r.code).toBe(2);
    expect(r.err.trim().split("\n")).toHaveLength(1);
    expect(r.err).toContain("run: --scale is an option of 'map', not of 'run': deno task rbfield map MODEL --scale 500 --out …");
    expect(r.err).not.toContain("positional argument");
    expect(fs.existsSync(out)).toBe(false);
    // Taken by several verbs: all are named.
    const s = await cli(["fit", pointsFile, "--cell", "2", "--out", path.join(tmp, "cell.json")]);
    expect(s.err).toContain("fit: --cell is an option of 'grid', 'contour', 'run', 'map' and 'report', not of 'fit'");
    // Taken by no verb: unknown, with the verb's help.
    const u = await cli(["run", pointsFile, "--bogus", "--out", out]);
    expect(u.code).toBe(2);
    expect(u.err.trim()).toBe("rbfield: run: unknown option --bogus (see 'deno task rbfield run --help')");
  });
});
