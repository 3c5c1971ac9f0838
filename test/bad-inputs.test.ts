// Bad inputs, one committed fixture each (test/fixtures/bad/), run through the command line in-process
// with main() from src/cli.ts. For every case: the exit code (README "Exit codes"), the key words of
// the message (the file, the line and column where they apply, and the advice), exactly one line on
// stderr with no stack trace and no control characters, no output file afterwards, a pre-existing
// output left as it was, no temporary files left behind, and the input files unchanged byte for byte.
// A few cases run the real CLI in a child process to check the process exit code as well.
//
// Where the expected behaviour comes from: the issue "Field data is messy" (one line, file/line/column,
// advice, exit codes), RFC 4180 (CSV quoting and record structure), RFC 7946 (GeoJSON Point features),
// IEEE 754 (the double and Float32 ranges), RFC 8259 (JSON syntax) and common practice for atomic
// replacement of files (write a new temporary file, then rename).
import { RUN_OUTPUTS } from "../src/write/outputs.ts";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import { errorOf } from "./helpers.ts";
import { spawnSync } from "node:child_process";
import * as fs from "node:fs";
import * as os from "node:os";
import * as path from "node:path";
import { fileURLToPath } from "node:url";
import { main } from "../src/cli.ts";
import { cleanPoints } from "../src/clean/clean.ts";
import { ExitCode } from "../src/errors.ts";
import { parsePointTable, readPointTable } from "../src/read/points.ts";
import { contourBands, contourLines } from "../src/write/contours.ts";
import { refuseInputAsOutput, writeFileAtomic } from "../src/write/atomic.ts";
import { encodeGeoTiff } from "../src/write/geotiff.ts";
import type { GridValues } from "../src/types.ts";

const FIXTURES = fileURLToPath(new URL("./fixtures/bad/", import.meta.url));
const ROOT = fileURLToPath(new URL("../", import.meta.url));
const RUN_FILES = RUN_OUTPUTS.map((o) => o.file);
/** Stands for a model fitted (in beforeAll) from good-points.csv, copied into the case's folder. */
const GOOD_MODEL = "good.rbfield.json";

async function cli(args: string[]) {
  let out = "", err = "";
  const code = await main(args, { out: (s) => (out += s), err: (s) => (err += s + "\n") });
  return { code, out, err };
}

interface Paths {
  /** The case's main input, copied into the case folder. */
  input: string;
  /** The output path (a file, or a folder for `run`). */
  out: string;
  /** Another fixture, copied into the case folder. */
  file(name: string): string;
}

interface Case {
  name: string;
  /** Fixture copied into a fresh folder as the main input (GOOD_MODEL: the fitted good model). */
  fixture: string;
  /** More fixtures the command reads (also checked unchanged). */
  extra?: string[];
  args(p: Paths): string[];
  /** The output is a file (default) or the folder of `run`. */
  out?: "file" | "dir";
  /** The output is the input itself. */
  outIsInput?: boolean;
  outName?: string;
  code: number;
  /** Key words of the message, including the advice. */
  words: (string | RegExp)[];
  /** The file the message must name (default: the main input); null when the problem is an option. */
  names?: string | null;
  line?: number;
  column?: number;
  /** Run the case only when this holds (e.g. a platform feature it needs). */
  only?: boolean;
}

/** Line and column just past the end of a fixture (where a parser meets the end of a cut-off file). */
function endOf(name: string): { line: number; column: number } {
  const lines = fs.readFileSync(path.join(FIXTURES, name), "utf8").split("\n");
  return { line: lines.length, column: lines[lines.length - 1].length + 1 };
}

const Q = ["--quiet"];

/** Linux's /sys: a folder nobody, not even root, can create files in. */
const SYS_READ_ONLY = (() => {
  try {
    if (!fs.statSync("/sys").isDirectory()) return false;
    const probe = "/sys/.rbfield-probe";
    fs.writeFileSync(probe, "", { flag: "wx" });
    fs.unlinkSync(probe);
    return false;
  } catch {
    return fs.existsSync("/sys");
  }
})();
const fitTo = (p: Paths, ...more: string[]) => ["fit", p.input, "--out", p.out, ...more, ...Q];
const gridTo = (p: Paths, ...more: string[]) => ["grid", p.input, "--out", p.out, ...more, ...Q];

