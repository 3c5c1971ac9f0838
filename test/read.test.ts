import { describe, expect, it } from "vitest";
import { errorOf } from "./helpers.ts";
import { fileURLToPath } from "node:url";
import { ExitCode, RbfieldError } from "../src/errors.ts";
import { parseNumber, parsePointTable, readPointTable } from "../src/read/points.ts";

const fixture = (name: string) => fileURLToPath(new URL(`./fixtures/read/${name}`, import.meta.url));


async function asyncErrorOf(fn: () => Promise<unknown>): Promise<RbfieldError> {
  try {
    await fn();
  } catch (e) {
    if (e instanceof RbfieldError) return e;
    throw e;
  }
  throw new Error("expected an RbfieldError");
}

describe("parseNumber", () => {
  it("accepts plain decimals with sign, spaces and exponents", () => {
    expect(parseNumber("12.5", false)).toBe(12.5);
    expect(parseNumber("  -3 ", false)).toBe(-3);
    expect(parseNumber("+7", false)).toBe(7);
    expect(parseNumber(".5", false)).toBe(0.5);
    expect(parseNumber("5.", false)).toBe(5);
    expect(parseNumber("-1.5e3", false)).toBe(-1500);
    expect(parseNumber("2E-2", false)).toBe(0.02);
    expect(parseNumber("007", false)).toBe(7);
  });
  it("rejects anything that is not a plain finite decimal", () => {
    for (const bad of ["", "  ", "NaN", "nan", "Infinity", "-Infinity", "inf", "1e999", "-1e999", "12abc",
      "0x10", "0b1", "1,5", "1 000", "1e", "e5", ".", "-", "+-1", "1..2", "١٢"]) {
      expect(parseNumber(bad, false), bad).toBeNaN();
    }
  });
  it("reads a decimal comma only when told to", () => {
    expect(parseNumber("12,5", true)).toBe(12.5);
    expect(parseNumber(" -,25 ", true)).toBe(-0.25);
    expect(parseNumber("12", true)).toBe(12);
    expect(parseNumber("1,5e2", true)).toBe(150);
    // A dot in a decimal-comma file is ambiguous (thousands mark?), so it is refused.
    expect(parseNumber("12.5", true)).toBeNaN();
    expect(parseNumber("1,2,3", true)).toBeNaN();
  });
});

