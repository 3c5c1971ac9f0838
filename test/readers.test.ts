// The reader interface (src/read/reader.ts, registry.ts): each format recognised from the first
// bytes of a file, one typed table from every reader, files without a header row, columns named by
// position, and text columns (point ids, codes) carried through cleaning.
//
// Where the expected behaviour comes from: issue 9 item 2 ("a reader interface": the typed table,
// `header: "auto" | "none"`, names by 1-based position, a header name that is a number winning only
// when it matches exactly, never guessing the columns of a file without a header, the refusal that
// shows the first row) and the part of issue 11 that rides on it (text columns kept per clean point,
// a merged point keeping its first row's texts); RFC 4180 (CSV records and fields), RFC 7946
// (GeoJSON FeatureCollection of Point features) and the 2008 GeoJSON "crs" member; the README's
// "Points" paragraph (semicolon files with decimal commas, TSV, whitespace text) and its list of
// what is refused (UTF-16 or binary files). Every expected number is copied from the fixture text.
import * as fs from "node:fs";
import * as os from "node:os";
import * as path from "node:path";
import { fileURLToPath } from "node:url";
import { describe, expect, it } from "vitest";
import { main } from "../src/cli.ts";
import { cleanPoints } from "../src/clean/clean.ts";
import { ExitCode, RbfieldError } from "../src/errors.ts";
import { delimitedReader } from "../src/read/delimited.ts";
import { geojsonReader } from "../src/read/geojson.ts";
import { chooseTextColumns } from "../src/read/columns.ts";
import { parsePointTable, readPointTable } from "../src/read/points.ts";
import type { PointReader, ReadOptions } from "../src/read/reader.ts";
import { parseTable, READERS, readerFor, readTable, withCells } from "../src/read/registry.ts";
import { whitespaceReader } from "../src/read/whitespace.ts";
import type { TableColumn, TypedTable } from "../src/types.ts";
import { errorOf } from "./helpers.ts";

const fixture = (name: string) => fileURLToPath(new URL(`./fixtures/read/${name}`, import.meta.url));
const bytesOf = (text: string) => new TextEncoder().encode(text);

/** The RbfieldError a promise rejects with (fails the test when it resolves or rejects otherwise). */
const rejection = (p: Promise<unknown>): Promise<RbfieldError> =>
  p.then(
    () => Promise.reject(new Error("expected an RbfieldError")),
    (e) => (e instanceof RbfieldError ? e : Promise.reject(e)),
  );

/** The values of a column, NaN kept (toEqual compares NaN with NaN as equal). */
function values(col: TableColumn): (number | string)[] {
  return Array.from(col.values as ArrayLike<number | string>);
}