const CASES: Case[] = [
  // ---- Empty and header-only files
  { name: "empty file", fixture: "empty.csv", args: (p) => fitTo(p), code: 3, line: 1, words: ["file is empty", "give a header row"] },
  {
    name: "only empty and comment lines",
    fixture: "empty-and-comments.csv",
    args: (p) => fitTo(p),
    code: 3,
    line: 1,
    words: ["only empty and comment lines", "give a header row"],
  },
  { name: "header only", fixture: "header-only.csv", args: (p) => fitTo(p), code: 3, line: 1, words: ["no data rows after the header", "add one row per point"] },
  {
    name: "header only, with a BOM, CRLF and a comment",
    fixture: "header-only-bom-crlf.csv",
    args: (p) => fitTo(p),
    code: 3,
    line: 1,
    words: ["no data rows after the header"],
  },
  // ---- Columns
  {
    name: "no numeric columns",
    fixture: "no-numeric-columns.csv",
    args: (p) => fitTo(p),
    code: 3,
    line: 1,
    words: ["cannot tell which are the x and y columns", "'station', 'crew', 'remark'", "name them with --x and --y"],
  },
  {
    name: "x and y but no value column",
    fixture: "no-value-column.csv",
    args: (p) => fitTo(p),
    code: 3,
    line: 1,
    words: ["cannot find the value column", "name it with --z"],
  },
  {
    name: "--z names a column that does not exist",
    fixture: "four-points.csv",
    args: (p) => fitTo(p, "--z", "depth"),
    code: 3,
    line: 1,
    words: ["--z column 'depth' not found", "'x', 'y', 'z'"],
  },
  {
    name: "--x names a column that does not exist",
    fixture: "four-points.csv",
    args: (p) => fitTo(p, "--x", "east"),
    code: 3,
    line: 1,
    words: ["--x column 'east' not found"],
  },
  {
    name: "semicolon file with decimal commas and unrecognised (German) header names",
    fixture: "semicolon-german-header.csv",
    args: (p) => fitTo(p),
    code: 3,
    line: 1,
    words: ["'Rechtswert', 'Hochwert', 'Höhe'", "--x and --y"],
  },
  // ---- Record structure (RFC 4180)
  {
    name: "decimal commas in a comma-separated file make extra cells",
    fixture: "decimal-comma-in-comma-csv.csv",
    args: (p) => fitTo(p),
    code: 3,
    line: 2,
    column: 7,
    words: ["row has 4 cells but the header has 3", "unquoted delimiter"],
  },
  {
    name: "semicolon file: an unquoted semicolon in a remark",
    fixture: "semicolon-unquoted-text.csv",
    args: (p) => fitTo(p),
    code: 3,
    line: 3,
    column: 21,
    words: ["row has 5 cells but the header has 4", "unquoted delimiter"],
  },
  {
    name: "quoted field with an embedded delimiter and no closing quote",
    fixture: "unclosed-quote.csv",
    args: (p) => fitTo(p),
    code: 3,
    line: 2,
    column: 7,
    words: ["no closing quote", "written twice"],
  },
  {
    name: "text after a closing quote",
    fixture: "text-after-quote.csv",
    args: (p) => fitTo(p),
    code: 3,
    line: 2,
    column: 7,
    words: ["malformed quotes", "followed by the delimiter"],
  },
  {
    name: "CRLF file with an extra cell (line numbers as editors count them)",
    fixture: "crlf-extra-cell.csv",
    args: (p) => fitTo(p),
    code: 3,
    line: 4,
    column: 7,
    words: ["row has 4 cells but the header has 3"],
  },
  {
    name: "BOM file with two extra cells (the BOM is not a column)",
    fixture: "bom-extra-cells.csv",
    args: (p) => fitTo(p),
    code: 3,
    line: 4,
    column: 7,
    words: ["row has 5 cells but the header has 3"],
  },
  // ---- Encodings and non-text files
  { name: "UTF-16 with a byte-order mark", fixture: "utf16-bom.csv", args: (p) => fitTo(p), code: 3, line: 1, words: ["UTF-16", "save it as UTF-8"] },
  {
    name: "UTF-16 without a byte-order mark",
    fixture: "utf16-no-bom.csv",
    args: (p) => fitTo(p),
    code: 3,
    line: 1,
    words: ["NUL bytes", "save the points as UTF-8 CSV"],
  },
  {
    name: "a spreadsheet (ZIP) saved with a .csv name",
    fixture: "spreadsheet.csv",
    args: (p) => fitTo(p),
    code: 3,
    words: ["ZIP archive", "save the points as CSV"],
  },
  {
    name: "terminal escape sequences in a header name are not echoed",
    fixture: "control-chars-header.csv",
    args: (p) => fitTo(p, "--z", "depth"),
    code: 3,
    line: 1,
    words: ["--z column 'depth' not found", "?[31mlevel?[0m"],
  },
  {
    name: "a line break inside a quoted header name keeps the message on one line",
    fixture: "newline-in-header.csv",
    args: (p) => fitTo(p, "--z", "depth"),
    code: 3,
    line: 1,
    words: ["'level?in metres'", "names are matched ignoring case"],
  },
  {
    name: "a bidirectional override in a header name is not echoed",
    fixture: "bidi-header.csv",
    args: (p) => fitTo(p, "--z", "depth"),
    code: 3,
    line: 1,
    words: ["'lev?el'"],
  },
  // ---- Cells and magnitudes
  {
    name: "Infinity, NaN, empty and non-numeric cells in every row",
    fixture: "no-finite-rows.csv",
    args: (p) => fitTo(p),
    code: 3,
    words: ["usable points"],
  },
  {
    name: "coordinates of 1e300 (beyond ±1e15 map units) are skipped, leaving too few points",
    fixture: "huge-coordinates.csv",
    args: (p) => fitTo(p),
    code: 3,
    words: ["at least 3 are needed"],
  },
  {
    name: "values of 1e300 (beyond the Float32 grid range) are skipped, leaving no points",
    fixture: "huge-values.csv",
    args: (p) => fitTo(p),
    code: 3,
    words: ["usable points"],
  },
  {
    name: "coordinates of 1e-300: the points span too little to compute with",
    fixture: "tiny-coordinates.csv",
    args: (p) => fitTo(p),
    code: 3,
    words: ["span only 2e-300 map units", "smaller units"],
  },
  {
    name: "coordinates of 1e14 that differ by 10: below double precision's useful digits",
    fixture: "relative-span-too-small.csv",
    args: (p) => fitTo(p),
    code: 3,
    words: ["span only 10 map units", "coordinates up to 1e14"],
  },
  // ---- Degenerate geometry
  {
    name: "two usable points (fewer than any trend needs)",
    fixture: "two-usable-points.csv",
    args: (p) => fitTo(p),
    code: 3,
    words: ["only 2 usable points", "at least 3 are needed"],
  },
  {
    name: "five points for quadratic trend (six terms)",
    fixture: "five-points.csv",
    args: (p) => fitTo(p, "--trend", "quadratic"),
    code: 3,
    words: ["too few for quadratic trend", "at least 7"],
  },
  {
    name: "all points on one line with linear trend",
    fixture: "collinear.csv",
    args: (p) => fitTo(p, "--trend", "linear"),
    code: 5,
    words: ["do not support linear trend", "--trend constant"],
  },
  {
    name: "all points on one line with quadratic trend",
    fixture: "collinear.csv",
    args: (p) => fitTo(p, "--trend", "quadratic"),
    code: 5,
    words: ["do not support quadratic trend", "--trend linear"],
  },
  {
    name: "all points on a circle (a conic) with quadratic trend",
    fixture: "on-a-circle.csv",
    args: (p) => fitTo(p, "--trend", "quadratic"),
    code: 5,
    words: ["do not support quadratic trend"],
  },
  {
    name: "all points identical",
    fixture: "all-identical.csv",
    args: (p) => fitTo(p),
    code: 3,
    words: ["at least 3 are needed"],
  },
  {
    name: "coincident points with conflicting values (default limit, 5% of the range)",
    fixture: "conflicting-duplicates.csv",
    args: (p) => fitTo(p),
    code: 3,
    line: 3,
    words: ["lines 3, 7", "differ by 1.6", "--merge-conflicts"],
  },
  {
    name: "coincident points with conflicting values (--max-spread)",
    fixture: "conflicting-duplicates.csv",
    args: (p) => fitTo(p, "--max-spread", "0.5"),
    code: 3,
    line: 3,
    words: ["--max-spread limit 0.5", "--merge-conflicts"],
  },
  // ---- GeoJSON (RFC 7946)
  {
    name: "GeoJSON with a LineString feature",
    fixture: "linestring.geojson",
    args: (p) => fitTo(p),
    code: 3,
    line: 6,
    words: ["features[2] has a LineString geometry", "only Point features", "remove it or convert it to points"],
  },
  { name: "GeoJSON with a Polygon first", fixture: "polygon-first.geojson", args: (p) => fitTo(p), code: 3, line: 2, words: ["features[0] has a Polygon geometry"] },
  { name: "GeoJSON with a MultiPoint", fixture: "multipoint.geojson", args: (p) => fitTo(p), code: 3, line: 3, words: ["features[1] has a MultiPoint geometry"] },
  { name: "GeoJSON with a null geometry", fixture: "null-geometry.geojson", args: (p) => fitTo(p), code: 3, line: 3, words: ["features[1] has a null geometry"] },
  {
    name: "GeoJSON Point with one coordinate",
    fixture: "point-one-coordinate.geojson",
    args: (p) => fitTo(p),
    code: 3,
    line: 3,
    words: ["features[1] Point needs at least two coordinates"],
  },
  {
    name: "GeoJSON features without properties",
    fixture: "no-properties.geojson",
    args: (p) => fitTo(p),
    code: 3,
    line: 1,
    words: ["cannot find the value column", "--z"],
  },
  {
    name: "GeoJSON where most features lack the value property",
    fixture: "properties-without-value.geojson",
    args: (p) => fitTo(p),
    code: 3,
    words: ["at least 3 are needed"],
  },
  { name: "GeoJSON: a single Feature, not a FeatureCollection", fixture: "single-feature.geojson", args: (p) => fitTo(p), code: 3, line: 1, words: ["must be a FeatureCollection"] },
  { name: "GeoJSON with no features", fixture: "empty-features.geojson", args: (p) => fitTo(p), code: 3, line: 2, words: ["has no features", "add one Point feature"] },
  {
    name: "GeoJSON cut off inside a string",
    fixture: "truncated.geojson",
    args: (p) => fitTo(p),
    code: 3,
    line: 3,
    column: 97,
    words: ["invalid JSON", "string is not closed", "may be truncated"],
  },
  // ---- Model files
  {
    name: "model file cut off halfway",
    fixture: "model-truncated.rbfield.json",
    args: (p) => gridTo(p),
    code: 3,
    // The file ends in the middle of a line: the error is right after its last character.
    ...endOf("model-truncated.rbfield.json"),
    words: ["not a valid rbfield model file", "truncated"],
  },
  { name: "model file from a later version", fixture: "model-version-99.rbfield.json", args: (p) => gridTo(p), code: 3, words: ["version 99 is not supported", "refit the points"] },
  { name: "model file with a text version", fixture: "model-version-string.rbfield.json", args: (p) => gridTo(p), code: 3, words: ['version "1.0" is not supported'] },
  {
    name: "model file with one weight missing",
    fixture: "model-short-weights.rbfield.json",
    args: (p) => gridTo(p),
    code: 3,
    words: ["model file is damaged", "weights do not match"],
  },
  {
    name: "model file with an unknown kernel",
    fixture: "model-unknown-kernel.rbfield.json",
    args: (p) => gridTo(p),
    code: 3,
    words: ['unknown kernel "cubic"'],
  },
  {
    name: "model file with a weight written as text",
    fixture: "model-weight-text.rbfield.json",
    args: (p) => gridTo(p),
    code: 3,
    words: ["weights do not match the points", "refit the points"],
  },
  {
    name: "model file whose hull is a path (never followed)",
    fixture: "model-hull-text.rbfield.json",
    args: (p) => gridTo(p),
    code: 3,
    words: ["hull missing", "refit the points"],
  },
  {
    name: "model file with its extent cut short",
    fixture: "model-extent-missing.rbfield.json",
    args: (p) => gridTo(p),
    code: 3,
    words: ["extent", "damaged", "refit the points"],
  },
  {
    name: "model file with a zero coordinate scale",
    fixture: "model-zero-scale.rbfield.json",
    args: (p) => gridTo(p),
    code: 3,
    words: ["damaged"],
  },
  {
    name: "model file with a log transform and no diagnostics",
    fixture: "model-log-without-diagnostics.rbfield.json",
    args: (p) => gridTo(p),
    code: 3,
    words: ["damaged"],
  },
  {
    name: "version 1 model file with a text anisotropy azimuth (predict)",
    fixture: "model-anisotropy-text.rbfield.json",
    extra: ["four-points.csv"],
    args: (p) => ["predict", p.input, p.file("four-points.csv"), "--out", p.out, ...Q],
    code: 3,
    words: ["damaged"],
  },
  { name: "a GeoJSON document given as a model", fixture: "not-a-model.json", args: (p) => gridTo(p), code: 3, words: ['not an rbfield model file (no "format": "rbfield-model")'] },
  { name: "a points CSV given as a model", fixture: "good-points.csv", args: (p) => gridTo(p), code: 3, words: ["not an rbfield model file (not JSON)"] },
  {
    name: "a text file named .tif given to contour",
    fixture: "fake.tif",
    args: (p) => ["contour", p.input, "--out", p.out, "--interval", "1", ...Q],
    code: 3,
    words: ["not a TIFF file"],
  },
  // ---- Grid options
  {
    name: "a grid extent that does not overlap the data",
    fixture: GOOD_MODEL,
    args: (p) => gridTo(p, "--extent", "0,0,10,10"),
    code: 2,
    names: null,
    words: ["does not overlap the data", "check the coordinate order and the CRS"],
  },
  {
    name: "a cell size that makes an absurd grid",
    fixture: GOOD_MODEL,
    args: (p) => gridTo(p, "--cell", "0.0001"),
    code: 2,
    names: null,
    words: ["100,000,000-cell limit", "choose a larger --cell or pass --force"],
  },
  {
    name: "a subnormal cell size (1e-320) that overflows the cell count",
    fixture: GOOD_MODEL,
    args: (p) => gridTo(p, "--cell", "1e-320"),
    code: 2,
    names: null,
    words: ["choose a larger --cell"],
  },
  {
    name: "an extent of zero width",
    fixture: GOOD_MODEL,
    args: (p) => gridTo(p, "--extent", "1000,2000,1000,2030"),
    code: 2,
    names: null,
    words: ["XMAX > XMIN"],
  },
  {
    name: "a contour interval giving millions of levels",
    fixture: GOOD_MODEL,
    args: (p) => ["contour", p.input, "--out", p.out, "--interval", "1e-9", ...Q],
    code: 2,
    names: null,
    words: ["at most 10000", "pick a larger interval"],
  },
  {
    name: "a mask file holding a LineString",
    fixture: "good-points.csv",
    extra: ["mask-linestring.geojson"],
    args: (p) => ["run", p.input, "--out", p.out, "--mask", p.file("mask-linestring.geojson"), ...Q],
    out: "dir",
    code: 3,
    names: "mask-linestring.geojson",
    words: ["no valid Polygon or MultiPolygon", "--mask hull or none"],
  },
  {
    name: "a mask file cut off",
    fixture: "good-points.csv",
    extra: ["mask-truncated.geojson"],
    args: (p) => ["run", p.input, "--out", p.out, "--mask", p.file("mask-truncated.geojson"), ...Q],
    out: "dir",
    code: 3,
    names: "mask-truncated.geojson",
    // The file ends inside the polygon: the place of the cut (json_syntax.ts).
    line: 1,
    column: 78,
    words: ["not valid GeoJSON"],
  },
  {
    name: "a non-detect without a detection limit (no limit column, no --detection-limit)",
    fixture: "non-detect-no-limit.csv",
    args: (p) => fitTo(p),
    code: 3,
    line: 4,
    words: ["non-detect 'ND' in column 'concentration' has no detection limit", "--detection-limit VALUE", "--detection-limit-column", "--non-detects zero or omit"],
  },
  {
    name: "an unknown --non-detects rule",
    fixture: "non-detect-no-limit.csv",
    args: (p) => fitTo(p, "--non-detects", "third"),
    code: 2,
    names: null,
    words: ["--non-detects must be half, limit, zero or omit"],
  },
  {
    name: "an unknown --duplicates rule",
    fixture: "coded-points.csv",
    args: (p) => fitTo(p, "--duplicates", "median"),
    code: 2,
    names: null,
    words: ["--duplicates must be mean, max, min or first"],
  },
  {
    name: "--where that no row meets",
    fixture: "coded-points.csv",
    args: (p) => fitTo(p, "--where", "code=XX"),
    code: 3,
    words: ["no row meets --where code=XX", "'GS' ×4", "'TP' ×1"],
  },
  {
    name: "--where without a value",
    fixture: "coded-points.csv",
    args: (p) => fitTo(p, "--where", "code"),
    code: 2,
    names: null,
    words: ["--where must be COLUMN=VALUE", "code=GS"],
  },
  {
    name: "--where naming a column the file does not have",
    fixture: "coded-points.csv",
    args: (p) => fitTo(p, "--where", "class=2"),
    code: 3,
    words: ["--where column 'class' not found", "'point', 'easting'"],
  },
  {
    name: "a mask that leaves no cell (smaller than a cell, between cell centres)",
    fixture: GOOD_MODEL,
    extra: ["mask-tiny.geojson"],
    args: (p) => gridTo(p, "--cell", "1", "--mask", p.file("mask-tiny.geojson")),
    code: 3,
    names: "mask-tiny.geojson",
    words: ["the mask leaves no cell", "--extent", "--cell"],
  },
  {
    name: "a longitude/latitude mask (RFC 7946) over points on a local site grid",
    fixture: "good-points.csv",
    extra: ["mask-lonlat.geojson"],
    args: (p) => ["run", p.input, "--out", p.out, "--mask", p.file("mask-lonlat.geojson"), ...Q],
    out: "dir",
    code: 3,
    names: "mask-lonlat.geojson",
    words: ["the mask is in WGS 84 longitude/latitude", "the points are in local site grid (no EPSG code)", "--crs"],
  },
  {
    name: "a mask in the points' CRS that misses the points",
    fixture: GOOD_MODEL,
    extra: ["mask-elsewhere.geojson"],
    args: (p) => gridTo(p, "--mask", p.file("mask-elsewhere.geojson")),
    code: 3,
    names: "mask-elsewhere.geojson",
    words: ["misses the points", "5000, 5000 to 5100, 5100"],
  },
  {
    name: "prediction locations without coordinate columns",
    fixture: GOOD_MODEL,
    extra: ["locations-no-coordinates.csv"],
    args: (p) => ["predict", p.input, p.file("locations-no-coordinates.csv"), "--out", p.out, ...Q],
    code: 3,
    names: "locations-no-coordinates.csv",
    line: 1,
    words: ["cannot tell which are the x and y columns", "--x and --y"],
  },
  // ---- Output paths
  {
    name: "fit: output path equal to the input path",
    fixture: "good-points.csv",
    args: (p) => ["fit", p.input, "--out", p.input, ...Q],
    outIsInput: true,
    code: 4,
    words: ["the output path is also an input file", "choose another output name"],
  },
  {
    name: "run: output folder equal to the input file",
    fixture: "good-points.csv",
    args: (p) => ["run", p.input, "--out", p.input, ...Q],
    outIsInput: true,
    code: 4,
    words: ["cannot create the output folder", "a file has that name", "choose another --out"],
  },
  {
    name: "run: output under a file, not a folder",
    fixture: "good-points.csv",
    args: (p) => ["run", p.input, "--out", path.join(p.input, "job"), ...Q],
    outIsInput: true,
    code: 4,
    names: "job",
    words: ["cannot create the output folder"],
  },
  {
    name: "grid: output path equal to the --mask file",
    fixture: GOOD_MODEL,
    extra: ["mask-square.geojson"],
    args: (p) => ["grid", p.input, "--mask", p.file("mask-square.geojson"), "--out", p.file("mask-square.geojson"), ...Q],
    code: 4,
    names: "mask-square.geojson",
    words: ["the output path is also an input file"],
  },
  {
    name: "fit: output into a folder that does not exist",
    fixture: "good-points.csv",
    outName: path.join("no-such-folder", "site.rbfield.json"),
    args: (p) => fitTo(p),
    code: 4,
    names: "site.rbfield.json",
    words: ["does not exist; create it first"],
  },
  {
    name: "fit: output path is a folder",
    fixture: "good-points.csv",
    outName: "a-folder",
    args: (p) => {
      fs.mkdirSync(p.out, { recursive: true });
      return fitTo(p);
    },
    code: 4,
    names: "a-folder",
    words: ["a folder has this name", "choose a file name"],
  },
  {
    name: "fit: output into a folder that cannot be written (/sys)",
    fixture: "good-points.csv",
    args: (p) => fitTo({ ...p, out: "/sys/rbfield-never-written.rbfield.json" }),
    code: 4,
    names: "rbfield-never-written.rbfield.json",
    words: ["cannot write in the folder /sys", "choose another output folder or fix its permissions"],
    only: SYS_READ_ONLY,
  },
  {
    name: "run: an output name taken by a folder is refused before any work",
    fixture: "good-points.csv",
    out: "dir",
    args: (p) => {
      fs.mkdirSync(path.join(p.out, "contours.geojson"), { recursive: true });
      return ["run", p.input, "--out", p.out, ...Q];
    },
    code: 4,
    names: "contours.geojson",
    words: ["a folder has this name", "choose a file name"],
  },
  {
    name: "points file that does not exist",
    fixture: "good-points.csv",
    args: (p) => ["fit", path.join(path.dirname(p.input), "missing.csv"), "--out", p.out, ...Q],
    code: 4,
    names: "missing.csv",
    words: ["cannot read the file", "no such file"],
  },
  {
    name: "model file that does not exist",
    fixture: "good-points.csv",
    args: (p) => ["grid", path.join(path.dirname(p.input), "missing.rbfield.json"), "--out", p.out, ...Q],
    code: 4,
    names: "missing.rbfield.json",
    words: ["cannot read the model file"],
  },
];

