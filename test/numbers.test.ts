// Numbers people can read: no binary floating-point artefacts in any summary line, message, map or
// report; lengths in the CRS's unit; one spelling for a local site grid; standard errors to two
// significant digits. Outside references, named beside each check: IEEE 754 binary64/binary32 (the
// artefacts a decimal number picks up, e.g. 0.1·3 = 0.30000000000000004, and 5712401.3 + 0.1·k);
// the issue's own examples of what must never print; the GUM, JCGM 100:2008 §7.2.6 (an uncertainty
// is quoted to at most two significant digits); NIST SP 811 (2008) for the unit symbols m and ft.
import { afterAll, describe, expect, it } from "vitest";
import * as fs from "node:fs";
import * as os from "node:os";
import * as path from "node:path";
import { main } from "../src/cli.ts";
import { DEMO_ARGS } from "../src/demo.ts";
import { coordinateText, crsText, fmt, formatUncertainty, lengthText, perUnitText } from "../src/text.ts";
import type { GridValues } from "../src/types.ts";
import { encodeGeoTiff } from "../src/write/geotiff.ts";

/**
 * Numbers in a text that show a binary artefact: nine or more 0s or 9s in a row after the decimal
 * point (0.30000000000000004, 0.8999999999999999), or more than 10 significant digits
 * (5712401.300000001, -6946.2939453125). Survey numbers never need more: a coordinate of 10⁷ m to
 * 0.1 mm has 11 only in theory, and rbfield rounds to the cell.
 */
function artefacts(text: string): string[] {
  const found: string[] = [];
  for (const m of text.matchAll(/\d+(?:\.\d+)?/g)) {
    const [whole, fraction = ""] = m[0].split(".");
    const significant = (whole + fraction).replace(/^0+/, "");
    if (/0{9,}|9{9,}/.test(fraction) || significant.length > 10) found.push(m[0]);
  }
  return found;
}

/** The words a reader sees in an SVG: the content of its <text> and <title> elements. */
function svgWords(svg: string): string {
  return [...svg.matchAll(/<(text|title)\b[^>]*>([^<]*)<\/\1>/g)].map((m) => m[2]).join("\n");
}

/** The words a reader sees in the report: every text node, styles and tags (and so attributes, data URIs) left out. */
function htmlWords(html: string): string {
  return html.replace(/<style[\s\S]*?<\/style>/g, " ").replace(/<[^>]+>/g, " ");
}

async function cli(args: string[]) {
  let out = "", err = "";
  const code = await main(args, { out: (s) => (out += s), err: (s) => (err += s + "\n") });
  return { code, out, err };
}

const tmp = fs.mkdtempSync(path.join(os.tmpdir(), "rbfield-numbers-"));
afterAll(() => fs.rmSync(tmp, { recursive: true, force: true }));

describe("the artefact search itself", () => {
  it("finds the issue's examples and IEEE 754 sums, and passes their rounded forms", () => {
    expect(artefacts("extent 5712401.300000001, 52.364250000000006 to -6946.2939453125")).toEqual([
      "5712401.300000001",
      "52.364250000000006",
      "6946.2939453125",
    ]);
    expect(artefacts(`${0.1 * 3} ${1 - 0.1 - 0.1 - 0.1 - 0.1 - 0.1 - 0.1 - 0.1 - 0.1 - 0.1}`)).toHaveLength(2);
    expect(artefacts("extent 5712401.3, 52.36425 to -6946.294; line 467; 400 × 300 cells; 2026-12-02")).toEqual([]);
  });
});