describe("format recognition from the first bytes", () => {
  const sniffs = (text: string | Uint8Array) => {
    const bytes = typeof text === "string" ? bytesOf(text) : text;
    return { geojson: geojsonReader.sniff(bytes), delimited: delimitedReader.sniff(bytes), whitespace: whitespaceReader.sniff(bytes) };
  };

  it("GeoJSON: the first character after white space (and a byte-order mark) is '{' (RFC 7946 §3.3)", () => {
    for (const text of ['{"type":"FeatureCollection","features":[]}', '\uFEFF\n  \r\n\t{"type"']) {
      const s = sniffs(text);
      expect(s.geojson, text).toBeGreaterThan(0);
      expect(s.delimited, text).toBe(0);
      expect(s.whitespace, text).toBe(0);
    }
  });

  it("delimited text: a comma, semicolon or tab in the first content line (RFC 4180; README 'Points')", () => {
    for (const text of ["x,y,z\n1,2,3\n", "# survey 2024\n\nOst;Nord;Wert\n", "Easting\tNorthing\tRL\n", '"a b",c\n']) {
      const s = sniffs(text);
      expect(s.delimited, text).toBeGreaterThan(0);
      expect(s.geojson, text).toBe(0);
      expect(s.whitespace, text).toBe(0);
    }
  });

  it("whitespace text: spaces or aligned tabs and no other delimiter in the first content line (README 'Points')", () => {
    for (const text of ["x y z\n1 2 3\n", "# export\nx\t\ty\t\tz\n", "  1001  512400.125  5402200.5\n"]) {
      const s = sniffs(text);
      expect(s.whitespace, text).toBeGreaterThan(0);
      expect(s.delimited, text).toBe(0);
      expect(s.geojson, text).toBe(0);
    }
  });

  it("looks only at the start: a header line followed by bytes that are not UTF-8 still sniffs as CSV", () => {
    const junk = new Uint8Array(3 << 20).fill(0xff);
    const bytes = new Uint8Array([...bytesOf("x,y,z\n"), ...junk]);
    expect(delimitedReader.sniff(bytes)).toBeGreaterThan(0);
    expect(whitespaceReader.sniff(bytes)).toBe(0);
  });

  it("picks the reader of each fixture, and the table names its format", async () => {
    const cases: [string, string, string, ReadOptions][] = [
      ["points.geojson", "geojson", "geojson", {}],
      ["bom-crlf.csv", "delimited", "csv", {}],
      ["tabs.tsv", "delimited", "tsv", {}],
      ["headerless-semicolon.csv", "delimited", "semicolon", { x: "1", y: "2", z: "3" }],
      ["headerless.txt", "whitespace", "whitespace", { x: "2", y: "3", z: "4" }],
    ];
    for (const [name, reader, format, options] of cases) {
      const bytes = fs.readFileSync(fixture(name));
      expect(readerFor(bytes).name, name).toBe(reader);
      expect((await readTable(bytes, name, options)).format, name).toBe(format);
    }
  });

  it("an empty file, recognised by no reader, is still refused as empty (README 'When something is wrong')", async () => {
    const e = await rejection(readTable(new Uint8Array(0), "empty.csv"));
    expect(e.message).toBe("empty.csv, line 1: file is empty; give a header row (e.g. x,y,z) and one row per point");
  });
});

describe("a binary format can join the registry", () => {
  // A stand-in binary format: signature "RBFB", a NUL byte, a point count, then x, y, z as
  // little-endian doubles (a real one, such as LAS with its "LASF" signature, follows the same steps).
  const fakeBinary: PointReader = {
    name: "fake-binary",
    sniff: (b) => (b.length >= 5 && b[0] === 0x52 && b[1] === 0x42 && b[2] === 0x46 && b[3] === 0x42 && b[4] === 0 ? 1 : 0),
    read(bytes, file): TypedTable {
      const view = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
      const n = view.getUint8(5);
      const cols = [0, 1, 2].map((k) => Float64Array.from({ length: n }, (_, i) => view.getFloat64(6 + 8 * (3 * i + k), true)));
      return {
        file,
        format: "fake-binary",
        columns: ["x", "y", "z"],
        data: cols.map((values, k) => ({ name: "xyz"[k], kind: "number" as const, values })),
        hasHeader: true,
        lines: Array.from({ length: n }, (_, i) => i + 1),
        unusable: [],
        xColumn: 0,
        yColumn: 1,
        zColumn: 2,
        columnChoice: "detected",
        chosenBy: { x: "detected", y: "detected", z: "detected" },
      };
    },
  };
  const file = new Uint8Array(6 + 2 * 24);
  file.set(bytesOf("RBFB"), 0);
  file[5] = 2;
  const dv = new DataView(file.buffer);
  [[10.5, 20.25, 3], [11, 21, -0.125]].flat().forEach((v, i) => dv.setFloat64(6 + 8 * i, v, true));

  it("the text readers refuse a file with a NUL byte, naming its line (README: binary files are refused)", async () => {
    const e = await rejection(readTable(file, "pts.bin"));
    expect(e.message).toMatch(/^pts\.bin, line 1: file holds NUL bytes, so it is not UTF-8 text/);
  });

  it("a reader with a signature placed before the text readers reads the same bytes", async () => {
    const t = await readTable(file, "pts.bin", {}, [fakeBinary, ...READERS]);
    expect(t.format).toBe("fake-binary");
    expect(values(t.data[0])).toEqual([10.5, 11]);
    expect(values(t.data[2])).toEqual([3, -0.125]);
    const c = cleanPoints(t);
    expect(Array.from(c.y)).toEqual([20.25, 21]);
    // Callers that work on cells (the estimates CSV) get the numbers written out.
    const cells = withCells(t);
    expect(cells.rows).toEqual([["10.5", "20.25", "3"], ["11", "21", "-0.125"]]);
  });
});

