import { describe, expect, it } from "vitest";
import { errorOf } from "./helpers.ts";
import { cleanPoints, describeCleaning } from "../src/clean/clean.ts";
import { ExitCode } from "../src/errors.ts";
import type { CleanPoints, PointTable, TextTable } from "../src/types.ts";
import { typeCells } from "../src/read/cells.ts";

/** A table with columns x, y, z; data rows start at line 2 unless lines are given; typed as the readers type it. */
function table(rows: string[][], extra: Partial<PointTable> = {}): TextTable {
  return typeCells({
    file: "pts.csv",
    columns: ["x", "y", "z"],
    rows,
    lines: rows.map((_, i) => i + 2),
    xColumn: 0,
    yColumn: 1,
    zColumn: 2,
    columnChoice: "detected",
    delimiter: ",",
    decimalComma: false,
    ...extra,
  });
}


describe("cleanPoints: unusable rows", () => {
  it("skips missing, non-numeric and non-finite cells with line numbers and column names", () => {
    const c = cleanPoints(table([
      ["1", "2", "3"],
      ["abc", "2", "3"],
      ["1", "", "3"],
      ["1", "2", "NaN"],
      ["1", "2", "Infinity"],
      ["1", "2", "1e999"],
      ["1", "2", "-inf"],
      ["4", "5", "6"],
    ]));
    expect(c.rowsRead).toBe(8);
    expect(Array.from(c.x)).toEqual([1, 4]);
    expect(Array.from(c.y)).toEqual([2, 5]);
    expect(Array.from(c.z)).toEqual([3, 6]);
    expect(c.lines).toEqual([2, 9]);
    expect(c.skipped).toEqual([
      { line: 3, row: 1, reason: "value 'abc' in column 'x' is not a number" },
      { line: 4, row: 2, reason: "missing value in column 'y'" },
      { line: 5, row: 3, reason: "value 'NaN' in column 'z' is not a finite number" },
      { line: 6, row: 4, reason: "value 'Infinity' in column 'z' is not a finite number" },
      { line: 7, row: 5, reason: "value '1e999' in column 'z' is not a finite number" },
      { line: 8, row: 6, reason: "value '-inf' in column 'z' is not a finite number" },
    ]);
    expect(c.merged).toEqual([]);
    expect(c.x).toBeInstanceOf(Float64Array);
  });

  it("uses the chosen columns and their names", () => {
    const c = cleanPoints(table([["P1", "x", "10", "20", "oops"]], {
      columns: ["id", "note", "Easting", "Northing", "RL"],
      xColumn: 2,
      yColumn: 3,
      zColumn: 4,
      lines: [17],
    }));
    expect(c.skipped).toEqual([{ line: 17, row: 0, reason: "value 'oops' in column 'RL' is not a number" }]);
    expect(c.x.length).toBe(0);
  });

  it("reads decimal commas and explains a dot in a decimal-comma file", () => {
    const c = cleanPoints(table([["1,5", "2,25", "-0,5"], ["1.5", "2", "3"]], { decimalComma: true }));
    expect(Array.from(c.x)).toEqual([1.5]);
    expect(Array.from(c.y)).toEqual([2.25]);
    expect(Array.from(c.z)).toEqual([-0.5]);
    expect(c.skipped).toEqual([
      { line: 3, row: 1, reason: "value '1.5' in column 'x' is not a number (this file uses a decimal comma)" },
    ]);
  });

  it("refuses a table with no value column", () => {
    const e = errorOf(() => cleanPoints(table([["1", "2"]], { columns: ["x", "y"], zColumn: -1 })));
    expect(e.exitCode).toBe(ExitCode.input);
    expect(e.message).toContain("pts.csv");
  });

  it("refuses a negative tolerance as a usage error", () => {
    expect(errorOf(() => cleanPoints(table([["1", "2", "3"]]), { tolerance: -1 })).exitCode).toBe(ExitCode.usage);
  });
});

