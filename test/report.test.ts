/// <reference lib="dom" />
// The HTML report on an invented survey: Franke's (1982) test function sampled at seeded random
// places, with one deliberate 1.5-unit blunder, fitted with fitSurface. Outside references, named
// beside each check: headless Chromium (Debian chromium, via playwright-core) for what a reader's
// browser does with the file (console, network, scripts, what is shown); the CSP Level 3
// specification for the policy's meaning; the model's own saved numbers for table contents.
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { mkdtempSync, rmSync, writeFileSync } from "node:fs";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { CAUTION } from "../src/caution.ts";
import { gridModel } from "../src/evaluate/grid.ts";
import { gridStandardError } from "../src/evaluate/stderr.ts";
import { fitSurface } from "../src/fit/surface.ts";
import { mapInputFromModel } from "../src/write/map.ts";
import { intervalRule } from "../src/write/levels.ts";
import { renderReport } from "../src/write/report.ts";
import { screenshot, skipChromium, startBrowser, stopBrowser, visit } from "./chromium.ts";
import { franke, makePoints } from "./helpers.ts";

const EVIL = "<img src=x onerror=alert(1)>";
const SECTIONS = ["map", "standard-error", "model", "selection", "residuals", "flagged", "input-rows", "warnings"];

// 80 points on a 100 m square at projected-looking coordinates; values in metres.
const points = makePoints(80, 7, (x, y) => 50 + 10 * franke((x - 600_000) / 100, (y - 4_100_000) / 100), 600_000, 4_100_000, 100);
const blunder = 17;
points.z[blunder] += 1.5;
const model = fitSurface(points, { source: { file: `survey ${EVIL}.csv`, x: "east", y: "north", z: EVIL }, crs: { epsg: 32633, label: "EPSG:32633" } });
const grid = gridModel(model, { cell: 1 });
const se = gridStandardError(model, grid);
const render = () =>
  renderReport({
    model,
    map: mapInputFromModel(model, grid, { rule: intervalRule(0.5), date: "2026-12-02", unit: "m", title: `Franke test site ${EVIL}` }),
    stderrGrid: se.grid,
    stderrNote: `computed every ${se.stride} cells`,
    cleaning: {
      rowsRead: 83,
      skipped: [{ line: 5, reason: `no number in column '${EVIL}'` }],
      merged: [{ x: 600_010, y: 4_100_020, lines: [30, 31], spread: 0.02, value: 51.3 }],
    },
    warnings: [`test warning ${EVIL}`],
    title: `Franke test site ${EVIL}`,
    date: "2026-12-02",
    unit: "m",
  });
const html = render();

const tmp = mkdtempSync(join(tmpdir(), "rbfield-report-"));
const file = join(tmp, "report.html");
writeFileSync(file, html);
afterAll(() => rmSync(tmp, { recursive: true, force: true }));

describe("renderReport as text", () => {
  it("is one self-contained file with a strict Content-Security-Policy (CSP Level 3) and no script", () => {
    const csp = /<meta http-equiv="Content-Security-Policy" content="([^"]+)">/.exec(html);
    expect(csp).not.toBeNull();
    const policy = Object.fromEntries(csp![1].split(";").map((d) => d.trim().split(/\s+/)).map(([k, ...v]) => [k, v]));
    expect(policy["default-src"]).toEqual(["'none'"]);
    expect(policy["img-src"]).toEqual(["data:"]);
    expect(policy["style-src"]).toHaveLength(1);
    expect(policy["style-src"][0]).toMatch(/^'sha256-[A-Za-z0-9+/]+=*'$/);
    expect(csp![1]).not.toMatch(/unsafe|script-src|\*/);
    // No script element, no javascript: address, no event-handler attribute inside any tag.
    expect(html).not.toMatch(/<script|javascript:|<[^>]*\son\w+=/i);
    // Nothing refers outside the file: no http(s) addresses in src/href attributes.
    expect(html).not.toMatch(/(src|href)="(https?:)?\/\//);
    expect(html).not.toContain(EVIL);
    expect(html).toContain("&#60;img src=x onerror=alert(1)&#62;");
  });

  it("is byte-identical for the same input", () => {
    const again = render();
    expect(again).toBe(html);
  });
});

