// Grids in tiles (src/evaluate/tiles.ts; `grid MODEL --tile COL,ROW --tile-size S` and the `tiles`
// verb): a grid put together from every tile is the same file, byte for byte, as the grid written
// whole (issue 10, item 7), for a local and a global model, with the hull and a polygon mask, values
// and standard errors. Each tile's georeferencing is read back with GDAL's gdalinfo (Debian
// gdal-bin): its origin is the whole grid's origin moved by whole cells (pixel-is-area geotransform,
// OGC GeoTIFF 1.1). Bad sets of tiles are refused with an exit code, one line and no output file
// (README "When something is wrong").
import { spawnSync } from "node:child_process";
import * as fs from "node:fs";
import * as os from "node:os";
import * as path from "node:path";
import process from "node:process";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { main } from "../src/cli.ts";
import { gaussian } from "../src/random.ts";
import { franke, makePoints, mulberry32 } from "./helpers.ts";

const haveGdal = spawnSync("gdalinfo", ["--version"], { encoding: "utf8" }).status === 0;
const skipGdal = !haveGdal && !process.env.CI;
if (skipGdal) console.warn("gdalinfo not found: the tiles' georeferencing is not read back with GDAL (it fails instead when CI is set)");

async function cli(args: string[]) {
  let out = "", err = "";
  const code = await main(args, { out: (s) => (out += s), err: (s) => (err += s + "\n") });
  return { code, out, err };
}

function gdalinfo(file: string): { geoTransform: number[]; size: number[]; bands: { metadata: Record<string, Record<string, string>> }[] } {
  const run = spawnSync("gdalinfo", ["-json", "-stats", file], { encoding: "utf8" });
  expect(run.status, run.stderr).toBe(0);
  return JSON.parse(run.stdout);
}

const bytes = (file: string) => new Uint8Array(fs.readFileSync(file));

// The site: UTM zone 32N (EPSG:32632), readings inside [X0 + 100, X0 + 800] × [Y0 + 50, Y0 + 500];
// the grid reaches beyond the readings so the hull cuts through tiles: 37 × 23 cells of 25 m, in
// tiles of 10 cells (4 × 3 tiles, the last column 7 cells wide and the last row 3 cells high).
const X0 = 500000, Y0 = 5000000, CELL = 25, COLS = 37, ROWS = 23, SIZE = 10;
const EXTENT = `${X0},${Y0},${X0 + COLS * CELL},${Y0 + ROWS * CELL}`;
const TILES_ACROSS = Math.ceil(COLS / SIZE), TILES_DOWN = Math.ceil(ROWS / SIZE);

let tmp = "";
const models: Record<"local" | "global", string> = { local: "", global: "" };
let maskFile = "";
let totalPoints = 0;

/** Noisy readings of Franke's function (Franke 1982) over the site, written as CSV. */
function pointsCsv(file: string, n: number, seed: number) {
  const g = gaussian(mulberry32(seed + 1));
  const pts = makePoints(n, seed, (x, y) => 100 + 10 * franke(x, y) + 0.05 * g());
  const rows = ["easting,northing,level"];
  for (let i = 0; i < n; i++) rows.push(`${(X0 + 100 + 700 * pts.x[i]).toFixed(3)},${(Y0 + 50 + 450 * pts.y[i]).toFixed(3)},${pts.z[i].toFixed(4)}`);
  fs.writeFileSync(file, rows.join("\n") + "\n");
}

beforeAll(async () => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "rbfield-tiles-"));
  // Local: 400 points in patches of about 60 (so tiles use only the patches that reach them); global: 300 points.
  totalPoints = 400;
  pointsCsv(path.join(tmp, "local.csv"), 400, 11);
  pointsCsv(path.join(tmp, "global.csv"), 300, 12);
  models.local = path.join(tmp, "local.rbfield.json");
  models.global = path.join(tmp, "global.rbfield.json");
  const FAST = ["--kernel", "thin-plate", "--trend", "linear", "--crs", "EPSG:32632", "--quiet"];
  const l = await cli(["fit", path.join(tmp, "local.csv"), "--out", models.local, "--method", "local", "--patch-points", "60", ...FAST]);
  expect(l.code, l.err).toBe(0);
  const g = await cli(["fit", path.join(tmp, "global.csv"), "--out", models.global, "--method", "global", ...FAST]);
  expect(g.code, g.err).toBe(0);
  // A field boundary with a notch and a hole, crossing tile edges (in the points' CRS).
  maskFile = path.join(tmp, "field.geojson");
  const ring = [[X0 + 60, Y0 + 30], [X0 + 880, Y0 + 30], [X0 + 880, Y0 + 540], [X0 + 430, Y0 + 540], [X0 + 430, Y0 + 300], [X0 + 60, Y0 + 300], [X0 + 60, Y0 + 30]];
  const hole = [[X0 + 600, Y0 + 120], [X0 + 600, Y0 + 210], [X0 + 720, Y0 + 210], [X0 + 720, Y0 + 120], [X0 + 600, Y0 + 120]];
  fs.writeFileSync(maskFile, JSON.stringify({ type: "Polygon", coordinates: [ring, hole] }));
}, 120_000);
afterAll(() => {
  if (tmp) fs.rmSync(tmp, { recursive: true, force: true });
});

