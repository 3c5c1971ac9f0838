// Streaming input (issue 10, capability 3): delimited and whitespace text is read a block at a time
// into typed columns, and gives the same table as the whole text does. Outside references, each named
// beside its check: the generator's own record of what it wrote (ECMAScript Number of the text it
// wrote, for the numbers; the lines it planted, for skipped and merged rows), and papaparse (an RFC
// 4180 parser run on the whole text at once) for the cells of every row.
import { beforeAll, describe, expect, it } from "vitest";
import { createHash } from "node:crypto";
import * as fs from "node:fs";
import * as os from "node:os";
import * as path from "node:path";
import { fileURLToPath } from "node:url";
import fc from "fast-check";
import Papa from "papaparse";
import { main } from "../src/cli.ts";
import { cleanPoints, describeCleaning } from "../src/clean/clean.ts";
import { RbfieldError } from "../src/errors.ts";
import { parsePointTable, readPointTable } from "../src/read/points.ts";
import { readerFor, withCells } from "../src/read/registry.ts";
import { cellTexts } from "../src/read/table.ts";
import { normalizeText } from "../src/read/textfile.ts";
import type { TextTable } from "../src/types.ts";

const here = path.dirname(fileURLToPath(import.meta.url));

// ---- The big file: 10⁶ data lines with planted bad rows, duplicates and quoted codes.

const N = 1_000_000;
const HEADER = "point,easting,northing,level,code";
/** Rows (0-based) whose cells are planted, with what the skipped row's reason must say. */
const BAD: Record<number, { cells: (c: string[]) => string[]; reason: RegExp }> = {
  500000: { cells: (c) => [c[0], c[1], c[2], "n/a", c[4]], reason: /^value 'n\/a' in column 'level' is not a number$/ },
  500001: { cells: (c) => [c[0], "12abc", c[2], c[3], c[4]], reason: /^value '12abc' in column 'easting' is not a number$/ },
  500002: { cells: (c) => [c[0], c[1]], reason: /^missing value in column 'northing'$/ },
  500003: { cells: (c) => [c[0], c[1], "", c[3], c[4]], reason: /^missing value in column 'northing'$/ },
  500004: { cells: (c) => [c[0], c[1], c[2], "1e999", c[4]], reason: /^value '1e999' in column 'level' is not a finite number$/ },
  700000: { cells: (c) => [c[0], c[1], c[2], "NaN", c[4]], reason: /^value 'NaN' in column 'level' is not a finite number$/ },
  900000: { cells: (c) => [c[0], c[1], c[2], "--", c[4]], reason: /^value '--' in column 'level' is not a number$/ },
};
/** Second rows of coincident pairs: the row (0-based) whose position they repeat. */
const REPEATS: Record<number, number> = { 600001: 600000, 800500: 800000, 999999: 999998 };
/** Rows where the truncated copies are cut: inside a quoted code, and inside the easting. */
const CUT_IN_QUOTE = 999000, CUT_IN_LINE = 998001;

interface Generated {
  file: string;
  /** Per row: the cells written (after planting). */
  cells(i: number): string[];
  /** Byte offset of each row's line start, for the rows the copies are cut at. */
  offsets: Map<number, number>;
  /** x, y, z per row as Number reads the text written (NaN where planted bad). */
  x: Float64Array;
  y: Float64Array;
  z: Float64Array;
}

function baseCells(i: number): string[] {
  const x = (500000 + (i % 1000) * 1.5).toFixed(3);
  const y = (5400000 + Math.floor(i / 1000) * 1.5).toFixed(3);
  const z = (100 + 3 * Math.sin(i / 150) + (i % 7) * 0.001).toFixed(3);
  const code = i % 1000 === 0 ? "GS, kerb" : ["GS", "GS", "KB", "TP"][i % 4];
  return [String(100000 + i), x, y, z, code];
}

