// Names of our own: the options renamed since the first release are refused with a one-line error
// that names the new option; version 1 model files still load and grid to the same bytes as the
// first release made (fixtures in test/fixtures/v1, made by that release); no word of the old
// vocabulary is left in the repository outside the refusal and this test.
import * as fs from "node:fs";
import * as os from "node:os";
import * as path from "node:path";
import { describe, expect, it } from "vitest";
import { main } from "../src/cli.ts";
import { decodeGeoTiff } from "../src/read/geotiff.ts";
import { encodeGeoTiff, geoTiffTags } from "../src/write/geotiff.ts";

async function cli(args: string[]): Promise<{ code: number; out: string; err: string }> {
  let out = "", err = "";
  const code = await main(args, { out: (s) => (out += s), err: (s) => (err += s + "\n") });
  return { code, out, err };
}

const here = path.dirname(new URL(import.meta.url).pathname);
const points = path.join(here, "fixtures", "bad", "good-points.csv");

describe("renamed options", () => {
  for (const [old, value, now] of [["--drift", "linear", "--trend"], ["--anisotropy", "30,2", "--stretch AZIMUTH:FACTOR"], ["--flag-threshold", "3", "--flag-level"]]) {
    it(`${old} is refused with a one-line error naming ${now} (exit 2)`, async () => {
      const tmp = fs.mkdtempSync(path.join(os.tmpdir(), "rbfield-names-"));
      const out = path.join(tmp, "m.json");
      const r = await cli(["fit", points, "--out", out, old, value]);
      expect(r.code).toBe(2);
      expect(r.err.trim().split("\n")).toHaveLength(1);
      expect(r.err).toContain(`${old} is now ${now}`);
      expect(fs.existsSync(out)).toBe(false);
    });
  }
  it("--trend and --stretch reach the model, and the summary says the stretch in words", async () => {
    const tmp = fs.mkdtempSync(path.join(os.tmpdir(), "rbfield-names-"));
    const out = path.join(tmp, "m.json");
    const r = await cli(["fit", points, "--out", out, "--kernel", "multiquadric", "--trend", "constant", "--stretch", "45:3", "--quiet"]);
    expect(r.code, r.err).toBe(0);
    const model = JSON.parse(fs.readFileSync(out, "utf8"));
    expect(model.version).toBe(2);
    expect(model.trend).toBe("constant");
    expect(model.stretch).toMatchObject({ azimuth: 45, factor: 3 });
    expect(r.out).toContain("stretched 3× along 45°");
  });
});

describe("version 1 model files", () => {
  it("load and grid to the same GeoTIFF bytes as the first release made (but for the band text added since)", async () => {
    const tmp = fs.mkdtempSync(path.join(os.tmpdir(), "rbfield-v1-"));
    const out = path.join(tmp, "grid.tif");
    const r = await cli(["grid", path.join(here, "fixtures", "v1", "v1-model.rbfield.json"), "--out", out, "--cell", "1", "--quiet"]);
    expect(r.code, r.err).toBe(0);
    const now = new Uint8Array(fs.readFileSync(out)), first = new Uint8Array(fs.readFileSync(path.join(here, "fixtures", "v1", "v1-grid.tif")));
    // The cells (the strip after the 1000-byte header), byte for byte as the first release wrote them.
    expect(now.length).toBe(first.length);
    expect(Buffer.compare(now.subarray(1000), first.subarray(1000))).toBe(0);
    // Today's file says what its band holds (GDAL_METADATA); without that tag it is the first release's file.
    const tags = await geoTiffTags(now);
    expect(tags.band?.description).toBeTruthy();
    const grid = await decodeGeoTiff(now, out);
    expect(Buffer.compare(encodeGeoTiff({ ...grid, crs: tags.crs }, { nodata: tags.nodata }), first)).toBe(0);
  });
});

describe("the old vocabulary is gone", () => {
  it('no "--drift" and no "blank" in the repository outside this test', () => {
    const root = path.resolve(here, "..");
    const hits: string[] = [];
    const walk = (dir: string) => {
      for (const e of fs.readdirSync(dir, { withFileTypes: true })) {
        if ([".git", "node_modules", "out"].includes(e.name)) continue;
        const p = path.join(dir, e.name);
        if (e.isDirectory()) walk(p);
        else if (p !== path.join(here, "names.test.ts") && !/\.(tif|png|pdf|lock)$/.test(e.name)) {
          const text = fs.readFileSync(p, "latin1");
          if (text.includes("--drift") || /blank/i.test(text)) hits.push(path.relative(root, p));
        }
      }
    };
    walk(root);
    expect(hits).toEqual([]);
  });
});