describe("delimited text formats", () => {
  it("reads comma CSV with a header (RFC 4180 §2)", () => {
    const t = parsePointTable("x,y,z\n1,2,3\n4,5,6\n", "a.csv");
    expect(t.file).toBe("a.csv");
    expect(t.delimiter).toBe(",");
    expect(t.columns).toEqual(["x", "y", "z"]);
    expect(t.rows).toEqual([["1", "2", "3"], ["4", "5", "6"]]);
    expect(t.lines).toEqual([2, 3]);
    expect([t.xColumn, t.yColumn, t.zColumn]).toEqual([0, 1, 2]);
    expect(t.columnChoice).toBe("detected");
    expect(t.decimalComma).toBe(false);
    expect(t.crs).toBeUndefined();
  });

  it("reads semicolon files with a decimal comma", () => {
    const t = parsePointTable("Ost;Nord;Wert\n10,5;20,25;3,75\n11;21;4,5\n", "de.csv", { x: "ost", y: "NORD" });
    expect(t.delimiter).toBe(";");
    expect(t.decimalComma).toBe(true);
    expect(t.rows[0]).toEqual(["10,5", "20,25", "3,75"]);
    expect([t.xColumn, t.yColumn, t.zColumn]).toEqual([0, 1, 2]);
    expect(t.columnChoice).toBe("named");
  });

  it("keeps decimal points in a semicolon file with no comma decimals", () => {
    const t = parsePointTable("x;y;z\n1.5;2.5;3\n", "s.csv");
    expect(t.delimiter).toBe(";");
    expect(t.decimalComma).toBe(false);
  });

  it("reads TSV", () => {
    const t = parsePointTable("Easting\tNorthing\tRL\n100\t200\t3.5\n", "t.tsv");
    expect(t.delimiter).toBe("\t");
    expect(t.rows).toEqual([["100", "200", "3.5"]]);
    expect([t.xColumn, t.yColumn, t.zColumn]).toEqual([0, 1, 2]);
  });

  it("reads whitespace-separated text (runs of spaces and tabs)", () => {
    const t = parsePointTable("  x    y \t z\n 1   2\t\t3\n4 5 6   \n", "w.txt");
    expect(t.delimiter).toBe("whitespace");
    expect(t.columns).toEqual(["x", "y", "z"]);
    expect(t.rows).toEqual([["1", "2", "3"], ["4", "5", "6"]]);
    expect(t.lines).toEqual([2, 3]);
  });

  it("treats tab-aligned columns as whitespace text, not empty TSV fields", () => {
    const t = parsePointTable("x\t\ty\t\tz\n1\t\t2\t\t3\n", "w.txt");
    expect(t.delimiter).toBe("whitespace");
    expect(t.rows).toEqual([["1", "2", "3"]]);
  });

  it("reads a double-quoted cell in whitespace text", () => {
    const t = parsePointTable('site x y z\n"Bore ""A"" 1" 10 20 30\n', "w.txt");
    expect(t.rows).toEqual([['Bore "A" 1', "10", "20", "30"]]);
  });

  it("keeps quoted fields with embedded delimiters and doubled quotes (RFC 4180 §2.6, §2.7)", () => {
    const t = parsePointTable('name,x,y,z\n"Smith, J",1,2,3\n"say ""hi""",4,5,6\n', "q.csv");
    expect(t.rows).toEqual([["Smith, J", "1", "2", "3"], ['say "hi"', "4", "5", "6"]]);
    expect([t.xColumn, t.yColumn, t.zColumn]).toEqual([1, 2, 3]);
  });

  it("keeps quoted fields in semicolon files", () => {
    const t = parsePointTable('name;x;y;z\n"a;b";1,5;2;3\n', "q.csv");
    expect(t.rows).toEqual([["a;b", "1,5", "2", "3"]]);
    expect(t.decimalComma).toBe(true);
  });

  it("counts lines correctly after a quoted field with an embedded newline (RFC 4180 §2.6)", () => {
    const t = parsePointTable('id,x,y,z\n"two\nlines",1,2,3\nc,4,5,6\n"three\n\nlines",7,8,9\nd,1,1,1\n', "n.csv");
    expect(t.rows[0][0]).toBe("two\nlines");
    expect(t.rows[2][0]).toBe("three\n\nlines");
    expect(t.lines).toEqual([2, 4, 5, 8]);
  });

  it("accepts a UTF-8 BOM and CRLF line ends (RFC 4180 §2.1)", () => {
    const t = parsePointTable("\uFEFFx,y,z\r\n1,2,3\r\n\r\n4,5,6\r\n", "b.csv");
    expect(t.columns).toEqual(["x", "y", "z"]);
    expect(t.rows).toEqual([["1", "2", "3"], ["4", "5", "6"]]);
    expect(t.lines).toEqual([2, 4]);
  });

  it("keeps an embedded CRLF line count right", () => {
    const t = parsePointTable('id,x,y,z\r\n"a\r\nb",1,2,3\r\nc,4,5,6\r\n', "b.csv");
    expect(t.lines).toEqual([2, 4]);
  });

  it("skips empty lines and lines starting with '#'", () => {
    const text = "# survey 2024\n\nx,y,z\n# mid comment with a \"quote\n1,2,3\n\n   \n,,\n4,5,6\n# end\n";
    const t = parsePointTable(text, "c.csv");
    expect(t.rows).toEqual([["1", "2", "3"], ["4", "5", "6"]]);
    expect(t.lines).toEqual([5, 9]);
  });

  it("skips comments right after a quoted multi-line field", () => {
    const t = parsePointTable('id,x,y,z\n"a\nb",1,2,3\n#note\n#note\nc,4,5,6\n', "c.csv");
    expect(t.lines).toEqual([2, 6]);
  });

  it("pads short rows with empty cells", () => {
    const t = parsePointTable("x,y,z\n1,2\n", "s.csv");
    expect(t.rows).toEqual([["1", "2", ""]]);
  });

  it("keeps duplicate header names and names empty ones 'column N'", () => {
    const t = parsePointTable("x,,y,y,z\n1,a,2,b,3\n", "h.csv");
    expect(t.columns).toEqual(["x", "column 2", "y", "y", "z"]);
    expect([t.xColumn, t.yColumn, t.zColumn]).toEqual([0, 2, 4]);
  });
});

