// Text input shared by the text readers: bytes to text (refusing what is not UTF-8 text), whole or
// a block at a time, line bookkeeping, comment lines, the first content line and the delimiter it suggests.
import { inputError } from "../errors.ts";
import type { TextTable } from "../types.ts";
import type { ByteBlocks, ReadOptions, TextReader } from "./reader.ts";

/**
 * A text reader from its parts: the judgement on the start of the text, the parser, and (for
 * formats that can be read a block at a time) the block reader. From bytes it decodes the start of
 * the file to sniff; it reads the whole file through the block reader when there is one, else
 * decodes it (refusing what is not UTF-8 text) and parses it.
 */
export function textReader(
  name: string,
  sniffText: (text: string) => number,
  parse: (text: string, file: string, options: ReadOptions) => TextTable,
  readBlocks?: (blocks: ByteBlocks, file: string, options: ReadOptions) => Promise<TextTable>,
): TextReader {
  return {
    name,
    sniff: (bytes) => sniffText(headText(bytes)),
    sniffText,
    read: (bytes, file, options) => (readBlocks ? readBlocks([bytes], file, options) : parse(decodeText(bytes, file), file, options)),
    parse,
    ...(readBlocks ? { readBlocks } : {}),
  };
}

/** Bytes at the start of a file that are searched for NUL bytes. */
const NUL_WINDOW = 65536;

/**
 * Refuse a file whose start shows it is not UTF-8 text: UTF-16, ZIP archives and anything holding a
 * NUL byte in its first 64 KiB (text files hold no NUL bytes, while UTF-16 without a byte-order
 * mark and binary files do).
 */
function checkTextStart(bytes: Uint8Array, file: string): void {
  if (bytes.length >= 2 && ((bytes[0] === 0xff && bytes[1] === 0xfe) || (bytes[0] === 0xfe && bytes[1] === 0xff))) {
    throw inputError("file is UTF-16 encoded; save it as UTF-8", { file, line: 1 });
  }
  if (bytes.length >= 4 && bytes[0] === 0x50 && bytes[1] === 0x4b && bytes[2] === 3 && bytes[3] === 4) {
    throw inputError("file is a ZIP archive (e.g. an Excel .xlsx workbook), not text; save the points as CSV", { file });
  }
  const nul = bytes.subarray(0, NUL_WINDOW).indexOf(0);
  if (nul >= 0) {
    let line = 1;
    for (let i = 0; i < nul; i++) if (bytes[i] === 0x0a) line++;
    throw inputError(
      "file holds NUL bytes, so it is not UTF-8 text (UTF-16, or a binary file such as a spreadsheet?); save the points as UTF-8 CSV",
      { file, line },
    );
  }
}

/**
 * Decode a text file's bytes as UTF-8 (a byte-order mark is dropped, bad bytes become U+FFFD), after
 * the checks of checkTextStart.
 */
export function decodeText(bytes: Uint8Array, file: string): string {
  checkTextStart(bytes, file);
  return new TextDecoder("utf-8").decode(bytes);
}

/**
 * A text file's bytes, a block at a time, to the text decodeText and normalizeText make of the whole
 * file: UTF-8 decoded with stream: true (a character split between blocks waits for the rest of
 * it), the byte-order marks dropped, CRLF and CR made "\n" (a CR at the end of a block waits to see
 * whether LF follows). No text comes out before the first 64 KiB have passed checkTextStart.
 */
export class TextBlocks {
  // The byte-order marks are dropped here, not by the decoder: Deno's decoder, in stream mode, also
  // drops a U+FEFF that starts a later call's bytes, while decodeText keeps it.
  private readonly decoder = new TextDecoder("utf-8", { ignoreBOM: true });
  private held: Uint8Array[] = [];
  private heldBytes = 0;
  private checked = false;
  /** Leading U+FEFF still to drop: the decoder's byte-order mark and normalizeText's. */
  private marks = 2;
  private cr = false;

  constructor(private readonly file: string) {}

  push(bytes: Uint8Array): string {
    if (this.checked) return this.normalize(this.decoder.decode(bytes, { stream: true }), false);
    this.held.push(bytes.slice());
    this.heldBytes += bytes.length;
    return this.heldBytes < NUL_WINDOW ? "" : this.release();
  }

  end(): string {
    const text = this.checked ? "" : this.release();
    return text + this.normalize(this.decoder.decode(), true);
  }

  private release(): string {
    const all = this.held.length === 1 ? this.held[0] : new Uint8Array(this.heldBytes);
    if (this.held.length > 1) {
      let at = 0;
      for (const b of this.held) {
        all.set(b, at);
        at += b.length;
      }
    }
    this.held = [];
    checkTextStart(all, this.file);
    this.checked = true;
    return this.normalize(this.decoder.decode(all, { stream: true }), false);
  }

  private normalize(text: string, last: boolean): string {
    while (this.marks > 0 && text.length > 0) {
      if (text.charCodeAt(0) !== 0xfeff) this.marks = 0;
      else {
        text = text.slice(1);
        this.marks--;
      }
    }
    if (this.cr) {
      text = "\r" + text;
      this.cr = false;
    }
    if (!last && text.endsWith("\r")) {
      text = text.slice(0, -1);
      this.cr = true;
    }
    return text.replace(/\r\n?/g, "\n");
  }
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
    const first = firstContentLine(body);
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
  constructor(body: string) {
    for (let i = body.indexOf("\n"); i >= 0; i = body.indexOf("\n", i + 1)) this.starts.push(i + 1);
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
}

/** Empty lines and lines with "#" in column 1 hold no row. */
export function isSkippedLine(text: string): boolean {
  return text.trim() === "" || text.startsWith("#");
}

/** The first line that is neither empty nor a comment: its 1-based number (-1 if none), where it starts and ends. */
export function firstContentLine(body: string): { line: number; start: number; end: number } {
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
  const first = firstContentLine(body);
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