describe("one typed table from every reader", () => {
  it("CSV: numbers as Float64Array with NaN for a cell that is not a number, ids and codes as text", async () => {
    const t = await readPointTable(fixture("codes.csv"));
    expect(t.columns).toEqual(["point_id", "easting", "northing", "level", "code"]);
    expect(t.data.map((c) => c.kind)).toEqual(["text", "number", "number", "number", "text"]);
    expect(t.data[3].values).toBeInstanceOf(Float64Array);
    expect(values(t.data[3])).toEqual([101.42, 101.55, 101.42, NaN, 101.61]);
    expect(values(t.data[0])).toEqual(["1047", "1048", "1049", "1050", "1051"]);
    expect(values(t.data[4])).toEqual(["GS", "TP", "GS2", "GS", ""]);
    expect(t.lines).toEqual([2, 3, 4, 5, 6]);
    expect(t.unusable).toEqual([{ row: 3, line: 5, column: 3, reason: "missing value in column 'level'" }]);
    expect([t.xColumn, t.yColumn, t.zColumn]).toEqual([1, 2, 3]);
    expect(t.chosenBy).toEqual({ x: "detected", y: "detected", z: "detected" });
    expect(t.hasHeader).toBe(true);
    expect(t.format).toBe("csv");
  });

  it("GeoJSON: coordinates as numbers, properties typed, the crs member kept (2008 GeoJSON crs)", async () => {
    const t = await readTable(fs.readFileSync(fixture("points.geojson")), "points.geojson");
    expect(t.format).toBe("geojson");
    expect(t.columns).toEqual(["x", "y", "name", "elev", "note"]);
    expect(t.data.map((c) => c.kind)).toEqual(["number", "number", "text", "number", "text"]);
    expect(values(t.data[0])).toEqual([500000.5, 500010, 500020]);
    expect(values(t.data[3])).toEqual([12.5, NaN, -3]);
    expect(values(t.data[2])).toEqual(["BH1", "BH2", ""]);
    expect(t.lines).toEqual([5, 7, 10]);
    expect(t.unusable).toEqual([{ row: 1, line: 7, column: 3, reason: "missing value in column 'elev'" }]);
    expect(t.crs).toEqual({ epsg: 28355, label: "EPSG:28355" });
  });

  it("semicolon text without a header: decimal commas read, the first row is data (README 'Points')", async () => {
    const t = await readPointTable(fixture("headerless-semicolon.csv"), { x: "1", y: "2", z: "3" });
    expect(t.hasHeader).toBe(false);
    expect(t.decimalComma).toBe(true);
    expect(t.columns).toEqual(["1", "2", "3"]);
    expect(t.lines).toEqual([1, 2, 3]);
    expect(values(t.data[0])).toEqual([512400.125, 512410, 512420.25]);
    expect(values(t.data[2])).toEqual([101.42, 101.55, 101.61]);
  });

  it("refuses a header option it does not know, naming the option", () => {
    const e = errorOf(() => parsePointTable("x,y,z\n1,2,3\n", "a.csv", { header: "first" as "none" }));
    expect(e.exitCode).toBe(ExitCode.usage);
    expect(e.option).toBe("header");
  });
});

