// Rows of delimited and whitespace text: the header row (or names by position when the first row
// is data), cell counts, and the typed table made from them.
import { inputError } from "../errors.ts";
import type { TextTable } from "../types.ts";
import { detectDecimalComma, looksNumeric, parseNumber, typeCells } from "./cells.ts";
import { chooseColumns } from "./columns.ts";
import type { ReadOptions } from "./reader.ts";
import type { Delimiter, LineIndex } from "./textfile.ts";

/** Collects the header and data rows, skipping empty rows and checking cell counts. */
export class RowCollector {
  header: string[] = [];
  /** Line of the header row, or of the first data row when the file has none. */
  headerLine = 0;
  hasHeader = true;
  rows: string[][] = [];
  lines: number[] = [];
  /** The first row while it may still turn out to be data. */
  private firstCells?: string[];

  constructor(
    readonly file: string,
    readonly index: LineIndex,
    readonly delimiter: Delimiter,
    readonly headerMode: ReadOptions["header"] = "auto",
  ) {}

  /** extraAt(k) gives the text offset where cell k (0-based) starts. */
  add(cells: string[], start: number, extraAt: (k: number) => number): void {
    if (cells.every((c) => c.trim() === "")) return;
    if (this.headerLine === 0) {
      this.headerLine = this.index.lineOf(start);
      if (this.headerMode !== "none" && !this.numbersOnly(cells)) {
        // A header row, unless the rows below show it is data (decided in finish()).
        this.header = cells.map((c, j) => (c.trim() === "" ? `column ${j + 1}` : c.trim()));
        this.firstCells = cells;
        return;
      }
      this.hasHeader = false;
      this.header = cells.map((_, j) => String(j + 1));
    }
    const n = this.header.length;
    if (cells.length > n) {
      const at = extraAt(n);
      const other = this.hasHeader ? "the header" : "the first row";
      throw inputError(
        `row has ${cells.length} cells but ${other} has ${n}; the first extra cell starts here ` +
          `(check for an unquoted delimiter or a missing header name)`,
        { file: this.file, line: this.index.lineOf(at), column: this.index.columnOf(at) },
      );
    }
    while (cells.length < n) cells.push("");
    this.rows.push(cells);
    this.lines.push(this.index.lineOf(start));
  }

  /** A row of numbers only (empty cells allowed, at least one number): data, not names. */
  private numbersOnly(cells: string[]): boolean {
    let numbers = 0;
    for (const cell of cells) {
      if (cell.trim() === "") continue;
      const plain = !Number.isNaN(parseNumber(cell, false));
      if (!plain && !(this.delimiter === ";" && !Number.isNaN(parseNumber(cell, true)))) return false;
      numbers++;
    }
    return numbers > 0;
  }

  /** The typed table: columns chosen as the options say, numbers parsed, unusable rows listed. */
  /**
   * With header "auto", a first row that holds text is still data when every column that is numeric
   * in the rows below has a number in it too (at least two such columns), and a word of the first row
   * recurs in its column below: data-collector exports put point codes beside the numbers, and codes
   * repeat, while a header row has names, which do not. When the first shot's code is unique the row
   * reads as a header and the refusal to guess the columns tells the user to name them by position.
   */
  private firstRowIsData(): boolean {
    const first = this.firstCells;
    if (!first || this.rows.length === 0) return false;
    const decimalComma = this.delimiter === ";" && detectDecimalComma(this.rows);
    let numeric = 0, recurring = false, words = false;
    for (let j = 0; j < first.length; j++) {
      const cell = first[j].trim();
      if (looksNumeric(this.rows, j, decimalComma)) {
        numeric++;
        if (Number.isNaN(parseNumber(cell, decimalComma))) return false;
      } else if (cell !== "" && Number.isNaN(parseNumber(cell, decimalComma))) {
        words = true;
        // A point code recurs in its column (GS, GS, KB …); a column name does not.
        if (this.rows.some((r) => r[j].trim() === cell)) recurring = true;
      }
    }
    return numeric >= 2 && (!words || recurring);
  }

  finish(options: ReadOptions): TextTable {
    if (this.firstRowIsData()) {
      this.rows.unshift(this.firstCells!);
      this.lines.unshift(this.headerLine);
      this.hasHeader = false;
      this.header = this.firstCells!.map((_, j) => String(j + 1));
    }
    const { file, header: columns, rows } = this;
    if (rows.length === 0) {
      throw inputError("no data rows after the header; add one row per point below it", { file, line: this.headerLine });
    }
    const decimalComma = this.delimiter === ";" && detectDecimalComma(rows);
    const choice = chooseColumns(columns, rows, options, {
      file,
      headerLine: this.headerLine,
      decimalComma,
      zCandidates: columns.map((_, j) => j),
      numericFallback: true,
      hasHeader: this.hasHeader,
      firstRow: this.index.text(this.headerLine),
    });
    return typeCells({
      file,
      columns,
      rows,
      lines: this.lines,
      ...choice,
      delimiter: this.delimiter,
      decimalComma,
      hasHeader: this.hasHeader,
    });
  }
}