function rowCells(i: number): string[] {
  const c = baseCells(i);
  const from = REPEATS[i];
  if (from !== undefined) {
    const b = baseCells(from);
    c[1] = b[1];
    c[2] = b[2];
    c[3] = (Number(b[3]) + 0.01).toFixed(3);
  }
  return BAD[i] ? BAD[i].cells(c) : c;
}

const csvCell = (s: string) => (/[",\n]/.test(s) ? `"${s.replace(/"/g, '""')}"` : s);

function writeBigFile(file: string): Generated {
  const offsets = new Map<number, number>();
  const x = new Float64Array(N), y = new Float64Array(N), z = new Float64Array(N);
  const fd = fs.openSync(file, "w");
  let block = HEADER + "\n";
  let written = 0;
  for (let i = 0; i < N; i++) {
    if (i === CUT_IN_QUOTE || i === CUT_IN_LINE) offsets.set(i, written + block.length);
    const c = rowCells(i);
    x[i] = Number(c[1] === "" || c[1] === undefined ? NaN : c[1]);
    y[i] = Number(c[2] === "" || c[2] === undefined ? NaN : c[2]);
    z[i] = Number(c[3] === "" || c[3] === undefined ? NaN : c[3]);
    block += c.map(csvCell).join(",") + "\n";
    if (block.length > 1 << 20) {
      fs.writeSync(fd, block);
      written += block.length;
      block = "";
    }
  }
  fs.writeSync(fd, block);
  fs.closeSync(fd);
  return { file, cells: rowCells, offsets, x, y, z };
}

/** A copy of the first `bytes` bytes of a file. */
function prefixCopy(from: string, to: string, bytes: number): void {
  fs.copyFileSync(from, to);
  fs.truncateSync(to, bytes);
}

const sha256 = (file: string) => createHash("sha256").update(fs.readFileSync(file)).digest("hex");

async function cli(args: string[]) {
  let out = "", err = "";
  const code = await main(args, { out: (s) => (out += s), err: (s) => (err += s + "\n") });
  return { code, out, err };
}

describe("a 10⁶-line CSV read a block at a time", () => {
  let dir: string;
  let big: Generated;
  let table: TextTable;
  const fractions: number[] = [];

  beforeAll(async () => {
    dir = fs.mkdtempSync(path.join(os.tmpdir(), "rbfield-stream-"));
    big = writeBigFile(path.join(dir, "survey.csv"));
    table = await readPointTable(big.file, { progress: (_m, f) => fractions.push(f ?? NaN) });
    return () => fs.rmSync(dir, { recursive: true, force: true });
  });

  it("reports progress as the blocks are read, up to the whole file", () => {
    expect(fractions.length).toBeGreaterThan(10);
    for (let k = 1; k < fractions.length; k++) expect(fractions[k]).toBeGreaterThan(fractions[k - 1]);
    expect(fractions.at(-1)).toBe(1);
  });

  it("keeps numbers in typed columns and text only in the id and code columns; the rows' text is not stored", () => {
    expect(table.lines.length).toBe(N);
    expect(table.data.map((c) => c.kind)).toEqual(["text", "number", "number", "number", "text"]);
    for (const j of [1, 2, 3]) expect(table.data[j].values).toBeInstanceOf(Float64Array);
    expect(Object.keys(table)).not.toContain("rows");
    expect(table.lines[0]).toBe(2);
    expect(table.lines[N - 1]).toBe(N + 1);
  });

  it("gives every cell back as written (the generator's text; quoted codes with a comma included)", () => {
    const text = cellTexts(table);
    const rows = [0, 1, 999, 1000, 123457, ...Object.keys(BAD).map(Number), ...Object.keys(REPEATS).map(Number), N - 1];
    for (let i = 0; i < N; i += 997) rows.push(i);
    for (const i of rows) {
      const written = big.cells(i);
      const width = table.columns.length;
      expect(Array.from({ length: width }, (_, j) => text(i, j)), `row ${i}`).toEqual(Array.from({ length: width }, (_, j) => written[j] ?? ""));
    }
  });

  it("skips the planted bad rows, names them by line, and reports the first five and a count", () => {
    const clean = cleanPoints(table, { mergeConflicts: true, minPoints: 3 });
    const planted = Object.keys(BAD).map(Number);
    expect(clean.skipped.map((s) => s.line)).toEqual(planted.map((i) => i + 2));
    clean.skipped.forEach((s, k) => expect(s.reason).toMatch(BAD[planted[k]].reason));
    const lines = planted.map((i) => i + 2);
    expect(describeCleaning(clean)[0]).toBe(
      `skipped 7 rows with missing or non-numeric values (lines ${lines.slice(0, 5).join(", ")} and 2 more)`,
    );
    // Merged: the planted pairs, each the mean of its two values.
    expect(clean.merged.map((g) => g.lines)).toEqual(
      Object.entries(REPEATS).map(([second, first]) => [first + 2, Number(second) + 2]).sort((a, b) => a[0] - b[0]),
    );
  });

  it("fits nothing wrong: the clean points are the good rows, in order, with the numbers written (ECMAScript Number of the text)", () => {
    const clean = cleanPoints(table, { mergeConflicts: true, minPoints: 3 });
    const seconds = new Set(Object.keys(REPEATS).map(Number));
    const firsts = new Map(Object.entries(REPEATS).map(([s, f]) => [f, Number(s)]));
    let k = 0, wrong = 0;
    for (let i = 0; i < N; i++) {
      if (BAD[i] || seconds.has(i)) continue;
      const second = firsts.get(i);
      const z = second === undefined ? big.z[i] : (big.z[i] + big.z[second]) / 2;
      if (clean.x[k] !== big.x[i] || clean.y[k] !== big.y[i] || clean.z[k] !== z || clean.lines[k] !== i + 2) wrong++;
      k++;
    }
    expect(k).toBe(clean.x.length);
    expect(wrong).toBe(0);
    expect(clean.rowsRead).toBe(N);
  });

  it("a copy cut inside a quoted field: one line naming file, line and column, exit 3, no output, input unchanged; progress first", async () => {
    const file = path.join(dir, "cut-in-quote.csv");
    const start = big.offsets.get(CUT_IN_QUOTE)!;
    const line = big.cells(CUT_IN_QUOTE).map(csvCell).join(",");
    const quote = line.indexOf('"');
    prefixCopy(big.file, file, start + quote + 4);
    const before = sha256(file);
    const out = path.join(dir, "cut-in-quote.rbfield.json");
    const r = await cli(["fit", file, "--out", out]);
    expect(r.code).toBe(3);
    const lines = r.err.trimEnd().split("\n");
    expect(lines[0]).toBe(`rbfield: reading ${file}`);
    expect(lines.at(-1)).toBe(
      `rbfield: ${file}, line ${CUT_IN_QUOTE + 2}, column ${quote + 1}: quoted field has no closing quote ` +
        "(RFC 4180: a quote inside a quoted field is written twice)",
    );
    expect(fs.existsSync(out)).toBe(false);
    expect(fs.readdirSync(dir).filter((f) => f.startsWith("cut-in-quote.rbfield"))).toEqual([]);
    expect(sha256(file)).toBe(before);
  });

  it("a copy cut inside a line: the last line is named as cut off, exit 3, no output", async () => {
    const file = path.join(dir, "cut-in-line.csv");
    const start = big.offsets.get(CUT_IN_LINE)!;
    const cells = big.cells(CUT_IN_LINE);
    const kept = `${cells[0]},${cells[1].slice(0, 4)}`;
    prefixCopy(big.file, file, start + kept.length);
    const out = path.join(dir, "cut-in-line.rbfield.json");
    const r = await cli(["fit", file, "--out", out, "--quiet"]);
    expect(r.code).toBe(3);
    expect(r.err.trimEnd().split("\n")).toEqual([
      `rbfield: ${file}, line ${CUT_IN_LINE + 2}, column ${kept.length + 1}: the last line has 2 of 5 cells and no line end: ` +
      "the file looks cut off; complete the file (or that line), or remove the line",
    ]);
    expect(fs.existsSync(out)).toBe(false);
  });
});

// ---- The same table from blocks of any size as from the whole text.

/** Everything a table says, in plain values (NaN as null), every cell's text included. */
function summary(t: TextTable) {
  const text = cellTexts(t);
  return {
    file: t.file,
    format: t.format,
    columns: t.columns,
    hasHeader: t.hasHeader,
    delimiter: t.delimiter,
    decimalComma: t.decimalComma,
    lines: t.lines,
    chosen: [t.xColumn, t.yColumn, t.zColumn, t.columnChoice, t.chosenBy],
    unusable: t.unusable,
    crs: t.crs ?? null,
    data: t.data.map((c) => ({ name: c.name, kind: c.kind, values: Array.from(c.values as ArrayLike<number | string>, (v) => (Number.isNaN(v) ? null : v)) })),
    cells: t.lines.map((_, i) => t.columns.map((_, j) => text(i, j))),
  };
}

/** The table, or the error message, from a reading. */
async function outcome(read: () => TextTable | Promise<TextTable>) {
  try {
    return { table: summary(await read()) };
  } catch (e) {
    if (e instanceof RbfieldError) return { error: e.message };
    throw e;
  }
}

/** The bytes in blocks: the first `first` bytes, then `size` at a time. */
function* blocksOf(bytes: Uint8Array, size: number, first: number): Generator<Uint8Array> {
  yield bytes.subarray(0, first);
  for (let at = first; at < bytes.length; at += size) yield bytes.subarray(at, at + size);
}

/**
 * Read bytes through the chosen reader, the first `first` bytes as one block, then `size` bytes at a
 * time. No text leaves the decoder before the first 64 KiB have been checked (TextBlocks), so
 * blocks smaller than that are seen one by one only after a first block of 64 KiB.
 */
async function readInBlocks(bytes: Uint8Array, file: string, size: number, options = {}, first = size): Promise<TextTable> {
  const reader = readerFor(bytes.subarray(0, 1 << 20));
  if (!reader.readBlocks) return withCells(await reader.read(bytes, file, options));
  return withCells(await reader.readBlocks(blocksOf(bytes, size, first), file, options));
}

/** A comment line of 64 KiB (65536 bytes with its line end): put before a text, it fills the decoder's first window. */
const WINDOW = 65536;
const LONG_COMMENT = "#" + "-".repeat(WINDOW - 2) + "\n";

function prefixed(bytes: Uint8Array): Uint8Array {
  const out = new Uint8Array(WINDOW + bytes.length);
  out.set(new TextEncoder().encode(LONG_COMMENT));
  out.set(bytes, WINDOW);
  return out;
}

/** The rows papaparse finds in the whole text (RFC 4180), as the reader keeps them: empty rows left out, the header row off, short rows padded. */
function papaRows(t: TextTable, text: string): string[][] {
  const parsed: { data: string[][] } = Papa.parse(normalizeText(text), { delimiter: t.delimiter, newline: "\n", comments: "#", quoteChar: '"' });
  const rows = parsed.data.filter((r) => r.some((c) => c.trim() !== ""));
  return rows.slice(t.hasHeader ? 1 : 0).map((r) => t.columns.map((_, j) => r[j] ?? ""));
}

const FIXTURE_DIRS = [path.join(here, "fixtures", "read"), path.join(here, "fixtures", "bad"), path.join(here, "..", "samples")];
const FIXTURES = FIXTURE_DIRS.flatMap((d) => fs.readdirSync(d).filter((f) => /\.(csv|txt|tsv|geojson)$/.test(f)).map((f) => path.join(d, f)));

describe("the same table from blocks as from the whole text, on every fixture", () => {
  it(`${FIXTURES.length} fixtures: the file read from disk, and its bytes in blocks of 1, 2, 3, 7, 64 and 4096 bytes, equal the file read as one block`, async () => {
    expect(FIXTURES.length).toBeGreaterThan(20);
    for (const file of FIXTURES) {
      const bytes = new Uint8Array(fs.readFileSync(file));
      const whole = await outcome(async () => withCells(await readerFor(bytes).read(bytes, file, {})));
      expect(await outcome(() => readPointTable(file)), file).toEqual(whole);
      for (const size of [1, 2, 3, 7, 64, 4096]) expect(await outcome(() => readInBlocks(bytes, file, size)), `${file} in blocks of ${size}`).toEqual(whole);
      // After a first block of 64 KiB (a long comment line), the rest in blocks of 1 to 7 bytes.
      const long = prefixed(bytes);
      const longWhole = await outcome(async () => withCells(await readerFor(long).read(long, file, {})));
      for (const size of [1, 2, 3, 5, 7]) expect(await outcome(() => readInBlocks(long, file, size, {}, WINDOW)), `${file} after 64 KiB in blocks of ${size}`).toEqual(longWhole);
    }
  });

  it("the cells of every delimited fixture are the rows papaparse finds in the whole text (RFC 4180)", async () => {
    let compared = 0;
    for (const file of FIXTURES) {
      const bytes = new Uint8Array(fs.readFileSync(file));
      let t: TextTable;
      try {
        t = await readInBlocks(bytes, file, 5);
      } catch (e) {
        if (e instanceof RbfieldError) continue;
        throw e;
      }
      if (![",", ";", "\t"].includes(t.delimiter)) continue;
      expect(summary(t).cells, file).toEqual(papaRows(t, new TextDecoder().decode(bytes)));
      compared++;
    }
    expect(compared).toBeGreaterThan(15);
  });
});

describe("random texts split at random bytes (fast-check, fixed seed)", () => {
  const cell = fc.oneof(
    fc.constantFrom("1", "2.5", "-0.125", "12,5", "100", "x", "y", "z", "GS", "n/a", "", " ", "1e3", "é", "𝑥", "0012", "1.50"),
    fc.stringMatching(/^[0-9.,a-z "é\r\n#;\t]{0,6}$/),
  );
  const line = fc.tuple(fc.array(cell, { minLength: 1, maxLength: 5 }), fc.constantFrom(",", ";", "\t", " ")).map(([cells, d]) =>
    cells.map((c) => (/[",;\t\r\n ]/.test(c) && d !== " " ? `"${c.replace(/"/g, '""')}"` : c)).join(d)
  );
  const text = fc.tuple(fc.array(line, { minLength: 1, maxLength: 12 }), fc.constantFrom("\n", "\r\n", "\r"), fc.boolean(), fc.boolean()).map(
    ([lines, eol, bom, lastEol]) => (bom ? "\uFEFF" : "") + lines.join(eol) + (lastEol ? eol : ""),
  );

  const OPTIONS = { x: "1", y: "2", z: "3" };

  it("give the table (or the error) the whole text gives, and papaparse's cells (800 runs)", async () => {
    await fc.assert(
      fc.asyncProperty(text, fc.integer({ min: 1, max: 9 }), fc.integer({ min: 0, max: 12 }), async (t, size, extra) => {
        const whole = await outcome(() => parsePointTable(t, "r.csv", OPTIONS));
        // The text after a 64 KiB comment line, so that the blocks reach the decoder one by one.
        const long = LONG_COMMENT + t;
        const wholeLong = await outcome(() => parsePointTable(long, "r.csv", OPTIONS));
        const streamed = await outcome(() => readInBlocks(new TextEncoder().encode(long), "r.csv", size, OPTIONS, WINDOW + extra));
        expect(streamed).toEqual(wholeLong);
        if (whole.table && [",", ";", "\t"].includes(whole.table.delimiter)) {
          const table = parsePointTable(t, "r.csv", OPTIONS);
          expect(whole.table.cells).toEqual(papaRows(table, t));
        }
      }),
      { seed: 20261202, numRuns: 800 },
    );
  });
});

