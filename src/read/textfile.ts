// Text input shared by the text readers: bytes to text (refusing what is not UTF-8 text), line
// bookkeeping, comment lines, the first content line and the delimiter it suggests.
import { inputError } from "../errors.ts";
import type { TextTable } from "../types.ts";
import type { ReadOptions, TextReader } from "./reader.ts";

/**
 * A text reader from its two parts: the judgement on the start of the text and the parser. From
 * bytes it decodes the start of the file to sniff, and the whole file (refusing what is not UTF-8
 * text) to read.
 */
export function textReader(
  name: string,
  sniffText: (text: string) => number,
  parse: (text: string, file: string, options: ReadOptions) => TextTable,
): TextReader {
  return {
    name,
    sniff: (bytes) => sniffText(headText(bytes)),
    sniffText,
    read: (bytes, file, options) => parse(decodeText(bytes, file), file, options),
    parse,
  };
}

/**
 * Decode a text file's bytes as UTF-8 (a byte-order mark is dropped, bad bytes become U+FFFD).
 * UTF-16, ZIP archives and anything holding a NUL byte are refused: text files hold no NUL bytes,
 * while UTF-16 without a byte-order mark and binary files do.
 */
export function decodeText(bytes: Uint8Array, file: string): string {
  if (bytes.length >= 2 && ((bytes[0] === 0xff && bytes[1] === 0xfe) || (bytes[0] === 0xfe && bytes[1] === 0xff))) {
    throw inputError("file is UTF-16 encoded; save it as UTF-8", { file, line: 1 });
  }
  if (bytes.length >= 4 && bytes[0] === 0x50 && bytes[1] === 0x4b && bytes[2] === 3 && bytes[3] === 4) {
    throw inputError("file is a ZIP archive (e.g. an Excel .xlsx workbook), not text; save the points as CSV", { file });
  }
  const nul = bytes.subarray(0, 65536).indexOf(0);
  if (nul >= 0) {
    let line = 1;
    for (let i = 0; i < nul; i++) if (bytes[i] === 0x0a) line++;
    throw inputError(
      "file holds NUL bytes, so it is not UTF-8 text (UTF-16, or a binary file such as a spreadsheet?); save the points as UTF-8 CSV",
      { file, line },
    );
  }
  return new TextDecoder("utf-8").decode(bytes);
}

/** Longest start of a file the text readers' sniff functions decode. */
const HEAD_LIMIT = 1 << 20;

/**
 * The start of a file as text, long enough to hold its first content line (or the whole file, or
 * the first MiB when the first line is longer): what the text readers' sniff functions look at.
 */
export function headText(bytes: Uint8Array): string {
  for (let n = 4096;; n *= 4) {
    const text = new TextDecoder("utf-8").decode(bytes.subarray(0, n));
    if (n >= bytes.length || n >= HEAD_LIMIT) return text;
    const body = normalizeText(text);
    const first = firstContentLineIn(body);
    if (first.end < body.length) return text;
  }
}

/** Text without a leading byte-order mark, with "\n" as the only line break (CRLF, LF or CR). */
export function normalizeText(text: string): string {
  const body = text.charCodeAt(0) === 0xfeff ? text.slice(1) : text;
  return body.replace(/\r\n?/g, "\n");
}

/** The first character that is not white space is "{" (a JSON document). */
export function startsWithBrace(body: string): boolean {
  const first = body.search(/\S/);
  return first >= 0 && body[first] === "{";
}

/** Offsets of line starts in text that uses "\n" only; lines are 1-based. */
export class LineIndex {
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

/** Empty lines and lines with "#" in column 1 hold no row. */
export function isSkippedLine(text: string): boolean {
  return text.trim() === "" || text.startsWith("#");
}

/** The first line that is neither empty nor a comment: its 1-based number and where it ends (-1 if none). */
function firstContentLineIn(body: string): { line: number; start: number; end: number } {
  let start = 0;
  for (let line = 1; start <= body.length; line++) {
    const nl = body.indexOf("\n", start);
    const end = nl < 0 ? body.length : nl;
    if (!isSkippedLine(body.slice(start, end))) return { line, start, end };
    start = end + 1;
  }
  return { line: -1, start: body.length, end: body.length };
}

/** The first content line's text, or undefined when there is none. */
export function firstContentText(body: string): string | undefined {
  const first = firstContentLineIn(body);
  return first.line < 0 ? undefined : body.slice(first.start, first.end);
}

/** Move past comment lines ("#" in column 1), as papaparse does before a row. */
export function skipCommentLines(body: string, offset: number): number {
  while (body.startsWith("#", offset)) {
    const nl = body.indexOf("\n", offset);
    if (nl < 0) return body.length;
    offset = nl + 1;
  }
  return offset;
}

export type Delimiter = "," | ";" | "\t" | "whitespace";

/**
 * Pick the delimiter from the first content line (counts outside double quotes). Semicolons win
 * over more numerous commas when every comma stands between two digits: decimal commas in a first
 * row of numbers ("512400,125;5402200,5;101,42").
 */
export function detectDelimiter(header: string): Delimiter {
  let commas = 0, digitCommas = 0, semis = 0, tabs = 0, quoted = false;
  const isDigit = (c: string | undefined) => c !== undefined && c >= "0" && c <= "9";
  for (let i = 0; i < header.length; i++) {
    const c = header[i];
    if (c === '"') quoted = !quoted;
    else if (quoted) continue;
    else if (c === ",") {
      commas++;
      if (isDigit(header[i - 1]) && isDigit(header[i + 1])) digitCommas++;
    } else if (c === ";") semis++;
    else if (c === "\t") tabs++;
  }
  if (tabs > 0 && tabs >= commas && tabs >= semis) {
    // Tabs next to other spaces are alignment, not a TSV delimiter.
    return /\t[ \t]|[ \t]\t/.test(header.trim()) ? "whitespace" : "\t";
  }
  if (semis > 0 && (semis >= commas || digitCommas === commas)) return ";";
  if (commas > 0) return ",";
  if (/[ \t]/.test(header.trim())) return "whitespace";
  return ",";
}

/** The delimiter a text file's first content line suggests; undefined for JSON or a file without content. */
export function textDelimiter(text: string): Delimiter | undefined {
  const body = normalizeText(text);
  if (startsWithBrace(body)) return undefined;
  const first = firstContentText(body);
  return first === undefined ? undefined : detectDelimiter(first);
}

/**
 * Text ready to split into rows: the body, its line index and the first content line. An empty
 * file, or one of only empty and comment lines, is refused.
 */
export function prepareText(text: string, file: string): { body: string; lines: LineIndex; first: number } {
  const body = normalizeText(text);
  if (body.search(/\S/) < 0) {
    throw inputError("file is empty; give a header row (e.g. x,y,z) and one row per point", { file, line: 1 });
  }
  const first = firstContentLineIn(body).line;
  if (first < 0) {
    throw inputError(
      "file is empty (only empty and comment lines); give a header row (e.g. x,y,z) and one row per point",
      { file, line: 1 },
    );
  }
  return { body, lines: new LineIndex(body), first };
}
