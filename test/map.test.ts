/// <reference lib="dom" />
// The printed map (SVG, PDF, PNG) on an invented analytic surface: a cone z = 100 − 0.05·r, whose
// contours are circles, so every label's value can be checked against the formula at the label's
// place. Outside references, named beside each check: the cone's formula; ISO 216 and ANSI/ASME
// Y14.1 paper sizes; Debian poppler-utils (pdfinfo, pdftotext, pdfimages) for the PDF; npm pngjs (an
// independent PNG decoder) for the PNG; headless Chromium (Debian chromium) for what a browser shows;
// viridis' published end colour #fde725 (matplotlib, van der Walt & Smith 2015).
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { spawnSync } from "node:child_process";
import { mkdtempSync, rmSync, writeFileSync } from "node:fs";
import { tmpdir } from "node:os";
import { join } from "node:path";
import process from "node:process";
import { PNG } from "pngjs";
import { ExitCode, RbfieldError } from "../src/errors.ts";
import { CAUTION } from "../src/caution.ts";
import type { GridValues } from "../src/types.ts";
import { contourLevels, contourLines } from "../src/write/contours.ts";
import { indexTest, intervalRule } from "../src/write/levels.ts";
import { type MapInput, type MapOptions, renderMap } from "../src/write/map.ts";
import { decimalsOf, formatFixed } from "../src/text.ts";
import { roundStepBelow } from "../src/write/map/format.ts";
import { mapToPdf, mapToPng } from "../src/write/map/print.ts";
import { screenshot, skipChromium, startBrowser, stopBrowser, visit } from "./chromium.ts";

// ---- The invented surface ----
const X0 = 512_450, Y0 = 5_402_250;
const cone = (x: number, y: number) => 100 - 0.05 * Math.hypot(x - X0, y - Y0);
const EVIL = `<img src=x onerror=alert(1)> & "quotes" \u0007bell`;

function coneGrid(): GridValues {
  const cols = 150, rows = 150, cell = 2, xmin = 512_300, ymax = 5_402_400;
  const values = new Float64Array(cols * rows);
  for (let r = 0; r < rows; r++) {
    for (let c = 0; c < cols; c++) {
      const x = xmin + (c + 0.5) * cell, y = ymax - (r + 0.5) * cell;
      // A masked corner, as a hull mask leaves.
      values[r * cols + c] = x > 512_560 && y < 5_402_140 ? NaN : cone(x, y);
    }
  }
  return { spec: { xmin, ymax, cols, rows, cell, xmax: xmin + cols * cell, ymin: ymax - rows * cell }, values, crs: { epsg: 32632, label: "EPSG:32632" } };
}

const POINTS = [
  { x: 512_350, y: 5_402_350, value: cone(512_350, 5_402_350), flagged: false },
  { x: 512_550, y: 5_402_350, value: cone(512_550, 5_402_350), flagged: false },
  { x: 512_400, y: 5_402_180, value: cone(512_400, 5_402_180) + 1.6, flagged: true },
  { x: 512_500, y: 5_402_300, value: cone(512_500, 5_402_300), flagged: false },
];

function coneInput(overrides: Partial<MapInput> = {}): MapInput {
  const grid = coneGrid();
  const levels = contourLevels(89, 100, 0.5);
  return {
    grid,
    contours: contourLines(grid, levels, { index: indexTest(intervalRule(0.5)) }),
    levels,
    rule: intervalRule(0.5),
    points: POINTS,
    outline: [[[512_310, 5_402_110], [512_590, 5_402_110], [512_590, 5_402_390], [512_310, 5_402_390], [512_310, 5_402_110]]],
    outlineLabel: "Data outline (convex hull)",
    title: "Cone test site",
    dataFile: "cone.csv",
    date: "2026-12-02",
    crs: "EPSG:32632",
    unit: "m",
    valueName: "level",
    method: "Radial-basis-function regression: thin-plate spline with linear trend; smoothing λ = 0.1.",
    ...overrides,
  };
}

const A4_LANDSCAPE: MapOptions = { paper: "A4", orientation: "landscape", relief: true, labelPoints: true };