describe("the demo run (README: deno task demo)", () => {
  const out = path.join(tmp, "demo");
  const run = cli([...DEMO_ARGS, "--out", out, "--date", "2026-12-02"]);

  it("no artefact in any summary line, progress line or warning", async () => {
    const r = await run;
    expect(r.code, r.err).toBe(0);
    const summary = fs.readFileSync(path.join(out, "run-summary.txt"), "utf8");
    expect(summary).toBe(r.out);
    for (const line of [...summary.split("\n"), ...r.err.split("\n")]) expect(artefacts(line), line).toEqual([]);
    // Lengths in the CRS's unit (EPSG:32632 is in metres) and standard errors to two digits (GUM).
    expect(summary).toContain("Grid: 400 × 300 cells of 1 m, extent 512300, 5402100 to 512700, 5402400 (outer cell edges)");
    expect(summary).not.toContain("map unit");
    expect(summary).toMatch(/Standard error of the surface: 0\.0\d\d? to 0\.\d\d inside the mask/);
  });

  it("no artefact in the report's text", async () => {
    expect((await run).code).toBe(0);
    const words = htmlWords(fs.readFileSync(path.join(out, "report.html"), "utf8"));
    expect(words).toContain("Kestrel Ridge");
    expect(artefacts(words)).toEqual([]);
  });

  it("no artefact in the map's text (SVG from the run's model, values labelled)", async () => {
    expect((await run).code).toBe(0);
    const svgFile = path.join(tmp, "demo-map.svg");
    const m = await cli(["map", path.join(out, "model.rbfield.json"), "--out", svgFile, "--interval", "0.5", "--relief", "--label-points", "--date", "2026-12-02", "--quiet"]);
    expect(m.code, m.err).toBe(0);
    const words = svgWords(fs.readFileSync(svgFile, "utf8"));
    expect(words).toContain("every 0.5");
    expect(artefacts(words)).toEqual([]);
    expect(artefacts(m.out)).toEqual([]);
  });
});

describe("awkward decimals: a site at 712401.3, 5712401.3 on a 0.1 grid (IEEE 754 sums)", () => {
  // Invented readings on a jittered 8 × 8 lattice with decimal coordinates and values.
  const rows = ["e,n,level"];
  for (let i = 0; i < 8; i++) {
    for (let j = 0; j < 8; j++) {
      const x = 712401.3 + 4.1 * i + 0.37 * ((3 * i + j) % 5), y = 5712401.3 + 3.9 * j + 0.29 * ((i + 2 * j) % 5);
      rows.push(`${x.toFixed(2)},${y.toFixed(2)},${(52.36425 + 0.013 * i - 0.021 * j + 0.07 * Math.sin(i + 2 * j)).toFixed(5)}`);
    }
  }
  const points = path.join(tmp, "awkward.csv");
  fs.writeFileSync(points, rows.join("\n") + "\n");
  const out = path.join(tmp, "awkward");
  const run = cli(["run", points, "--out", out, "--crs", "local", "--cell", "0.1", "--interval", "0.1", "--kernel", "thin-plate", "--date", "2026-12-02"]);

  it("summary, messages, report and map print rounded numbers, and say 'map units' for a grid whose unit is not stated", async () => {
    const r = await run;
    expect(r.code, r.err).toBe(0);
    const summary = fs.readFileSync(path.join(out, "run-summary.txt"), "utf8");
    for (const line of [...summary.split("\n"), ...r.err.split("\n")]) expect(artefacts(line), line).toEqual([]);
    // The grid's edges are 712401.3 + 0.1·k in binary arithmetic; printed rounded to the cell.
    expect(summary).toMatch(/cells of 0\.1 map units, extent 7124\d\d\.\d, 57124\d\d\.\d to 7124\d\d\.\d, 57124\d\d\.\d \(outer cell edges\)/);
    expect(artefacts(htmlWords(fs.readFileSync(path.join(out, "report.html"), "utf8")))).toEqual([]);
    const svgFile = path.join(tmp, "awkward.svg");
    const m = await cli(["map", path.join(out, "model.rbfield.json"), "--out", svgFile, "--interval", "0.1", "--label-points", "--date", "2026-12-02", "--quiet"]);
    expect(m.code, m.err).toBe(0);
    const svgText = svgWords(fs.readFileSync(svgFile, "utf8"));
    expect(artefacts(svgText)).toEqual([]);
    // No unit stated: no print scale is claimed.
    expect(svgText).toContain("No print scale: the CRS does not state its unit");
    const g = await cli(["grid", path.join(out, "model.rbfield.json"), "--out", path.join(tmp, "awkward.tif"), "--cell", "0.1", "--quiet"]);
    expect(g.code, g.err).toBe(0);
    expect(artefacts(g.out)).toEqual([]);
  });

  it("one spelling for a local site grid in the summary, the report and the map", async () => {
    expect((await run).code).toBe(0);
    const texts = [
      fs.readFileSync(path.join(out, "run-summary.txt"), "utf8"),
      htmlWords(fs.readFileSync(path.join(out, "report.html"), "utf8")),
    ];
    for (const t of texts) {
      const places = [...t.matchAll(/local (site )?grid/g)].map((m) => m.index!);
      expect(places.length).toBeGreaterThan(0);
      for (const i of places) expect(t.slice(i, i + 30)).toBe("local site grid (no EPSG code)");
    }
  });
});

