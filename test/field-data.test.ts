// Data as field crews and laboratories hand it over: point numbers and codes carried to residuals.csv
// and the blunder flags, the code filter, non-detects and qualifiers, duplicates and their RPD, every
// skipped row listed, samples far from the rest. Every expected value below is worked out by hand
// from the file the test writes; the outside source of each rule is named beside its check.
import * as fs from "node:fs";
import * as os from "node:os";
import * as path from "node:path";
import fc from "fast-check";
import { afterAll, describe, expect, it } from "vitest";
import { main } from "../src/cli.ts";
import { parseMeasurement } from "../src/read/cells.ts";
import { modelFromJson } from "../src/model/model.ts";
import { mulberry32 } from "./helpers.ts";

async function cli(args: string[]): Promise<{ code: number; out: string; err: string }> {
  let out = "", err = "";
  const code = await main(args, { out: (s) => (out += s), err: (s) => (err += s + "\n") });
  return { code, out, err };
}

const tmp = fs.mkdtempSync(path.join(os.tmpdir(), "rbfield-field-"));
afterAll(() => fs.rmSync(tmp, { recursive: true, force: true }));
const FAST = ["--kernel", "thin-plate", "--trend", "linear", "--quiet"];

function write(name: string, text: string): string {
  const f = path.join(tmp, name);
  fs.writeFileSync(f, text);
  return f;
}

/** Records of a CSV file written by rbfield (RFC 4180: CRLF record ends, quoted fields with "" for a quote). */
function csvRows(file: string): string[][] {
  return fs.readFileSync(file, "utf8").split("\r\n").filter((l) => l !== "").map((l) => {
    const cells: string[] = [];
    for (let i = 0; i <= l.length;) {
      if (l[i] === '"') {
        let cell = "";
        for (i++; i < l.length; i++) {
          if (l[i] === '"' && l[i + 1] === '"') cell += l[i++];
          else if (l[i] === '"') break;
          else cell += l[i];
        }
        cells.push(cell);
        i += 2; // the closing quote and the comma
      } else {
        const end = l.indexOf(",", i) < 0 ? l.length : l.indexOf(",", i);
        cells.push(l.slice(i, end));
        i = end + 1;
      }
    }
    return cells;
  });
}

type Model = { points: { x: number[]; y: number[]; z: number[]; line: number[]; text?: { name: string; role: string; values: string[] }[] }; extent: Record<string, number> };
const readModel = (file: string): Model => JSON.parse(fs.readFileSync(file, "utf8"));
/** The fitted value of the point whose id text is `id`. */
function valueOf(model: Model, id: string): number | undefined {
  const ids = model.points.text?.find((t) => t.role === "id")?.values ?? [];
  const i = ids.indexOf(id);
  return i < 0 ? undefined : model.points.z[i];
}