// ---------------------------------------------------------------------------------------------

let tmpRoot = "";
let goodModel = "";

beforeAll(async () => {
  tmpRoot = fs.mkdtempSync(path.join(os.tmpdir(), "rbfield-bad-"));
  goodModel = path.join(tmpRoot, GOOD_MODEL);
  const r = await cli(["fit", path.join(FIXTURES, "good-points.csv"), "--out", goodModel, "--quiet"]);
  if (r.code !== 0) throw new Error(`could not fit the good model: ${r.err}`);
});

afterAll(() => {
  if (tmpRoot) fs.rmSync(tmpRoot, { recursive: true, force: true });
});

/** A fresh folder with the case's input files; returns the paths and the input bytes. */
function prepare(c: Case, tag: string): { p: Paths; inputs: Map<string, Buffer>; dir: string } {
  const dir = fs.mkdtempSync(path.join(tmpRoot, `${tag}-`));
  const copy = (name: string) => {
    const to = path.join(dir, name);
    fs.copyFileSync(name === GOOD_MODEL ? goodModel : path.join(FIXTURES, name), to);
    return to;
  };
  const input = copy(c.fixture);
  for (const e of c.extra ?? []) copy(e);
  const out = c.outIsInput ? input : path.join(dir, c.outName ?? (c.out === "dir" ? "job" : "output.file"));
  const inputs = new Map<string, Buffer>();
  for (const name of [c.fixture, ...(c.extra ?? [])]) inputs.set(path.join(dir, name), fs.readFileSync(path.join(dir, name)));
  return { p: { input, out, file: (name) => path.join(dir, name) }, inputs, dir };
}