describe("files without a header row", () => {
  it("auto: a first row of numbers only is data; columns are named by position and chosen by position", async () => {
    const t = await readPointTable(fixture("headerless.txt"), { x: "2", y: "3", z: "4" });
    expect(t.hasHeader).toBe(false);
    expect(t.columns).toEqual(["1", "2", "3", "4"]);
    expect(t.lines).toEqual([2, 3, 4, 5, 6, 7, 8, 9]);
    expect(t.rows[0]).toEqual(["1001", "512400.125", "5402200.500", "101.42"]);
    expect([t.xColumn, t.yColumn, t.zColumn]).toEqual([1, 2, 3]);
    expect(t.chosenBy).toEqual({ x: "position", y: "position", z: "position" });
    expect(t.columnChoice).toBe("named");
    const c = cleanPoints(t);
    expect(Array.from(c.x.slice(0, 3))).toEqual([512400.125, 512410, 512420.25]);
    expect(Array.from(c.z.slice(0, 3))).toEqual([101.42, 101.55, 101.61]);
    expect(c.lines.slice(0, 3)).toEqual([2, 3, 4]);
  });

  it("refuses to guess x and y, showing the first row and how to name the columns by position", async () => {
    const e = await rejection(readPointTable(fixture("headerless.txt")));
    expect(e.exitCode).toBe(ExitCode.input);
    expect(e.place).toEqual({ file: fixture("headerless.txt"), line: 2 });
    expect(e.message).toContain('first row: "1001  512400.125  5402200.500  101.42"');
    expect(e.messageFor((o) => `--${o}`)).toContain("name the columns by position, e.g. --x 1 --y 2 --z 3");
    expect(e.message).not.toContain("\n");
    expect(e.option).toBe("x");
  });

  it("asks only for the columns not named; a locations file needs no value column", () => {
    const text = "1001 10 20 5\n1002 11 21 6\n";
    const e = errorOf(() => parsePointTable(text, "h.txt", { x: "2", y: "3" }));
    expect(e.message).toContain("which column is the value");
    expect(e.messageFor((o) => `--${o}`)).toContain("e.g. --z 3");
    expect(e.option).toBe("z");
    const loc = parsePointTable(text, "loc.txt", { x: "2", y: "3", needValue: false });
    expect(loc.zColumn).toBe(-1);
    expect(loc.chosenBy.z).toBe("none");
  });

  it("the command line shows the same one-line refusal and reads the file with --x 2 --y 3 --z 4", async () => {
    const dir = fs.mkdtempSync(path.join(os.tmpdir(), "rbfield-readers-"));
    const out = path.join(dir, "m.rbfield.json");
    let err = "";
    const io = { out: () => {}, err: (s: string) => (err += s + "\n") };
    const refused = await main(["fit", fixture("headerless.txt"), "--out", out, "--quiet"], io);
    expect(refused).toBe(ExitCode.input);
    expect(err.trim().split("\n")).toHaveLength(1);
    expect(err).toContain("name the columns by position, e.g. --x 1 --y 2 --z 3");
    expect(fs.existsSync(out)).toBe(false);
    err = "";
    const ok = await main(["fit", fixture("headerless.txt"), "--out", out, "--x", "2", "--y", "3", "--z", "4", "--quiet"], io);
    expect(ok, err).toBe(0);
    const model = JSON.parse(fs.readFileSync(out, "utf8"));
    expect(model.points.x.slice(0, 2)).toEqual([512400.125, 512410]);
    expect(model.points.line.slice(0, 2)).toEqual([2, 3]);
  });

  it('header "none": a first row of numbers that looks like names is read as data at line 1', () => {
    const text = fs.readFileSync(fixture("year-columns.csv"), "utf8");
    const t = parsePointTable(text, "year-columns.csv", { header: "none", x: "2", y: "3", z: "4" });
    expect(t.hasHeader).toBe(false);
    expect(t.columns).toEqual(["1", "2", "3", "4"]);
    expect(t.lines).toEqual([1, 2, 3, 4]);
    expect(values(t.data[1])).toEqual([2019, 10, 11, 12]);
    expect(values(t.data[3])).toEqual([3, 1.5, 2.5, 3.5]);
    // Column 1 holds "station", "A", "B", "C": text.
    expect(t.data[0]).toEqual({ name: "1", kind: "text", values: ["station", "A", "B", "C"] });
    expect(t.unusable).toEqual([]);
  });

  it('header "none": a row of names becomes a row that cannot be used, with the reason', () => {
    const t = parsePointTable("x,y,z\n1,2,3\n4,5,6\n", "n.csv", { header: "none", x: "1", y: "2", z: "3" });
    expect(t.rows[0]).toEqual(["x", "y", "z"]);
    expect(t.unusable).toEqual([{ row: 0, line: 1, column: 0, reason: "value 'x' in column '1' is not a number" }]);
    const c = cleanPoints(t);
    expect(c.skipped).toEqual([{ line: 1, row: 0, reason: "value 'x' in column '1' is not a number" }]);
    expect(Array.from(c.x)).toEqual([1, 4]);
  });

  it("auto: a first row with any word in it is a header, even when other names are numbers", () => {
    const t = parsePointTable("station,2019,2020,3\nA,10,20,1.5\n", "y.csv", { x: "2019", y: "2020", z: "3" });
    expect(t.hasHeader).toBe(true);
    expect(t.lines).toEqual([2]);
  });
});