describe("numbers kept as numbers give their text back", () => {
  // Number-like text of every shape: signs, leading zeros, trailing zeros, no integer part, a lone
  // mark, exponents, up to 20 digits either side (more than a double holds), spaces around.
  const numberText = fc.oneof(
    fc.stringMatching(/^ ?[+-]?\d{0,20}([.]\d{0,20})?([eE][+-]?\d{1,3})? ?$/),
    fc.double({ noNaN: true }).map(String),
    fc.tuple(fc.double({ min: -1e7, max: 1e7, noNaN: true }), fc.integer({ min: 0, max: 20 })).map(([v, d]) => v.toFixed(d)),
  );

  it("every cell as written, and its number as ECMAScript Number reads the plain ones (2000 runs)", () => {
    fc.assert(
      fc.property(fc.array(fc.tuple(numberText, numberText, numberText), { minLength: 1, maxLength: 30 }), fc.boolean(), (rows, comma) => {
        const cells = rows.map((r) => r.map((c) => (comma ? c.replace(".", ",") : c)));
        const d = comma ? ";" : ",";
        const t = parsePointTable(`x${d}y${d}z\n${cells.map((r) => r.join(d)).join("\n")}\n`, "n.csv");
        // Rows of nothing but spaces hold no point and are not read.
        const kept = cells.filter((r) => r.some((c) => c.trim() !== ""));
        const text = cellTexts(t);
        expect(t.lines.length).toBe(kept.length);
        kept.forEach((r, i) => r.forEach((c, j) => expect(text(i, j)).toBe(c)));
        // A plain decimal (what the number grammar takes) reads as Number reads it.
        const plain = t.decimalComma ? /^[+-]?(?:\d+(?:,\d*)?|,\d+)(?:[eE][+-]?\d+)?$/ : /^[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?$/;
        kept.forEach((r, i) =>
          r.forEach((c, j) => {
            const v = Number(c.trim().replace(",", "."));
            const expected = plain.test(c.trim()) && Number.isFinite(v) ? v : NaN;
            expect(Object.is(t.data[j].values[i], expected) || (Number.isNaN(expected) && Number.isNaN(t.data[j].values[i] as number)), `${c}`).toBe(true);
          })
        );
      }),
      { seed: 20261202, numRuns: 2000 },
    );
  });
});

describe("the header decision and the decimal mark, with more than 1000 rows (README 'Points')", () => {
  it("a semicolon export whose first row is data, and whose decimal mark the first row decides, reads as when held whole", async () => {
    // The first row holds a decimal comma and a code that recurs below; the 1000 rows below hold 5
    // comma decimals and 6 point decimals, so the mark is a comma only with the first row counted
    // (detectDecimalComma: commas at least as many as points), and that row is data only when its
    // code is seen to recur.
    const rows = ["1001;512400,125;5402200;101;GS"];
    for (let i = 0; i < 1200; i++) {
      const x = i < 5 ? `${512000 + i},5` : i < 11 ? `${512000 + i}.5` : `${512000 + i}`;
      rows.push(`${1002 + i};${x};${5402000 + i};${100 + (i % 9)};${i % 2 ? "GS" : "KB"}`);
    }
    const text = rows.join("\n") + "\n";
    const t = parsePointTable(text, "dc.csv", { x: "2", y: "3", z: "4" });
    expect(t.hasHeader).toBe(false);
    expect(t.decimalComma).toBe(true);
    expect(t.lines.length).toBe(1201);
    expect(t.data[1].values[0]).toBe(512400.125);
    expect(t.unusable.map((u) => u.line)).toEqual([7, 8, 9, 10, 11, 12]);
    expect(t.unusable[0].reason).toBe("value '512005.5' in column '2' is not a number (this file uses a decimal comma)");
    expect(summary(await readInBlocks(new TextEncoder().encode(text), "dc.csv", 11, { x: "2", y: "3", z: "4" }))).toEqual(summary(t));
  });
});