function escapeRe(s: string): string {
  return s.replace(/[.*+?^${}()|[\]\\]/g, "\\$&");
}

function checkMessage(c: Case, err: string, named: string | null): void {
  // One line, prefixed, no stack trace, no control characters (terminal escapes) or bidi overrides.
  expect(err.endsWith("\n")).toBe(true);
  const text = err.slice(0, -1);
  expect(text.split("\n"), err).toHaveLength(1);
  expect(text.startsWith("rbfield: "), text).toBe(true);
  expect(text).not.toMatch(/\bat .*\.ts:\d+/);
  // deno-lint-ignore no-control-regex
  expect(text).not.toMatch(/[\u0000-\u001f\u007f-\u009f\u202a-\u202e\u2066-\u2069]/);
  for (const w of c.words) {
    if (typeof w === "string") expect(text).toContain(w);
    else expect(text).toMatch(w);
  }
  if (named !== null) {
    let where = escapeRe(named);
    if (c.line !== undefined) where += `, line ${c.line}`;
    if (c.column !== undefined) where += `, column ${c.column}`;
    // "rbfield: <path>/<file>[, line L[, column C]]: message"
    expect(text).toMatch(new RegExp(`^rbfield: (?:[^:]*[/\\\\])?${where}: `));
    expect(text.split(named).length - 1, "the file is named once").toBe(1);
  }
}