describe("column choice", () => {
  it("detects common names ignoring case, spaces, underscores and units in brackets", () => {
    const t = parsePointTable("Point ID,Easting (m),NORTHING [m],Reduced_Level\nP1,1,2,3\n", "d.csv");
    expect([t.xColumn, t.yColumn, t.zColumn]).toEqual([1, 2, 3]);
    const u = parsePointTable("E,N,Elev\n1,2,3\n", "d.csv");
    expect([u.xColumn, u.yColumn, u.zColumn]).toEqual([0, 1, 2]);
    const v = parsePointTable("map_x,map y,head\n1,2,3\n", "d.csv");
    expect([v.xColumn, v.yColumn, v.zColumn]).toEqual([0, 1, 2]);
  });

  it("prefers the listed name order, not column order", () => {
    // "n" is also a northing name, but "y" comes first in the list.
    const t = parsePointTable("n,x,y,z\n1,2,3,4\n", "d.csv");
    expect([t.xColumn, t.yColumn, t.zColumn]).toEqual([1, 2, 3]);
  });

  it("falls back to the first numeric column for the value, skipping id-like names", () => {
    const t = parsePointTable("id,x,y,name,depth\n1,10,20,A,5\n2,11,21,B,6\n", "f.csv");
    expect(t.zColumn).toBe(4);
  });

  it("matches named columns case-insensitively", () => {
    const t = parsePointTable("EAST,NORTH,Depth\n1,2,3\n", "n.csv", { x: "east", y: "north", z: "DEPTH" });
    expect([t.xColumn, t.yColumn, t.zColumn]).toEqual([0, 1, 2]);
    expect(t.columnChoice).toBe("named");
  });

  it("refuses a named column that does not exist, listing the columns", () => {
    const e = errorOf(() => parsePointTable("x,y,elev\n1,2,3\n", "pts.csv", { z: "depth" }));
    expect(e.exitCode).toBe(ExitCode.input);
    expect(e.message).toContain("pts.csv, line 1");
    expect(e.message).toContain("'depth'");
    expect(e.message).toContain("'x', 'y', 'elev'");
  });

  it("asks for --x and --y when they cannot be detected", () => {
    const e = errorOf(() => parsePointTable("a,b,c\n1,2,3\n", "pts.csv"));
    expect(e.exitCode).toBe(ExitCode.input);
    expect(e.message).toContain("pts.csv, line 1");
    expect(e.messageFor((o) => `--${o}`)).toContain("--x and --y");
    expect(e.place).toEqual({ file: "pts.csv", line: 1 });
  });

  it("asks for --z when no value column is found", () => {
    const e = errorOf(() => parsePointTable("x,y,name\n1,2,A\n", "pts.csv"));
    expect(e.message).toContain("pts.csv, line 1");
    expect(e.messageFor((o) => `--${o}`)).toContain("--z");
  });

  it("allows no value column for prediction locations", () => {
    const t = parsePointTable("x,y,name\n1,2,A\n", "loc.csv", { needValue: false });
    expect(t.zColumn).toBe(-1);
    const u = parsePointTable("x,y,value\n1,2,3\n", "loc.csv", { needValue: false });
    expect(u.zColumn).toBe(2);
  });
});

