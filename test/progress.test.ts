// Progress on stderr: a bar redrawn in place when stderr is a terminal, plain lines when it is not,
// nothing with --quiet. The terminal is a fake writer that records what the CLI sends it. Outside
// reference: ECMA-48 (5th edition, 1991) control functions, which terminals obey: CSI n G (cursor
// character absolute) returns to the start of the line, CSI 0 K / CSI 2 K (erase in line) clear to
// its end / the whole line.
import { afterAll, describe, expect, it } from "vitest";
import * as fs from "node:fs";
import * as os from "node:os";
import * as path from "node:path";
import { main } from "../src/cli.ts";
import { progressReporter, statedFraction } from "../src/cli_progress.ts";
import type { GridValues } from "../src/types.ts";
import { encodeGeoTiff } from "../src/write/geotiff.ts";

const ESC = "\u001b";
const CSI = `${ESC}[`;

const tmp = fs.mkdtempSync(path.join(os.tmpdir(), "rbfield-progress-"));
afterAll(() => fs.rmSync(tmp, { recursive: true, force: true }));

// A small invented grid, z = x + y, to contour at three levels.
const grid: GridValues = (() => {
  const cols = 40, rows = 40, values = new Float64Array(cols * rows);
  for (let r = 0; r < rows; r++) for (let c = 0; c < cols; c++) values[r * cols + c] = c + (rows - 1 - r);
  return { spec: { xmin: 0, ymin: 0, xmax: cols, ymax: rows, cell: 1, cols, rows }, values, crs: { label: "local site grid" } };
})();
const tif = path.join(tmp, "plane.tif");
fs.writeFileSync(tif, encodeGeoTiff(grid));

async function run(args: string[], terminal: boolean) {
  let out = "", err = "";
  const screen: string[] = [];
  const code = await main(args, {
    out: (s) => (out += s),
    err: (s) => (err += s + "\n"),
    terminal: terminal ? { write: (s) => void screen.push(s), columns: 100 } : undefined,
  });
  return { code, out, err, screen: screen.join("") };
}

const contour = (name: string, ...extra: string[]) => ["contour", tif, "--out", path.join(tmp, name), "--levels", "10,20,30", ...extra];

describe("progress on stderr", () => {
  it("on a terminal: a bar with its percentage, redrawn at the line start, erased at the end; no plain lines", async () => {
    const r = await run(contour("t.geojson"), true);
    expect(r.code, r.err).toBe(0);
    // The bar: the step, filled and empty cells, a percentage (the contouring loop passes its fraction).
    expect(r.screen).toMatch(/rbfield: [\u2588\u2591]{24} +\d{1,3}% contour lines at 3 levels/);
    // ECMA-48: each drawing starts at column 1 (CSI 1 G) and clears what an older, longer one left (CSI 0 K) …
    expect(r.screen).toContain(`${CSI}1Grbfield: `);
    expect(r.screen).toContain(`${CSI}0K`);
    // … and the last thing sent erases the whole line, so the summary on stdout starts on a clean one.
    expect(r.screen.endsWith(`${CSI}1G${CSI}2K`)).toBe(true);
    expect(r.err).toBe("");
    expect(r.out).toContain("Contour lines (at 10, 20 and 30 as listed, 3 within the surface's range; each an index contour)");
  });

  it("not on a terminal: one plain line per step, no escape sequence, no bar", async () => {
    const r = await run(contour("p.geojson"), false);
    expect(r.code, r.err).toBe(0);
    expect(r.screen).toBe("");
    expect(r.err.split("\n")).toContain("rbfield: contour lines at 3 levels");
    // The loop reports three fractions under one message: still one line.
    expect(r.err.split("\n").filter((l) => l.startsWith("rbfield: contour lines"))).toHaveLength(1);
    expect(r.err).not.toContain(ESC);
    expect(r.err).not.toMatch(/[\u2588\u2591]|%/);
  });

  it("--quiet: nothing on stderr, terminal or not", async () => {
    for (const terminal of [true, false]) {
      const r = await run(contour(`q${terminal}.geojson`, "--quiet"), terminal);
      expect(r.code, r.err).toBe(0);
      expect(r.err).toBe("");
      expect(r.screen).toBe("");
    }
  });

  it("an error on a terminal: the bar is erased before the one-line message", async () => {
    // Points on one line cannot carry a linear trend: the fit fails after reading has been reported.
    const points = path.join(tmp, "line.csv");
    fs.writeFileSync(points, "x,y,z\n0,0,1\n1,1,2\n2,2,3\n3,3,4\n4,4,5\n5,5,6\n");
    const r = await run(["run", points, "--out", path.join(tmp, "failed"), "--kernel", "thin-plate"], true);
    expect(r.code).toBe(5);
    expect(r.err.trim().split("\n")).toHaveLength(1);
    expect(r.screen).toContain("rbfield: reading");
    expect(r.screen.endsWith(`${CSI}1G${CSI}2K`)).toBe(true);
  });

  it("messages from input are made printable before they reach the terminal", () => {
    const screen: string[] = [], lines: string[] = [];
    const plain = progressReporter({ quiet: false, line: (s) => lines.push(s) });
    plain.progress!(`reading evil${ESC}[2Jname.csv`);
    expect(lines).toEqual(["rbfield: reading evil?[2Jname.csv"]);
    const tty = progressReporter({ quiet: false, terminal: { write: (s) => void screen.push(s) }, line: (s) => lines.push(s) });
    tty.progress!(`reading evil${ESC}[2Jname.csv`);
    tty.clear();
    expect(screen.join("")).not.toContain(`${ESC}[2J`);
  });

  it("a library message that states 'k of n' or 'k/n' gives the bar its fraction", () => {
    expect(statedFraction("gridding: row 30 of 120")).toBe(0.25);
    expect(statedFraction("shape scan 3/6")).toBe(0.5);
    expect(statedFraction("standard errors: row 101 of 101 (every 3 cells)")).toBe(1);
    expect(statedFraction("gridding 400 × 300 cells on 2 threads")).toBeUndefined();
    expect(statedFraction("reading 2024/08 survey.csv")).toBeUndefined();
  });
});