describe("laboratory values: the number grammar (README 'Non-detects'; qualifiers as in the US EPA National Functional Guidelines)", () => {
  it("reads non-detects, qualified numbers and rejected values, and nothing else", () => {
    // "<0.5": below a detection limit of 0.5 written in the cell.
    expect(parseMeasurement("<0.5", false)).toEqual({ kind: "non-detect", limit: 0.5, qualifier: "<" });
    expect(parseMeasurement("< 0,5", true)).toEqual({ kind: "non-detect", limit: 0.5, qualifier: "<" });
    // Limit not written: "< DL", "ND", "n.d.", German "n.n." (nicht nachweisbar), "BDL".
    for (const cell of ["< DL", "<LOD", "ND", "n.d.", "n.n.", "BDL"]) {
      expect(parseMeasurement(cell, false), cell).toEqual({ kind: "non-detect", limit: null, qualifier: cell });
    }
    // EPA U / UJ: not detected at the reported value.
    expect(parseMeasurement("0.5 U", false)).toEqual({ kind: "non-detect", limit: 0.5, qualifier: "U" });
    expect(parseMeasurement("0.5UJ", false)).toEqual({ kind: "non-detect", limit: 0.5, qualifier: "UJ" });
    // EPA J (estimated) and lab symbols: the number is used, the qualifier kept.
    expect(parseMeasurement("0,8 J", true)).toEqual({ kind: "number", value: 0.8, qualifier: "J" });
    expect(parseMeasurement("12,4*", true)).toEqual({ kind: "number", value: 12.4, qualifier: "*" });
    expect(parseMeasurement("3.1J", false)).toEqual({ kind: "number", value: 3.1, qualifier: "J" });
    // EPA R: rejected, not to be used.
    expect(parseMeasurement("9.0 R", false)).toEqual({ kind: "rejected", value: 9, qualifier: "R" });
    // Not measurements: missing, not analysed, above the range, words and units.
    for (const cell of ["", "n/a", "n.a.", ">1000", "12abc", "abc", "<", "1,2,3 J", "--"]) expect(parseMeasurement(cell, false), cell).toBeNull();
  });

  it("never throws; numbers and limits are finite, limits not negative; a plain number keeps its meaning (fast-check)", () => {
    const pieces = fc.constantFrom("<", " ", "0", "5", ".", ",", "-", "e", "J", "U", "R", "ND", "n.", "*", "#", "DL", "x", "\u2020");
    fc.assert(
      fc.property(fc.array(pieces, { maxLength: 12 }).map((a) => a.join("")), fc.boolean(), (cell, comma) => {
        const m = parseMeasurement(cell, comma);
        if (m === null) return;
        if (m.kind === "non-detect") expect(m.limit === null || (Number.isFinite(m.limit) && m.limit >= 0)).toBe(true);
        else expect(Number.isFinite(m.value)).toBe(true);
      }),
      { seed: 2012, numRuns: 5000 },
    );
    // A plain decimal number (the grammar of parseNumber) is always that number, unqualified.
    fc.assert(
      fc.property(fc.double({ noNaN: true, noDefaultInfinity: true, min: -1e12, max: 1e12 }), (v) => {
        expect(parseMeasurement(String(v), false)).toEqual({ kind: "number", value: Number(String(v)), qualifier: "" });
      }),
      { seed: 2006, numRuns: 2000 },
    );
  });
});