describe("input errors", () => {
  it("reports an empty file", () => {
    for (const text of ["", "\uFEFF", "  \n\n \r\n"]) {
      const e = errorOf(() => parsePointTable(text, "empty.csv"));
      expect(e.message).toContain("empty.csv");
      expect(e.message).toContain("file is empty");
      expect(e.exitCode).toBe(ExitCode.input);
    }
    expect(errorOf(() => parsePointTable("# only\n# comments\n", "c.csv")).message).toContain("file is empty");
  });

  it("reports a header with no data rows", () => {
    for (const text of ["x,y,z\n", "x,y,z", "x,y,z\n\n# nothing\n"]) {
      const e = errorOf(() => parsePointTable(text, "h.csv"));
      expect(e.message).toContain("h.csv, line 1");
      expect(e.message).toContain("no data rows after the header");
    }
  });

  it("names the line and column of the first extra cell", () => {
    const e = errorOf(() => parsePointTable("x,y,z\n1,2,3\n4,5,6,7\n", "x.csv"));
    expect(e.message).toContain("x.csv, line 3, column 7");
    expect(e.place).toEqual({ file: "x.csv", line: 3, column: 7 });
  });

  it("finds the extra cell after quoted fields and embedded newlines", () => {
    const e = errorOf(() => parsePointTable('x,y,z\n"a\nb,c",2,3,9\n', "x.csv"));
    // Row starts on line 2; its fourth cell starts on line 3, after `b,c",2,3,`.
    expect(e.place).toEqual({ file: "x.csv", line: 3, column: 10 });
  });

  it("finds the extra cell in whitespace text", () => {
    const e = errorOf(() => parsePointTable("x y z\n1 2 3  44\n", "w.txt"));
    expect(e.place).toEqual({ file: "w.txt", line: 2, column: 8 });
  });

  it("reports an unterminated quote at its line and column", () => {
    const e = errorOf(() => parsePointTable('x,y,z\n1,2,3\n4,"5,6\n7,8,9\n', "u.csv"));
    expect(e.message).toContain("u.csv, line 3, column 3");
    expect(e.message).toContain("no closing quote");
  });
});

