// Delimited and whitespace text to rows of cells, a chunk of text at a time, so that a big file is
// never held whole: the first content line chooses the delimiter; papaparse splits delimited text
// (RFC 4180 quoting) and a line loop splits whitespace text; rows go to the RowCollector as they are
// complete, with their line numbers counted as the text passes.
import Papa from "papaparse";
import { inputError } from "../errors.ts";
import type { TextTable } from "../types.ts";
import type { ReadOptions } from "./reader.ts";
import { RowCollector, type RowPlace } from "./rows.ts";
import { ownText } from "./table.ts";
import { type Delimiter, detectDelimiter, firstContentLine, isSkippedLine, normalizeText, skipCommentLines, TextBlocks } from "./textfile.ts";

/** A splitter takes text in pieces and hands complete rows to its collector. */
interface Splitter {
  push(text: string): void;
  end(): void;
}

interface PapaStep {
  data: string[][];
  errors: { code: string; message: string; index?: number }[];
  meta: { cursor: number };
}
interface PapaParser {
  parse(input: string, baseIndex: number, ignoreLastRow: boolean): { meta: { cursor: number } };
}
// papaparse's own parser, the one its streamers drive (exported as Papa.Parser).
const papa = Papa as unknown as { Parser: new (config: Record<string, unknown>) => PapaParser };

/**
 * Delimited text through papaparse's parser, fed as papaparse's own chunk streamer feeds it: each
 * piece is parsed with the unfinished row before it in front, and the last row of a piece waits for
 * the next (ignoreLastRow) unless the text has ended. Row starts come from the cursor of the row
 * before; a piece that completes no row (a quoted field spanning pieces) is parsed again only once
 * the text has doubled, so a long field costs linear time.
 */
class DelimitedSplitter implements Splitter, RowPlace {
  private readonly parser: PapaParser;
  /** Text after the last complete row, and its offset in the whole text. */
  private rest = "";
  private base = 0;
  /** The text being parsed (rest and the new piece) and whether nothing follows it. */
  private text = "";
  private final = false;
  /** Where the previous row ended and the current one starts, in `text`. */
  private prevEnd = 0;
  private rowStart = 0;
  /** Lines counted up to offset `counted` of `text`: `line` is the line there; the next line end after it. */
  private counted = 0;
  private line = 1;
  private nextNewline = -1;
  /** The line at the start of `rest`. */
  private restLine = 1;
  private waitFor = 0;

  constructor(readonly delimiter: "," | ";" | "\t", private readonly out: RowCollector) {
    this.parser = new papa.Parser({
      delimiter,
      newline: "\n",
      quoteChar: '"',
      escapeChar: '"',
      comments: "#",
      step: (result: PapaStep) => this.step(result),
    });
  }

  push(piece: string): void {
    if (piece === "") return;
    this.rest += piece;
    if (this.rest.length >= this.waitFor) this.parse(true);
  }

  end(): void {
    this.parse(false);
  }

  private parse(more: boolean): void {
    this.text = this.rest;
    this.final = !more;
    this.prevEnd = 0;
    this.counted = 0;
    this.line = this.restLine;
    this.nextNewline = -1;
    const result = this.parser.parse(this.text, this.base, more);
    if (more) {
      const cut = result.meta.cursor - this.base;
      this.restLine = this.advance(cut);
      this.rest = this.text.slice(cut);
      this.base += cut;
      this.waitFor = cut === 0 ? 2 * this.text.length : 0;
    }
    this.text = "";
  }

  private step(result: PapaStep): void {
    const text = this.text;
    const start = skipCommentLines(text, this.prevEnd);
    this.prevEnd = result.meta.cursor - this.base;
    this.rowStart = start;
    const line = this.advance(start);
    const err = result.errors[0];
    if (err) {
      const at = Math.max(0, Math.min(text.length - 1, (err.index ?? start + 1) - 1));
      const what = err.code === "MissingQuotes"
        ? "quoted field has no closing quote"
        : "malformed quotes: a closing quote must be followed by the delimiter or the end of the line";
      throw inputError(`${what} (RFC 4180: a quote inside a quoted field is written twice)`, { file: this.out.file, ...this.placeOf(at) });
    }
    const unterminated = this.final && this.prevEnd === text.length && !text.endsWith("\n");
    this.out.add(result.data[0], line, this, unterminated);
  }

  /** Count line ends up to offset `to` (at or after `counted`) of the text; the line there. */
  private advance(to: number): number {
    const text = this.text;
    let nl = this.nextNewline;
    if (nl < this.counted) {
      nl = text.indexOf("\n", this.counted);
      if (nl < 0) nl = Infinity;
    }
    while (nl < to) {
      this.line++;
      nl = text.indexOf("\n", nl + 1);
      if (nl < 0) nl = Infinity;
    }
    this.nextNewline = nl;
    this.counted = to;
    return this.line;
  }