function outputState(out: string): Map<string, Buffer> | null {
  if (!fs.existsSync(out)) return null;
  const state = new Map<string, Buffer>();
  if (fs.statSync(out).isDirectory()) {
    for (const name of fs.readdirSync(out)) {
      const f = path.join(out, name);
      state.set(name, fs.statSync(f).isDirectory() ? Buffer.from("<folder>") : fs.readFileSync(f));
    }
  } else {
    state.set("", fs.readFileSync(out));
  }
  return state;
}

function noTemporaryFiles(dir: string): void {
  const all: string[] = [];
  const walk = (d: string) => {
    for (const e of fs.readdirSync(d, { withFileTypes: true })) {
      if (e.isDirectory()) walk(path.join(d, e.name));
      else all.push(e.name);
    }
  };
  walk(dir);
  expect(all.filter((n) => /\.tmp$|rbfield-probe/.test(n))).toEqual([]);
}

describe("bad inputs: one line, the right exit code, no output, inputs unchanged", () => {
  it("has at least 40 cases, each with a committed fixture", () => {
    expect(CASES.length).toBeGreaterThanOrEqual(40);
    for (const c of CASES) {
      if (c.fixture !== GOOD_MODEL) expect(fs.existsSync(path.join(FIXTURES, c.fixture)), c.fixture).toBe(true);
      for (const e of c.extra ?? []) expect(fs.existsSync(path.join(FIXTURES, e)), e).toBe(true);
    }
  });

  CASES.forEach((c, index) => {
    const title = `${c.name} → exit ${c.code}`;
    if (c.only === false) {
      it.skip(`${title} (not available on this system)`);
      return;
    }

    it(title, async () => {
      const named = c.names === undefined ? c.fixture : c.names;
      // 1. No output beforehand: none afterwards.
      if (!c.outIsInput) {
        const { p, inputs, dir } = prepare(c, `case${index}a`);
        const args = c.args(p);
        const before = outputState(p.out);
        const r = await cli(args);
        expect(r.code, r.err).toBe(c.code);
        expect(r.out).toBe("");
        checkMessage(c, r.err, named);
        const after = outputState(p.out);
        if (before === null) {
          // No file; `run` may leave its (empty) output folder behind.
          if (after !== null) expect([...after.keys()].filter((k) => k !== "")).toEqual([]);
          if (after !== null && c.out !== "dir") expect(fs.statSync(p.out).isDirectory()).toBe(true);
        } else {
          expect(after).toEqual(before);
        }
        for (const [file, bytes] of inputs) expect(fs.readFileSync(file).equals(bytes), `${file} unchanged`).toBe(true);
        noTemporaryFiles(dir);
      }
      // 2. An output from an earlier run: left exactly as it was.
      {
        const { p, inputs, dir } = prepare(c, `case${index}b`);
        const args = c.args(p);
        if (!c.outIsInput && !fs.existsSync(p.out)) {
          if (c.out === "dir") {
            fs.mkdirSync(p.out);
            for (const name of RUN_FILES) fs.writeFileSync(path.join(p.out, name), `earlier ${name}\n`);
          } else if (fs.existsSync(path.dirname(p.out))) {
            fs.writeFileSync(p.out, "earlier output\n");
          }
        }
        const before = outputState(p.out);
        const r = await cli(args);
        expect(r.code, r.err).toBe(c.code);
        checkMessage(c, r.err, named);
        expect(outputState(p.out)).toEqual(before);
        for (const [file, bytes] of inputs) expect(fs.readFileSync(file).equals(bytes), `${file} unchanged`).toBe(true);
        noTemporaryFiles(dir);
      }
    });
  });
});

