// The typed table as the text readers build it, a row at a time, without keeping the text of the
// file: numbers go into growing Float64Arrays with the number of decimals each was written with, so
// the text of every cell can be given back exactly (cellText) from a few bytes per cell; text goes
// into string lists only in columns that hold text (point ids, codes), equal strings shared. A cell
// that the decimals do not give back ("1e5", "+2", " 12", "n/a") keeps its own text.
//
// Invariant: once read, a number column's values are replaced (replaceValues), never changed in
// place: the numbers as read are what the cell text is given back from.
import { formatNumber, messageText } from "../text.ts";
import type { PointTable, TableColumn, TextTable, TypedTable, UnusableRow } from "../types.ts";
import { parseNumber } from "./grammar.ts";
import { isIdentifierName } from "./names.ts";

type NumberColumn = Extract<TableColumn, { kind: "number" }>;

/** The cell was empty. */
const EMPTY = -1;
/** The cell keeps its own text (in `other`): not a number, or a number toFixed does not give back. */
const OTHER = -2;
/** Longest fraction toFixed writes. */
const MAX_DECIMALS = 100;
/** Integers below this (2⁵³) are written the same by String and toFixed(0). */
const MAX_EXACT_INTEGER = 2 ** 53;
/** A column switches to plain strings once this many cells, and a quarter of its rows, keep their own text. */
const OWN_TEXT_LIMIT = 4096;
/** Equal strings are shared in a text column until it has this many different ones (codes repeat, ids do not). */
const SHARED_LIMIT = 10000;

/** How the cells of a number column were written. */
type Written =
  | { numbers: Float64Array; decimals: Int8Array; other: Map<number, string>; decimalComma: boolean }
  | { text: string[] };

/** Written forms of the number columns of read tables (the column objects are the keys). */
const WRITTEN = new WeakMap<object, Written>();

/**
 * A string that holds its own characters. V8 makes a substring of 13 or more characters a view into
 * the string it was cut from (here a whole block of the file), and keeping the view keeps the block;
 * shorter substrings are copies. The JSON round trip makes a plain copy (a slice of a concatenation,
 * the usual trick, makes a view into a fresh copy: two objects, measured 60% more memory).
 */
export function ownText(s: string): string {
  return s.length < 13 ? s : JSON.parse(JSON.stringify(s));
}

/** Decimals that give the cell back with toFixed, or OTHER (any number text; see plainDecimals for the usual ones). */
function decimalsOf(cell: string, v: number, decimalComma: boolean): number {
  const at = cell.indexOf(decimalComma ? "," : ".");
  const d = at < 0 ? 0 : cell.length - at - 1;
  if (d > MAX_DECIMALS) return OTHER;
  const text = v.toFixed(d);
  return (decimalComma && d > 0 ? text.replace(".", ",") : text) === cell ? d : OTHER;
}

/**
 * The decimals of a number written plainly — an optional minus, an integer part without leading
 * zeros, and a decimal mark with at least one digit after it when there is a fraction — with at most
 * 15 significant digits; -1 for any other text. Such a text T with d decimals and s ≤ 15 significant
 * digits is below 10^(s−d) in size, so the double nearest to it is within 10^(s−d)·2⁻⁵³ < 0.12·10^−d
 * of it, and toFixed(d) (the multiple of 10^−d nearest to the double, ECMA-262 Number.prototype.toFixed)
 * gives T back; toFixed writes a minus for every negative number, so "-0" forms are left out.
 */
function plainDecimals(cell: string, decimalComma: boolean): number {
  const n = cell.length;
  let i = 0;
  if (cell.charCodeAt(0) === 45) i = 1; // "-"
  const intStart = i;
  let c = cell.charCodeAt(i);
  if (c === 48) i++; // a lone "0" before the mark
  else if (c >= 49 && c <= 57) {
    do c = cell.charCodeAt(++i); while (c >= 48 && c <= 57);
  } else return -1;
  let significant = cell.charCodeAt(intStart) === 48 ? 0 : i - intStart;
  if (i === n) return (significant > 0 && significant <= 15) || (significant === 0 && intStart === 0) ? 0 : -1;
  if (cell.charCodeAt(i) !== (decimalComma ? 44 : 46)) return -1;
  const fracStart = ++i;
  let firstNonZero = -1;
  for (; i < n; i++) {
    c = cell.charCodeAt(i);
    if (c < 48 || c > 57) return -1;
    if (firstNonZero < 0 && c !== 48) firstNonZero = i;
  }
  const d = n - fracStart;
  if (d === 0) return -1;
  if (significant > 0) significant += d;
  else if (firstNonZero >= 0) significant = n - firstNonZero;
  else if (intStart === 1) return -1; // "-0.000": toFixed writes "0.000"
  return significant <= 15 ? d : -1;
}