  /** Line and column of an offset at or after `counted` (for messages; counts nothing). */
  private placeOf(at: number): { line: number; column: number } {
    const text = this.text;
    let line = this.line;
    for (let i = text.indexOf("\n", this.counted); i >= 0 && i < at; i = text.indexOf("\n", i + 1)) line++;
    const lineStart = at === 0 ? 0 : text.lastIndexOf("\n", at - 1) + 1;
    return { line, column: at - lineStart + 1 };
  }

  cellAt(k: number): { line: number; column: number } {
    return this.placeOf(cellOffset(this.text, this.rowStart, this.delimiter, k));
  }

  endAt(): { line: number; column: number } {
    return this.placeOf(this.prevEnd);
  }

  lineText(): string {
    const end = this.text.indexOf("\n", this.rowStart);
    return ownText(this.text.slice(this.rowStart, end < 0 ? this.text.length : end));
  }
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

/** Text whose cells are separated by runs of spaces and tabs (a cell may be double-quoted on one line), line by line. */
class WhitespaceSplitter implements Splitter, RowPlace {
  private rest = "";
  private line = 0;
  private current = "";
  private starts: number[] = [];

  constructor(private readonly out: RowCollector) {}

  push(piece: string): void {
    const text = this.rest + piece;
    let from = 0;
    for (let nl = text.indexOf("\n"); nl >= 0; nl = text.indexOf("\n", from)) {
      this.row(text.slice(from, nl), false);
      from = nl + 1;
    }
    this.rest = text.slice(from);
  }

  end(): void {
    this.row(this.rest, true);
    this.rest = "";
  }

  /** Split a line that is neither empty nor a comment into cells. */
  private row(text: string, last: boolean): void {
    const line = ++this.line;
    if (isSkippedLine(text)) return;
    const cells: string[] = [];
    const starts: number[] = [];
    let i = 0;
    while (true) {
      while (i < text.length && (text[i] === " " || text[i] === "\t")) i++;
      if (i >= text.length) break;
      starts.push(i);
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
            file: this.out.file,
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
    this.current = text;
    this.starts = starts;
    this.out.add(cells, line, this, last);
  }

  cellAt(k: number): { line: number; column: number } {
    return { line: this.line, column: this.starts[k] + 1 };
  }

  endAt(): { line: number; column: number } {
    return { line: this.line, column: this.current.length + 1 };
  }

  lineText(): string {
    return ownText(this.current);
  }
}

/**
 * Text (with "\n" line ends and no byte-order mark: normalizeText, TextBlocks) to a typed table, a
 * piece at a time. The text waits until its first content line is complete, which chooses the
 * delimiter (`forced`: always whitespace); an empty file, or one of only comments, is refused at the end.
 */
export class TextTableReader {
  private head = "";
  private splitter?: Splitter;
  private collector?: RowCollector;

  constructor(
    private readonly file: string,
    private readonly options: ReadOptions,
    private readonly forced?: "whitespace",
  ) {}

  push(text: string): void {
    if (this.splitter) {
      this.splitter.push(text);
      return;
    }
    this.head += text;
    const first = firstContentLine(this.head);
    if (first.line > 0 && first.end < this.head.length) this.start(first);
  }

  end(): TextTable {
    if (!this.splitter) {
      const file = this.file;
      if (this.head.search(/\S/) < 0) {
        throw inputError("file is empty; give a header row (e.g. x,y,z) and one row per point", { file, line: 1 });
      }
      const first = firstContentLine(this.head);
      if (first.line < 0) {
        throw inputError(
          "file is empty (only empty and comment lines); give a header row (e.g. x,y,z) and one row per point",
          { file, line: 1 },
        );
      }
      this.start(first);
    }
    this.splitter!.end();
    return this.collector!.finish(this.options);
  }

  private start(first: { start: number; end: number }): void {
    const delimiter: Delimiter = this.forced ?? detectDelimiter(this.head.slice(first.start, first.end));
    const collector = new RowCollector(this.file, delimiter, this.options.header);
    this.collector = collector;
    this.splitter = delimiter === "whitespace" ? new WhitespaceSplitter(collector) : new DelimitedSplitter(delimiter, collector);
    const head = this.head;
    this.head = "";
    this.splitter.push(head);
  }
}

/** Parse the whole text of a file (pure). */
export function parseTextTable(text: string, file: string, options: ReadOptions, forced?: "whitespace"): TextTable {
  const reader = new TextTableReader(file, options, forced);
  reader.push(normalizeText(text));
  return reader.end();
}

/** Read a text file from its bytes, a block at a time (decoded and normalised by TextBlocks). */
export async function readTextTable(
  blocks: AsyncIterable<Uint8Array> | Iterable<Uint8Array>,
  file: string,
  options: ReadOptions,
  forced?: "whitespace",
): Promise<TextTable> {
  const text = new TextBlocks(file);
  const reader = new TextTableReader(file, options, forced);
  for await (const block of blocks) reader.push(text.push(block));
  reader.push(text.end());
  return reader.end();
}