describe("the real command line (child process)", () => {
  const deno = (args: string[]) =>
    spawnSync("npx", ["-y", "deno@2", "run", "--allow-read", "--allow-write", "src/cli.ts", ...args], {
      cwd: ROOT,
      encoding: "utf8",
      env: { ...process.env, NO_COLOR: "1" },
      timeout: 120_000,
    });

  it("exit 3 and one line for an empty file, with no stack trace", () => {
    const dir = fs.mkdtempSync(path.join(tmpRoot, "proc-"));
    const out = path.join(dir, "m.json");
    const r = deno(["fit", path.join(FIXTURES, "empty.csv"), "--out", out]);
    expect(r.status, r.stderr).toBe(3);
    expect(r.stderr.trimEnd().split("\n")).toEqual([expect.stringMatching(/^rbfield: .*empty\.csv, line 1: file is empty/)]);
    expect(r.stderr).not.toMatch(/^\s+at |^error: /m);
    expect(fs.existsSync(out)).toBe(false);
  });

  it("exit 3 and one line for a truncated model, even with --debug (no stack trace for input errors)", () => {
    const dir = fs.mkdtempSync(path.join(tmpRoot, "proc-"));
    const out = path.join(dir, "g.tif");
    const r = deno(["grid", path.join(FIXTURES, "model-truncated.rbfield.json"), "--out", out, "--debug"]);
    expect(r.status, r.stderr).toBe(3);
    expect(r.stderr.trimEnd().split("\n")).toHaveLength(1);
    expect(r.stderr).toMatch(/model-truncated\.rbfield\.json, line \d+, column \d+: not a valid rbfield model file/);
    expect(r.stderr).not.toMatch(/^\s+at |^error: /m);
    expect(fs.existsSync(out)).toBe(false);
  });

  it("exit 5 for collinear points with progress on: the error is the last line and no output folder holds files", () => {
    const dir = fs.mkdtempSync(path.join(tmpRoot, "proc-"));
    const out = path.join(dir, "job");
    const r = deno(["run", path.join(FIXTURES, "collinear.csv"), "--trend", "linear", "--out", out]);
    expect(r.status, r.stderr).toBe(5);
    const lines = r.stderr.trimEnd().split("\n");
    expect(lines.every((l) => l.startsWith("rbfield: ")), r.stderr).toBe(true);
    expect(lines.at(-1)).toMatch(/do not support linear trend.*--trend constant/);
    expect(r.stderr).not.toMatch(/^\s+at |^error: /m);
    expect(fs.existsSync(out) ? fs.readdirSync(out) : []).toEqual([]);
  });
});

