// Laboratory values in the value column: non-detects ("<0.5", "< DL", "ND", "n.n.", "0.5 U") and
// numbers with qualifiers ("0,8 J", "12,4*"), recognised by the grammar in cells.ts instead of being
// skipped as text. Non-detects enter the fit by a rule (--non-detects): half the detection limit
// (default), the limit, zero, or not at all. The table's value column is replaced by one with the
// values entered (as project.ts replaces the coordinates); the cells keep their text, and every
// qualifier is kept per row.
import { ExitCode, inputError, opt, RbfieldError } from "../errors.ts";
import { messageText } from "../text.ts";
import type { TextTable } from "../types.ts";
import { type Measurement, parseMeasurement } from "./cells.ts";
import { columnByOption } from "./columns.ts";
import { cellNumber, cellTexts, valuesToChange } from "./table.ts";
import { DETECTION_LIMIT_NAMES, normalizeName } from "./names.ts";

/**
 * How a non-detect enters the fit: half its detection limit (default), the limit, zero, or not at all
 * ("omit": the row is skipped and listed).
 */
export type NonDetectRule = "half" | "limit" | "zero" | "omit";
export const NON_DETECT_RULES: readonly NonDetectRule[] = ["half", "limit", "zero", "omit"];

export interface LabValueOptions {
  /** Default "half". */
  nonDetects?: NonDetectRule;
  /** Detection limit for non-detects whose cell and row give none. */
  detectionLimit?: number;
  /** Column of detection limits (name or 1-based position); default: a column named DL, LOD, MDL … (names.ts). */
  detectionLimitColumn?: string;
}

/** One non-detect: its row, the cell as written, its limit and the value it entered the fit with (null: left out). */
export interface NonDetect {
  row: number;
  line: number;
  cell: string;
  limit: number | null;
  /** Where the limit came from: the cell itself ("<0.5", "0.5 U"), the detection-limit column, the option, or nowhere. */
  limitFrom: "cell" | "column" | "option" | null;
  value: number | null;
}

/** What the value column held beyond plain numbers. */
export interface LabValues {
  rule: NonDetectRule;
  /** Name of the detection-limit column used, or null. */
  limitColumn: string | null;
  nonDetects: NonDetect[];
  /** Detected values written with a qualifier ("0,8 J"), and the qualifier. */
  qualified: { row: number; line: number; qualifier: string }[];
  /** Per table row: the qualifier stripped from the value ("J", "*", "<", "ND"; "" for none). */
  qualifier: string[];
  /** Per table row: the detection limit of a non-detect, NaN for a detected value. */
  limit: Float64Array;
}

/**
 * Recognise non-detects and qualified numbers in the table's value column and enter them by the rule.
 * Rows whose value cannot be used stay unusable with their reason: values qualified R (rejected), and
 * non-detects under "omit". A non-detect without a limit under "half" or "limit" is an error.
 */
export function readLabValues(table: TextTable, options: LabValueOptions = {}): LabValues {
  const rule = options.nonDetects ?? "half";
  if (!NON_DETECT_RULES.includes(rule)) {
    throw new RbfieldError(`${opt("nonDetects")} must be ${NON_DETECT_RULES.join(", ")}, not "${messageText(String(rule), 20)}"`, ExitCode.usage);
  }
  const given = options.detectionLimit;
  if (given !== undefined && !(given >= 0 && Number.isFinite(given))) {
    throw new RbfieldError(`${opt("detectionLimit")} must be a number >= 0, not ${given}`, ExitCode.usage);
  }
  const n = table.lines.length;
  const qualifier: string[] = new Array(n).fill("");
  const limitOf = new Float64Array(n).fill(NaN);
  const out: LabValues = { rule, limitColumn: null, nonDetects: [], qualified: [], qualifier, limit: limitOf };
  const zj = table.zColumn;
  const zcol = table.data[zj];
  if (zj < 0 || zcol?.kind !== "number") return out;
  const zName = messageText(table.columns[zj], 40);
  const text = cellTexts(table);
  const found = new Map<number, Measurement>();
  for (let i = 0; i < n; i++) {
    if (!Number.isNaN(zcol.values[i])) continue;
    const m = parseMeasurement(text(i, zj), table.decimalComma);
    if (m) found.set(i, m);
  }
  if (found.size === 0) return out;
  const z = valuesToChange(table, zj);

  const dj = limitColumnOf(table, options.detectionLimitColumn);
  out.limitColumn = dj >= 0 ? table.columns[dj] : null;
  const unusable = new Map(table.unusable.map((u) => [u.row, u]));
  const setUnusable = (i: number, reason: string, cause: "non-detect" | "rejected") => {
    z[i] = NaN;
    unusable.set(i, { row: i, line: table.lines[i], column: zj, reason, cause });
  };
  for (const [i, m] of found) {
    // Only the value cell is looked at; a row whose x or y is not a number stays as the reader said.
    if (unusable.get(i)?.column !== zj) continue;
    const cell = text(i, zj).trim();
    const shown = messageText(cell, 40);
    if (m.kind === "number") {
      z[i] = m.value;
      qualifier[i] = m.qualifier;
      out.qualified.push({ row: i, line: table.lines[i], qualifier: m.qualifier });
      unusable.delete(i);
    } else if (m.kind === "rejected") {
      qualifier[i] = m.qualifier;
      setUnusable(i, `value '${shown}' in column '${zName}' is qualified R: rejected in data validation, not to be used`, "rejected");
    } else {
      qualifier[i] = m.qualifier;
      const fromColumn = dj >= 0 ? cellNumber(table, i, dj) : NaN;
      const limitFrom = m.limit !== null ? "cell" : fromColumn >= 0 ? "column" : given !== undefined ? "option" : null;
      const limit = m.limit ?? (fromColumn >= 0 ? fromColumn : given ?? null);
      if (limit !== null) limitOf[i] = limit;
      if (rule === "omit") {
        out.nonDetects.push({ row: i, line: table.lines[i], cell, limit, limitFrom, value: null });
        setUnusable(i, `non-detect '${shown}' in column '${zName}' left out of the fit (--non-detects omit)`, "non-detect");
        continue;
      }
      if (limit === null && rule !== "zero") {
        throw inputError(
          `non-detect '${shown}' in column '${zName}' has no detection limit: give ${opt("detectionLimit")} VALUE or a ` +
            `detection-limit column (${opt("detectionLimitColumn")}), or choose ${opt("nonDetects")} zero or omit`,
          { file: table.file, line: table.lines[i] },
        );
      }
      const value = rule === "zero" ? 0 : rule === "limit" ? limit! : limit! / 2;
      z[i] = value;
      out.nonDetects.push({ row: i, line: table.lines[i], cell, limit, limitFrom, value });
      unusable.delete(i);
    }
  }
  table.unusable = [...unusable.values()].sort((a, b) => a.row - b.row);
  return out;
}

