// CSV writer for estimates at input points: the input columns as read, plus added number columns.
// Output follows RFC 4180 (comma delimiter, CRLF record ends, quotes doubled inside quoted fields).
import { ExitCode, RbfieldError } from "../errors.ts";
import { formatNumber } from "../text.ts";
import { cellTexts } from "../read/table.ts";
import type { PointTable } from "../types.ts";
import type { TextPieces } from "./atomic.ts";

export { formatNumber };

/** Quote a field when it holds a comma, a quote, CR or LF (RFC 4180 §2.6, §2.7). */
export function csvField(text: string): string {
  return /[",\r\n]/.test(text) ? `"${text.replace(/"/g, '""')}"` : text;
}

/**
 * The input's columns in the header: their names; for a file without a header row (columns named
 * "1", "2", … by position) the roles where known, x, y and z, and column_N for the others, so the
 * header does not read as numbers (README "Estimates at points").
 */
export function inputHeader(table: PointTable): string[] {
  if (table.hasHeader !== false) return table.columns;
  return table.columns.map((_, j) =>
    j === table.xColumn ? "x" : j === table.yColumn ? "y" : j === table.zColumn ? "z" : `column_${j + 1}`
  );
}

/**
 * One record per input row: original cells (as written: cellTexts, made from the typed columns for
 * a table a reader made), then each added column (numbers formatted with formatNumber).
 */
export function estimatesCsv(
  table: PointTable,
  added: { name: string; values: Float64Array | number[] | string[]; digits?: number }[],
): string {
  return [...estimatesRecords(table, added)].join("");
}

/** estimatesCsv as pieces written while they are made (a run's table at every reading). */
export function estimatesCsvPieces(
  table: PointTable,
  added: { name: string; values: Float64Array | number[] | string[]; digits?: number }[],
): TextPieces {
  return { pieces: estimatesRecords(table, added) };
}

/** The header, then one record per row, each with its CRLF (checked before the first record). */
function estimatesRecords(
  table: PointTable,
  added: { name: string; values: Float64Array | number[] | string[]; digits?: number }[],
): Iterable<string> {
  const rows = table.lines.length;
  for (const col of added) {
    if (col.values.length !== rows) {
      throw new RbfieldError(
        `column '${col.name}' has ${col.values.length} values for ${rows} rows`,
        ExitCode.internal,
      );
    }
  }
  const width = table.columns.length;
  const header = [...inputHeader(table), ...added.map((c) => c.name)];
  const text = cellTexts(table);
  return (function* () {
    yield header.map(csvField).join(",") + "\r\n";
    for (let i = 0; i < rows; i++) {
      const fields: string[] = [];
      for (let j = 0; j < width; j++) fields.push(csvField(text(i, j)));
      for (const col of added) {
        const v = col.values[i];
        fields.push(csvField(typeof v === "string" ? v : formatNumber(v, col.digits ?? 10)));
      }
      yield fields.join(",") + "\r\n";
    }
  })();
}