describe("non-detects and qualifiers in a laboratory file (semicolon, decimal commas)", () => {
  // Thirteen wells; the value column holds what German and US laboratories write. Lines 2–14.
  const lab = write(
    "wells.csv",
    [
      "site;easting;northing;concentration;DL",
      "W01;1000,0;2000,0;12,4*;0,1", // line 2: 12.4, qualifier *
      "W02;1100,0;2000,0;<0,5;0,5", // 3: non-detect, limit 0.5 in the cell
      "W03;1200,0;2000,0;ND;0,4", // 4: non-detect, limit 0.4 from column DL
      "W04;1000,0;2100,0;n.n.;", // 5: non-detect, limit from --detection-limit 0.2
      "W05;1100,0;2100,0;0,8 J;0,1", // 6: 0.8, qualifier J
      "W06;1200,0;2100,0;3,5;0,1",
      "W07;1000,0;2200,0;< DL;0,3", // 8: non-detect, limit 0.3 from column DL
      "W08;1100,0;2200,0;7,25;0,1",
      "W09;1200,0;2200,0;5,1;0,1",
      "W10;1050,0;2050,0;2,2;0,1",
      "W11;1150,0;2150,0;4,4;0,1",
      "W12;1050,0;2150,0;0,5 U;0,5", // 13: non-detect, limit 0.5 in the cell (EPA U)
      "W13;1150,0;2050,0;9,0 R;0,1", // 14: rejected (EPA R): skipped
    ].join("\n") + "\n",
  );
  const nd = ["W02", "W03", "W04", "W07", "W12"];
  const limits = [0.5, 0.4, 0.2, 0.3, 0.5];
  // The documented values (README "Non-detects"): half the limit, the limit, zero.
  const expected: Record<string, number[]> = { half: limits.map((l) => l / 2), limit: limits, zero: [0, 0, 0, 0, 0] };

  for (const rule of ["half", "limit", "zero"]) {
    it(`--non-detects ${rule} enters each non-detect as documented and counts them in the summary`, async () => {
      const out = path.join(tmp, `nd-${rule}.json`);
      const r = await cli(["fit", lab, "--out", out, "--detection-limit", "0.2", "--non-detects", rule, ...FAST]);
      expect(r.code, r.err).toBe(0);
      const model = readModel(out);
      nd.forEach((id, k) => expect(valueOf(model, id), id).toBeCloseTo(expected[rule][k], 12));
      expect(valueOf(model, "W01")).toBe(12.4);
      expect(valueOf(model, "W05")).toBe(0.8);
      expect(valueOf(model, "W13")).toBeUndefined();
      expect(model.points.z.length).toBe(12);
      expect(r.out).toContain("Non-detects: 5 values below the detection limit (lines 3, 4, 5, 8, 13)");
      expect(r.out).toContain("limits: 2 written in the cell, 2 from column 'DL', 1 from --detection-limit");
      expect(r.out).toContain("Qualifiers: 2 values carried qualifiers (* ×1, J ×1; lines 2, 6)");
      expect(r.out).toContain("skipped 1 row (line 14): 1 rejected (qualifier R)");
      if (rule === "half") expect(r.out).toContain("common practice, not a published optimum");
    });
  }

  it("--non-detects omit leaves them out, and every one is listed in skipped.csv with its point id", async () => {
    const dir = path.join(tmp, "nd-omit");
    const r = await cli(["run", lab, "--out", dir, "--non-detects", "omit", "--json", ...FAST]);
    expect(r.code, r.err).toBe(0);
    const json = JSON.parse(r.out);
    expect(json.n).toBe(7);
    expect(json.input.nonDetects.rule).toBe("omit");
    expect(json.input.nonDetects.values.map((v: { line: number; value: number | null }) => [v.line, v.value])).toEqual([[3, null], [4, null], [5, null], [8, null], [13, null]]);
    const skipped = csvRows(path.join(dir, "skipped.csv"));
    expect(skipped[0]).toEqual(["line", "point", "reason"]);
    expect(skipped.slice(1).map((r) => [r[0], r[1]])).toEqual([["3", "W02"], ["4", "W03"], ["5", "W04"], ["8", "W07"], ["13", "W12"], ["14", "W13"]]);
    expect(skipped[1][2]).toContain("non-detect '<0,5' in column 'concentration' left out of the fit");
    expect(skipped[6][2]).toContain("qualified R");
    const summary = fs.readFileSync(path.join(dir, "run-summary.txt"), "utf8");
    expect(summary).toContain("skipped 6 rows (lines 3, 4, 5, 8, 13 and 1 more): 5 non-detects left out (--non-detects omit), 1 rejected (qualifier R)");
    expect(summary).toContain("left out of the fit (--non-detects omit");
  });

  it("qualifiers are stripped and kept in residuals.csv, beside the substituted value and its detection limit", async () => {
    const dir = path.join(tmp, "nd-half");
    const r = await cli(["run", lab, "--out", dir, "--detection-limit", "0.2", ...FAST]);
    expect(r.code, r.err).toBe(0);
    const rows = csvRows(path.join(dir, "residuals.csv"));
    const h = rows[0];
    expect(h.slice(0, 8)).toEqual(["line", "site", "x", "y", "value", "qualifier", "detection_limit", "fitted"]);
    const byId = new Map(rows.slice(1).map((r) => [r[1], r]));
    expect(byId.get("W01")!.slice(4, 7)).toEqual(["12.4", "*", ""]);
    expect(byId.get("W05")!.slice(4, 7)).toEqual(["0.8", "J", ""]);
    expect(byId.get("W02")!.slice(4, 7)).toEqual(["0.25", "<", "0.5"]);
    expect(byId.get("W03")!.slice(4, 7)).toEqual(["0.2", "ND", "0.4"]);
    expect(byId.get("W12")!.slice(4, 7)).toEqual(["0.25", "U", "0.5"]);
    expect(byId.get("W06")!.slice(4, 7)).toEqual(["3.5", "", ""]);
    // estimates.csv keeps the input columns as written.
    expect(fs.readFileSync(path.join(dir, "estimates.csv"), "utf8")).toContain('W04,"1000,0","2100,0",n.n.,,');
  });
});

