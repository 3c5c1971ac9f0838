// Read stage entry: a point file (CSV, semicolon, TSV, whitespace text or GeoJSON) into a table
// with every cell's text (PointTable, as the later stages and the estimates CSV use it) and its
// typed columns (TypedTable). The formats are readers under src/read/, chosen in registry.ts.
import { readFile } from "node:fs/promises";
import { ExitCode, RbfieldError } from "../errors.ts";
import type { TextTable } from "../types.ts";
import type { ReadOptions } from "./reader.ts";
import { parseTable, readTable, withCells } from "./registry.ts";

export { parseNumber } from "./cells.ts";
export { messageText } from "../text.ts";
export type { ReadOptions } from "./reader.ts";

/** Read a point file from disk; a missing or unreadable file is an I/O error. */
export async function readPointTable(path: string, options?: ReadOptions): Promise<TextTable> {
  let bytes: Uint8Array;
  try {
    bytes = await readFile(path);
  } catch (e) {
    throw new RbfieldError(`cannot read the file: ${ioReason(e)}`, ExitCode.io, { file: path });
  }
  return withCells(await readTable(bytes, path, options));
}

function ioReason(e: unknown): string {
  const code = (e as { code?: string })?.code;
  if (code === "ENOENT") return "no such file";
  if (code === "EACCES" || code === "EPERM") return "permission denied";
  if (code === "EISDIR") return "it is a directory";
  return e instanceof Error ? e.message : String(e);
}

/** Parse the text of a point file (pure). `file` is used in messages only. */
export function parsePointTable(text: string, file: string, options: ReadOptions = {}): TextTable {
  return parseTable(text, file, options);
}
