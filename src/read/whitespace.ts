// Reader: text whose cells are separated by runs of spaces and tabs (a cell may be double-quoted
// on one line), split line by line a block at a time (text_rows.ts). Recognised by a first content
// line with spaces or aligned tabs and no other delimiter.
import type { ReadOptions, TextReader } from "./reader.ts";
import { parseTextTable, readTextTable } from "./text_rows.ts";
import { textDelimiter, textReader } from "./textfile.ts";

function sniffText(text: string): number {
  return textDelimiter(text) === "whitespace" ? 0.9 : 0;
}

export const whitespaceReader: TextReader = textReader(
  "whitespace",
  sniffText,
  (text: string, file: string, options: ReadOptions) => parseTextTable(text, file, options, "whitespace"),
  (blocks, file, options) => readTextTable(blocks, file, options, "whitespace"),
);
