// The run's lists of input rows (RFC 4180 CSV, CRLF record ends): every skipped row (skipped.csv) and
// every group of coincident points merged into one (duplicates.csv). Both are written with their
// header even when empty, so a script reading them needs no special case.
import { formatNumber } from "../text.ts";
import type { DuplicateRule } from "../types.ts";
import { csvField } from "./csv.ts";

/** A row that was not fitted: its input line, its point id ("" without an id column) and why. */
export interface SkippedEntry {
  line: number;
  point: string;
  reason: string;
}

/** A group of coincident points merged into one point. */
export interface DuplicateGroup {
  /** 1-based number of the group, in file order of its first row. */
  group: number;
  rule: DuplicateRule;
  x: number;
  y: number;
  /** The rows merged, in file order: line, point id, value (as fitted, non-detects substituted). */
  members: { line: number; point: string; value: number }[];
  /** The value the point was given, and the line it keeps. */
  value: number;
  line: number;
  /** Max minus min of the values; relative percent difference (null when the mean is 0). */
  spread: number;
  rpd: number | null;
}

const csv = (rows: string[][]) => rows.map((r) => r.map(csvField).join(",") + "\r\n").join("");

/** skipped.csv: line, point, reason. */
export function skippedCsv(rows: SkippedEntry[]): string {
  return csv([["line", "point", "reason"], ...rows.map((r) => [String(r.line), r.point, r.reason])]);
}

/**
 * duplicates.csv: one record per merged row: its group, line, point id, position and value, then the
 * group's rule, merged value, the line the point keeps, spread and RPD (percent).
 */
export function duplicatesCsv(groups: DuplicateGroup[]): string {
  const header = ["group", "line", "point", "x", "y", "value", "rule", "merged_value", "kept_line", "spread", "rpd_percent"];
  const n = (v: number | null, digits = 10) => (v === null ? "" : formatNumber(v, digits));
  return csv([
    header,
    ...groups.flatMap((g) =>
      g.members.map((m) => [
        String(g.group), String(m.line), m.point, n(g.x, 15), n(g.y, 15), n(m.value), g.rule, n(g.value), String(g.line), n(g.spread), n(g.rpd, 6),
      ])
    ),
  ]);
}
