// Reader: comma (CSV, RFC 4180), semicolon (decimal commas recognised) and tab-separated text,
// split by papaparse a block at a time (text_rows.ts). Recognised by the delimiter its first content
// line uses.
import type { ReadOptions, TextReader } from "./reader.ts";
import { parseTextTable, readTextTable } from "./text_rows.ts";
import { textDelimiter, textReader } from "./textfile.ts";

/** Confidence for text whose first content line has a comma, semicolon or tab delimiter. */
function sniffText(text: string): number {
  const d = textDelimiter(text);
  return d === "," || d === ";" || d === "\t" ? 0.9 : 0;
}

/**
 * This reader also stands in for text no reader recognises (an empty file, or one of only
 * comments, is refused here), and splits whitespace-separated text as the whitespace reader does:
 * the first content line chooses the delimiter.
 */
export const delimitedReader: TextReader = textReader(
  "delimited",
  sniffText,
  (text: string, file: string, options: ReadOptions) => parseTextTable(text, file, options),
  (blocks, file, options) => readTextTable(blocks, file, options),
);