describe("the value column of a laboratory file named after its analyte", () => {
  it("is found although its first cells are non-detects, and the detection-limit column is not taken for it", async () => {
    const file = write(
      "benzene.csv",
      "site,x,y,Benzene,DL\nB1,0,0,<0.5,0.5\nB2,10,0,ND,0.5\nB3,0,10,1.2,0.5\nB4,10,10,2.4 J,0.5\nB5,5,5,0.9,0.5\nB6,15,5,3.1,0.5\n",
    );
    const r = await cli(["fit", file, "--out", path.join(tmp, "benzene.json"), ...FAST]);
    expect(r.code, r.err).toBe(0);
    expect(r.out).toContain("value = Benzene");
    // Both non-detects have the limit 0.5 (the cell, the DL column): half is 0.25.
    const model = readModel(path.join(tmp, "benzene.json"));
    expect([valueOf(model, "B1"), valueOf(model, "B2"), valueOf(model, "B4")]).toEqual([0.25, 0.25, 2.4]);
  });
});

describe("duplicates: --duplicates mean|max|min|first and RPD (US EPA SW-846 Chapter One: RPD = |a − b| / mean × 100)", () => {
  const rows = ["x,y,value"];
  // Nine distinct positions on a 3 × 3 lattice; a pair at (10, 0) and a triple at (20, 20).
  for (const [x, y, v] of [[0, 0, 5], [10, 0, 10], [20, 0, 7], [0, 10, 6], [10, 10, 8], [20, 10, 9], [0, 20, 4], [10, 20, 6], [20, 20, 4]]) rows.push(`${x},${y},${v}`);
  rows.push("10,0,12"); // line 11: pair (10, 0): 10 and 12
  rows.push("20,20,9"); // line 12: triple (20, 20): 4, 9, 5
  rows.push("20,20,5"); // line 13
  const file = write("dups.csv", rows.join("\n") + "\n");
  // By hand: pair mean 11, max 12, min 10, first 10; triple mean 6, max 9, min 4, first 4.
  const expected: Record<string, [number, number]> = { mean: [11, 6], max: [12, 9], min: [10, 4], first: [10, 4] };
  const at = (m: Model, x: number, y: number) => m.points.z[m.points.x.findIndex((px, i) => px === x && m.points.y[i] === y)];

  for (const rule of ["mean", "max", "min", "first"]) {
    it(`${rule}: the merged values, the lines kept, the groups and their RPD in --json`, async () => {
      const out = path.join(tmp, `dups-${rule}.json`);
      const r = await cli(["fit", file, "--out", out, "--duplicates", rule, "--merge-conflicts", "--json", ...FAST]);
      expect(r.code, r.err).toBe(0);
      const model = readModel(out);
      expect(model.points.z.length).toBe(9);
      expect(at(model, 10, 0)).toBe(expected[rule][0]);
      expect(at(model, 20, 20)).toBe(expected[rule][1]);
      const groups = JSON.parse(r.out).input.duplicates.groups;
      expect(groups.map((g: { members: { line: number }[] }) => g.members.map((m) => m.line))).toEqual([[3, 11], [10, 12, 13]]);
      // Pair: |10 − 12| / 11 × 100 = 18.18 %; triple, relative range: (9 − 4) / 6 × 100 = 83.33 %.
      expect(groups[0].rpd).toBeCloseTo(200 / 11, 10);
      expect(groups[1].rpd).toBeCloseTo(500 / 6, 10);
      // The line a point keeps: the first for mean and first, the row of the kept value for max and min.
      const keptLine = { mean: [3, 10], first: [3, 10], max: [11, 12], min: [3, 10] }[rule]!;
      expect(groups.map((g: { line: number }) => g.line)).toEqual(keptLine);
    });
  }

  it("a spread is a difference of readings: written to their decimals, without binary leftovers (IEEE 754; common practice)", async () => {
    // 19.7 − 18.8 is 0.8999999999999986 in binary floating point; 35.7 − 34.8 is 0.9000000000000057.
    const f = write("dups-decimals.csv", "well,x,y,nitrate\nA,0,0,18.8\nA,0,0,19.7\nB,10,0,35.7\nB,10,0,34.8\nC,0,10,5.0\nD,10,10,7.25\nE,5,5,6\n");
    const r = await cli(["fit", f, "--out", path.join(tmp, "dups-decimals.json"), "--merge-conflicts", "--json", ...FAST]);
    expect(r.code, r.err).toBe(0);
    const groups = JSON.parse(r.out).input.duplicates.groups;
    expect(groups.map((g: { spread: number }) => g.spread)).toEqual([0.9, 0.9]);
    // "well" names the point-id column (README 'Point ids and codes').
    expect(groups[0].members.map((m: { point: string }) => m.point)).toEqual(["A", "A"]);
  });

  it("duplicates.csv lists every merged row; skipped.csv is written with its header when nothing was skipped", async () => {
    const dir = path.join(tmp, "dups-run");
    const r = await cli(["run", file, "--out", dir, "--duplicates", "max", "--merge-conflicts", ...FAST]);
    expect(r.code, r.err).toBe(0);
    const d = csvRows(path.join(dir, "duplicates.csv"));
    expect(d[0]).toEqual(["group", "line", "point", "x", "y", "value", "rule", "merged_value", "kept_line", "spread", "rpd_percent"]);
    expect(d.slice(1).map((r) => [r[0], r[1], r[5], r[6], r[7], r[8], r[9]])).toEqual([
      ["1", "3", "10", "max", "12", "11", "2"],
      ["1", "11", "12", "max", "12", "11", "2"],
      ["2", "10", "4", "max", "9", "12", "5"],
      ["2", "12", "9", "max", "9", "12", "5"],
      ["2", "13", "5", "max", "9", "12", "5"],
    ]);
    expect(Number(d[1][10])).toBeCloseTo(200 / 11, 4);
    expect(Number(d[3][10])).toBeCloseTo(500 / 6, 3);
    expect(fs.readFileSync(path.join(dir, "skipped.csv"), "utf8")).toBe("line,point,reason\r\n");
    expect(r.out).toContain("merged 2 groups of coincident points (largest value kept; largest spread 5, largest RPD 83.3%)");
  });
});