function writtenText(w: Written, i: number): string {
  if ("text" in w) return w.text[i] ?? "";
  const d = w.decimals[i];
  if (d === 0) {
    const v = w.numbers[i];
    return Math.abs(v) < MAX_EXACT_INTEGER ? String(v) : v.toFixed(0);
  }
  if (d > 0) {
    const text = w.numbers[i].toFixed(d);
    return w.decimalComma ? text.replace(".", ",") : text;
  }
  return d === EMPTY ? "" : (w.other.get(i) ?? "");
}

/** One column while rows arrive: numbers with their decimals, or (once it is clearly text) strings. */
class ColumnCells {
  private numbers: Float64Array;
  private decimals: Int8Array;
  private other = new Map<number, string>();
  private text: string[] | null = null;
  private shared: Map<string, string> | null = new Map();
  /** A cell is a number; a cell holds text that is not a number (not only spaces). */
  hasNumber = false;
  hasWord = false;

  constructor(capacity: number, private readonly decimalComma: boolean) {
    this.numbers = new Float64Array(capacity);
    this.decimals = new Int8Array(capacity);
  }

  /** Cell i (rows arrive in order; i is the number of rows before it). */
  add(i: number, cell: string): void {
    if (this.text) {
      if (!this.hasWord || !this.hasNumber) this.classify(cell);
      this.text.push(this.share(cell));
      return;
    }
    if (i >= this.numbers.length) this.grow(i + 1);
    this.put(i, cell);
    if (this.other.size > OWN_TEXT_LIMIT && this.other.size * 4 > i) this.toText(i + 1);
  }

  /** Put a cell before the `rows` cells there are (a first row that turned out to be data). */
  prepend(rows: number, cell: string): void {
    if (this.text) {
      this.classify(cell);
      this.text.unshift(this.share(cell));
      return;
    }
    if (rows + 1 > this.numbers.length) this.grow(rows + 1);
    this.numbers.copyWithin(1, 0, rows);
    this.decimals.copyWithin(1, 0, rows);
    const other = new Map<number, string>();
    for (const [i, s] of this.other) other.set(i + 1, s);
    this.other = other;
    this.put(0, cell);
  }

  private put(i: number, cell: string): void {
    if (cell === "") {
      this.numbers[i] = NaN;
      this.decimals[i] = EMPTY;
      return;
    }
    const plain = plainDecimals(cell, this.decimalComma);
    if (plain >= 0) {
      // The same number parseNumber reads from plain text.
      this.numbers[i] = Number(this.decimalComma && plain > 0 ? cell.replace(",", ".") : cell);
      this.decimals[i] = plain;
      this.hasNumber = true;
      return;
    }
    const v = parseNumber(cell, this.decimalComma);
    this.numbers[i] = v;
    if (v === v) {
      this.hasNumber = true;
      const d = decimalsOf(cell, v, this.decimalComma);
      this.decimals[i] = d;
      if (d === OTHER) this.other.set(i, ownText(cell));
    } else {
      if (!this.hasWord && cell.trim() !== "") this.hasWord = true;
      this.decimals[i] = OTHER;
      this.other.set(i, this.share(cell));
    }
  }

  private classify(cell: string): void {
    if (cell.trim() === "") return;
    if (Number.isNaN(parseNumber(cell, this.decimalComma))) this.hasWord = true;
    else this.hasNumber = true;
  }

  private share(cell: string): string {
    const shared = this.shared;
    if (!shared || cell.length > 64) return ownText(cell);
    const known = shared.get(cell);
    if (known !== undefined) return known;
    if (shared.size >= SHARED_LIMIT) {
      this.shared = null;
      return ownText(cell);
    }
    const own = ownText(cell);
    shared.set(own, own);
    return own;
  }

  private grow(min: number): void {
    let size = Math.max(1024, this.numbers.length * 2);
    while (size < min) size *= 2;
    const numbers = new Float64Array(size);
    numbers.set(this.numbers);
    const decimals = new Int8Array(size);
    decimals.set(this.decimals);
    this.numbers = numbers;
    this.decimals = decimals;
  }