/** Every tile of a grid (values and standard errors) and the whole grid, written under `name`. */
async function gridInTiles(model: string, name: string, extra: string[], o: { cols?: number; rows?: number; size?: number; extent?: string; cell?: number } = {}) {
  const size = o.size ?? SIZE, cell = o.cell ?? CELL;
  const layout = ["--extent", o.extent ?? EXTENT, "--cell", String(cell), ...extra, "--quiet"];
  const whole = path.join(tmp, `${name}.tif`), wholeSe = path.join(tmp, `${name}.se.tif`);
  const w = await cli(["grid", model, "--out", whole, "--stderr", wholeSe, ...layout, "--json"]);
  expect(w.code, w.err).toBe(0);
  const wholeJson = JSON.parse(w.out);
  const across = Math.ceil((o.cols ?? COLS) / size), down = Math.ceil((o.rows ?? ROWS) / size);
  const tiles: string[] = [], seTiles: string[] = [], json: Record<string, unknown>[] = [];
  for (let r = 0; r < down; r++) {
    for (let c = 0; c < across; c++) {
      const t = path.join(tmp, `${name}.${c}-${r}.tif`), s = path.join(tmp, `${name}.${c}-${r}.se.tif`);
      const res = await cli(["grid", model, "--out", t, "--stderr", s, ...layout, "--tile", `${c},${r}`, "--tile-size", String(size), "--json"]);
      expect(res.code, res.err).toBe(0);
      tiles.push(t);
      seTiles.push(s);
      json.push(JSON.parse(res.out));
    }
  }
  return { whole, wholeSe, wholeJson, tiles, seTiles, json };
}

async function assemble(tiles: string[], out: string) {
  const r = await cli(["tiles", ...tiles, "--out", out, "--quiet"]);
  expect(r.code, r.err).toBe(0);
  return out;
}