/** A smooth field sampled on a jittered 8 × 8 lattice, 70 m across, with a 3 m blunder at one shot. */
function fieldShots(seed: number): { id: number; n: number; e: number; z: number; code: string }[] {
  const r = mulberry32(seed);
  const shots = [];
  for (let i = 0; i < 8; i++) {
    for (let j = 0; j < 8; j++) {
      const e = 500000 + 10 * i + 3 * r(), n = 4000000 + 10 * j + 3 * r();
      const z = 100 + 0.05 * (e - 500000) + 0.02 * (n - 4000000) + 0.3 * Math.sin((e - 500000) / 15);
      shots.push({ id: 1000 + 8 * i + j, n, e, z, code: (i + j) % 3 === 1 ? "TP" : "GS" });
    }
  }
  shots[47].z += 3; // point 1047, code GS: the planted blunder
  return shots;
}

describe("point numbers and codes: in residuals.csv and in the blunder flags", () => {
  it("a headerless data-collector export (point, northing, easting, elevation, code) with --id and --code", async () => {
    const shots = fieldShots(7);
    expect([shots[47].id, shots[47].code]).toEqual([1047, "GS"]);
    const file = write("export.csv", shots.map((s) => `${s.id},${s.n.toFixed(3)},${s.e.toFixed(3)},${s.z.toFixed(3)},${s.code}`).join("\n") + "\n");
    const dir = path.join(tmp, "export");
    const r = await cli(["run", file, "--out", dir, "--x", "3", "--y", "2", "--z", "4", "--id", "1", "--code", "5", "--crs", "EPSG:32631", ...FAST]);
    expect(r.code, r.err).toBe(0);
    // Point 1047 is on line 48 of the file (one shot per line, no header).
    expect(r.out).toContain("point 1047 (code GS, line 48)");
    expect(r.out).toMatch(/possible blunders \([^)]*\): point 1047 \(code GS, line 48\)/);
    const rows = csvRows(path.join(dir, "residuals.csv"));
    expect(rows[0].slice(0, 6)).toEqual(["line", "point", "code", "x", "y", "value"]);
    const row = rows.find((r) => r[1] === "1047")!;
    expect(row[0]).toBe("48");
    expect(row[2]).toBe("GS");
    expect(row.at(-1)).toBe("possible blunder");
    const json = JSON.parse((await cli(["fit", file, "--out", path.join(tmp, "export.json"), "--x", "3", "--y", "2", "--z", "4", "--id", "1", "--code", "5", "--json", ...FAST])).out);
    expect(json.flagged).toContainEqual({ line: 48, point: "1047", code: "GS", label: "point 1047 (code GS, line 48)" });
  });

  it("a headerless export gets names for people: the value is 'value (column 4)', estimates.csv a header of roles (README 'Points', 'Outputs of run')", async () => {
    const shots = fieldShots(7);
    const file = write("export2.csv", shots.map((s) => `${s.id},${s.n.toFixed(3)},${s.e.toFixed(3)},${s.z.toFixed(3)},${s.code}`).join("\n") + "\n");
    const dir = path.join(tmp, "export2");
    const r = await cli(["run", file, "--out", dir, "--x", "3", "--y", "2", "--z", "4", "--crs", "EPSG:32631", ...FAST]);
    expect(r.code, r.err).toBe(0);
    // Not "4 surface" with a legend "4": the columns of a file without a header have no names.
    const model = JSON.parse(fs.readFileSync(path.join(dir, "model.rbfield.json"), "utf8"));
    expect(model.source).toEqual({ file: "export2.csv", x: "column 3", y: "column 2", z: "value (column 4)" });
    expect(r.out).toContain("Input: export2.csv (x = column 3, y = column 2, value = value (column 4))");
    const rows = csvRows(path.join(dir, "estimates.csv"));
    expect(rows[0]).toEqual(["column_1", "y", "x", "z", "column_5", "estimate", "std_error", "nearest_reading", "extrapolation"]);
    // The cells stay as written (the file's first row is data, line 1).
    expect(rows[1].slice(0, 5)).toEqual([String(shots[0].id), shots[0].n.toFixed(3), shots[0].e.toFixed(3), shots[0].z.toFixed(3), shots[0].code]);

    // A set-out list whose ids do not recur (S1, S2 …): with --x 3 --y 2 its first row is data (issue: S1 was lost).
    const setout = write("setout.csv", "S1,4000010.0,500020.0\nS2,4000030.0,500040.0\nS3,4000020.0,500030.0\n");
    const est = path.join(tmp, "setout-est.csv");
    const p = await cli(["predict", path.join(dir, "model.rbfield.json"), setout, "--out", est, "--x", "3", "--y", "2", "--quiet"]);
    expect(p.code, p.err).toBe(0);
    const e = csvRows(est);
    expect(e[0].slice(0, 4)).toEqual(["column_1", "y", "x", "estimate"]);
    expect(e.slice(1).map((row) => row[0])).toEqual(["S1", "S2", "S3"]);
  });

  it("with a header, the id is the first identifier-named column and the code a column named description", async () => {
    const shots = fieldShots(8);
    const file = write("named.csv", "Point No,Northing,Easting,Elevation,Description\n" + shots.map((s) => `${s.id},${s.n},${s.e},${s.z},${s.code}`).join("\n") + "\n");
    const out = path.join(tmp, "named.json");
    const r = await cli(["fit", file, "--out", out, ...FAST]);
    expect(r.code, r.err).toBe(0);
    expect(r.out).toContain("point id = Point No, code = Description");
    expect(r.out).toContain("point 1047 (code GS, line 49)");
    const text = readModel(out).points.text!;
    expect(text.map((t) => [t.name, t.role])).toEqual([["Point No", "id"], ["Description", "code"]]);
    expect(text[0].values.slice(0, 3)).toEqual(["1000", "1001", "1002"]);
  });

  it("the model keeps the texts (format version 2, additive) and a damaged text list is refused", () => {
    const text = fs.readFileSync(path.join(tmp, "named.json"), "utf8");
    const model = modelFromJson(text, "named.json");
    expect(model.version).toBe(2);
    const damaged = JSON.parse(text);
    damaged.points.text[0].values.pop();
    expect(() => modelFromJson(JSON.stringify(damaged), "damaged.json")).toThrow(/damaged \(point texts are not one string per point\)/);
  });
});

