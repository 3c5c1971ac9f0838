// Cells to typed columns: the number grammar of the text readers (grammar.ts), laboratory values,
// the decimal mark a file uses, which columns look numeric, and typed tables from rows of cells.
import type { PointTable, TextTable } from "../types.ts";
import { parseNumber } from "./grammar.ts";
import { TableBuilder } from "./table.ts";

export { parseNumber };

/**
 * What a laboratory value cell says, beyond a plain number (README "Non-detects"):
 * - "number": a number, with the qualifier written after it ("0,8 J" → 0.8, "J"; "12,4*" → 12.4, "*"),
 *   "" when there is none;
 * - "non-detect": below the detection limit: "<0.5" and "< 0,5" (the limit written), "<DL", "< LOD",
 *   "ND", "n.d.", "n.n.", "BDL" (limit from elsewhere: null), or a number qualified U or UJ ("0.5 U":
 *   not detected at that limit, in the US EPA data-validation qualifiers);
 * - "rejected": a number qualified R (rejected in the US EPA qualifiers: not to be used);
 * - null: none of these (missing, "n/a", text, ">1000", "12abc").
 * A qualifier is one or two letters, optionally followed by up to two of * # ^ ! †, or one to three
 * of those symbols alone, written after the number with or without a space.
 */
export type Measurement =
  | { kind: "number"; value: number; qualifier: string }
  | { kind: "non-detect"; limit: number | null; qualifier: string }
  | { kind: "rejected"; value: number; qualifier: string };

// One shape per pattern, each part of fixed form, so no text can match in more than one way.
const BELOW_NUMBER = /^<\s*([+-]?[0-9.,]+(?:[eE][+-]?\d+)?)$/;
const BELOW_WORD = /^<\s*[A-Za-z][A-Za-z.]{0,11}$/;
const NOT_DETECTED = /^(?:n\.?\s?d\.?|n\.\s?n\.|nn|bdl|not detected|nicht nachweisbar)$/i;
const QUALIFIED = /^([+-]?[0-9.,]+(?:[eE][+-]?\d+)?)\s?((?:[A-Za-z]{1,2}[*#^!\u2020]{0,2})|[*#^!\u2020]{1,3})$/;

export function parseMeasurement(cell: string, decimalComma: boolean): Measurement | null {
  const s = cell.trim();
  if (s === "") return null;
  const plain = parseNumber(s, decimalComma);
  if (!Number.isNaN(plain)) return { kind: "number", value: plain, qualifier: "" };
  let m = BELOW_NUMBER.exec(s);
  if (m) {
    const limit = parseNumber(m[1], decimalComma);
    return Number.isNaN(limit) || limit < 0 ? null : { kind: "non-detect", limit, qualifier: "<" };
  }
  if (BELOW_WORD.test(s) || NOT_DETECTED.test(s)) return { kind: "non-detect", limit: null, qualifier: s };
  m = QUALIFIED.exec(s);
  if (!m) return null;
  const value = parseNumber(m[1], decimalComma);
  if (Number.isNaN(value)) return null;
  const qualifier = m[2];
  const letters = qualifier.replace(/[^A-Za-z]/g, "").toUpperCase();
  if (letters === "U" || letters === "UJ") return value >= 0 ? { kind: "non-detect", limit: value, qualifier } : null;
  if (letters === "R") return { kind: "rejected", value, qualifier };
  return { kind: "number", value, qualifier };
}

/** Decimal comma when comma-decimal cells are at least as common as dot-decimal ones. */
export function detectDecimalComma(rows: string[][]): boolean {
  let comma = 0, dot = 0;
  const limit = Math.min(rows.length, 1000);
  for (let r = 0; r < limit; r++) {
    for (const cell of rows[r]) {
      const s = cell.trim();
      if (/^[+-]?\d*,\d+(?:[eE][+-]?\d+)?$/.test(s)) comma++;
      else if (/^[+-]?\d*\.\d+(?:[eE][+-]?\d+)?$/.test(s)) dot++;
    }
  }
  return comma > 0 && comma >= dot;
}

/**
 * Type the cells of a text table (TableBuilder: the x, y and value columns and every other column
 * whose cells are all numbers become numbers; rows whose x, y or value is not a number are listed).
 */
export function typeCells(cells: PointTable): TextTable {
  const { rows, data: _data, unusable: _unusable, ...meta } = cells;
  const width = cells.columns.length;
  const builder = new TableBuilder(width, cells.decimalComma);
  for (const row of rows) builder.add(Array.from({ length: width }, (_, j) => row[j] ?? ""));
  return builder.finish(meta);
}

/** The first `count` cells of column j that are not empty or spaces, in row order (what looksNumeric judges). */
export function firstCells(rows: string[][], j: number, count = 5): string[] {
  const out: string[] = [];
  for (let r = 0; r < rows.length && out.length < count; r++) {
    const cell = rows[r][j] ?? "";
    if (cell.trim() !== "") out.push(cell);
  }
  return out;
}

/**
 * The first few non-empty cells of a column (given in row order; firstCells) are all numbers, and
 * there is at least one; with `readings`, laboratory values ("<0.5", "ND", "0,8 J") count as numbers too.
 */
export function looksNumeric(cells: string[], decimalComma: boolean, readings = false): boolean {
  let seen = 0;
  for (let r = 0; r < cells.length && seen < 5; r++) {
    const cell = cells[r];
    if (cell.trim() === "") continue;
    if (Number.isNaN(parseNumber(cell, decimalComma)) && !(readings && parseMeasurement(cell, decimalComma))) return false;
    seen++;
  }
  return seen > 0;
}
