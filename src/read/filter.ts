// The code filter (--where COL=VALUE[,VALUE…]): keep only the rows whose column holds one of the
// values, e.g. ground shots only. It runs on the table as read, before anything else looks at the
// rows, so rows it drops are neither skipped nor fitted; the summary says how many it dropped.
import { ExitCode, opt, RbfieldError } from "../errors.ts";
import { messageText } from "../text.ts";
import type { TextTable } from "../types.ts";
import { columnByOption } from "./columns.ts";

/** One condition: the column (name or 1-based position) and the values any of which it must hold. */
export interface WhereCondition {
  column: string;
  values: string[];
}

/** What the filter did: the conditions as resolved (column names), and the rows kept and dropped. */
export interface WhereResult {
  conditions: { column: string; values: string[] }[];
  kept: number;
  dropped: number;
}

/** "code=GS,GS2" → { column: "code", values: ["GS", "GS2"] }; a usage error naming the option otherwise. */
export function parseWhere(text: string): WhereCondition {
  const at = text.indexOf("=");
  const column = at > 0 ? text.slice(0, at).trim() : "";
  const values = at > 0 ? text.slice(at + 1).split(",").map((v) => v.trim()) : [];
  if (column === "" || values.length === 0 || values.some((v) => v === "")) {
    throw new RbfieldError(
      `${opt("where")} must be COLUMN=VALUE or COLUMN=VALUE,VALUE… (e.g. code=GS), not "${messageText(text, 40)}"`,
      ExitCode.usage,
    );
  }
  return { column, values };
}

/**
 * Keep the rows whose cells match every condition: the cell, without surrounding spaces and ignoring
 * case, equals one of the condition's values. Returns a new table (the input is not changed); a
 * condition that no row meets is an error that lists the values the column holds.
 */
export function filterRows(table: TextTable, conditions: WhereCondition[]): { table: TextTable; result: WhereResult } {
  const place = { file: table.file };
  const resolved = conditions.map((c) => ({
    j: columnByOption(table.columns, c.column, "where", place),
    wanted: new Set(c.values.map((v) => v.toLowerCase())),
    values: c.values,
  }));
  const keep: number[] = [];
  for (let i = 0; i < table.rows.length; i++) {
    if (resolved.every((c) => c.wanted.has((table.rows[i][c.j] ?? "").trim().toLowerCase()))) keep.push(i);
  }
  if (keep.length === 0) {
    // Name the first condition no row meets on its own, with the values its column holds.
    const c = resolved.find((c) => !table.rows.some((row) => c.wanted.has((row[c.j] ?? "").trim().toLowerCase()))) ?? resolved[0];
    const counts = new Map<string, number>();
    for (const row of table.rows) {
      const v = (row[c.j] ?? "").trim();
      counts.set(v, (counts.get(v) ?? 0) + 1);
    }
    const common = [...counts].sort((a, b) => b[1] - a[1] || (a[0] < b[0] ? -1 : 1)).slice(0, 8)
      .map(([v, n]) => `${v === "" ? "(empty)" : `'${messageText(v, 20)}'`} ×${n}`);
    throw new RbfieldError(
      `no row meets ${opt("where")} ${messageText(table.columns[c.j], 40)}=${c.values.map((v) => messageText(v, 20)).join(",")}` +
        `; column '${messageText(table.columns[c.j], 40)}' holds ${common.join(", ")}${counts.size > 8 ? ", …" : ""}`,
      ExitCode.input,
      place,
    );
  }
  const result: WhereResult = {
    conditions: resolved.map((c) => ({ column: table.columns[c.j], values: c.values })),
    kept: keep.length,
    dropped: table.rows.length - keep.length,
  };
  return { table: keep.length === table.rows.length ? table : subsetRows(table, keep), result };
}

/** The table with only the rows listed (0-based, ascending): cells, lines, typed columns, unusable rows. */
export function subsetRows(table: TextTable, keep: number[]): TextTable {
  const newIndex = new Map(keep.map((i, k) => [i, k]));
  return {
    ...table,
    rows: keep.map((i) => table.rows[i]),
    lines: keep.map((i) => table.lines[i]),
    data: table.data.map((col) =>
      col.kind === "number"
        ? { ...col, values: Float64Array.from(keep, (i) => col.values[i]) }
        : { ...col, values: keep.map((i) => col.values[i]) }
    ),
    unusable: table.unusable.filter((u) => newIndex.has(u.row)).map((u) => ({ ...u, row: newIndex.get(u.row)! })),
  };
}