describe("--where COL=VALUE[,VALUE…]: keep only the matching rows", () => {
  it("keeps ground shots only, and says how many rows it dropped", async () => {
    const shots = fieldShots(9);
    const file = write("coded.csv", "pt,northing,easting,level,code\n" + shots.map((s) => `${s.id},${s.n},${s.e},${s.z},${s.code}`).join("\n") + "\n");
    const gs = shots.filter((s) => s.code === "GS").length;
    const out = path.join(tmp, "gs.json");
    const r = await cli(["fit", file, "--out", out, "--where", "code=gs", "--json", ...FAST]);
    expect(r.code, r.err).toBe(0);
    const json = JSON.parse(r.out);
    // (i + j) mod 3 = 1 for 22 of the 64 lattice cells (3 + 3 + 2 + 3 + 3 + 2 + 3 + 3 over i = 0 … 7): 42 ground shots.
    expect(gs).toBe(42);
    expect(json.n).toBe(42);
    expect(json.input.where).toEqual({ conditions: [{ column: "code", values: ["gs"] }], kept: 42, dropped: 22 });
    const model = readModel(out);
    expect(new Set(model.points.text!.find((t) => t.role === "code")!.values)).toEqual(new Set(["GS"]));
    const text = await cli(["fit", file, "--out", out, "--where", "code=GS,TP", "--where", "pt=1000,1001,1002,1003", ...FAST]);
    expect(text.out).toContain("Points: 64 rows read, 60 dropped by --where code=GS,TP --where pt=1000,1001,1002,1003, 4 used");
  });
});

