// Rows of delimited and whitespace text, as the splitters (text_rows.ts) hand them over one at a
// time: the header row (or names by position when the first row is data), cell counts, and the typed
// table they go into (table.ts), so that the rows' text is not kept.
import { inputError } from "../errors.ts";
import type { TextTable } from "../types.ts";
import { detectDecimalComma, looksNumeric, parseNumber } from "./cells.ts";
import { chooseColumns } from "./columns.ts";
import type { ReadOptions } from "./reader.ts";
import { ownText, TableBuilder } from "./table.ts";
import type { Delimiter } from "./textfile.ts";

/** Where the splitter is in the text, for the row it hands over. */
export interface RowPlace {
  /** Line and column where cell k (0-based) of the row starts. */
  cellAt(k: number): { line: number; column: number };
  /** Line and column just past the row's last character. */
  endAt(): { line: number; column: number };
  /** The text of the row's first line. */
  lineText(): string;
}

/** Rows read to choose the decimal mark (detectDecimalComma looks at the first 1000). */
const EARLY_ROWS = 1000;
/** Cells per column that looksNumeric judges. */
const SAMPLE_CELLS = 5;

/** A row whose cells are all empty or spaces. */
function isEmptyRow(cells: string[]): boolean {
  for (const c of cells) if (c !== "" && c.trim() !== "") return false;
  return true;
}

/**
 * Collects the header and data rows, skipping empty rows and checking cell counts. Rows go into
 * typed columns as they arrive once the decimal mark is settled (at once for comma, tab and
 * whitespace text; after the first 1000 rows for semicolon text, which may use decimal commas);
 * what the header decision needs from the rows below (the first cells of each column, whether a
 * word of the first row recurs in its column) is kept as the rows pass.
 */
export class RowCollector {
  header: string[] = [];
  /** Line of the header row, or of the first data row when the file has none. */
  headerLine = 0;
  hasHeader = true;
  private lines: number[] = [];
  /** The first row while it may still turn out to be data, its cells trimmed, and its line's text. */
  private firstCells?: string[];
  private firstTrimmed: string[] = [];
  private firstText = "";
  /** Per column: a cell of the first row, not empty, recurs in the column below. */
  private recurs: boolean[] = [];
  /** Per column: its first cells that are not empty or spaces, in the rows after a pending first row. */
  private samples: string[][] = [];
  private unsampled = 0;
  /** Semicolon text: the first rows after a pending first row (all rows when there is none), for the decimal mark. */
  private early: string[][] = [];
  /** Rows not yet in typed columns (semicolon text before its decimal mark is settled). */
  private buffer: string[][] = [];
  private builder?: TableBuilder;
  /** The decimal mark stays open to the end (see startColumns). */
  private undecided = false;
  /** The last row's cell count as written, and where it ends when no line end follows it. */
  private lastCells = 0;
  private lastEnd?: { line: number; column: number };

  constructor(
    readonly file: string,
    readonly delimiter: Delimiter,
    readonly headerMode: ReadOptions["header"] = "auto",
  ) {}

  /** A row of cells starting at `line`; `unterminated` when the text ends inside it, with no line end. */
  add(cells: string[], line: number, place: RowPlace, unterminated = false): void {
    if (isEmptyRow(cells)) return;
    if (this.headerLine === 0) {
      this.headerLine = line;
      this.firstText = place.lineText();
      if (this.headerMode !== "none" && !this.numbersOnly(cells)) {
        // A header row, unless the rows below show it is data (decided in finish()).
        this.header = cells.map((c, j) => (c.trim() === "" ? `column ${j + 1}` : c.trim()));
        this.firstCells = cells;
        this.firstTrimmed = cells.map((c) => c.trim());
        this.recurs = cells.map(() => false);
        this.samples = cells.map(() => []);
        this.unsampled = cells.length;
        return;
      }
      this.hasHeader = false;
      this.header = cells.map((_, j) => String(j + 1));
      this.samples = cells.map(() => []);
      this.unsampled = cells.length;
    }
    const n = this.header.length;
    if (cells.length > n) {
      const at = place.cellAt(n);
      const other = this.hasHeader ? "the header" : "the first row";
      throw inputError(
        `row has ${cells.length} cells but ${other} has ${n}; the first extra cell starts here ` +
          `(check for an unquoted delimiter or a missing header name)`,
        { file: this.file, line: at.line, column: at.column },
      );
    }
    this.lastCells = cells.length;
    if (unterminated) this.lastEnd = place.endAt();
    while (cells.length < n) cells.push("");
    if (this.firstCells) this.noteRecurring(cells);
    if (this.unsampled > 0) this.noteSamples(cells);
    if (this.delimiter === ";" && this.early.length < EARLY_ROWS) this.early.push(cells);
    this.lines.push(line);
    if (this.builder) this.builder.add(cells);
    else {
      this.buffer.push(cells);
      this.startColumns();
    }
  }

  private noteRecurring(cells: string[]): void {
    const first = this.firstTrimmed;
    for (let j = 0; j < first.length; j++) {
      const w = first[j];
      if (this.recurs[j] || w === "") continue;
      const c = cells[j];
      if (c === w || (c.length > w.length && c.trim() === w)) this.recurs[j] = true;
    }
  }

  private noteSamples(cells: string[]): void {
    for (let j = 0; j < cells.length; j++) {
      const s = this.samples[j];
      if (s.length >= SAMPLE_CELLS || cells[j].trim() === "") continue;
      s.push(ownText(cells[j]));
      if (s.length === SAMPLE_CELLS) this.unsampled--;
    }
  }