describe.skipIf(skipChromium)("the report in headless Chromium", () => {
  beforeAll(startBrowser);
  afterAll(stopBrowser);

  it("opens offline with no console message, no request and no script run; every section is there", async () => {
    const v = await visit(file);
    const shot = await screenshot(v, "report.png");
    console.log(`screenshot: ${shot}`);
    // A CSP violation (e.g. a style hash that does not match) would appear as a console error.
    expect(v.console, "console").toEqual([]);
    expect(v.errors).toEqual([]);
    expect(v.dialogs, "an injected script ran").toEqual([]);
    expect(v.requests, "network requests").toEqual([]);
    const seen = await v.page.evaluate((ids) => ({
      sections: ids.map((id) => {
        const e = document.getElementById(id);
        const r = e?.getBoundingClientRect();
        return { id, shown: !!e && r!.height > 0 && r!.width > 0 };
      }),
      images: document.getElementsByTagName("img").length,
      scripts: document.getElementsByTagName("script").length,
      sheets: document.querySelectorAll("svg.sheet").length,
      styled: getComputedStyle(document.querySelector("h2")!).borderBottomStyle,
      text: document.body.innerText,
    }), SECTIONS);
    for (const s of seen.sections) expect(s.shown, s.id).toBe(true);
    expect(seen.images).toBe(0);
    expect(seen.scripts).toBe(0);
    expect(seen.sheets).toBe(2);
    // The inline style applied: the CSP hash matched.
    expect(seen.styled).toBe("solid");
    // Input text is shown as text.
    expect(seen.text).toContain(`Franke test site ${EVIL}`);
    expect(seen.text).toContain(`no number in column '${EVIL}'`);
    expect(seen.text).toContain(`test warning ${EVIL}`);
    expect(seen.text.replace(/\s+/g, " ")).toContain(CAUTION);
  });

  it("tables and charts carry the model's numbers", async () => {
    const v = await visit(file);
    const got = await v.page.evaluate(() => {
      const rows = (sel: string) => [...document.querySelectorAll(`${sel} tbody tr`)].map((tr) => [...tr.querySelectorAll("td")].map((td) => td.textContent ?? ""));
      const bars = [...document.querySelectorAll("#histogram-bars rect")].map((r) => Number(r.getAttribute("data-count")));
      const beyond = document.getElementById("histogram-beyond")?.textContent ?? "";
      // The chosen-λ marker and the λ axis' tick labels, as laid out (for reading λ off the axis).
      const ticks = [...document.querySelectorAll("#gcv-chart text")]
        .map((t) => ({ text: t.textContent ?? "", x: Number(t.getAttribute("x")), y: Number(t.getAttribute("y")) }));
      const marker = document.querySelector("#gcv-chosen circle");
      return {
        flagged: rows("#flagged"),
        ranking: rows("#selection"),
        modelRows: rows("#model"),
        bars,
        beyond,
        ticks,
        markerX: Number(marker?.getAttribute("cx")),
      };
    });
    // Possible blunders: exactly the model's flagged lines, the planted blunder among them.
    expect(got.flagged.map((r) => Number(r[0])).sort((a, b) => a - b)).toEqual([...model.diagnostics.flags.lines].sort((a, b) => a - b));
    expect(got.flagged.map((r) => Number(r[0]))).toContain(points.lines[blunder]);
    // Candidate ranking: one row per candidate, the chosen one marked.
    expect(got.ranking.length).toBe(model.diagnostics.selection!.ranking.length);
    expect(got.ranking.filter((r) => r[0] === "chosen").length).toBe(1);
    // Model table: n and the skipped and merged rows with their lines.
    const rowText = got.modelRows.map((r) => r.join(" ")).join("\n");
    expect(rowText).toContain(`Points used (n) ${model.diagnostics.n}`);
    expect(rowText).toMatch(/Rows skipped 1: line 5/);
    expect(rowText).toMatch(/Coincident points merged 1 group: lines 30 \+ 31/);
    // Histogram: every defined leave-one-out residual is counted once (bars plus those beyond the axis).
    const beyond = [...got.beyond.matchAll(/(\d+) (below|above)/g)].reduce((s, m) => s + Number(m[1]), 0);
    expect(got.bars.reduce((s, c) => s + c, 0) + beyond).toBe(model.loo.filter((v) => v !== null).length);
    // GCV chart: the marker sits at the model's λ on the logarithmic axis, read off two tick labels.
    const axis = got.ticks.filter((t) => /^(10|1|0\.1|0\.01|0\.001|100|1000)$|^10[⁰¹²³⁴⁵⁶⁷⁸⁹⁻]+$/.test(t.text) && t.y > 300);
    expect(axis.length).toBeGreaterThanOrEqual(2);
    const value = (t: string) => {
      const sup = /^10([⁻]?)([⁰¹²³⁴⁵⁶⁷⁸⁹]+)$/.exec(t);
      if (!sup) return Number(t);
      const digits = [...sup[2]].map((c) => "⁰¹²³⁴⁵⁶⁷⁸⁹".indexOf(c)).join("");
      return 10 ** ((sup[1] ? -1 : 1) * Number(digits));
    };
    const [a, b] = [axis[0], axis[axis.length - 1]];
    const expected = a.x + ((Math.log10(model.lambda) - Math.log10(value(a.text))) / (Math.log10(value(b.text)) - Math.log10(value(a.text)))) * (b.x - a.x);
    expect(Math.abs(got.markerX - expected)).toBeLessThan(1);
  });
});