describe("skipped.csv: every skipped row, while the summary keeps its short form", () => {
  it("lists seven skipped rows with line, point id and reason; the summary shows five", async () => {
    const shots = fieldShots(10);
    const lines = ["point,easting,northing,level"];
    shots.forEach((s, k) => {
      const bad = { 3: "", 9: "n/a", 15: "abc", 21: "NaN", 27: "1e999", 33: "-", 39: "2e40" }[k];
      lines.push(`${s.id},${s.e},${s.n},${bad ?? s.z}`);
    });
    const dir = path.join(tmp, "skipped");
    const r = await cli(["run", write("holes.csv", lines.join("\n") + "\n"), "--out", dir, "--json", ...FAST]);
    expect(r.code, r.err).toBe(0);
    // Shot k is on line k + 2.
    const want = [3, 9, 15, 21, 27, 33, 39].map((k) => [String(k + 2), String(shots[k].id)]);
    const rows = csvRows(path.join(dir, "skipped.csv"));
    expect(rows.slice(1).map((r) => [r[0], r[1]])).toEqual(want);
    expect(rows[1][2]).toBe("missing value in column 'level'");
    expect(rows[2][2]).toBe("value 'n/a' in column 'level' is not a number");
    expect(JSON.parse(r.out).input.skipped.map((s: { line: number }) => s.line)).toEqual(want.map((w) => Number(w[0])));
    const summary = fs.readFileSync(path.join(dir, "run-summary.txt"), "utf8");
    expect(summary).toContain("skipped 7 rows with missing, non-numeric or out-of-range values (lines 5, 11, 17, 23, 29 and 2 more); every skipped row in skipped.csv");
  });
});

