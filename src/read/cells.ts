// Cells to typed columns: the number grammar of the text readers, which columns are numbers and
// which are text, and why a row's x, y or value cannot be used.
import { messageText } from "../text.ts";
import type { PointTable, TableColumn, TextTable, UnusableRow } from "../types.ts";
import { isIdentifierName } from "./names.ts";

// Written so that no text can match in more than one way: "\d+\.?\d*" would let a long run of
// digits split between the two \d parts, and a failing match would then take quadratic time.
const PLAIN_NUMBER = /^[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?$/;
const COMMA_NUMBER = /^[+-]?(?:\d+(?:,\d*)?|,\d+)(?:[eE][+-]?\d+)?$/;

/**
 * Parse a plain finite decimal number; NaN for anything else ("", "NaN", "Infinity", "1e999",
 * "12abc", "0x10"). With decimalComma the decimal mark is "," and a "." is refused.
 */
export function parseNumber(cell: string, decimalComma: boolean): number {
  let s = cell.trim();
  if (decimalComma) {
    if (!COMMA_NUMBER.test(s)) return NaN;
    s = s.replace(",", ".");
  } else if (!PLAIN_NUMBER.test(s)) {
    return NaN;
  }
  const v = Number(s);
  return Number.isFinite(v) ? v : NaN;
}

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
 * Type the cells of a text table: the chosen x, y and value columns and every other column whose
 * cells are all numbers (at least one, empty cells allowed, name not an identifier such as "id" or
 * "code") become numbers, NaN where a cell is not a number; the rest stay text. Rows whose x, y or
 * value is not a number are listed with the reason.
 */
export function typeCells(cells: PointTable): TextTable {
  const { columns, rows, decimalComma } = cells;
  const chosen = [cells.xColumn, cells.yColumn, cells.zColumn].filter((j) => j >= 0);
  const data: TableColumn[] = columns.map((name, j) => {
    if (!chosen.includes(j) && !numbersOnly(rows, j, name, decimalComma)) {
      return { name, kind: "text", values: rows.map((row) => row[j] ?? "") };
    }
    const values = new Float64Array(rows.length);
    for (let i = 0; i < rows.length; i++) values[i] = parseNumber(rows[i][j] ?? "", decimalComma);
    return { name, kind: "number", values };
  });
  const unusable: UnusableRow[] = [];
  for (let i = 0; i < rows.length; i++) {
    for (const j of chosen) {
      if (!Number.isNaN((data[j].values as Float64Array)[i])) continue;
      unusable.push({ row: i, line: cells.lines[i], column: j, reason: badCellReason(rows[i][j] ?? "", columns[j], decimalComma) });
      break;
    }
  }
  const how = cells.columnChoice === "named" ? "named" : "detected";
  return {
    ...cells,
    format: cells.format ?? formatOf(cells.delimiter),
    data,
    hasHeader: cells.hasHeader ?? true,
    unusable,
    chosenBy: cells.chosenBy ?? { x: how, y: how, z: cells.zColumn < 0 ? "none" : how },
  };
}

/** Format name of a delimiter as PointTable.delimiter gives it. */
function formatOf(delimiter: string): string {
  return ({ ",": "csv", ";": "semicolon", "\t": "tsv" } as Record<string, string>)[delimiter] ?? delimiter;
}

function numbersOnly(rows: string[][], j: number, name: string, decimalComma: boolean): boolean {
  if (isIdentifierName(name)) return false;
  let seen = false;
  for (const row of rows) {
    const cell = row[j] ?? "";
    if (cell.trim() === "") continue;
    if (Number.isNaN(parseNumber(cell, decimalComma))) return false;
    seen = true;
  }
  return seen;
}

/** Why a cell is not a usable number: missing, not finite, or not a number (with a decimal-comma hint). */
function badCellReason(rawCell: string, rawColumn: string, decimalComma: boolean): string {
  const cell = messageText(rawCell, 40);
  const column = messageText(rawColumn, 40);
  const t = cell.trim();
  if (t === "") return `missing value in column '${column}'`;
  const asNumber = Number(decimalComma ? rawCell.trim().replace(",", ".") : rawCell.trim());
  if (/^[+-]?(nan|inf|infinity)$/i.test(t) || asNumber === Infinity || asNumber === -Infinity) {
    return `value '${t}' in column '${column}' is not a finite number`;
  }
  if (/^>\s*[0-9.,]/.test(t)) return `value '${t}' in column '${column}' is above the reported range (a '>' value is no number to fit)`;
  const hint = decimalComma && t.includes(".") ? " (this file uses a decimal comma)" : "";
  return `value '${t}' in column '${column}' is not a number${hint}`;
}

/**
 * The first few non-empty cells of column j are all numbers (and there is at least one); with
 * `readings`, laboratory values ("<0.5", "ND", "0,8 J") count as numbers too.
 */
export function looksNumeric(rows: string[][], j: number, decimalComma: boolean, readings = false): boolean {
  let seen = 0;
  for (let r = 0; r < rows.length && seen < 5; r++) {
    const cell = rows[r][j];
    if (cell.trim() === "") continue;
    if (Number.isNaN(parseNumber(cell, decimalComma)) && !(readings && parseMeasurement(cell, decimalComma))) return false;
    seen++;
  }
  return seen > 0;
}