/** The detection-limit column: as named, else the first column named as one (never x, y or the value), else -1. */
function limitColumnOf(table: TextTable, named: string | undefined): number {
  const taken = [table.xColumn, table.yColumn, table.zColumn];
  if (named !== undefined) {
    const j = columnByOption(table.columns, named, "detectionLimitColumn", { file: table.file });
    if (taken.includes(j)) {
      throw inputError(`${opt("detectionLimitColumn")} '${messageText(named, 40)}' is the x, y or value column; name the column of detection limits`, { file: table.file });
    }
    return j;
  }
  for (const name of DETECTION_LIMIT_NAMES) {
    const j = table.columns.findIndex((c, k) => !taken.includes(k) && normalizeName(c) === name);
    if (j >= 0) return j;
  }
  return -1;
}

const RULE_TEXT: Record<NonDetectRule, string> = {
  half: "entered as half the detection limit (--non-detects half, the default: the middle of the range 0 to the limit " +
    "in which the true value lies; common practice, not a published optimum)",
  limit: "entered at the detection limit (--non-detects limit: the largest value they can have)",
  zero: "entered as 0 (--non-detects zero: the smallest value they can have)",
  omit: "left out of the fit (--non-detects omit: the mapped area may shrink to the detections)",
};

function lineList(lines: number[]): string {
  return `line${lines.length === 1 ? "" : "s"} ${lines.slice(0, 5).join(", ")}${lines.length > 5 ? ` and ${lines.length - 5} more` : ""}`;
}

/**
 * Summary lines: how many non-detects, where, how they entered the fit and where their limits came
 * from; how many values carried a qualifier, which, and where they are kept (`keptIn`, e.g. "in
 * column qualifier of residuals.csv").
 */
export function describeLabValues(lab: LabValues, keptIn: string): string[] {
  const out: string[] = [];
  const nd = lab.nonDetects;
  if (nd.length) {
    const count = (from: NonDetect["limitFrom"]) => nd.filter((d) => d.limitFrom === from).length;
    const sources = [
      ...(count("cell") ? [`${count("cell")} written in the cell`] : []),
      ...(count("column") ? [`${count("column")} from column '${messageText(lab.limitColumn ?? "", 40)}'`] : []),
      ...(count("option") ? [`${count("option")} from --detection-limit`] : []),
      ...(count(null) ? [`${count(null)} without a limit`] : []),
    ];
    out.push(
      `Non-detects: ${nd.length} ${nd.length === 1 ? "value" : "values"} below the detection limit (${lineList(nd.map((d) => d.line))}), ` +
        `${RULE_TEXT[lab.rule]}; limits: ${sources.join(", ")}`,
    );
  }
  const q = lab.qualified;
  if (q.length) {
    const counts = new Map<string, number>();
    for (const r of q) counts.set(r.qualifier, (counts.get(r.qualifier) ?? 0) + 1);
    const kinds = [...counts].map(([k, n]) => `${messageText(k, 8)} ×${n}`).join(", ");
    out.push(
      `Qualifiers: ${q.length} ${q.length === 1 ? "value carried a qualifier" : "values carried qualifiers"} (${kinds}; ${lineList(q.map((r) => r.line))}), ` +
        `stripped from the numbers and kept ${keptIn}`,
    );
  }
  return out;
}