describe("samples far from all others", () => {
  it("two reference samples 600 m away are fitted but leave the default extent and hull alone unless --keep-isolated", async () => {
    const shots = fieldShots(11);
    const lines = ["id,x,y,z", ...shots.map((s) => `${s.id},${s.e},${s.n},${s.z}`)];
    lines.push("R1,500600,4000600,140", "R2,500604,4000603,140.5");
    const file = write("far.csv", lines.join("\n") + "\n");
    const out = path.join(tmp, "far.json");
    const r = await cli(["fit", file, "--out", out, "--json", ...FAST]);
    expect(r.code, r.err).toBe(0);
    const model = readModel(out);
    expect(model.points.z.length).toBe(66);
    // The extent is the lattice's bounding box (the coordinates as written).
    const e = shots.map((s) => s.e), n = shots.map((s) => s.n);
    expect(model.extent).toEqual({ xmin: Math.min(...e), ymin: Math.min(...n), xmax: Math.max(...e), ymax: Math.max(...n) });
    expect(JSON.parse(r.out).input.isolated.points.map((p: { point: string }) => p.point)).toEqual(["R1", "R2"]);
    const text = (await cli(["fit", file, "--out", out, ...FAST])).out;
    expect(text).toMatch(/Isolated samples: 2 more than 10 median spacings \([\d.]+ map units\) from the rest: point R1 \(line 66\) [\d.]+ map units away; point R2/);
    const kept = await cli(["fit", file, "--out", out, "--keep-isolated", ...FAST]);
    expect(kept.code, kept.err).toBe(0);
    expect(readModel(out).extent).toEqual({ xmin: Math.min(...e), ymin: Math.min(...n), xmax: 500604, ymax: 4000603 });
  });
});

describe("non-detects and the blunder test", () => {
  // A non-detect is no measurement of a value: it says the value lies between 0 and the detection
  // limit (common practice in environmental QA), and the number entered (half the limit) is a
  // substitute. So it is never listed as a possible blunder — the advice to correct or remove a
  // blunder would delete a clean well — and what is checked instead is whether the surface exceeds
  // the limit there. The file: 36 wells on a 6 × 6 pattern (50 m) with readings 20–45 mg/l rising to
  // the east, and one "<0.5" in the middle of them: its substitute 0.25 lies far below every
  // neighbour, so the surface there exceeds 0.5.
  it("are never flagged as blunders; the surface exceeding the limit at one is a warning naming it", async () => {
    const rows = ["well,x,y,nitrate"];
    let k = 0;
    for (let i = 0; i < 6; i++) {
      for (let j = 0; j < 6; j++) {
        k++;
        const value = i === 2 && j === 3 ? "<0.5" : (20 + 5 * i + 0.5 * ((k * 7) % 5)).toFixed(1);
        rows.push(`MW-${k},${50 * i},${50 * j},${value}`);
      }
    }
    const file = write("nd-wells.csv", rows.join("\n") + "\n");
    const out = path.join(tmp, "nd-wells.rbfield.json");
    const r = await cli(["fit", file, "--out", out, "--transform", "log", "--json", ...FAST]);
    expect(r.code, r.err).toBe(0);
    const json = JSON.parse(r.out);
    // The non-detect is MW-16 on line 17 (header on line 1).
    expect(json.input.nonDetects.values.map((d: { line: number }) => d.line)).toEqual([17]);
    const model = modelFromJson(fs.readFileSync(out, "utf8"), out);
    expect(model.diagnostics.flags.lines).not.toContain(17);
    expect(model.diagnostics.warnings.join("\n")).toMatch(/the surface exceeds the detection limit at 1 of 1 non-detects \(point MW-16 \(line 17\)\)/);
  });
});
