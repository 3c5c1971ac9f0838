// Read stage entry: a point file (CSV, semicolon, TSV, whitespace text or GeoJSON) into a table
// with its typed columns (TypedTable) and the text of every cell as written (TextTable: cellTexts
// in table.ts, or `rows` when asked for), as the later stages and the estimates CSV use it. The
// formats are readers under src/read/, chosen in registry.ts; delimited and whitespace text is read
// from disk a block at a time, so a big file is never held whole.
import { type FileHandle, open, readFile } from "node:fs/promises";
import { ExitCode, RbfieldError } from "../errors.ts";
import type { TextTable } from "../types.ts";
import { checkReadOptions, type ReadOptions } from "./reader.ts";
import { parseTable, readerFor, withCells } from "./registry.ts";

export { parseNumber } from "./cells.ts";
export { messageText } from "../text.ts";
export type { ReadOptions } from "./reader.ts";

/** Bytes read at a time; the first block is also what the readers' sniff functions judge (headText reads at most 1 MiB). */
const BLOCK_BYTES = 1 << 20;

/**
 * Read a point file from disk; a missing or unreadable file is an I/O error. Delimited and
 * whitespace text is read a block at a time, reporting `progress` with the fraction read when the
 * file is longer than one block (1 MiB); other formats are read whole.
 */
export async function readPointTable(path: string, options: ReadOptions = {}): Promise<TextTable> {
  checkReadOptions(options);
  const io = (e: unknown) => new RbfieldError(`cannot read the file: ${ioReason(e)}`, ExitCode.io, { file: path });
  let handle: FileHandle;
  try {
    handle = await open(path, "r");
  } catch (e) {
    throw io(e);
  }
  try {
    let size = 0;
    let head: Uint8Array;
    try {
      size = (await handle.stat()).size;
      head = await readBlock(handle);
    } catch (e) {
      throw io(e);
    }
    const reader = readerFor(head);
    if (reader.readBlocks) {
      const progress = head.length === BLOCK_BYTES ? options.progress : undefined;
      const fraction = (done: number) => (size > 0 ? Math.min(1, done / size) : undefined);
      progress?.(`reading ${path}`, fraction(head.length));
      const blocks = blocksFrom(handle, head, (done) => progress?.(`reading ${path}`, fraction(done)), io);
      return withCells(await reader.readBlocks(blocks, path, options));
    }
    let bytes: Uint8Array;
    try {
      bytes = await readFile(path);
    } catch (e) {
      throw io(e);
    }
    return withCells(await reader.read(bytes, path, options));
  } finally {
    await handle.close();
  }
}

/** The next block of the file (shorter only at its end; empty there). */
async function readBlock(handle: FileHandle): Promise<Uint8Array> {
  const block = new Uint8Array(BLOCK_BYTES);
  let n = 0;
  while (n < block.length) {
    const { bytesRead } = await handle.read(block, n, block.length - n, null);
    if (bytesRead === 0) break;
    n += bytesRead;
  }
  return n === block.length ? block : block.subarray(0, n);
}

/** The file's blocks from the first (already read) on, saying how many bytes have been read after each. */
async function* blocksFrom(
  handle: FileHandle,
  head: Uint8Array,
  read: (done: number) => void,
  io: (e: unknown) => RbfieldError,
): AsyncGenerator<Uint8Array> {
  yield head;
  let done = head.length;
  let block = head;
  while (block.length === BLOCK_BYTES) {
    try {
      block = await readBlock(handle);
    } catch (e) {
      throw io(e);
    }
    if (block.length === 0) break;
    done += block.length;
    read(done);
    yield block;
  }
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
