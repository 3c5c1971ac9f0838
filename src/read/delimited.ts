// Reader: comma (CSV, RFC 4180), semicolon (decimal commas recognised) and tab-separated text,
// split by papaparse. Recognised by the delimiter its first content line uses.
import Papa from "papaparse";
import { inputError } from "../errors.ts";
import type { TextTable } from "../types.ts";
import type { ReadOptions, TextReader } from "./reader.ts";
import { RowCollector } from "./rows.ts";
import { detectDelimiter, prepareText, skipCommentLines, textDelimiter, textReader } from "./textfile.ts";
import { whitespaceRows } from "./whitespace.ts";

interface PapaStep {
  data: string[];
  errors: { code: string; message: string; index?: number }[];
  meta: { cursor: number };
}
const papa = Papa as unknown as {
  parse(input: string, config: Record<string, unknown>): void;
};

/** Confidence for text whose first content line has a comma, semicolon or tab delimiter. */
function sniffText(text: string): number {
  const d = textDelimiter(text);
  return d === "," || d === ";" || d === "\t" ? 0.9 : 0;
}

/**
 * Parse delimited text. This reader also stands in for text no reader recognises (an empty file,
 * or one of only comments, is refused here), and splits whitespace-separated text as the
 * whitespace reader does.
 */
function parse(text: string, file: string, options: ReadOptions): TextTable {
  const { body, lines, first } = prepareText(text, file);
  const delimiter = detectDelimiter(lines.text(first));
  if (delimiter === "whitespace") return whitespaceRows(lines, file, options).finish(options);
  const collected = new RowCollector(file, lines, delimiter, options.header);
  splitDelimited(body, delimiter, collected);
  return collected.finish(options);
}

export const delimitedReader: TextReader = textReader("delimited", sniffText, parse);

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
