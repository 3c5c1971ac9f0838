// The reader interface: every input format is a module under src/read/ that recognises its files
// from their first bytes and turns them into one TypedTable (src/types.ts). registry.ts lists them.
import { ExitCode, RbfieldError } from "../errors.ts";
import { messageText } from "../text.ts";
import type { TextTable, TypedTable } from "../types.ts";

export interface ReadOptions {
  /**
   * Column (or GeoJSON property) names, matched case-insensitively, or 1-based positions ("3" is
   * the third column). A column name that is itself a number is taken over the position only when
   * it equals the option exactly ("3" picks a column named "3", else the third column).
   */
  x?: string;
  y?: string;
  z?: string;
  /** Default true; false for prediction locations, where the value column is optional. */
  needValue?: boolean;
  /**
   * Delimited and whitespace text: "auto" (default) reads the first row as column names unless it
   * holds only numbers; "none" reads it as data. Without a header row the columns are named by
   * position, "1", "2", …, and x, y and the value must be named (nothing is guessed).
   */
  header?: "auto" | "none";
  /** Point clouds (LAS/LAZ): keep only these ASPRS classes (e.g. [2], ground). */
  classes?: number[];
  /** readPointTable: progress of reading, with the fraction of the file read. */
  progress?: (message: string, fraction?: number) => void;
}

/** A file's bytes in order, a block at a time. */
export type ByteBlocks = AsyncIterable<Uint8Array> | Iterable<Uint8Array>;

export interface PointReader {
  /** Short name, e.g. "geojson". */
  readonly name: string;
  /**
   * How sure the reader is, from the start of a file, that it can read it: 0 (not its format) to 1
   * (a signature that settles it). Text readers answer at most 0.9, so a binary format with a
   * signature wins over text that happens to look like a header line.
   */
  sniff(bytes: Uint8Array): number;
  /** Read the whole file; a text reader returns the cells' text as well (a TextTable). */
  read(bytes: Uint8Array, file: string, options: ReadOptions): TypedTable | TextTable | Promise<TypedTable | TextTable>;
  /**
   * Read the file a block at a time, holding no more of it than a block and the typed table
   * (delimited and whitespace text); readPointTable gives the others the whole file.
   */
  readBlocks?(blocks: ByteBlocks, file: string, options: ReadOptions): Promise<TypedTable | TextTable>;
}

/** A reader of a text format, which can also start from text already decoded. */
export interface TextReader extends PointReader {
  /** The same judgement as sniff, on text (the start of the file at least up to its first content line). */
  sniffText(text: string): number;
  parse(text: string, file: string, options: ReadOptions): TextTable;
}

/** Refuse option values the readers do not know (a usage error naming the option). */
export function checkReadOptions(options: ReadOptions): void {
  const header = options.header;
  if (header !== undefined && header !== "auto" && header !== "none") {
    throw new RbfieldError(`header must be "auto" or "none", not "${messageText(String(header), 40)}"`, ExitCode.usage, undefined, "header");
  }
}