// ---- Reading the SVG back (its own text, parsed here) ----
const decode = (s: string) => s.replace(/&#(\d+);/g, (_, c) => String.fromCharCode(Number(c))).replace(/&amp;/g, "&").replace(/&lt;/g, "<").replace(/&gt;/g, ">");
function attrs(tag: string): Record<string, string> {
  const out: Record<string, string> = {};
  for (const m of tag.matchAll(/([\w:-]+)="([^"]*)"/g)) out[m[1]] = decode(m[2]);
  return out;
}
/** Elements named `name` inside the element with id `id` (not nested further). */
function within(svg: string, id: string): string {
  const start = svg.indexOf(`id="${id}"`);
  expect(start, `element #${id}`).toBeGreaterThan(0);
  const open = svg.lastIndexOf("<g", start);
  // Count nested <g> to find the group's end.
  let depth = 0;
  const re = /<g[\s>]|<\/g>/g;
  re.lastIndex = open;
  for (let m = re.exec(svg); m; m = re.exec(svg)) {
    depth += m[0] === "</g>" ? -1 : 1;
    if (depth === 0) return svg.slice(open, m.index);
  }
  throw new Error(`unclosed group ${id}`);
}
function texts(fragment: string): { a: Record<string, string>; text: string }[] {
  return [...fragment.matchAll(/<text([^>]*)>([^<]*)<\/text>/g)].map((m) => ({ a: attrs(m[1]), text: decode(m[2]) }));
}
const num = (s: string) => Number(s.replace("\u2212", "-"));

/** Paper ↔ ground from two labelled ticks on each axis (what a reader does with a ruler). */
function groundMapping(svg: string) {
  const all = texts(svg);
  // The i-th labelled tick of an axis (labels too close to the frame's corners are left out).
  const tick = (axis: "x" | "y", i: number) => {
    const t = all.filter((e) => e.a.id?.startsWith(`tick-${axis}-`))[i];
    return { at: Number(axis === "x" ? t.a.x : t.a.y), value: num(t.text) };
  };
  const x0 = tick("x", 0), x1 = tick("x", 1), y0 = tick("y", 0), y1 = tick("y", 1);
  const ax = (x1.value - x0.value) / (x1.at - x0.at), ay = (y1.value - y0.value) / (y1.at - y0.at);
  return {
    toGround: (px: number, py: number): [number, number] => [x0.value + (px - x0.at) * ax, y0.value + (py - y0.at) * ay],
    toPaper: (x: number, y: number): [number, number] => [x0.at + (x - x0.value) / ax, y0.at + (y - y0.value) / ay],
    ticks: { x0, x1, y0, y1 },
  };
}
function printScale(svg: string): number {
  const t = texts(svg).find((e) => e.a.id === "print-scale")!;
  const m = /1:(\d+)/.exec(t.text);
  expect(m, t.text).not.toBeNull();
  return Number(m![1]);
}

const tmp = mkdtempSync(join(tmpdir(), "rbfield-map-"));
afterAll(() => rmSync(tmp, { recursive: true, force: true }));

describe("number formatting", () => {
  it("prints decimals without floating-point artefacts (values written out by hand)", () => {
    expect(formatFixed(5712401.300000001, 1)).toBe("5712401.3");
    expect(formatFixed(0.1 + 0.2, 2)).toBe("0.30");
    expect(formatFixed(-0.0001, 2)).toBe("0.00");
    expect(formatFixed(-2.5, 1)).toBe("\u22122.5");
    expect(decimalsOf(0.1)).toBe(1);
    expect(decimalsOf(0.25)).toBe(2);
    expect(decimalsOf(5)).toBe(0);
    expect(decimalsOf(1e-7)).toBe(7);
    expect(String(roundStepBelow(0.0031))).toBe("0.002");
    expect(roundStepBelow(74)).toBe(50);
    expect(roundStepBelow(100)).toBe(100);
  });
});

describe("renderMap: contours and labels (against the cone's formula)", () => {
  const svg = renderMap(coneInput(), A4_LANDSCAPE);
  writeFileSync(join(tmp, "cone.svg"), svg);
  const labels = texts(within(svg, "contour-labels"));
  const map = groundMapping(svg);

  it("labels index contours (every fifth, multiples of 2.5 m) along the line, upright", () => {
    expect(labels.length).toBeGreaterThanOrEqual(4);
    const seen = new Set<number>();
    for (const l of labels) {
      const value = num(l.text);
      seen.add(value);
      expect(Math.abs(value / 2.5 - Math.round(value / 2.5))).toBeLessThan(1e-9);
      const rotate = /rotate\(([-\d.]+)\)/.exec(l.a.transform);
      const angle = Number(rotate![1]);
      expect(angle).toBeGreaterThan(-90);
      expect(angle).toBeLessThanOrEqual(90);
    }
    // Circles of radius 50, 100 and 150 m lie wholly inside the map: each is labelled.
    for (const level of [97.5, 95, 92.5]) expect(seen.has(level), `level ${level}`).toBe(true);
  });

  it("each label's value is the cone's value where it sits (within a tenth of the interval)", () => {
    for (const l of labels) {
      const t = /translate\(([-\d.]+) ([-\d.]+)\)/.exec(l.a.transform)!;
      const [x, y] = map.toGround(Number(t[1]), Number(t[2]));
      expect(Math.abs(cone(x, y) - num(l.text)), `label ${l.text} at ${x}, ${y}`).toBeLessThan(0.05);
    }
  });

  it("index contours are drawn heavier than the others", () => {
    const weight = (id: string) => Number(/stroke-width="([\d.]+)"/.exec(svg.slice(svg.indexOf(`id="${id}"`)))![1]);
    expect(weight("index-contours")).toBeGreaterThan(2 * weight("contours"));
    const indexLevels = [...within(svg, "index-contours").matchAll(/data-level="([-\d.]+)"/g)].map((m) => Number(m[1]));
    for (const v of indexLevels) expect(Math.abs(v / 2.5 - Math.round(v / 2.5))).toBeLessThan(1e-9);
  });

  it("shows points, the flagged blunder, the outline, legend, title block and caution", () => {
    expect((within(svg, "points").match(/<circle/g) ?? []).length).toBe(POINTS.length);
    expect((within(svg, "flagged").match(/<circle/g) ?? []).length).toBe(1);
    expect(svg).toContain('id="outline"');
    const all = texts(svg).map((t) => t.text).join(" ");
    for (const s of ["Cone test site", "cone.csv", "2026-12-02", "EPSG:32632", "every 0.5 m", "index contours every 2.5 m", "thin-plate", "Possible blunder"]) {
      expect(all).toContain(s);
    }
    expect(all.replace(/\s+/g, " ")).toContain(CAUTION);
  });

  it("prints no floating-point artefacts, even at awkward coordinates", () => {
    const grid = coneGrid();
    // Shift the grid to a decimal origin and a 0.1 m cell: sums of these are not exact in binary.
    const spec = { ...grid.spec, xmin: 712_401.3, ymax: 5_712_401.3, cell: 0.1 };
    const shifted: GridValues = { ...grid, spec: { ...spec, xmax: spec.xmin + spec.cols * 0.1, ymin: spec.ymax - spec.rows * 0.1 } };
    const levels = contourLevels(89, 100, 0.1);
    const out = renderMap({ ...coneInput(), grid: shifted, contours: contourLines(shifted, levels), levels, rule: intervalRule(0.1), points: [], outline: [] }, A4_LANDSCAPE);
    const words = texts(out).map((t) => t.text).join(" ");
    expect(words).not.toMatch(/\d\.\d*(0{5,}|9{5,})\d/);
    expect(words).toMatch(/7124\d\d(\.\d)?/);
  });
});

describe("renderMap: scale bar, ticks and print scale (measured in the SVG)", () => {
  const cases: [MapOptions, number | null][] = [
    [A4_LANDSCAPE, null],
    [{ paper: "A3", orientation: "landscape", relief: false, labelPoints: false, scale: 1250 }, 1250],
    [{ paper: "letter", orientation: "portrait", relief: false, labelPoints: false }, null],
  ];
  for (const [options, stated] of cases) {
    it(`${options.paper} ${options.orientation}, ${stated ? `1:${stated}` : "fit to page"}`, () => {
      const svg = renderMap(coneInput(), options);
      const s = printScale(svg);
      if (stated) expect(s).toBe(stated);
      // Fit to page: a common engineering scale, 1, 1.25, 2, 2.5 or 5 × 10^k.
      const mantissa = s / 10 ** Math.floor(Math.log10(s));
      expect([1, 1.25, 2, 2.5, 5].some((m) => Math.abs(m - mantissa) < 1e-9), `1:${s}`).toBe(true);
      // Scale bar: its drawn length at 1:s against its label, within 0.5 %.
      const rects = [...within(svg, "scale-bar-body").matchAll(/<rect([^>]*)\/>/g)].map((m) => attrs(m[1]));
      const left = Math.min(...rects.map((r) => Number(r.x))), right = Math.max(...rects.map((r) => Number(r.x) + Number(r.width)));
      const label = texts(within(svg, "scale-bar")).find((t) => t.a.id === "scale-bar-end")!.text;
      const metres = num(label.split(" ")[0]);
      expect(label).toMatch(/ m$/);
      expect(Math.abs(((right - left) * s) / 1000 - metres) / metres).toBeLessThan(0.005);
      // Round length: 1, 2 or 5 × 10^k.
      expect([1, 2, 5]).toContain(Math.round(metres / 10 ** Math.floor(Math.log10(metres))));
      // Ticks: distance on paper between two labelled ticks against their labels' difference.
      const { ticks } = groundMapping(svg);
      for (const [a, b] of [[ticks.x0, ticks.x1], [ticks.y0, ticks.y1]]) {
        const ground = Math.abs(b.value - a.value), paper = Math.abs(b.at - a.at);
        expect(Math.abs((paper * s) / 1000 - ground) / ground).toBeLessThan(0.005);
      }
      // Survey points: drawn distance against their coordinates.
      const circles = [...within(svg, "points").matchAll(/<circle([^>]*)\/>/g)].map((m) => attrs(m[1]));
      const [p, q] = [circles[0], circles[1]];
      const drawn = Math.hypot(Number(p.cx) - Number(q.cx), Number(p.cy) - Number(q.cy));
      const ground = Math.hypot(POINTS[0].x - POINTS[1].x, POINTS[0].y - POINTS[1].y);
      expect(Math.abs((drawn * s) / 1000 - ground) / ground).toBeLessThan(0.005);
    });
  }

  it("refuses a stated scale at which the map does not fit the paper", () => {
    let error: unknown;
    try {
      renderMap(coneInput(), { paper: "A4", orientation: "portrait", relief: false, labelPoints: false, scale: 200 });
    } catch (e) {
      error = e;
    }
    expect(error).toBeInstanceOf(RbfieldError);
    expect((error as RbfieldError).exitCode).toBe(ExitCode.usage);
    expect((error as RbfieldError).message).toMatch(/1:200.*larger paper/);
  });

  it("is byte-identical for the same input", () => {
    expect(renderMap(coneInput(), A4_LANDSCAPE)).toBe(renderMap(coneInput(), A4_LANDSCAPE));
  });
});

// ---- PDF and PNG ----
function tool(name: string): boolean {
  return spawnSync(name, ["-v"], { encoding: "utf8" }).error === undefined;
}
const skipPoppler = !tool("pdfinfo") && !process.env.CI;
if (skipPoppler) console.warn("pdfinfo not found: PDF checks skipped (they fail instead when CI is set)");
function run(cmd: string, args: string[]): string {
  const r = spawnSync(cmd, args, { encoding: "utf8" });
  expect(r.error, `${cmd} must be installed (Debian poppler-utils)`).toBeUndefined();
  expect(r.status, r.stderr).toBe(0);
  return r.stdout;
}

describe.skipIf(skipPoppler)("mapToPdf, read by poppler-utils", () => {
  // Paper sizes in millimetres from ISO 216 (A series) and ANSI/ASME Y14.1 (inches × 25.4).
  const papers: [MapOptions["paper"], MapOptions["orientation"], number, number][] = [
    ["A4", "portrait", 210, 297],
    ["A3", "landscape", 420, 297],
    ["A1", "portrait", 594, 841],
    ["letter", "landscape", 11 * 25.4, 8.5 * 25.4],
    ["tabloid", "portrait", 11 * 25.4, 17 * 25.4],
  ];
  for (const [paper, orientation, w, h] of papers) {
    it(`${paper} ${orientation}: page size within 1 pt, title block and caution as text`, async () => {
      const file = join(tmp, `${paper}-${orientation}.pdf`);
      writeFileSync(file, await mapToPdf(renderMap(coneInput(), { paper, orientation, relief: paper !== "A1", labelPoints: false })));
      const info = run("pdfinfo", [file]);
      const size = /Page size:\s+([\d.]+) x ([\d.]+) pts/.exec(info)!;
      expect(Math.abs(Number(size[1]) - (w * 72) / 25.4)).toBeLessThan(1);
      expect(Math.abs(Number(size[2]) - (h * 72) / 25.4)).toBeLessThan(1);
      expect(info).toMatch(/Pages:\s+1\b/);
      const words = run("pdftotext", [file, "-"]).replace(/\s+/g, " ");
      for (const s of ["Cone test site", "cone.csv", "2026-12-02", "EPSG:32632", "Scale 1:", CAUTION]) expect(words).toContain(s);
      // Vector output: the only raster is the colour relief (none without it); fonts are embedded.
      const images = run("pdfimages", ["-list", file]).trim().split("\n").slice(2).filter((l) => l.trim());
      expect(images.length).toBe(paper === "A1" ? 0 : 1);
      expect(run("pdffonts", [file])).toMatch(/DejaVuSans\s.*yes\s+yes/);
    });
  }

  it("is byte-identical for the same drawing", async () => {
    const svg = renderMap(coneInput(), A4_LANDSCAPE);
    expect(await mapToPdf(svg)).toEqual(await mapToPdf(svg));
  });
});

describe("mapToPng, decoded by pngjs", () => {
  it("has the size asked for and shows the relief", async () => {
    const options: MapOptions = { paper: "A4", orientation: "portrait", relief: true, labelPoints: false, shade: false };
    const svg = renderMap(coneInput(), options);
    const bytes = await mapToPng(svg, { dpi: 100 });
    const png = PNG.sync.read(Buffer.from(bytes));
    // A4 portrait at 100 dpi: 210 / 25.4 × 100 by 297 / 25.4 × 100 pixels (±1 for rounding).
    expect(Math.abs(png.width - (210 / 25.4) * 100)).toBeLessThanOrEqual(1);
    expect(Math.abs(png.height - (297 / 25.4) * 100)).toBeLessThanOrEqual(1);
    // Near the cone's apex (the highest value) the relief is viridis' top colour #fde725.
    const [px, py] = groundMapping(svg).toPaper(X0 + 6, Y0 + 6);
    const k = 4 * (Math.round((py * 100) / 25.4) * png.width + Math.round((px * 100) / 25.4));
    const rgb = [png.data[k], png.data[k + 1], png.data[k + 2]];
    expect(Math.abs(rgb[0] - 0xfd) + Math.abs(rgb[1] - 0xe7) + Math.abs(rgb[2] - 0x25), `pixel ${rgb}`).toBeLessThan(40);
    expect(await mapToPng(svg, { dpi: 100 })).toEqual(bytes);
  });
});

// ---- In a browser ----
type Quad = [number, number][];
function quadsOverlap(a: Quad, b: Quad): boolean {
  for (const poly of [a, b]) {
    for (let i = 0; i < 4; i++) {
      const [x1, y1] = poly[i], [x2, y2] = poly[(i + 1) % 4];
      const nx = y2 - y1, ny = x1 - x2;
      const pa = a.map(([x, y]) => x * nx + y * ny), pb = b.map(([x, y]) => x * nx + y * ny);
      if (Math.max(...pa) < Math.min(...pb) || Math.max(...pb) < Math.min(...pa)) return false;
    }
  }
  return true;
}
function segmentCrossesQuad(p: [number, number], q: [number, number], quad: Quad): boolean {
  const inside = ([x, y]: [number, number]) => {
    let sign = 0;
    for (let i = 0; i < 4; i++) {
      const [x1, y1] = quad[i], [x2, y2] = quad[(i + 1) % 4];
      const s = Math.sign((x2 - x1) * (y - y1) - (y2 - y1) * (x - x1));
      if (s !== 0 && sign !== 0 && s !== sign) return false;
      if (s !== 0) sign = s;
    }
    return true;
  };
  if (inside(p) || inside(q)) return true;
  const cross = (a: number[], b: number[], c: number[]) => (b[0] - a[0]) * (c[1] - a[1]) - (b[1] - a[1]) * (c[0] - a[0]);
  for (let i = 0; i < 4; i++) {
    const a = quad[i], b = quad[(i + 1) % 4];
    if (cross(p, q, a) * cross(p, q, b) < 0 && cross(a, b, p) * cross(a, b, q) < 0) return true;
  }
  return false;
}

describe.skipIf(skipChromium)("the SVG map in headless Chromium", () => {
  beforeAll(startBrowser);
  afterAll(stopBrowser);

  it("opens with no console error and no request, and input text stays text", async () => {
    const svg = renderMap(coneInput({ title: `Site ${EVIL}`, dataFile: `${EVIL}.csv`, valueName: EVIL, crs: EVIL }), A4_LANDSCAPE);
    expect(svg).not.toContain("<img");
    const file = join(tmp, "evil.svg");
    writeFileSync(file, svg);
    // A4 landscape at CSS's 96 pixels to the inch.
    const v = await visit(file, { width: Math.round((297 / 25.4) * 96), height: Math.round((210 / 25.4) * 96) });
    const shot = await screenshot(v, "map-a4-landscape.png", false);
    expect(v.console, "console").toEqual([]);
    expect(v.errors).toEqual([]);
    expect(v.dialogs, "an alert ran").toEqual([]);
    expect(v.requests, "network requests").toEqual([]);
    const seen = await v.page.evaluate(() => ({
      title: document.getElementById("title")?.textContent ?? "",
      images: document.getElementsByTagName("img").length,
      parseError: document.getElementsByTagName("parsererror").length,
    }));
    expect(seen.parseError).toBe(0);
    expect(seen.images).toBe(0);
    // The title is wrapped over lines (text elements), so compare without spaces.
    expect(seen.title.replace(/\s+/g, "")).toContain("<imgsrc=xonerror=alert(1)>");
    console.log(`screenshot: ${shot}`);
  });

  it("contour labels do not overlap each other, and no line crosses a label", async () => {
    const file = join(tmp, "labels.svg");
    writeFileSync(file, renderMap(coneInput(), A4_LANDSCAPE));
    const v = await visit(file);
    const { labels, paths } = await v.page.evaluate(() => {
      const root = document.documentElement as unknown as SVGSVGElement;
      const toRoot = root.getScreenCTM()!.inverse();
      const labels = [...document.querySelectorAll("#contour-labels text, #point-labels text")].map((t) => {
        const e = t as SVGTextElement;
        const b = e.getBBox();
        const m = toRoot.multiply(e.getScreenCTM()!);
        const corner = (x: number, y: number) => [m.a * x + m.c * y + m.e, m.b * x + m.d * y + m.f];
        return {
          kind: e.closest("#contour-labels") ? "contour" : "point",
          text: e.textContent,
          quad: [corner(b.x, b.y), corner(b.x + b.width, b.y), corner(b.x + b.width, b.y + b.height), corner(b.x, b.y + b.height)],
        };
      });
      const paths = [...document.querySelectorAll("#contours path, #index-contours path")].map((p) => p.getAttribute("d")!);
      return { labels, paths };
    });
    const contourLabels = labels.filter((l) => l.kind === "contour");
    expect(contourLabels.length).toBeGreaterThanOrEqual(4);
    // Point labels are drawn twice (halo and ink): compare each drawn label once.
    const unique = labels.filter((l, i) => labels.findIndex((m) => JSON.stringify(m.quad) === JSON.stringify(l.quad)) === i);
    for (let i = 0; i < unique.length; i++) {
      for (let j = i + 1; j < unique.length; j++) {
        expect(quadsOverlap(unique[i].quad as Quad, unique[j].quad as Quad), `${unique[i].text} / ${unique[j].text}`).toBe(false);
      }
    }
    const segments: [[number, number], [number, number]][] = [];
    for (const d of paths) {
      for (const sub of d.split("M").filter((s) => s)) {
        const pts = sub.split("L").map((p) => p.trim().split(/\s+/).map(Number) as [number, number]);
        for (let i = 0; i + 1 < pts.length; i++) segments.push([pts[i], pts[i + 1]]);
      }
    }
    for (const l of contourLabels) {
      for (const [p, q] of segments) expect(segmentCrossesQuad(p, q, l.quad as Quad), `line through label ${l.text}`).toBe(false);
    }
  });
});

describe("the colour scale of log-spaced values", () => {
  // A logarithmic scale puts v at (log v − log lo)/(log hi − log lo) of its length (the definition of
  // a log axis, common practice in plotting): on [1, 100] the value 10 sits at the middle.
  it("places the ticks 1, 2, 5 × 10ᵏ by their logarithm and names the scale", async () => {
    const { colourRamp } = await import("../src/write/map/furniture.ts");
    const x = 10, width = 100;
    const svg = colourRamp(x, 0, width, [1, 100], "values", "nitrate, log scale", 1, "t", true).svg;
    const labels = [...svg.matchAll(/<text x="([\d.]+)"[^>]*>([^<]+)<\/text>/g)].map((m) => [Number(m[1]), m[2]] as const);
    const at = new Map(labels.map(([px, label]) => [label, px]));
    expect([...at.keys()]).toEqual(["nitrate, log scale", "1", "2", "5", "10", "20", "50", "100"]);
    for (const v of [1, 2, 5, 10, 20, 50, 100]) expect(at.get(String(v))).toBeCloseTo(x + (Math.log10(v) / 2) * width, 2);
    // A linear scale on [0, 100] puts 40 at 0.4 of its length (ticks every 20).
    const linear = colourRamp(x, 0, width, [0, 100], "values", "", 1, "l").svg;
    expect(linear).toMatch(new RegExp(`<text x="${x + 0.4 * width}"[^>]*>40<`));
  });
});

describe("the grid of a map or report drawn from a model", () => {
  // Four cells per millimetre across a 250 mm frame is finer than print shows (a 0.25 mm cell; common
  // practice in cartography to sample a raster near the output resolution): without a cell given,
  // a dense survey's map is drawn on about 1000 cells along its longer side, a sparse one's on its
  // default cell. Fake models carry what the layout reads: extent, spacing, hull.
  it("is no finer than about 1000 cells along the longer side", async () => {
    const { drawingCell, defaultCell } = await import("../src/evaluate/grid.ts");
    const fake = (spacing: number) => ({ extent: { xmin: 0, ymin: 0, xmax: 1000, ymax: 600 }, spacing, hull: [[0, 0], [1000, 0], [1000, 600], [0, 600], [0, 0]] }) as never;
    // 200,000 points 0.5 m apart: default cell 0.25 m (4000 × 2400 cells); drawn at 1 m (1000 × 600).
    expect(defaultCell(fake(0.5))).toBe(0.25);
    expect(drawingCell(fake(0.5))).toBe(1);
    // A sparse survey (40 m apart): its default 5 m cell stays.
    expect(drawingCell(fake(40))).toBe(5);
  });

  // run draws its own (possibly much finer) grid on the map and in the report through drawingView.
  // The mean of a linear function over a block of cell centres is its value at the block's centre
  // (the centroid of points placed symmetrically about it): an exact check of the block means.
  it("a run's grid is drawn in blocks of k × k cells, their means, masked where any cell is", async () => {
    const { drawingView } = await import("../src/evaluate/grid.ts");
    const cols = 2500, rows = 7, cell = 0.5, xmin = 100, ymax = 50;
    const f = (x: number, y: number) => 3 + 0.25 * x - 0.5 * y;
    const values = new Float64Array(cols * rows);
    for (let r = 0; r < rows; r++) for (let c = 0; c < cols; c++) values[r * cols + c] = f(xmin + (c + 0.5) * cell, ymax - (r + 0.5) * cell);
    values[4 * cols + 10] = NaN; // masks block (row 1, column 3) of the k = 3 blocks
    const grid = { spec: { xmin, ymin: ymax - rows * cell, xmax: xmin + cols * cell, ymax, cell, cols, rows }, values, crs: { label: "local" } };
    const view = drawingView(grid);
    // k = ⌈2500 / 1000⌉ = 3: 834 × 3 blocks of 1.5 units, the north-west corner kept.
    expect(view.spec).toEqual({ xmin, ymax, cell: 1.5, cols: 834, rows: 3, xmax: xmin + 834 * 1.5, ymin: ymax - 3 * 1.5 });
    for (let r = 0; r < 2; r++) {
      for (let c = 0; c < 833; c++) {
        const v = view.values[r * 834 + c];
        if (r === 1 && c === 3) expect(v).toBeNaN();
        else expect(Math.abs(v - f(xmin + (c + 0.5) * 1.5, ymax - (r + 0.5) * 1.5))).toBeLessThan(1e-9);
      }
    }
    // A grid of at most 1000 cells a side is drawn as it is.
    const small = { ...grid, spec: { ...grid.spec, cols: 1000, rows: 7 }, values: values.subarray(0, 7000) };
    expect(drawingView(small)).toBe(small);
  });
});