describe("cleanPoints: coincident points", () => {
  it("merges points with equal coordinates and equal values, keeping first-occurrence order", () => {
    const c = cleanPoints(table([
      ["5", "5", "1"],
      ["0", "0", "2"],
      ["5", "5", "1"],
      ["7", "1", "4"],
      ["5", "5", "1"],
    ]));
    expect(Array.from(c.x)).toEqual([5, 0, 7]);
    expect(Array.from(c.y)).toEqual([5, 0, 1]);
    expect(Array.from(c.z)).toEqual([1, 2, 4]);
    expect(c.lines).toEqual([2, 3, 5]);
    // RPD of equal values is 0 (relative range over the mean).
    expect(c.merged).toEqual([{ x: 5, y: 5, lines: [2, 4, 6], spread: 0, value: 1, values: [1, 1, 1], rows: [0, 2, 4], rule: "mean", line: 2, rpd: 0 }]);
    expect(c.rowsRead).toBe(5);
  });

  it("treats -0 and 0 as the same coordinate", () => {
    const c = cleanPoints(table([["0", "1", "3"], ["-0", "1", "3"]]));
    expect(c.x.length).toBe(1);
    expect(c.merged[0].lines).toEqual([2, 3]);
  });

  it("refuses differing values by default, naming the first line, the spread and the way out", () => {
    const e = errorOf(() => cleanPoints(table([["9", "9", "0"], ["1", "1", "10"], ["1", "1", "12.5"]])));
    expect(e.exitCode).toBe(ExitCode.input);
    expect(e.place).toEqual({ file: "pts.csv", line: 3 });
    expect(e.message).toContain("pts.csv, line 3");
    expect(e.message).toContain("lines 3, 4");
    expect(e.message).toContain("differ by 2.5");
    expect(e.message).toContain("--merge-conflicts");
  });

  it("averages conflicting values when mergeConflicts is set", () => {
    const c = cleanPoints(table([["1", "1", "10"], ["1", "1", "12.5"], ["1", "1", "11"]]), { mergeConflicts: true });
    expect(Array.from(c.z)).toEqual([11.166666666666666]);
    // Three values: RPD as the relative range, (12.5 − 10) / mean(10, 12.5, 11) × 100 = 2.5 / 11.1667 × 100 ≈ 22.388 %.
    expect(c.merged).toEqual([{
      x: 1, y: 1, lines: [2, 3, 4], spread: 2.5, value: 11.166666666666666, values: [10, 12.5, 11], rows: [0, 1, 2], rule: "mean", line: 2,
      rpd: expect.closeTo(22.38806, 4),
    }]);
  });

  it("allows a spread up to maxSpread and refuses beyond it", () => {
    const ok = cleanPoints(table([["1", "1", "10"], ["1", "1", "10.5"]]), { maxSpread: 0.5 });
    expect(Array.from(ok.z)).toEqual([10.25]);
    expect(ok.merged[0].spread).toBe(0.5);
    const e = errorOf(() => cleanPoints(table([["1", "1", "10"], ["1", "1", "10.75"]]), { maxSpread: 0.5 }));
    expect(e.message).toContain("differ by 0.75");
    expect(e.message).toContain("more than the allowed 0.5");
  });

  it("merges points closer than the tolerance at their mean position", () => {
    // (0,0) and (3,4) are 5 apart: "closer than" is strict.
    const far = cleanPoints(table([["0", "0", "1"], ["3", "4", "1"]]), { tolerance: 5 });
    expect(far.x.length).toBe(2);
    const near = cleanPoints(table([["0", "0", "1"], ["3", "4", "3"]]), { tolerance: 5.5, mergeConflicts: true });
    expect(Array.from(near.x)).toEqual([1.5]);
    expect(Array.from(near.y)).toEqual([2]);
    expect(Array.from(near.z)).toEqual([2]);
    // A pair: RPD = |1 − 3| / mean(1, 3) × 100 = 100 %.
    expect(near.merged).toEqual([{ x: 1.5, y: 2, lines: [2, 3], spread: 2, value: 2, values: [1, 3], rows: [0, 1], rule: "mean", line: 2, rpd: 100 }]);
  });

  it("finds coincident points across hash cell edges and zero", () => {
    const c = cleanPoints(
      table([["0.99", "0", "1"], ["-0.004", "-3", "2"], ["1.01", "0", "1"], ["0.004", "-3", "2"]]),
      { tolerance: 1 },
    );
    expect(c.lines).toEqual([2, 3]);
    expect(c.merged.map((g) => g.lines)).toEqual([[2, 4], [3, 5]]);
  });

  // Correctness at size only: speed lives in `deno task bench`, never in timed tests.
  it("merges the duplicates of many points (200,000 rows, every tenth repeated)", () => {
    const n = 200_000;
    const rows: string[][] = [];
    for (let i = 0; i < n; i++) rows.push([String(i % 1000), String(Math.floor(i / 1000)), String(i)]);
    // Repeat every 10th point with the same value: n / 10 merged groups.
    for (let i = 0; i < n; i += 10) rows.push([String(i % 1000), String(Math.floor(i / 1000)), String(i)]);
    const c = cleanPoints(table(rows));
    expect(c.x.length).toBe(n);
    expect(c.merged.length).toBe(n / 10);
    expect(c.merged[1].lines).toEqual([12, n + 3]);
  });
});

describe("describeCleaning", () => {
  const base: CleanPoints = {
    x: new Float64Array(0),
    y: new Float64Array(0),
    z: new Float64Array(0),
    lines: [],
    skipped: [],
    merged: [],
    rowsRead: 0,
  };

  it("says nothing when nothing happened", () => {
    expect(describeCleaning(base)).toEqual([]);
  });

  it("lists skipped lines and merged groups", () => {
    const p: CleanPoints = {
      ...base,
      skipped: [7, 12, 40].map((line) => ({ line, reason: "r" })),
      merged: [
        { x: 0, y: 0, lines: [1, 2], spread: 0.01, value: 0, values: [-0.005, 0.005], rows: [0, 1], rule: "mean", line: 1, rpd: null },
        { x: 1, y: 1, lines: [3, 4], spread: 0.03, value: 2, values: [1.985, 2.015], rows: [2, 3], rule: "mean", line: 3, rpd: 1.5 },
      ],
    };
    expect(describeCleaning(p)).toEqual([
      "skipped 3 rows with missing or non-numeric values (lines 7, 12, 40)",
      "merged 2 groups of coincident points (mean value; largest spread 0.03, largest RPD 1.5%)",
    ]);
  });

  it("shortens long lists and uses the singular", () => {
    const p: CleanPoints = {
      ...base,
      skipped: [7, 12, 40, 41].map((line) => ({ line, reason: "r" })),
      merged: [{ x: 0, y: 0, lines: [1, 2], spread: 0, value: 0, values: [0, 0], rows: [0, 1], rule: "max", line: 1, rpd: null }],
    };
    expect(describeCleaning(p, 2)).toEqual([
      "skipped 4 rows with missing or non-numeric values (lines 7, 12 and 2 more)",
      "merged 1 group of coincident points (largest value kept; largest spread 0)",
    ]);
    expect(describeCleaning({ ...base, skipped: [{ line: 9, reason: "r" }] })).toEqual([
      "skipped 1 row with missing or non-numeric values (line 9)",
    ]);
  });
});