  private written(rows: number): Written {
    return { numbers: this.numbers.subarray(0, rows), decimals: this.decimals.subarray(0, rows), other: this.other, decimalComma: this.decimalComma };
  }

  /** From numbers to strings: the cells so far as written. */
  private toText(rows: number): void {
    const w = this.written(rows);
    this.text = Array.from({ length: rows }, (_, i) => this.share(writtenText(w, i)));
    this.numbers = new Float64Array(0);
    this.decimals = new Int8Array(0);
    this.other = new Map();
  }

  /** The finished column: numbers (their written form registered for cellText) or text. */
  finish(name: string, rows: number, kind: "number" | "text"): TableColumn {
    if (kind === "text") {
      if (this.text) return { name, kind, values: this.text };
      const w = this.written(rows);
      return { name, kind, values: Array.from({ length: rows }, (_, i) => this.share(writtenText(w, i))) };
    }
    let col: NumberColumn;
    if (this.text) {
      const text = this.text;
      col = { name, kind, values: Float64Array.from(text, (cell) => parseNumber(cell, this.decimalComma)) };
      WRITTEN.set(col, { text });
    } else {
      const numbers = this.numbers.slice(0, rows);
      col = { name, kind, values: numbers };
      WRITTEN.set(col, { numbers, decimals: this.decimals.slice(0, rows), other: this.other, decimalComma: this.decimalComma });
    }
    this.numbers = new Float64Array(0);
    this.decimals = new Int8Array(0);
    return col;
  }
}

/** What a text table says besides its cells (the typed parts are made by TableBuilder.finish). */
export type TableMeta = Omit<PointTable, "rows" | "data" | "unusable">;

/**
 * Builds a typed table a row at a time. Columns become numbers when they are the x, y or value
 * column, or when every cell that is not empty is a number (at least one) and the name is not an
 * identifier (id, point, code …); the rest stay text. Rows whose x, y or value is not a number are
 * listed with the reason.
 */
export class TableBuilder {
  rows = 0;
  private readonly cells: ColumnCells[];

  constructor(readonly width: number, readonly decimalComma: boolean) {
    this.cells = Array.from({ length: width }, () => new ColumnCells(1024, decimalComma));
  }

  /** A row of exactly `width` cells. */
  add(cells: string[]): void {
    const i = this.rows++;
    for (let j = 0; j < this.width; j++) this.cells[j].add(i, cells[j]);
  }

  /** A row put before the others. */
  prepend(cells: string[]): void {
    for (let j = 0; j < this.width; j++) this.cells[j].prepend(this.rows, cells[j]);
    this.rows++;
  }

  finish(meta: TableMeta): TextTable {
    const { columns, lines, decimalComma } = meta;
    const chosen = [meta.xColumn, meta.yColumn, meta.zColumn].filter((j) => j >= 0);
    const data = this.cells.map((c, j) => {
      const number = chosen.includes(j) || (!isIdentifierName(columns[j]) && c.hasNumber && !c.hasWord);
      return c.finish(columns[j], this.rows, number ? "number" : "text");
    });
    const unusable: UnusableRow[] = [];
    const chosenValues = chosen.map((j) => (data[j] as NumberColumn).values);
    for (let i = 0; i < this.rows; i++) {
      for (let k = 0; k < chosen.length; k++) {
        if (!Number.isNaN(chosenValues[k][i])) continue;
        const j = chosen[k];
        unusable.push({ row: i, line: lines[i], column: j, reason: badCellReason(writtenCell(data[j], i), columns[j], decimalComma) });
        break;
      }
    }
    const how = meta.columnChoice === "named" ? "named" : "detected";
    const table: TextTable = {
      ...meta,
      format: meta.format ?? formatOf(meta.delimiter),
      data,
      hasHeader: meta.hasHeader ?? true,
      unusable,
      chosenBy: meta.chosenBy ?? { x: how, y: how, z: meta.zColumn < 0 ? "none" : how },
    } as TextTable;
    return withRowView(table);
  }
}

