// Determinism: the same input and options give byte-identical outputs (the issue "Field data is
// messy"; common practice for reproducible survey deliverables). `run` is executed twice on the
// bundled sample (comments, a missing reading, a repeated shot, a blunder) into two folders and
// every output is compared byte for byte; the summary, which names its own folder, is compared
// with the folder name written the same way. Gridding on several threads must equal gridding on one.
import { RUN_OUTPUTS } from "../src/write/outputs.ts";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import * as fs from "node:fs";
import * as os from "node:os";
import * as path from "node:path";
import { fileURLToPath } from "node:url";
import { main } from "../src/cli.ts";
import { cleanPoints } from "../src/clean/clean.ts";
import { gridModel } from "../src/evaluate/grid.ts";
import { gridModelParallel } from "../src/evaluate/parallel.ts";
import { fitSurface } from "../src/fit/surface.ts";
import { parsePointTable } from "../src/read/points.ts";
import { encodeGeoTiff } from "../src/write/geotiff.ts";

const SAMPLE = fileURLToPath(new URL("../samples/kestrel-ridge-levels.csv", import.meta.url));
const FOOTINGS = fileURLToPath(new URL("../samples/kestrel-ridge-footings.csv", import.meta.url));

async function cli(args: string[]) {
  let out = "", err = "";
  const code = await main(args, { out: (s) => (out += s), err: (s) => (err += s + "\n") });
  return { code, out, err };
}

let tmp = "";
beforeAll(() => {
  tmp = fs.mkdtempSync(path.join(os.tmpdir(), "rbfield-determinism-"));
});
afterAll(() => {
  if (tmp) fs.rmSync(tmp, { recursive: true, force: true });
});

function files(dir: string): string[] {
  return fs.readdirSync(dir).sort();
}

describe("same input and options → byte-identical outputs", () => {
  it("run, twice into two folders: every output file is identical", async () => {
    const args = ["--crs", "EPSG:32632", "--locations", FOOTINGS, "--date", "2026-12-02", "--quiet"];
    const a = path.join(tmp, "first", "job");
    const b = path.join(tmp, "second", "job");
    const ra = await cli(["run", SAMPLE, "--out", a, ...args]);
    expect(ra.code, ra.err).toBe(0);
    const rb = await cli(["run", SAMPLE, "--out", b, ...args]);
    expect(rb.code, rb.err).toBe(0);

    expect(files(a)).toEqual(files(b));
    // The sample is fitted by the global method: no binary model part (written for local models only).
    expect(files(a)).toEqual(RUN_OUTPUTS.filter((o) => !o.optional).map((o) => o.file).sort());
    for (const name of files(a)) {
      let fa = fs.readFileSync(path.join(a, name));
      let fb = fs.readFileSync(path.join(b, name));
      if (name === "run-summary.txt") {
        // The summary lists the output paths; with each folder written as "<out>" the texts are equal.
        fa = Buffer.from(fa.toString("utf8").replaceAll(a, "<out>"));
        fb = Buffer.from(fb.toString("utf8").replaceAll(b, "<out>"));
        expect(fa.toString("utf8")).toContain("<out>");
      }
      expect(fa.equals(fb), `${name} differs between the two runs`).toBe(true);
    }
    // What the user sees on stdout is the summary: the same apart from the folder, too.
    expect(ra.out.replaceAll(a, "<out>")).toBe(rb.out.replaceAll(b, "<out>"));
    // No temporary or probe files are left beside the outputs.
    expect(files(a).filter((n) => n.startsWith("."))).toEqual([]);
  }, 120_000);

  it("fit, grid and contour verbs, twice with the same paths: identical bytes, including a run replacing its own output", async () => {
    const dir = path.join(tmp, "verbs");
    fs.mkdirSync(dir);
    const model = path.join(dir, "site.rbfield.json");
    const tif = path.join(dir, "surface.tif");
    const lines = path.join(dir, "contours.geojson");
    const outputs: Record<string, Buffer>[] = [];
    for (let round = 0; round < 2; round++) {
      expect((await cli(["fit", SAMPLE, "--out", model, "--crs", "EPSG:32632", "--quiet"])).code).toBe(0);
      expect((await cli(["grid", model, "--out", tif, "--cell", "2", "--quiet"])).code).toBe(0);
      expect((await cli(["contour", tif, "--out", lines, "--interval", "0.5", "--quiet"])).code).toBe(0);
      outputs.push(Object.fromEntries([model, tif, lines].map((f) => [path.basename(f), fs.readFileSync(f)])));
    }
    for (const name of Object.keys(outputs[0])) {
      expect(outputs[0][name].equals(outputs[1][name]), `${name} differs between the two rounds`).toBe(true);
    }
  }, 120_000);

  it("gridding on several threads gives the same GeoTIFF bytes as on one", async () => {
    // 150 points on a 400 × 400 grid: enough work for the parallel path (cells × points ≥ 2e7).
    const rows = ["x,y,z"];
    for (let i = 0; i < 150; i++) {
      const x = 1000 + ((i * 37) % 101) * 3.7 + (i % 7) * 0.31;
      const y = 2000 + ((i * 53) % 97) * 3.9 + (i % 5) * 0.27;
      rows.push(`${x.toFixed(2)},${y.toFixed(2)},${(10 + Math.sin(x / 40) * Math.cos(y / 55)).toFixed(4)}`);
    }
    const model = fitSurface(cleanPoints(parsePointTable(rows.join("\n") + "\n", "grid.csv")));
    const options = { cell: 1, extent: [1000, 2000, 1400, 2400] as [number, number, number, number] };
    const one = encodeGeoTiff(gridModel(model, options));
    for (const threads of [2, 3]) {
      const messages: string[] = [];
      const many = encodeGeoTiff(await gridModelParallel(model, { ...options, progress: (m) => messages.push(m) }, threads));
      // The parallel path announces its threads (src/evaluate/parallel.ts); without it this compares nothing new.
      expect(messages.join("\n")).toMatch(new RegExp(`on ${threads} threads`));
      expect(Buffer.from(many).equals(Buffer.from(one)), `${threads} threads`).toBe(true);
    }
  }, 120_000);
});