describe("messy data that is handled, not refused", () => {
  it("an ill-conditioned system falls back to more smoothing, and the summary says so (no NaN in any output)", async () => {
    const dir = fs.mkdtempSync(path.join(tmpRoot, "illcond-"));
    const input = path.join(dir, "good-points.csv");
    fs.copyFileSync(path.join(FIXTURES, "good-points.csv"), input);
    const out = path.join(dir, "job");
    // Gaussian with ε·h ≈ 0.01 and no smoothing: the kernel matrix is numerically singular.
    const r = await cli(["run", input, "--out", out, "--kernel", "gaussian", "--shape", "0.001", "--trend", "none", "--smoothing", "0", "--quiet"]);
    expect(r.code, r.err).toBe(0);
    const summary = fs.readFileSync(path.join(out, "run-summary.txt"), "utf8");
    expect(summary).toMatch(/smoothing was raised/);
    expect(summary).toMatch(/given, raised for stability/);
    for (const name of ["run-summary.txt", "estimates.csv", "residuals.csv"]) {
      expect(fs.readFileSync(path.join(out, name), "utf8"), name).not.toMatch(/NaN|Infinity/);
    }
    // JSON turns NaN and Infinity into null: the numbers DEVELOPERS.md lists must all be finite numbers.
    const model = JSON.parse(fs.readFileSync(path.join(out, "model.rbfield.json"), "utf8"));
    const d = model.diagnostics;
    const numbers = [model.lambda, d.edf, d.gcv, d.loocvRmse, d.rmse, d.sigma, d.condition, ...model.global.weights,
      ...model.global.trendCoefficients, ...model.fitted, ...model.loo];
    expect(numbers.every((v) => typeof v === "number" && Number.isFinite(v))).toBe(true);
    for (const name of ["contours.geojson", "bands.geojson"]) {
      expect(fs.readFileSync(path.join(out, name), "utf8"), name).not.toMatch(/null|NaN/);
    }
  });

  it("rows with out-of-range coordinates are skipped and listed; the rest is fitted with finite outputs", async () => {
    const dir = fs.mkdtempSync(path.join(tmpRoot, "range-"));
    const input = path.join(dir, "mixed.csv");
    fs.writeFileSync(input, fs.readFileSync(path.join(FIXTURES, "good-points.csv"), "utf8") + "1e300,2010,10\n1010,2010,1e39\n");
    const out = path.join(dir, "job");
    const r = await cli(["run", input, "--out", out, "--quiet"]);
    expect(r.code, r.err).toBe(0);
    const summary = fs.readFileSync(path.join(out, "run-summary.txt"), "utf8");
    expect(summary).toContain("skipped 2 rows with missing, non-numeric or out-of-range values (lines 18, 19)");
    const est = fs.readFileSync(path.join(out, "estimates.csv"), "utf8").trimEnd().split("\r\n");
    // The skipped rows keep their estimate column: the model is evaluated where the coordinates are usable.
    expect(est).toHaveLength(19);
    expect(est.join("\n")).not.toMatch(/NaN|Infinity/);
  });

  it("coincident points with conflicting values are averaged with --merge-conflicts, and the summary says so", async () => {
    const dir = fs.mkdtempSync(path.join(tmpRoot, "merge-"));
    const input = path.join(dir, "conflicting-duplicates.csv");
    fs.copyFileSync(path.join(FIXTURES, "conflicting-duplicates.csv"), input);
    const r = await cli(["fit", input, "--out", path.join(dir, "m.json"), "--merge-conflicts", "--quiet"]);
    expect(r.code, r.err).toBe(0);
    // Lines 3 and 7 (10.5 and 12.1): spread 1.6, RPD |10.5 − 12.1| / 11.3 × 100 = 14.2 % (3 significant digits).
    expect(r.out).toContain("merged 1 group of coincident points (mean value; largest spread 1.6, largest RPD 14.2%)");
  });

  it("negative option values are read as numbers, and a negative smoothing is refused as a value (common practice for CLI parsing)", async () => {
    const dir = fs.mkdtempSync(path.join(tmpRoot, "negative-"));
    const input = path.join(dir, "pts.csv");
    // Points around the origin so that a negative extent overlaps them.
    fs.writeFileSync(input, "x,y,z\n-50,-50,1\n50,-50,2\n50,50,3\n-50,50,2.5\n0,0,2.2\n-20,30,2.4\n");
    const model = path.join(dir, "m.json");
    expect((await cli(["fit", input, "--out", model, "--quiet"])).code).toBe(0);
    const c = await cli(["contour", model, "--out", path.join(dir, "c.geojson"), "--interval", "0.5", "--base", "-0.25", "--quiet"]);
    expect(c.code, c.err).toBe(0);
    const levels = JSON.parse(fs.readFileSync(path.join(dir, "c.geojson"), "utf8")).features.map((f: { properties: { level: number } }) => f.properties.level);
    expect(levels).toContain(1.25); // −0.25 + 3 × 0.5
    const g = await cli(["grid", model, "--out", path.join(dir, "g.tif"), "--extent", "-100,-200,100,200", "--cell", "10", "--quiet", "--json"]);
    expect(g.code, g.err).toBe(0);
    expect(JSON.parse(g.out).extent).toEqual([-100, -200, 100, 200]);
    const bad = await cli(["fit", input, "--out", path.join(dir, "x.json"), "--smoothing", "-1", "--quiet"]);
    expect(bad.code).toBe(2);
    expect(bad.err).toContain("--smoothing must be gcv or a number ≥ 0");
  });

  it("strings from the input reach the summary and stdout escaped", async () => {
    const dir = fs.mkdtempSync(path.join(tmpRoot, "escape-"));
    const input = path.join(dir, "control-chars-header.csv");
    fs.copyFileSync(path.join(FIXTURES, "control-chars-header.csv"), input);
    const out = path.join(dir, "job");
    const r = await cli(["run", input, "--out", out, "--quiet"]);
    expect(r.code, r.err).toBe(0);
    const summary = fs.readFileSync(path.join(out, "run-summary.txt"), "utf8");
    expect(summary).toContain("?[31mlevel?[0m");
    for (const text of [summary, r.out]) expect(text).not.toContain("\u001b");
  });

  it("a crs link to a file inside GeoJSON is not followed (no CRS is taken from it)", () => {
    const text = JSON.stringify({
      type: "FeatureCollection",
      crs: { type: "link", properties: { href: "file:///etc/passwd", type: "proj4" } },
      features: [{ type: "Feature", geometry: { type: "Point", coordinates: [1, 2] }, properties: { z: 3 } }],
    });
    expect(parsePointTable(text, "link.geojson").crs).toBeUndefined();
  });
});