describe("messages with numbers from a Float32 grid", () => {
  it("a contour interval too fine for a GeoTIFF's values names them rounded (-6946.2939453125 is a binary32 value)", async () => {
    // Float32 values as a GeoTIFF holds them: -6946.294 stored is exactly -6946.2939453125.
    const values = new Float64Array(16).map((_, i) => Math.fround(-6946.294 + i * 0.37));
    const grid: GridValues = { spec: { xmin: 0, ymin: 0, xmax: 4, ymax: 4, cell: 1, cols: 4, rows: 4 }, values, crs: { label: "local site grid" } };
    const tif = path.join(tmp, "f32.tif");
    fs.writeFileSync(tif, encodeGeoTiff(grid));
    const r = await cli(["contour", tif, "--out", path.join(tmp, "f32.geojson"), "--interval", "0.000000001", "--quiet"]);
    expect(r.code).toBe(2);
    expect(r.err).toContain("between -6946 and -6941");
    expect(artefacts(r.err)).toEqual([]);
  });
});

describe("the formatting module (src/text.ts)", () => {
  it("standard errors to two significant digits, trailing zeros kept (GUM §7.2.6)", () => {
    expect([0.01327, 0.156, 0.1, 0.0996, 156, 2.04].map((v) => formatUncertainty(v))).toEqual(["0.013", "0.16", "0.10", "0.10", "160", "2.0"]);
  });

  it("lengths in the CRS's unit (NIST SP 811 symbols), 'map units' when the CRS does not say", () => {
    expect(lengthText(2.5, { label: "EPSG:32632", epsg: 32632, unit: "metre" })).toBe("2.5 m");
    expect(lengthText(10, { label: "EPSG:2227", epsg: 2227, unit: "US survey foot" })).toBe("10 US ft");
    expect(lengthText(3, { label: "local", unit: "foot" })).toBe("3 ft");
    expect(lengthText(1, { label: "local site grid" })).toBe("1 map unit");
    expect(lengthText(0.30000000000000004, { label: "local site grid", unit: null })).toBe("0.3 map units");
    expect(perUnitText({ label: "EPSG:32632", unit: "metre" })).toBe("per m");
    expect(perUnitText({ label: "x" })).toBe("per map unit");
  });

  it("one spelling for a local site grid, whatever a model file stored", () => {
    for (const label of ["local", "local site grid", "local site grid (no EPSG code)"]) expect(crsText({ label })).toBe("local site grid (no EPSG code)");
    expect(crsText({ label: "local site grid in feet", unit: "foot" })).toBe("local site grid in feet (no EPSG code)");
    expect(crsText({ label: "EPSG:32632", epsg: 32632 })).toBe("EPSG:32632");
  });

  it("coordinates rounded to a millionth of the cell; figures to 4 significant digits", () => {
    expect(coordinateText(712401.3 + 0.1 * 3000, 0.1)).toBe("712701.3");
    expect(coordinateText(5712401.300000001, 0.1)).toBe("5712401.3");
    expect(coordinateText(-0.0000001, 1)).toBe("0");
    expect([221000, 0.003853, 1e-7, 687000000, 2.5e12, -0.8875, NaN].map((v) => fmt(v))).toEqual(["221000", "0.003853", "1e-7", "6.87e+8", "2.5e+12", "-0.8875", "—"]);
  });
});
