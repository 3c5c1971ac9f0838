// Read stage: turn a CSV / semicolon / TSV / whitespace text or a GeoJSON file into a PointTable.
// Cells are kept as raw text; numbers are parsed later by the clean stage.
import { readFile } from "node:fs/promises";
import Papa from "papaparse";
import { ExitCode, inputError, printable, RbfieldError } from "../errors.ts";
import type { Crs, PointTable } from "../types.ts";

export interface ReadOptions {
  /** Column (or GeoJSON property) names, matched case-insensitively. */
  x?: string;
  y?: string;
  z?: string;
  /** Default true; false for prediction locations, where the value column is optional. */
  needValue?: boolean;
}

// Header names recognised without options, compared after normalizeName().
const X_NAMES = ["x", "easting", "east", "e", "eastings", "mapx"];
const Y_NAMES = ["y", "northing", "north", "n", "northings", "mapy"];
const Z_NAMES = [
  "z", "elevation", "elev", "height", "value", "level", "rl", "reducedlevel",
  "h", "val", "reading", "concentration", "head",
];
// Never picked as the value column by the "first numeric column" fallback.
const ID_NAMES = new Set([
  "id", "fid", "oid", "objectid", "pointid", "ptid", "pt", "point", "no", "num", "number",
  "index", "idx", "name", "label", "station", "site", "code",
]);