describe("a set-out list: point ids that do not recur beside coordinates named by position (README 'Points'; common practice)", () => {
  const text = "S1,181210.0,532120.0\nS2,181230.0,532140.0\nS3,181220.0,532130.0\n";

  it("--x 3 --y 2 with numbers there: the first row is data, S1 is kept", () => {
    const t = parsePointTable(text, "setout.csv", { x: "3", y: "2", needValue: false });
    expect(t.hasHeader).toBe(false);
    expect(t.lines).toEqual([1, 2, 3]);
    expect(t.rows.map((r) => r[0])).toEqual(["S1", "S2", "S3"]);
    expect(values(t.data[2])).toEqual([532120, 532140, 532130]);
  });

  it("a one-row list is data too", () => {
    const t = parsePointTable("S1,181210.0,532120.0\n", "one.csv", { x: "3", y: "2", needValue: false });
    expect(t.lines).toEqual([1]);
    expect(t.rows[0][0]).toBe("S1");
  });

  it("a header row (names at those positions) stays a header; without positions the list is refused as before", () => {
    const t = parsePointTable("id,north,east\n" + text, "named.csv", { x: "3", y: "2", needValue: false });
    expect(t.hasHeader).toBe(true);
    expect(t.lines).toEqual([2, 3, 4]);
    // Without positions nothing says the first row is data: it is read as names, as before.
    const e = errorOf(() => parsePointTable(text, "setout.csv", { needValue: false }));
    expect(e.message).toMatch(/cannot tell which are the x and y columns from the header/);
  });
});

describe("identifier columns of wells, boreholes and samples (README 'Point ids and codes'; common practice)", () => {
  for (const name of ["well", "Well_ID", "wellid", "station", "Sample", "sample_id", "SITE_ID", "borehole", "BH", "point", "id"]) {
    it(`'${name}' is the point-id column`, () => {
      const t = parsePointTable(`${name},x,y,z\nA,1,2,3\nB,4,5,6\nC,7,8,9\n`, "w.csv");
      expect(chooseTextColumns(t, {}).id).toBe(0);
    });
  }
});