describe("a grid in tiles equals the grid written whole", () => {
  for (const method of ["local", "global"] as const) {
    for (const mask of ["hull", "polygon"] as const) {
      it(`${method} model, ${mask} mask: values and standard errors put together are byte-identical`, async () => {
        const name = `${method}-${mask}`;
        const g = await gridInTiles(models[method], name, mask === "polygon" ? ["--mask", maskFile] : []);
        expect(g.wholeJson.cols).toBe(COLS);
        expect(g.wholeJson.rows).toBe(ROWS);
        expect(g.tiles.length).toBe(TILES_ACROSS * TILES_DOWN);
        // Shuffled order: the tiles verb places each tile by its description, not by the order given.
        const order = [...g.tiles.keys()].reverse();
        const values = await assemble(order.map((i) => g.tiles[i]), path.join(tmp, `${name}.assembled.tif`));
        const errors = await assemble(order.map((i) => g.seTiles[i]), path.join(tmp, `${name}.assembled.se.tif`));
        expect(Buffer.compare(bytes(values), bytes(g.whole)), "assembled values differ from the whole grid").toBe(0);
        expect(Buffer.compare(bytes(errors), bytes(g.wholeSe)), "assembled standard errors differ from the whole grid's").toBe(0);
        if (method === "local") {
          // A local model's tile is computed from the patches that reach it (issue 10, item 7): a corner tile uses fewer than all points.
          const used = g.json.map((j) => j.points as number);
          expect(Math.min(...used)).toBeLessThan(totalPoints);
          for (const j of g.json) expect(j.patches).toBeGreaterThan(0);
        } else {
          for (const j of g.json) expect(j.patches).toBeNull();
        }
      });
    }
  }

  it("standard errors on a coarser lattice (stride 2) cross tile edges the same way: byte-identical", async () => {
    // 251 × 203 cells × 300² per cell is above the full-grid work limit (STDERR_FULL_WORK 4·10⁹), so
    // the standard errors are computed every 2nd cell and interpolated; tiles of 64 cut the lattice
    // at odd places and at the grid's edge.
    const cols = 251, rows = 203, cell = 4;
    const g = await gridInTiles(models.global, "global-stride", ["--mask", "none"], { cols, rows, size: 64, cell, extent: `${X0},${Y0},${X0 + cols * cell},${Y0 + rows * cell}` });
    expect(g.wholeJson.stderrStride).toBe(2);
    for (const j of g.json) expect(j.stderrStride).toBe(2);
    const values = await assemble(g.tiles, path.join(tmp, "global-stride.assembled.tif"));
    const errors = await assemble(g.seTiles, path.join(tmp, "global-stride.assembled.se.tif"));
    expect(Buffer.compare(bytes(values), bytes(g.whole))).toBe(0);
    expect(Buffer.compare(bytes(errors), bytes(g.wholeSe))).toBe(0);
  });

  it("a breakline model (the invented Heron Lane strings) on two threads: byte-identical, from the whole model", async () => {
    // A breakline model's sides are found per disc over all patches, so every tile uses the whole
    // model; its buffers go to each worker thread afresh (240 × 154 cells of 0.5 m start workers).
    const heron = path.join(path.dirname(new URL(import.meta.url).pathname), "..", "samples", "heron-lane-strings.csv");
    const model = path.join(tmp, "heron.rbfield.json");
    const f = await cli(["fit", heron, "--crs", "local:m", "--x", "easting", "--y", "northing", "--z", "level", "--strings", "code=KT,CH,CL,BT,BB,DT,DI", "--out", model, "--quiet"]);
    expect(f.code, f.err).toBe(0);
    const g = await gridInTiles(model, "heron", [], { cols: 240, rows: 154, size: 128, cell: 0.5, extent: "0,1.5,120,78.5" });
    const values = await assemble(g.tiles, path.join(tmp, "heron.assembled.tif"));
    const errors = await assemble(g.seTiles, path.join(tmp, "heron.assembled.se.tif"));
    expect(Buffer.compare(bytes(values), bytes(g.whole))).toBe(0);
    expect(Buffer.compare(bytes(errors), bytes(g.wholeSe))).toBe(0);
    // Every tile names the whole model as what it was computed from.
    for (const j of g.json) expect([j.patches, j.points]).toEqual([g.json[0].patches, g.json[0].points]);
  }, 120_000);

  it.skipIf(skipGdal)("each tile's origin (gdalinfo) is the whole grid's moved by whole cells; tiles are cut at the grid's edge", async () => {
    const name = "local-hull";
    const whole = gdalinfo(path.join(tmp, `${name}.tif`));
    // Pixel-is-area: origin at the outer north-west corner, cell 25, rows going south (OGC GeoTIFF 1.1).
    expect(whole.geoTransform).toEqual([X0, CELL, 0, Y0 + ROWS * CELL, 0, -CELL]);
    expect(whole.size).toEqual([COLS, ROWS]);
    // The hull cuts through the grid: some cells are nodata, most are not.
    const valid = Number(whole.bands[0].metadata[""].STATISTICS_VALID_PERCENT);
    expect(valid).toBeGreaterThan(30);
    expect(valid).toBeLessThan(100);
    for (let r = 0; r < TILES_DOWN; r++) {
      for (let c = 0; c < TILES_ACROSS; c++) {
        for (const file of [`${name}.${c}-${r}.tif`, `${name}.${c}-${r}.se.tif`]) {
          const info = gdalinfo(path.join(tmp, file));
          const [ox, dx, rx, oy, ry, dy] = info.geoTransform;
          expect([dx, rx, ry, dy]).toEqual([CELL, 0, 0, -CELL]);
          // Whole cells from the whole grid's origin: c·S cells east, r·S cells south.
          expect((ox - whole.geoTransform[0]) / CELL).toBe(c * SIZE);
          expect((whole.geoTransform[3] - oy) / CELL).toBe(r * SIZE);
          expect(info.size).toEqual([Math.min(SIZE, COLS - c * SIZE), Math.min(SIZE, ROWS - r * SIZE)]);
        }
      }
    }
  });
});