describe("library safeguards behind the messages above", () => {
  it("cleanPoints({ minPoints }) names the file and says why too few points remain (for src/job.ts to use)", async () => {
    const clean = async (name: string) => {
      const table = await readPointTable(path.join(FIXTURES, name));
      return errorOf(() => cleanPoints(table, { mergeConflicts: true, minPoints: 3 }));
    };
    const none = await clean("no-finite-rows.csv");
    expect(none.exitCode).toBe(ExitCode.input);
    expect(none.message).toMatch(/no-finite-rows\.csv: no usable points: all 6 data rows were skipped \(line 2: value 'Infinity' in column 'x' is not a finite number\)/);
    expect(none.messageFor((o) => `--${o}`)).toContain("check that x, y and value are the columns 'x', 'y', 'z' or name them with --x --y --z");
    const two = await clean("two-usable-points.csv");
    expect(two.message).toMatch(/two-usable-points\.csv: only 2 usable points at distinct positions, and at least 3 are needed/);
    expect(two.message).toContain("1 of 3 rows skipped (first: line 4: missing value in column 'z')");
    const one = await clean("all-identical.csv");
    expect(one.message).toContain("only 1 usable point at distinct positions");
    expect(one.message).toContain("5 rows merged into coincident points (lines 2, 3, 4, 5, 6)");
    // Without minPoints nothing changes for library callers.
    expect(cleanPoints(parsePointTable("x,y,z\n1,2,abc\n", "a.csv")).x.length).toBe(0);
  });

  it("a Float32 GeoTIFF refuses values beyond ±3.4e38 instead of writing Infinity (IEEE 754 binary32)", () => {
    const spec = { xmin: 0, ymin: 0, xmax: 2, ymax: 2, cell: 1, cols: 2, rows: 2 };
    const grid = (v: number): GridValues => ({ spec, values: Float64Array.from([1, 2, v, NaN]), crs: { label: "local" } });
    expect(encodeGeoTiff(grid(3.4e38)).length).toBeGreaterThan(0);
    for (const v of [3.5e38, -1e39, Infinity, -Infinity]) {
      const e = errorOf(() => encodeGeoTiff(grid(v)));
      expect(e.exitCode).toBe(ExitCode.numerical);
      expect(e.message).toContain("cell 1, 2 (column, row)");
      expect(e.message).toContain("rescale the values");
    }
  });

  it("contours of a grid with infinite cells or a tiny cell hold no NaN/null and no collapsed points", () => {
    const cols = 6, rows = 6;
    const cone = (cell: number, hole: number): GridValues => {
      const values = new Float64Array(cols * rows);
      for (let r = 0; r < rows; r++) for (let c = 0; c < cols; c++) values[r * cols + c] = Math.hypot(c - 2.5, r - 2.5);
      values[0] = hole;
      return { spec: { xmin: 0, ymin: 0, xmax: cols * cell, ymax: rows * cell, cell, cols, rows }, values, crs: { label: "local" } };
    };
    for (const g of [cone(1, Infinity), cone(1, -Infinity), cone(1e-300, 0)]) {
      const text = JSON.stringify([contourLines(g, [1, 2]), contourBands(g, [0, 1, 2, 3, 4])]);
      expect(text).not.toMatch(/null|NaN/);
      const lines = contourLines(g, [1.5]);
      const pts = lines.features.flatMap((f) => (f.geometry.type === "LineString" ? [f.geometry.coordinates] : f.geometry.coordinates)).flat();
      expect(pts.length).toBeGreaterThan(4);
      // Rounding to 15 decimals used to turn every coordinate of a 1e-300 grid into 0.
      expect(new Set(pts.map((p) => p.join(","))).size).toBeGreaterThan(4);
    }
  });

  it("refuses a hard link to an input as the output, and leaves no temporary file when a write fails", () => {
    const dir = fs.mkdtempSync(path.join(tmpRoot, "atomic-"));
    const input = path.join(dir, "points.csv");
    fs.writeFileSync(input, "x,y,z\n");
    const link = path.join(dir, "also-points.csv");
    fs.linkSync(input, link);
    const e = errorOf(() => refuseInputAsOutput(link, [input]));
    expect(e.exitCode).toBe(ExitCode.io);
    expect(e.message).toMatch(/also-points\.csv: the output path is also an input file/);
    fs.mkdirSync(path.join(dir, "taken.json"));
    const w = errorOf(() => writeFileAtomic(path.join(dir, "taken.json"), "{}"));
    expect(w.exitCode).toBe(ExitCode.io);
    expect(w.message).toContain("a folder has that name");
    expect(fs.readdirSync(dir).sort()).toEqual(["also-points.csv", "points.csv", "taken.json"]);
    // A successful write replaces the file in one step, with nothing left beside it.
    writeFileAtomic(input, "x,y,z\n1,2,3\n");
    expect(fs.readFileSync(input, "utf8")).toBe("x,y,z\n1,2,3\n");
    expect(fs.readdirSync(dir).sort()).toEqual(["also-points.csv", "points.csv", "taken.json"]);
  });
});