describe("columns named by 1-based position", () => {
  const text = "station,2019,2020,3\nA,10,20,1.5\nB,11,21,2.5\n";

  it("a number picks the column at that position when no column name equals it", () => {
    const t = parsePointTable(text, "y.csv", { x: "2", y: "2020", z: "4" });
    expect([t.xColumn, t.yColumn, t.zColumn]).toEqual([1, 2, 3]);
    expect(t.chosenBy).toEqual({ x: "position", y: "named", z: "position" });
  });

  it("a column name that is a number wins over the position only when it matches exactly", () => {
    // "3" is the fourth column's name, so it is that column, not the third; "03" names no column
    // exactly, so it is the third column.
    const t = parsePointTable(text, "y.csv", { x: "2", y: "03", z: "3" });
    expect([t.xColumn, t.yColumn, t.zColumn]).toEqual([1, 2, 3]);
    expect(t.chosenBy).toEqual({ x: "position", y: "position", z: "named" });
  });

  it("a position beyond the last column is refused, listing the columns and naming the option", () => {
    const e = errorOf(() => parsePointTable(text, "y.csv", { x: "2", y: "5", z: "4" }));
    expect(e.exitCode).toBe(ExitCode.input);
    // The library names the option; the CLI writes it as the flag (RbfieldError.messageFor).
    expect(e.messageFor((o) => `--${o}`)).toContain("y.csv, line 1: --y 5: there is no column at that position");
    expect(e.message).toContain("'station', '2019', '2020', '3'");
    expect(e.option).toBe("y");
    expect(errorOf(() => parsePointTable(text, "y.csv", { x: "0", y: "2", z: "4" })).option).toBe("x");
  });
});

describe("text columns carried through cleaning", () => {
  it("each clean point keeps its row's ids and codes; a merged point keeps its first row's", async () => {
    const c = cleanPoints(await readPointTable(fixture("codes.csv")));
    // Line 4 (1049) repeats line 2's position and level: merged into 1047; line 5 has no level.
    expect(c.lines).toEqual([2, 3, 6]);
    expect(c.merged.map((g) => g.lines)).toEqual([[2, 4]]);
    expect(c.skipped).toEqual([{ line: 5, row: 3, reason: "missing value in column 'level'" }]);
    expect(c.texts).toEqual([
      { name: "point_id", values: ["1047", "1048", "1051"] },
      { name: "code", values: ["GS", "TP", ""] },
    ]);
  });

  it("GeoJSON properties that are text reach the clean points too", async () => {
    const c = cleanPoints(await readPointTable(fixture("points.geojson")));
    expect(c.lines).toEqual([5, 10]);
    expect(c.texts).toEqual([
      { name: "name", values: ["BH1", ""] },
      { name: "note", values: ["", 'a, "b"'] },
    ]);
  });

  it("a table of numbers only gives no text columns", () => {
    expect(cleanPoints(parseTable("x,y,z\n1,2,3\n4,5,6\n", "a.csv")).texts).toEqual([]);
  });
});

describe("stages depend only downward", () => {
  it("src/clean imports nothing from src/read or src/write (issue 9: clean works on numbers only)", () => {
    const dir = fileURLToPath(new URL("../src/clean/", import.meta.url));
    for (const name of fs.readdirSync(dir)) {
      const source = fs.readFileSync(path.join(dir, name), "utf8");
      const imports = [...source.matchAll(/^import[^;]*from\s+"([^"]+)"/gm)].map((m) => m[1]);
      expect(imports.length, name).toBeGreaterThan(0);
      for (const spec of imports) expect(spec, `${name} imports ${spec}`).not.toMatch(/\/(read|write)\//);
    }
  });
});

describe("a data-collector export: point number, northing, easting, elevation, code (common practice)", () => {
  const text = "1047,4000047.593,500012.100,101.23,GS\n1048,4000050.100,500020.500,101.40,GS\n1049,4000060.000,500011.000,101.10,KB\n1050,4000071.200,500030.000,101.90,GS\n";
  it("has no header row although its first row holds a code: refused without names, showing the first row", () => {
    const e = errorOf(() => parsePointTable(text, "dc.csv"));
    expect(e.message).toContain('first row: "1047,4000047.593,500012.100,101.23,GS"');
    expect(e.message).toMatch(/name the columns by position/);
  });
  it("reads with columns named by position; northing and easting are never swapped silently", () => {
    const t = parsePointTable(text, "dc.csv", { x: "3", y: "2", z: "4" });
    expect(t.hasHeader).toBe(false);
    expect(t.lines).toEqual([1, 2, 3, 4]);
    expect(t.rows[0][2]).toBe("500012.100");
    const codes = t.data.find((c) => c.name === "5");
    expect(codes?.kind).toBe("text");
  });
});