// Written so that no text can match in more than one way: "\d+\.?\d*" would let a long run of
// digits split between the two \d parts, and a failing match would then take quadratic time.
const PLAIN_NUMBER = /^[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?$/;
const COMMA_NUMBER = /^[+-]?(?:\d+(?:,\d*)?|,\d+)(?:[eE][+-]?\d+)?$/;

/** Longest piece of input text quoted in a message. */
const QUOTE_LIMIT = 60;

/**
 * Input text made safe for a one-line message: control characters (terminal escapes, line breaks),
 * Unicode line separators and bidirectional controls become "?", and long text is cut short.
 */
export function messageText(text: string, limit = QUOTE_LIMIT): string {
  const safe = printable(text);
  const chars = Array.from(safe);
  return chars.length > limit ? chars.slice(0, limit - 1).join("") + "…" : safe;
}

/**
 * Parse a plain finite decimal number; NaN for anything else ("", "NaN", "Infinity", "1e999",
 * "12abc", "0x10"). With decimalComma the decimal mark is "," and a "." is refused.
 */
export function parseNumber(cell: string, decimalComma: boolean): number {
  let s = cell.trim();
  if (decimalComma) {
    if (!COMMA_NUMBER.test(s)) return NaN;
    s = s.replace(",", ".");
  } else if (!PLAIN_NUMBER.test(s)) {
    return NaN;
  }
  const v = Number(s);
  return Number.isFinite(v) ? v : NaN;
}

/** Read a point file from disk; a missing or unreadable file is an I/O error. */
export async function readPointTable(path: string, options?: ReadOptions): Promise<PointTable> {
  let bytes: Uint8Array;
  try {
    bytes = await readFile(path);
  } catch (e) {
    throw new RbfieldError(`cannot read the file: ${ioReason(e)}`, ExitCode.io, { file: path });
  }
  if (bytes.length >= 2 && ((bytes[0] === 0xff && bytes[1] === 0xfe) || (bytes[0] === 0xfe && bytes[1] === 0xff))) {
    throw inputError("file is UTF-16 encoded; save it as UTF-8", { file: path, line: 1 });
  }
  if (bytes.length >= 4 && bytes[0] === 0x50 && bytes[1] === 0x4b && bytes[2] === 3 && bytes[3] === 4) {
    throw inputError("file is a ZIP archive (e.g. an Excel .xlsx workbook), not text; save the points as CSV", { file: path });
  }
  // Text files hold no NUL bytes; UTF-16 without a byte-order mark and binary files do.
  const nul = bytes.subarray(0, 65536).indexOf(0);
  if (nul >= 0) {
    let line = 1;
    for (let i = 0; i < nul; i++) if (bytes[i] === 0x0a) line++;
    throw inputError(
      "file holds NUL bytes, so it is not UTF-8 text (UTF-16, or a binary file such as a spreadsheet?); save the points as UTF-8 CSV",
      { file: path, line },
    );
  }
  // TextDecoder drops a UTF-8 BOM; bad bytes become U+FFFD.
  return parsePointTable(new TextDecoder("utf-8").decode(bytes), path, options);
}

function ioReason(e: unknown): string {
  const code = (e as { code?: string })?.code;
  if (code === "ENOENT") return "no such file";
  if (code === "EACCES" || code === "EPERM") return "permission denied";
  if (code === "EISDIR") return "it is a directory";
  return e instanceof Error ? e.message : String(e);
}

/** Parse the text of a point file (pure). `file` is used in messages only. */
export function parsePointTable(text: string, file: string, options: ReadOptions = {}): PointTable {
  let body = text.charCodeAt(0) === 0xfeff ? text.slice(1) : text;
  // One line break form; keeps line numbers as editors count them (CRLF, LF or CR).
  body = body.replace(/\r\n?/g, "\n");
  const lines = new LineIndex(body);
  const first = body.search(/\S/);
  if (first < 0) {
    throw inputError("file is empty; give a header row (e.g. x,y,z) and one row per point", { file, line: 1 });
  }
  if (body[first] === "{") return parseGeoJson(body, file, lines, options);

  const headerLine = firstContentLine(lines);
  if (headerLine < 0) {
    throw inputError(
      "file is empty (only empty and comment lines); give a header row (e.g. x,y,z) and one row per point",
      { file, line: 1 },
    );
  }
  const delimiter = detectDelimiter(lines.text(headerLine));
  const collected = new RowCollector(file, lines);
  if (delimiter === "whitespace") splitWhitespace(lines, collected);
  else splitDelimited(body, delimiter, collected);

  const columns = collected.header;
  const rows = collected.rows;
  if (rows.length === 0) {
    throw inputError("no data rows after the header; add one row per point below it", {
      file,
      line: collected.headerLine,
    });
  }
  const decimalComma = delimiter === ";" && detectDecimalComma(rows);
  const choice = chooseColumns(columns, rows, options, {
    file,
    headerLine: collected.headerLine,
    decimalComma,
    zCandidates: columns.map((_, j) => j),
    numericFallback: true,
  });
  return {
    file,
    columns,
    rows,
    lines: collected.lines,
    ...choice,
    delimiter,
    decimalComma,
  };
}

// ---------------------------------------------------------------------------------------------
// Line bookkeeping

/** Offsets of line starts in text that uses "\n" only; lines are 1-based. */
class LineIndex {
  readonly starts: number[] = [0];
  constructor(readonly body: string) {
    for (let i = body.indexOf("\n"); i >= 0; i = body.indexOf("\n", i + 1)) this.starts.push(i + 1);
  }
  get count(): number {
    return this.starts.length;
  }
  lineOf(offset: number): number {
    let lo = 0;
    let hi = this.starts.length - 1;
    while (lo < hi) {
      const mid = (lo + hi + 1) >> 1;
      if (this.starts[mid] <= offset) lo = mid;
      else hi = mid - 1;
    }
    return lo + 1;
  }
  columnOf(offset: number): number {
    return offset - this.starts[this.lineOf(offset) - 1] + 1;
  }
  text(line: number): string {
    const start = this.starts[line - 1];
    const end = line < this.starts.length ? this.starts[line] - 1 : this.body.length;
    return this.body.slice(start, end);
  }
}

function isSkippedLine(text: string): boolean {
  return text.trim() === "" || text.startsWith("#");
}

function firstContentLine(lines: LineIndex): number {
  for (let line = 1; line <= lines.count; line++) if (!isSkippedLine(lines.text(line))) return line;
  return -1;
}

/** Move past comment lines ("#" in column 1), as papaparse does before a row. */
function skipCommentLines(body: string, offset: number): number {
  while (body.startsWith("#", offset)) {
    const nl = body.indexOf("\n", offset);
    if (nl < 0) return body.length;
    offset = nl + 1;
  }
  return offset;
}

// ---------------------------------------------------------------------------------------------
// Delimited text

type Delimiter = "," | ";" | "\t" | "whitespace";

/** Pick the delimiter from the header line (counts outside double quotes). */
function detectDelimiter(header: string): Delimiter {
  let commas = 0, semis = 0, tabs = 0, quoted = false;
  for (const c of header) {
    if (c === '"') quoted = !quoted;
    else if (quoted) continue;
    else if (c === ",") commas++;
    else if (c === ";") semis++;
    else if (c === "\t") tabs++;
  }
  if (tabs > 0 && tabs >= commas && tabs >= semis) {
    // Tabs next to other spaces are alignment, not a TSV delimiter.
    return /\t[ \t]|[ \t]\t/.test(header.trim()) ? "whitespace" : "\t";
  }
  if (semis > 0 && semis >= commas) return ";";
  if (commas > 0) return ",";
  if (/[ \t]/.test(header.trim())) return "whitespace";
  return ",";
}

/** Collects header and data rows, skipping empty rows and checking cell counts. */
class RowCollector {
  header: string[] = [];
  headerLine = 0;
  rows: string[][] = [];
  lines: number[] = [];
  constructor(readonly file: string, readonly index: LineIndex) {}

  /** extraAt(k) gives the text offset where cell k (0-based) starts. */
  add(cells: string[], start: number, extraAt: (k: number) => number): void {
    if (cells.every((c) => c.trim() === "")) return;
    if (this.headerLine === 0) {
      this.headerLine = this.index.lineOf(start);
      this.header = cells.map((c, j) => (c.trim() === "" ? `column ${j + 1}` : c.trim()));
      return;
    }
    const n = this.header.length;
    if (cells.length > n) {
      const at = extraAt(n);
      throw inputError(
        `row has ${cells.length} cells but the header has ${n}; the first extra cell starts here ` +
          `(check for an unquoted delimiter or a missing header name)`,
        { file: this.file, line: this.index.lineOf(at), column: this.index.columnOf(at) },
      );
    }
    while (cells.length < n) cells.push("");
    this.rows.push(cells);
    this.lines.push(this.index.lineOf(start));
  }
}

interface PapaStep {
  data: string[];
  errors: { code: string; message: string; index?: number }[];
  meta: { cursor: number };
}
const papa = Papa as unknown as {
  parse(input: string, config: Record<string, unknown>): void;
};

/** RFC 4180 style parsing with papaparse; row starts come from meta.cursor of the previous row. */
function splitDelimited(body: string, delim: "," | ";" | "\t", out: RowCollector): void {
  let prevCursor = 0;
  papa.parse(body, {
    delimiter: delim,
    newline: "\n",
    quoteChar: '"',
    escapeChar: '"',
    comments: "#",
    header: false,
    skipEmptyLines: false,
    dynamicTyping: false,
    step(result: PapaStep) {
      const start = skipCommentLines(body, prevCursor);
      prevCursor = result.meta.cursor;
      const err = result.errors[0];
      if (err) {
        const at = Math.max(0, Math.min(body.length - 1, (err.index ?? start + 1) - 1));
        const what = err.code === "MissingQuotes"
          ? "quoted field has no closing quote"
          : "malformed quotes: a closing quote must be followed by the delimiter or the end of the line";
        throw inputError(`${what} (RFC 4180: a quote inside a quoted field is written twice)`, {
          file: out.file,
          line: out.index.lineOf(at),
          column: out.index.columnOf(at),
        });
      }
      out.add(result.data, start, (k) => cellOffset(body, start, delim, k));
    },
  });
}

/** Offset where cell k of the row starting at `start` begins (quote rules as in RFC 4180). */
function cellOffset(body: string, start: number, delim: string, k: number): number {
  let i = start;
  for (let cell = 0; cell < k; cell++) {
    if (body[i] === '"') {
      i++;
      while (i < body.length) {
        if (body[i] === '"') {
          if (body[i + 1] === '"') i += 2;
          else {
            i++;
            break;
          }
        } else i++;
      }
    }
    while (i < body.length && body[i] !== delim && body[i] !== "\n") i++;
    i++; // past the delimiter
  }
  return Math.min(i, body.length);
}

/** Cells split by runs of spaces/tabs; a cell may be double-quoted on one line. */
function splitWhitespace(lines: LineIndex, out: RowCollector): void {
  for (let line = 1; line <= lines.count; line++) {
    const text = lines.text(line);
    if (isSkippedLine(text)) continue;
    const base = lines.starts[line - 1];
    const cells: string[] = [];
    const starts: number[] = [];
    let i = 0;
    while (true) {
      while (i < text.length && (text[i] === " " || text[i] === "\t")) i++;
      if (i >= text.length) break;
      starts.push(base + i);
      if (text[i] === '"') {
        let value = "";
        let j = i + 1;
        let closed = false;
        while (j < text.length) {
          if (text[j] === '"') {
            if (text[j + 1] === '"') {
              value += '"';
              j += 2;
              continue;
            }
            closed = true;
            j++;
            break;
          }
          value += text[j++];
        }
        if (!closed) {
          throw inputError("quoted field has no closing quote on this line; close the quote or remove it", {
            file: out.file,
            line,
            column: i + 1,
          });
        }
        cells.push(value);
        i = j;
      } else {
        let j = i;
        while (j < text.length && text[j] !== " " && text[j] !== "\t") j++;
        cells.push(text.slice(i, j));
        i = j;
      }
    }
    out.add(cells, base, (k) => starts[k]);
  }
}

/** Decimal comma when comma-decimal cells are at least as common as dot-decimal ones. */
function detectDecimalComma(rows: string[][]): boolean {
  let comma = 0, dot = 0;
  const limit = Math.min(rows.length, 1000);
  for (let r = 0; r < limit; r++) {
    for (const cell of rows[r]) {
      const s = cell.trim();
      if (/^[+-]?\d*,\d+(?:[eE][+-]?\d+)?$/.test(s)) comma++;
      else if (/^[+-]?\d*\.\d+(?:[eE][+-]?\d+)?$/.test(s)) dot++;
    }
  }
  return comma > 0 && comma >= dot;
}

// ---------------------------------------------------------------------------------------------
// Column choice

/** Lower case, without units in brackets, spaces, underscores or hyphens. */
function normalizeName(name: string): string {
  // The bracket body excludes opening brackets too, so a run of "(" cannot make the match quadratic.
  return name.toLowerCase().replace(/[([{][^()[\]{}]*[)\]}]/g, "").replace(/[\s_-]+/g, "");
}

interface ChoiceContext {
  file: string;
  headerLine: number;
  decimalComma: boolean;
  /** Columns that may be detected as the value column by name. */
  zCandidates: number[];
  /** Column used when no value name matches (GeoJSON third coordinate), or -1. */
  zDefault?: number;
  /** Allow the "first numeric column" fallback for the value. */
  numericFallback: boolean;
}

type Choice = Pick<PointTable, "xColumn" | "yColumn" | "zColumn" | "columnChoice">;

function chooseColumns(
  columns: string[],
  rows: string[][],
  options: ReadOptions,
  ctx: ChoiceContext,
): Choice {
  const shown = columns.slice(0, 20).map((c) => `'${messageText(c, 40)}'`);
  if (columns.length > 20) shown.push(`and ${columns.length - 20} more`);
  const list = shown.join(", ");
  const place = { file: ctx.file, line: ctx.headerLine };
  const named = (flag: "x" | "y" | "z"): number => {
    const want = options[flag]!.trim();
    let j = columns.findIndex((c) => c.toLowerCase() === want.toLowerCase());
    if (j < 0) j = columns.findIndex((c) => normalizeName(c) === normalizeName(want));
    if (j < 0) {
      throw inputError(
        `--${flag} column '${messageText(want, 40)}' not found; the columns are: ${list} (names are matched ignoring case)`,
        place,
      );
    }
    return j;
  };
  const byName = (names: string[], allowed: (j: number) => boolean): number => {
    for (const name of names) {
      const j = columns.findIndex((c, k) => allowed(k) && normalizeName(c) === name);
      if (j >= 0) return j;
    }
    return -1;
  };

  const xColumn = options.x !== undefined ? named("x") : byName(X_NAMES, () => true);
  const yColumn = options.y !== undefined ? named("y") : byName(Y_NAMES, (k) => k !== xColumn);
  if (xColumn < 0 || yColumn < 0) {
    const missing = xColumn < 0 && yColumn < 0 ? "are the x and y columns" : xColumn < 0 ? "is the x column" : "is the y column";
    throw inputError(
      `cannot tell which ${missing} from the header (columns are: ${list}); name them with --x and --y`,
      place,
    );
  }
  if (xColumn === yColumn) {
    throw inputError(`x and y are both column '${messageText(columns[xColumn], 40)}'; name different columns with --x and --y`, place);
  }

  const needValue = options.needValue ?? true;
  const free = (k: number) => k !== xColumn && k !== yColumn;
  let zColumn = -1;
  if (options.z !== undefined) {
    zColumn = named("z");
    if (!free(zColumn)) {
      throw inputError(`--z column '${messageText(columns[zColumn], 40)}' is also the x or y column; name another column with --z`, place);
    }
  } else {
    const candidates = new Set(ctx.zCandidates);
    zColumn = byName(Z_NAMES, (k) => free(k) && candidates.has(k));
    if (zColumn < 0 && ctx.zDefault !== undefined && ctx.zDefault >= 0) zColumn = ctx.zDefault;
    if (zColumn < 0 && needValue && ctx.numericFallback) {
      zColumn = columns.findIndex((c, k) =>
        free(k) && candidates.has(k) && !ID_NAMES.has(normalizeName(c)) &&
        looksNumeric(rows, k, ctx.decimalComma)
      );
    }
    if (zColumn < 0 && needValue) {
      throw inputError(
        `cannot find the value column (columns are: ${list}); name it with --z`,
        place,
      );
    }
  }
  const anyNamed = options.x !== undefined || options.y !== undefined || options.z !== undefined;
  return { xColumn, yColumn, zColumn, columnChoice: anyNamed ? "named" : "detected" };
}

/** The first few non-empty cells of column j are all numbers (and there is at least one). */
function looksNumeric(rows: string[][], j: number, decimalComma: boolean): boolean {
  let seen = 0;
  for (let r = 0; r < rows.length && seen < 5; r++) {
    const cell = rows[r][j];
    if (cell.trim() === "") continue;
    if (Number.isNaN(parseNumber(cell, decimalComma))) return false;
    seen++;
  }
  return seen > 0;
}

// ---------------------------------------------------------------------------------------------
// GeoJSON (RFC 7946)

function parseGeoJson(body: string, file: string, lines: LineIndex, options: ReadOptions): PointTable {
  let doc: unknown;
  try {
    doc = JSON.parse(body);
  } catch (e) {
    const found = locateJsonError(body) ?? fromParseMessage(e, body.length);
    throw inputError(`invalid JSON: ${messageText(found.message, 120)}; fix the JSON syntax (the file may be truncated)`, {
      file,
      line: lines.lineOf(found.offset),
      column: lines.columnOf(found.offset),
    });
  }
  const top = doc as Record<string, unknown>;
  if (top === null || typeof top !== "object" || Array.isArray(top) || top.type !== "FeatureCollection") {
    throw inputError("GeoJSON must be a FeatureCollection of Point features (RFC 7946 §3.3)", { file, line: 1 });
  }
  const offsets = featureOffsets(body);
  const keyAt = body.search(/"features"\s*:/);
  const keyLine = keyAt >= 0 ? lines.lineOf(keyAt) : 1;
  const features = top.features;
  if (!Array.isArray(features)) {
    throw inputError("GeoJSON FeatureCollection has no \"features\" array (RFC 7946 §3.3)", { file, line: keyLine });
  }
  if (features.length === 0) {
    throw inputError("GeoJSON FeatureCollection has no features; add one Point feature per measured point", {
      file,
      line: keyLine,
    });
  }
  const lineOfFeature = (i: number) =>
    offsets.length === features.length ? lines.lineOf(offsets[i]) : keyLine;

  // First pass: geometry checks, property names, third coordinate.
  const propNames: string[] = [];
  const propSeen = new Set<string>();
  let hasZ = false;
  for (let i = 0; i < features.length; i++) {
    const f = features[i] as Record<string, unknown> | null;
    const place = { file, line: lineOfFeature(i) };
    if (f === null || typeof f !== "object" || f.type !== "Feature") {
      throw inputError(
        `features[${i}] is not a GeoJSON Feature (RFC 7946 §3.2); each element must be {"type": "Feature", "geometry": …, "properties": …}`,
        place,
      );
    }
    const g = f.geometry as Record<string, unknown> | null;
    const gtype = g && typeof g === "object" ? String(g.type) : "null";
    if (gtype !== "Point") {
      throw inputError(
        `features[${i}] has a ${messageText(gtype, 40)} geometry; only Point features are read (RFC 7946 §3.1.2): ` +
          "remove it or convert it to points",
        place,
      );
    }
    const coords = g!.coordinates;
    if (!Array.isArray(coords) || coords.length < 2) {
      throw inputError(`features[${i}] Point needs at least two coordinates, [x, y] (RFC 7946 §3.1.2)`, place);
    }
    if (coords.length >= 3) hasZ = true;
    const props = f.properties;
    if (props !== null && props !== undefined && typeof props === "object" && !Array.isArray(props)) {
      for (const k of Object.keys(props)) {
        if (!propSeen.has(k)) {
          propSeen.add(k);
          propNames.push(k);
        }
      }
    }
  }

  const columns = ["x", "y", ...(hasZ ? ["z"] : []), ...propNames];
  const firstProp = hasZ ? 3 : 2;
  const rows: string[][] = [];
  const rowLines: number[] = [];
  for (let i = 0; i < features.length; i++) {
    const f = features[i] as { geometry: { coordinates: unknown[] }; properties?: Record<string, unknown> | null };
    const c = f.geometry.coordinates;
    const row = [cellText(c[0]), cellText(c[1])];
    if (hasZ) row.push(cellText(c[2]));
    const props = f.properties && typeof f.properties === "object" ? f.properties : {};
    for (const k of propNames) row.push(cellText(props[k]));
    rows.push(row);
    rowLines.push(lineOfFeature(i));
  }

  const propIdx = propNames.map((_, k) => firstProp + k);
  const choice = chooseColumns(columns, rows, options, {
    file,
    headerLine: keyLine,
    decimalComma: false,
    zCandidates: propIdx,
    zDefault: hasZ ? 2 : -1,
    numericFallback: false,
  });
  const crs = readCrs(top.crs);
  return {
    file,
    columns,
    rows,
    lines: rowLines,
    ...choice,
    delimiter: "geojson",
    decimalComma: false,
    ...(crs ? { crs } : {}),
  };
}

function cellText(v: unknown): string {
  if (v === null || v === undefined) return "";
  if (typeof v === "string") return v;
  if (typeof v === "number" || typeof v === "boolean") return String(v);
  return JSON.stringify(v);
}

/** EPSG code from a GeoJSON 2008 "crs" member (RFC 7946 dropped it, but files still carry it). */
function readCrs(crs: unknown): Crs | undefined {
  let name: unknown = crs;
  if (crs && typeof crs === "object") {
    const props = (crs as { properties?: Record<string, unknown> }).properties;
    name = props?.name ?? (props?.code !== undefined ? `EPSG:${props.code}` : undefined);
  }
  if (typeof name !== "string") return undefined;
  if (/CRS84$/i.test(name)) return { epsg: 4326, label: "EPSG:4326" };
  const m = /EPSG:(?:[0-9.]*:)?(\d+)\s*$/i.exec(name) ?? /EPSG\/[^/]*\/(\d+)\s*$/i.exec(name);
  if (!m) return undefined;
  const epsg = Number(m[1]);
  return { epsg, label: `EPSG:${epsg}` };
}

/** Start offsets of the elements of the top-level "features" array (text known to be valid JSON). */
function featureOffsets(s: string): number[] {
  let offsets: number[] = [];
  let depth = 0;
  let lastKey = "";
  let inFeatures = false;
  let expectElem = false;
  for (let i = 0; i < s.length; i++) {
    const c = s[i];
    if (c === " " || c === "\n" || c === "\t" || c === "\r") continue;
    if (inFeatures && depth === 2 && expectElem && c !== "]") {
      offsets.push(i);
      expectElem = false;
    }
    if (c === '"') {
      const start = i;
      i++;
      while (s[i] !== '"') i += s[i] === "\\" ? 2 : 1;
      if (depth === 1) lastKey = s.slice(start + 1, i);
    } else if (c === "{" || c === "[") {
      depth++;
      if (c === "[" && depth === 2 && lastKey === "features") {
        inFeatures = true;
        expectElem = true;
        offsets = [];
      }
    } else if (c === "}" || c === "]") {
      if (inFeatures && depth === 2) inFeatures = false;
      depth--;
    } else if (c === "," && inFeatures && depth === 2) {
      expectElem = true;
    }
  }
  return offsets;
}

/** Find the first syntax error in JSON text (RFC 8259 grammar). */
function locateJsonError(s: string): { offset: number; message: string } | undefined {
  let i = 0;
  class Stop {
    constructor(readonly offset: number, readonly message: string) {}
  }
  const fail = (message: string): never => {
    throw new Stop(Math.min(i, s.length), message);
  };
  const what = () => (i >= s.length ? "unexpected end of file" : `unexpected '${messageText(s[i])}'`);
  const ws = () => {
    while (i < s.length && " \t\n\r".includes(s[i])) i++;
  };
  const lit = (word: string) => {
    for (const ch of word) {
      if (s[i] !== ch) fail(`${what()} (expected '${word}')`);
      i++;
    }
  };
  const str = () => {
    i++;
    while (true) {
      if (i >= s.length) fail("string is not closed");
      const ch = s.charCodeAt(i);
      if (ch === 0x22) return void i++;
      if (ch < 0x20) fail("control character inside a string");
      if (ch === 0x5c) {
        i++;
        if (s[i] === "u") {
          if (!/^[0-9a-fA-F]{4}$/.test(s.slice(i + 1, i + 5))) fail("bad \\u escape");
          i += 5;
        } else if (i < s.length && '"\\/bfnrt'.includes(s[i])) i++;
        else fail("bad escape in a string");
      } else i++;
    }
  };
  const num = () => {
    const m = /^-?(?:0|[1-9]\d*)(?:\.\d+)?(?:[eE][+-]?\d+)?/.exec(s.slice(i, i + 400));
    if (!m) fail(`${what()} (bad number)`);
    i += m![0].length;
  };
  const value = (depth: number): void => {
    if (depth > 5000) fail("nesting too deep");
    ws();
    const c = s[i];
    if (c === "{") {
      i++;
      ws();
      if (s[i] === "}") return void i++;
      while (true) {
        ws();
        if (s[i] !== '"') fail(`${what()} (expected a property name in double quotes)`);
        str();
        ws();
        if (s[i] !== ":") fail(`${what()} (expected ':')`);
        i++;
        value(depth + 1);
        ws();
        if (s[i] === ",") i++;
        else if (s[i] === "}") return void i++;
        else fail(`${what()} (expected ',' or '}')`);
      }
    } else if (c === "[") {
      i++;
      ws();
      if (s[i] === "]") return void i++;
      while (true) {
        value(depth + 1);
        ws();
        if (s[i] === ",") i++;
        else if (s[i] === "]") return void i++;
        else fail(`${what()} (expected ',' or ']')`);
      }
    } else if (c === '"') str();
    else if (c === "-" || (c >= "0" && c <= "9")) num();
    else if (c === "t") lit("true");
    else if (c === "f") lit("false");
    else if (c === "n") lit("null");
    else fail(`${what()} (expected a value)`);
  };
  try {
    value(0);
    ws();
    if (i < s.length) fail("unexpected text after the end of the JSON value");
  } catch (e) {
    if (e instanceof Stop) return { offset: e.offset, message: e.message };
    throw e;
  }
  return undefined;
}

function fromParseMessage(e: unknown, length: number): { offset: number; message: string } {
  const message = e instanceof Error ? e.message : String(e);
  const m = /position (\d+)/.exec(message);
  return { offset: m ? Math.min(Number(m[1]), length) : 0, message };
}