/** Format name of a delimiter as PointTable.delimiter gives it. */
function formatOf(delimiter: string): string {
  return ({ ",": "csv", ";": "semicolon", "\t": "tsv" } as Record<string, string>)[delimiter] ?? delimiter;
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

/** Cell i of a column as written: text, a number column read from text, or a number written out. */
function writtenCell(col: TableColumn, i: number): string {
  if (col.kind === "text") return col.values[i] ?? "";
  const w = WRITTEN.get(col);
  if (w) return writtenText(w, i);
  const v = col.values[i];
  return Number.isNaN(v) ? "" : formatNumber(v, 17);
}

/** The table keeps cell text as a list of rows (a hand-made table), rather than in its columns. */
export function hasOwnRows(table: object): table is { rows: string[][] } {
  return Array.isArray(Object.getOwnPropertyDescriptor(table, "rows")?.value);
}

/**
 * The text of every cell of a table, as a function of row and column: as written in the file for a
 * table a text reader made, the numbers written out (17 significant digits) for a binary format's,
 * the rows' own cells for a hand-made table. Missing cells are "".
 */
export function cellTexts(table: PointTable | TypedTable): (i: number, j: number) => string {
  if (hasOwnRows(table)) {
    const rows = table.rows;
    return (i, j) => rows[i]?.[j] ?? "";
  }
  const data = table.data ?? [];
  return (i, j) => (data[j] ? writtenCell(data[j], i) : "");
}

/** One cell's text (see cellTexts; for loops over many cells, take the function once). */
export function cellText(table: PointTable | TypedTable, i: number, j: number): string {
  return cellTexts(table)(i, j);
}

/**
 * Cell (i, j) as the number grammar reads it (parseNumber with the table's decimal mark), from the
 * numbers as read: projection and laboratory values, which replace a column's values, do not change it.
 */
export function cellNumber(table: PointTable | TypedTable, i: number, j: number): number {
  const col = table.data?.[j];
  const decimalComma = "decimalComma" in table ? Boolean(table.decimalComma) : false;
  if (col?.kind === "number" && !hasOwnRows(table)) {
    const w = WRITTEN.get(col);
    if (!w) return col.values[i];
    if (!("text" in w)) return w.numbers[i];
  }
  return parseNumber(cellText(table, i, j), decimalComma);
}

/** Replace column j's values (projected coordinates, laboratory values entered), keeping how its cells were written. */
export function replaceValues(table: TypedTable, j: number, values: Float64Array): Float64Array {
  const col = table.data[j] as NumberColumn;
  const next: NumberColumn = { ...col, values };
  const w = WRITTEN.get(col);
  if (w) WRITTEN.set(next, w);
  table.data[j] = next;
  return values;
}

/** Column j's values as a fresh copy set in the table, to be changed in place by the caller. */
export function valuesToChange(table: TypedTable, j: number): Float64Array {
  return replaceValues(table, j, (table.data[j] as NumberColumn).values.slice());
}

/** Only the rows listed (0-based, ascending) of a column, with how their cells were written. */
export function subsetColumn(col: TableColumn, keep: number[]): TableColumn {
  if (col.kind === "text") return { ...col, values: keep.map((i) => col.values[i]) };
  const w = WRITTEN.get(col);
  const pick = (a: Float64Array) => Float64Array.from(keep, (i) => a[i]);
  if (!w) return { ...col, values: pick(col.values) };
  let written: Written;
  let values: Float64Array;
  if ("text" in w) {
    written = { text: keep.map((i) => w.text[i]) };
    values = pick(col.values);
  } else {
    const numbers = pick(w.numbers);
    const other = new Map<number, string>();
    keep.forEach((i, k) => {
      const s = w.other.get(i);
      if (s !== undefined) other.set(k, s);
    });
    written = { numbers, decimals: Int8Array.from(keep, (i) => w.decimals[i]), other, decimalComma: w.decimalComma };
    values = col.values === w.numbers ? numbers : pick(col.values);
  }
  const next: NumberColumn = { ...col, values };
  WRITTEN.set(next, written);
  return next;
}

/**
 * Give a table whose cells live in its columns the `rows` of a PointTable: every cell's text, made
 * when asked for (not kept, and not copied by a spread). For small tables and callers that want
 * rows; the stages use cellTexts.
 */
export function withRowView<T extends TypedTable>(table: T): T & { rows: string[][] } {
  Object.defineProperty(table, "rows", {
    get(this: TypedTable) {
      const text = cellTexts(this);
      const width = this.columns.length;
      return this.lines.map((_, i) => Array.from({ length: width }, (_, j) => text(i, j)));
    },
    enumerable: false,
    configurable: true,
  });
  return table as T & { rows: string[][] };
}