describe("the report verb", () => {
  // The command line on a saved model: the same page as run's report (its sections, CSP and
  // caution), the cleaning rows said to be elsewhere, and a refused ending that writes nothing.
  it("writes the report of a saved model, and refuses an --out that is not .html", async () => {
    const { main } = await import("../src/cli.ts");
    const { encodeModel } = await import("../src/model/model.ts");
    const dir = mkdtempSync(join(tmpdir(), "rbfield-report-verb-"));
    try {
      const modelFile = join(dir, "site.rbfield.json");
      writeFileSync(modelFile, encodeModel(model, "site.rbfield.bin").json);
      let out = "", err = "";
      const io = { out: (s: string) => (out += s), err: (s: string) => (err += s + "\n") };
      const file = join(dir, "report.html");
      expect(await main(["report", modelFile, "--out", file, "--cell", "2", "--date", "2026-01-31", "--quiet"], io), err).toBe(0);
      const page = (await import("node:fs")).readFileSync(file, "utf8");
      expect(page).toMatch(/<meta http-equiv="Content-Security-Policy" content="default-src 'none'/);
      for (const id of SECTIONS.filter((s) => s !== "input-rows")) expect(page).toContain(`id="${id}"`);
      expect(page).toContain("not recorded in this model file");
      expect(page).toContain("2026-01-31");
      expect(out).toContain(CAUTION);
      // A model fitted from a file keeps the rows skipped and merged: its report lists them by line.
      const csv = join(dir, "levels.csv");
      writeFileSync(csv, ["id,x,y,z", "A1,0,0,10", "A2,10,0,11", "A3,0,10,12", "A4,10,10,13", "A5,5,5,oops", "A6,5,5,11.5", "A7,5,5,11.55",
        "A8,3,7,12.1", "A9,7,3,10.9", "A10,2,2,10.4", "A11,8,8,12.6", "A12,1,9,12.3"].join("\n") + "\n");
      const fitted = join(dir, "levels.rbfield.json");
      expect(await main(["fit", csv, "--out", fitted, "--quiet"], io), err).toBe(0);
      const cleaned = join(dir, "levels.html");
      expect(await main(["report", fitted, "--out", cleaned, "--quiet"], io), err).toBe(0);
      const text = (await import("node:fs")).readFileSync(cleaned, "utf8");
      expect(text).toContain("Rows skipped</td><td>1: line 6<");
      expect(text).toContain("Coincident points merged</td><td>1 group: lines 7 + 8<");
      expect(text).toContain(`id="input-rows"`);
      const pdf = join(dir, "report.pdf");
      expect(await main(["report", modelFile, "--out", pdf, "--quiet"], io)).toBe(2);
      expect(err).toMatch(/the report is written as \.html/);
      expect((await import("node:fs")).existsSync(pdf)).toBe(false);
    } finally {
      rmSync(dir, { recursive: true, force: true });
    }
  });
});

describe("the report of a local-method model", () => {
  // The local method chooses λ in each patch by GCV: the report says so (no single curve, never
  // "smoothing given") and names the method and its patches in the model table.
  it("names the method and its patches, and says λ was chosen per patch", () => {
    const pts = makePoints(400, 11, (x, y) => 50 + 10 * franke((x - 600_000) / 100, (y - 4_100_000) / 100), 600_000, 4_100_000, 100);
    const local = fitSurface(pts, { method: "local", kernel: "thin-plate", trend: "linear" });
    const page = renderReport({
      model: local,
      map: mapInputFromModel(local, gridModel(local, { cell: 2 }), { rule: intervalRule(1), date: "2026-01-31" }),
      title: "local",
      date: "2026-01-31",
    });
    expect(page).toMatch(/<td>Method<\/td><td>local \(partition of unity\): [\d,]+ patches of \d+–\d+ points/);
    expect(page).toContain("λ was chosen by GCV in each patch of the local method");
    expect(page).not.toContain("smoothing given");
  });
});
