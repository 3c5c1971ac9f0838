// The readers rbfield knows, and the choice among them: each is asked how sure it is, from the
// start of the file, that the file is its format; the surest reads it. Text no reader recognises
// goes to the delimited reader, which refuses empty and non-text files with their own messages.
import type { TextTable, TypedTable } from "../types.ts";
import { delimitedReader } from "./delimited.ts";
import { geojsonReader } from "./geojson.ts";
import { lasReader } from "./las_reader.ts";
import { checkReadOptions, type PointReader, type ReadOptions, type TextReader } from "./reader.ts";
import { withRowView } from "./table.ts";
import { whitespaceReader } from "./whitespace.ts";

/** Every reader, binary formats with a signature first; ties go to the earlier one. */
export const READERS: readonly PointReader[] = [lasReader, geojsonReader, whitespaceReader, delimitedReader];
/** The text readers, for text already decoded. */
export const TEXT_READERS: readonly TextReader[] = [geojsonReader, whitespaceReader, delimitedReader];

function surest<R>(readers: readonly R[], confidence: (r: R) => number, fallback: R): R {
  let best = fallback;
  let level = 0;
  for (const r of readers) {
    const c = confidence(r);
    if (c > level) {
      best = r;
      level = c;
    }
  }
  return best;
}

/** The reader for a file's bytes. */
export function readerFor(bytes: Uint8Array, readers: readonly PointReader[] = READERS): PointReader {
  return surest(readers, (r) => r.sniff(bytes), delimitedReader);
}

/** The reader for text already decoded. */
export function textReaderFor(text: string, readers: readonly TextReader[] = TEXT_READERS): TextReader {
  return surest(readers, (r) => r.sniffText(text), delimitedReader);
}

/** Read a file's bytes with the reader that recognises them. */
export async function readTable(
  bytes: Uint8Array,
  file: string,
  options: ReadOptions = {},
  readers: readonly PointReader[] = READERS,
): Promise<TypedTable | TextTable> {
  checkReadOptions(options);
  return await readerFor(bytes, readers).read(bytes, file, options);
}

/** Parse decoded text with the text reader that recognises it. */
export function parseTable(text: string, file: string, options: ReadOptions = {}): TextTable {
  checkReadOptions(options);
  return textReaderFor(text).parse(text, file, options);
}

/**
 * A typed table with cell text for callers that work on cells (the estimates CSV keeps every input
 * column): a text reader's table as it is, a binary reader's with its numbers written out (cellTexts
 * in table.ts gives every cell, `rows` all of them when asked for).
 */
export function withCells(table: TypedTable | TextTable): TextTable {
  if ("rows" in table) return table as TextTable;
  return withRowView({ ...table, delimiter: table.format, decimalComma: false });
}
