// The code filter (--where COL=VALUE[,VALUE…]): keep only the rows whose column holds one of the
// values, e.g. ground shots only. It runs on the table as read, before anything else looks at the
// rows, so rows it drops are neither skipped nor fitted; the summary says how many it dropped.
import { ExitCode, opt, RbfieldError } from "../errors.ts";
import { messageText } from "../text.ts";
import type { TextTable } from "../types.ts";
import { columnByOption } from "./columns.ts";
import { cellTexts, hasOwnRows, subsetColumn, withRowView } from "./table.ts";

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
  const text = cellTexts(table);
  const n = table.lines.length;
  const holds = (c: (typeof resolved)[number], i: number) => c.wanted.has(text(i, c.j).trim().toLowerCase());
  const keep: number[] = [];
  for (let i = 0; i < n; i++) {
    if (resolved.every((c) => holds(c, i))) keep.push(i);
  }
  if (keep.length === 0) {
    // Name the first condition no row meets on its own, with the values its column holds.
    const none = (c: (typeof resolved)[number]) => {
      for (let i = 0; i < n; i++) if (holds(c, i)) return false;
      return true;
    };
    const c = resolved.find(none) ?? resolved[0];
    const counts = new Map<string, number>();
    for (let i = 0; i < n; i++) {
      const v = text(i, c.j).trim();
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
    dropped: n - keep.length,
  };
  return { table: keep.length === n ? table : subsetRows(table, keep), result };
}

/** The table with only the rows listed (0-based, ascending): cells, lines, typed columns, unusable rows. */
export function subsetRows(table: TextTable, keep: number[]): TextTable {
  const newIndex = new Int32Array(table.lines.length).fill(-1);
  keep.forEach((i, k) => (newIndex[i] = k));
  const subset = {
    ...table,
    lines: keep.map((i) => table.lines[i]),
    data: table.data.map((col) => subsetColumn(col, keep)),
    unusable: table.unusable.filter((u) => newIndex[u.row] >= 0).map((u) => ({ ...u, row: newIndex[u.row] })),
  };
  return hasOwnRows(table) ? { ...subset, rows: keep.map((i) => table.rows[i]) } : withRowView(subset);
}