describe("GeoJSON (RFC 7946)", () => {
  const fc = (features: string, extra = "") =>
    `{"type":"FeatureCollection",${extra}"features":[\n${features}\n]}`;
  const pt = (x: number, y: number, props: string) =>
    `{"type":"Feature","geometry":{"type":"Point","coordinates":[${x},${y}]},"properties":${props}}`;

  it("reads Point features with properties, a missing value and a crs member", async () => {
    const t = await readPointTable(fixture("points.geojson"));
    expect(t.delimiter).toBe("geojson");
    expect(t.columns).toEqual(["x", "y", "name", "elev", "note"]);
    expect(t.rows).toEqual([
      ["500000.5", "6000000.25", "BH1", "12.5", ""],
      ["500010", "6000010", "BH2", "", ""],
      ["500020", "6000020", "", "-3", 'a, "b"'],
    ]);
    expect(t.lines).toEqual([5, 7, 10]);
    expect([t.xColumn, t.yColumn, t.zColumn]).toEqual([0, 1, 3]);
    expect(t.crs).toEqual({ epsg: 28355, label: "EPSG:28355" });
  });

  it("uses the property named by z, case-insensitively", () => {
    const t = parsePointTable(fc(pt(1, 2, '{"Depth":5,"elev":9}')), "g.json", { z: "depth" });
    expect(t.zColumn).toBe(2);
    expect(t.columnChoice).toBe("named");
  });

  it("uses the third coordinate when no value property is found", () => {
    const text = fc(`{"type":"Feature","geometry":{"type":"Point","coordinates":[1,2,30]},"properties":{"name":"A"}}`);
    const t = parsePointTable(text, "g.json");
    expect(t.columns).toEqual(["x", "y", "z", "name"]);
    expect(t.rows).toEqual([["1", "2", "30", "A"]]);
    expect(t.zColumn).toBe(2);
  });

  it("prefers a value property over the third coordinate", () => {
    const text = fc(`{"type":"Feature","geometry":{"type":"Point","coordinates":[1,2,30]},"properties":{"head":7}}`);
    expect(parsePointTable(text, "g.json").zColumn).toBe(3);
  });

  it("reads 'EPSG:28355' as a crs name", () => {
    const t = parsePointTable(
      fc(pt(1, 2, '{"z":1}'), '"crs":{"type":"name","properties":{"name":"EPSG:28355"}},'),
      "g.json",
    );
    expect(t.crs).toEqual({ epsg: 28355, label: "EPSG:28355" });
  });

  it("refuses a non-Point geometry, naming the feature and its line", () => {
    const text = fc(
      [pt(1, 2, '{"z":1}'), `{"type":"Feature","geometry":{"type":"LineString","coordinates":[[0,0],[1,1]]},"properties":{}}`]
        .join(",\n"),
    );
    const e = errorOf(() => parsePointTable(text, "g.geojson"));
    expect(e.exitCode).toBe(ExitCode.input);
    expect(e.message).toContain("g.geojson, line 3");
    expect(e.message).toContain("features[1]");
    expect(e.message).toContain("LineString");
  });

  it("refuses a null geometry", () => {
    const e = errorOf(() => parsePointTable(fc(`{"type":"Feature","geometry":null,"properties":{}}`), "g.json"));
    expect(e.message).toContain("g.json, line 2");
    expect(e.message).toContain("features[0]");
  });

  it("reports invalid JSON with line and column (RFC 8259 §2)", () => {
    const text = '{\n  "type": "FeatureCollection",\n  "features": [\n    {"type": "Feature" "geometry": null}\n  ]\n}\n';
    const e = errorOf(() => parsePointTable(text, "bad.geojson"));
    expect(e.message).toContain("bad.geojson, line 4, column 24");
    expect(e.message).toContain("invalid JSON");
  });

  it("reports a trailing comma and a truncated file", () => {
    const e1 = errorOf(() => parsePointTable('{"type": "FeatureCollection",\n "features": [1,]}', "t.json"));
    expect(e1.place).toEqual({ file: "t.json", line: 2, column: 17 });
    const e2 = errorOf(() => parsePointTable('\uFEFF  {"type": "Feat', "t.json"));
    expect(e2.place?.line).toBe(1);
    expect(e2.message).toContain("string is not closed");
  });

  it("refuses a JSON document that is not a FeatureCollection", () => {
    const e = errorOf(() => parsePointTable('{"type":"Point","coordinates":[1,2]}', "p.json"));
    expect(e.message).toContain("p.json, line 1");
    expect(e.message).toContain("FeatureCollection");
  });
});

describe("readPointTable", () => {
  it("reads a file with a BOM and CRLF, quoted number and named columns detected", async () => {
    const t = await readPointTable(fixture("bom-crlf.csv"));
    expect(t.columns).toEqual(["Easting", "Northing", "RL"]);
    expect(t.rows).toEqual([["100.5", "200.25", "10"], ["101", "201", "11.5"]]);
    expect(t.lines).toEqual([2, 3]);
  });

  it("reads TSV from disk", async () => {
    const t = await readPointTable(fixture("tabs.tsv"));
    expect(t.delimiter).toBe("\t");
    expect(t.zColumn).toBe(2);
  });

  it("gives an I/O error naming a missing file", async () => {
    const path = fixture("no-such-file.csv");
    const e = await asyncErrorOf(() => readPointTable(path));
    expect(e.exitCode).toBe(ExitCode.io);
    expect(e.message).toContain(path);
    expect(e.message).toContain("no such file");
  });

  it("gives an I/O error for a directory", async () => {
    const e = await asyncErrorOf(() => readPointTable(fixture("")));
    expect(e.exitCode).toBe(ExitCode.io);
  });
});