describe("bad tiles are refused: exit code, one line, no output", () => {
  const tile = (name: string, c: number, r: number, se = false) => path.join(tmp, `${name}.${c}-${r}${se ? ".se" : ""}.tif`);
  const all = (name: string, se = false) => Array.from({ length: TILES_ACROSS * TILES_DOWN }, (_, i) => tile(name, i % TILES_ACROSS, Math.floor(i / TILES_ACROSS), se));

  async function refused(args: string[], code: number, message: RegExp) {
    const out = args[args.indexOf("--out") + 1];
    const r = await cli([...args, "--quiet"]);
    expect(r.code, r.err).toBe(code);
    expect(r.err.trim().split("\n"), r.err).toHaveLength(1);
    expect(r.err).toMatch(message);
    expect(fs.existsSync(out), `${out} must not be written`).toBe(false);
    return r.err;
  }

  it("a tile outside the grid (exit 2, the tiles there are)", async () => {
    for (const t of ["4,0", "0,3", "9,9"]) {
      const err = await refused(["grid", models.local, "--out", path.join(tmp, "outside.tif"), "--extent", EXTENT, "--cell", String(CELL), "--tile", t, "--tile-size", String(SIZE)], 2, new RegExp(`tile ${t} is not in the grid`));
      expect(err).toContain("0…3 across and 0…2 down");
    }
    await refused(["grid", models.local, "--out", path.join(tmp, "outside.tif"), "--tile", "0,0", "--tile-size", "0"], 2, /--tile-size must be a whole number/);
    await refused(["grid", models.local, "--out", path.join(tmp, "outside.tif"), "--tile", "-1,0"], 2, /--tile must be COL,ROW/);
  });

  it("a missing tile (exit 3, naming it)", async () => {
    const tiles = all("local-hull").filter((f) => f !== tile("local-hull", 3, 2));
    await refused(["tiles", ...tiles, "--out", path.join(tmp, "missing.tif")], 3, /tile 3,2 missing/);
  });

  it("tiles of two different grids: another tile size, another model, another mask, standard errors among values (exit 3)", async () => {
    const out = path.join(tmp, "mixed.tif");
    // Another tile size over the same grid.
    const other = path.join(tmp, "other-size.tif");
    expect((await cli(["grid", models.local, "--out", other, "--extent", EXTENT, "--cell", String(CELL), "--tile", "0,0", "--tile-size", "12", "--quiet"])).code).toBe(0);
    await refused(["tiles", ...all("local-hull").slice(1), other, "--out", out], 3, /is a tile of another grid \(37 × 23 cells in tiles of 12\)/);
    // The same layout from another model: the global model's tile 0,0 among the local model's tiles.
    await refused(["tiles", tile("global-hull", 0, 0), ...all("local-hull").slice(1), "--out", out], 3, /another grid \(another model, extent or mask/);
    // The same model and layout with another mask.
    await refused(["tiles", ...all("local-hull").slice(0, -1), tile("local-polygon", 3, 2), "--out", out], 3, /another grid \(another model, extent or mask/);
    // A standard-error tile among value tiles.
    await refused(["tiles", ...all("local-hull").slice(0, -1), tile("local-hull", 3, 2, true), "--out", out], 3, /holds standard errors/);
    // A whole grid is not a tile.
    await refused(["tiles", path.join(tmp, "local-hull.tif"), "--out", out], 3, /not a tile written by 'rbfield grid --tile'/);
  });

  it("a duplicate tile (exit 3): the same file twice, or a copy under another name", async () => {
    const out = path.join(tmp, "dup.tif");
    await refused(["tiles", ...all("local-hull"), tile("local-hull", 1, 1), "--out", out], 3, /tile 1,1 is given twice/);
    const copy = path.join(tmp, "copy-of-1-1.tif");
    fs.copyFileSync(tile("local-hull", 1, 1), copy);
    await refused(["tiles", ...all("local-hull"), copy, "--out", out], 3, /tile 1,1 is given twice/);
  });

  it("a tile file that is not there (exit 4)", async () => {
    await refused(["tiles", ...all("local-hull"), path.join(tmp, "no-such-tile.tif"), "--out", path.join(tmp, "absent.tif")], 4, /cannot read/);
  });
});