  /** The decimal mark of the table: semicolon text whose first rows write more decimal commas than points. */
  private decimalComma(firstIsData: boolean): boolean {
    if (this.delimiter !== ";") return false;
    return detectDecimalComma(firstIsData && this.firstCells ? [this.firstCells, ...this.early].slice(0, EARLY_ROWS) : this.early);
  }

  /**
   * Start the typed columns once the decimal mark cannot change: at once without semicolons; else
   * after the first 1000 rows, when it is the same whether a pending first row is a header or data
   * (else, rarely, the rows wait for the end).
   */
  private startColumns(): void {
    if (this.undecided) return;
    let comma = false;
    if (this.delimiter === ";") {
      if (this.early.length < EARLY_ROWS) return;
      comma = this.decimalComma(false);
      if (this.firstCells && this.decimalComma(true) !== comma) {
        this.undecided = true;
        return;
      }
    }
    this.builder = this.fill(comma);
  }

  private fill(decimalComma: boolean): TableBuilder {
    const builder = new TableBuilder(this.header.length, decimalComma);
    for (const row of this.buffer) builder.add(row);
    this.buffer = [];
    return builder;
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

  /**
   * With header "auto", a first row that holds text is still data when every column that is numeric
   * in the rows below has a number in it too (at least two such columns), and a word of the first row
   * recurs in its column below: data-collector exports put point codes beside the numbers, and codes
   * repeat, while a header row has names, which do not. When the first shot's code is unique the row
   * reads as a header and the refusal to guess the columns tells the user to name them by position.
   */
  private firstRowIsData(options: ReadOptions): boolean {
    const first = this.firstCells;
    if (!first) return false;
    const decimalComma = this.decimalComma(false);
    if (this.positionsHoldNumbers(options, decimalComma)) return true;
    if (this.lines.length === 0) return false;
    let numeric = 0, recurring = false, words = false;
    for (let j = 0; j < first.length; j++) {
      const cell = this.firstTrimmed[j];
      if (looksNumeric(this.samples[j], decimalComma)) {
        numeric++;
        if (Number.isNaN(parseNumber(cell, decimalComma))) return false;
      } else if (cell !== "" && Number.isNaN(parseNumber(cell, decimalComma))) {
        words = true;
        // A point code recurs in its column (GS, GS, KB …); a column name does not.
        if (this.recurs[j]) recurring = true;
      }
    }
    return numeric >= 2 && (!words || recurring);
  }

  /**
   * x and y (and the value, when given) named by 1-based position, and the first row holds numbers
   * at the x and y positions: the first row is data, whatever text the other cells hold (a point id
   * "S1" beside the coordinates; a value "ND"). A header row has names there; a first row with a
   * cell equal to an option ("3") is a header, as columnByOption takes that option for the name.
   */
  private positionsHoldNumbers(options: ReadOptions, decimalComma: boolean): boolean {
    if (options.x === undefined || options.y === undefined) return false;
    const first = this.firstTrimmed;
    const given = [options.x, options.y, options.z].filter((o) => o !== undefined).map((o) => o.trim().toLowerCase());
    // An option equal to a cell of the first row names that column: the row is a header.
    if (first.some((c) => given.includes(c.toLowerCase()))) return false;
    for (const [k, wanted] of [options.x, options.y, options.z].entries()) {
      if (wanted === undefined) continue;
      const w = wanted.trim();
      if (!/^\d+$/.test(w)) return false;
      const p = Number(w);
      if (p < 1 || p > first.length) return false;
      const cell = first[p - 1];
      if (k < 2 && Number.isNaN(parseNumber(cell, decimalComma))) return false;
    }
    return true;
  }

  /** The typed table: columns chosen as the options say, numbers parsed, unusable rows listed. */
  finish(options: ReadOptions): TextTable {
    const { file } = this;
    const end = this.lastEnd;
    if (end && this.lastCells < this.header.length) {
      throw inputError(
        `the last line has ${this.lastCells} of ${this.header.length} cells and no line end: the file looks cut off; ` +
          "complete the file (or that line), or remove the line",
        { file, line: end.line, column: end.column },
      );
    }
    const firstIsData = this.firstRowIsData(options);
    const first = this.firstCells;
    let samples = this.samples;
    if (firstIsData && first) {
      this.lines.unshift(this.headerLine);
      if (this.builder) this.builder.prepend(first);
      else this.buffer.unshift(first);
      this.hasHeader = false;
      this.header = first.map((_, j) => String(j + 1));
      samples = samples.map((s, j) => (first[j].trim() === "" ? s : [first[j], ...s]));
    }
    if (this.lines.length === 0) {
      throw inputError("no data rows after the header; add one row per point below it", { file, line: this.headerLine });
    }
    const decimalComma = this.decimalComma(firstIsData);
    const builder = this.builder ?? this.fill(decimalComma);
    const columns = this.header;
    const choice = chooseColumns(columns, samples, options, {
      file,
      headerLine: this.headerLine,
      decimalComma,
      zCandidates: columns.map((_, j) => j),
      numericFallback: true,
      hasHeader: this.hasHeader,
      firstRow: this.firstText,
    });
    return builder.finish({
      file,
      columns,
      lines: this.lines,
      ...choice,
      delimiter: this.delimiter,
      decimalComma,
      hasHeader: this.hasHeader,
    });
  }
}
