// CSV writer for estimates at input points: the input columns as read, plus added number columns.
// Output follows RFC 4180 (comma delimiter, CRLF record ends, quotes doubled inside quoted fields).
import { ExitCode, RbfieldError } from "../errors.ts";
import { formatNumber } from "../text.ts";
import { cellTexts } from "../read/table.ts";
import type { PointTable } from "../types.ts";

export { formatNumber };

/** Quote a field when it holds a comma, a quote, CR or LF (RFC 4180 §2.6, §2.7). */
export function csvField(text: string): string {
  return /[",\r\n]/.test(text) ? `"${text.replace(/"/g, '""')}"` : text;
}

/**
 * One record per input row: original cells (as written: cellTexts, made from the typed columns for
 * a table a reader made), then each added column (numbers formatted with formatNumber).
 */
export function estimatesCsv(
  table: PointTable,
  added: { name: string; values: Float64Array | number[] | string[]; digits?: number }[],
): string {
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
  const out: string[] = [];
  const header = [...table.columns, ...added.map((c) => c.name)];
  out.push(header.map(csvField).join(",") + "\r\n");
  const text = cellTexts(table);
  for (let i = 0; i < rows; i++) {
    const fields: string[] = [];
    for (let j = 0; j < width; j++) fields.push(csvField(text(i, j)));
    for (const col of added) {
      const v = col.values[i];
      fields.push(csvField(typeof v === "string" ? v : formatNumber(v, col.digits ?? 10)));
    }
    out.push(fields.join(",") + "\r\n");
  }
  return out.join("");
}
