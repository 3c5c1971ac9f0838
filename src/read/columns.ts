// Which columns are x, y and the value: named by the caller (by name or by 1-based position), or
// found by their header names. A file without a header row is never guessed at.
import { ExitCode, inputError, opt, RbfieldError } from "../errors.ts";
import { messageText } from "../text.ts";
import type { ColumnFound, SourcePlace, TypedTable } from "../types.ts";
import { looksNumeric } from "./cells.ts";
import { isCodeName, isDetectionLimitName, isIdentifierName, LAT_NAMES, LON_NAMES, normalizeName, X_NAMES, Y_NAMES, Z_NAMES } from "./names.ts";
import type { ReadOptions } from "./reader.ts";

export interface ChoiceContext {
  file: string;
  /** Line of the header row (of the first row when there is none, of "features" in GeoJSON). */
  headerLine: number;
  decimalComma: boolean;
  /** Columns that may be detected as the value column by name. */
  zCandidates: number[];
  /** Column used when no value name matches (GeoJSON third coordinate), or -1. */
  zDefault?: number;
  /** Allow the "first numeric column" fallback for the value. */
  numericFallback: boolean;
  /** False when the first row was data and the columns are named "1", "2", … by position. */
  hasHeader: boolean;
  /** The first row as written, quoted when the columns of a file without a header must be named. */
  firstRow?: string;
}

export type Choice = Pick<TypedTable, "xColumn" | "yColumn" | "zColumn" | "columnChoice" | "chosenBy">;

type Flag = "x" | "y" | "z";
const POSITION = /^\d+$/;

/**
 * Choose the x, y and value columns. An option names a column by its name (ignoring case, then
 * also spaces, underscores and units in brackets) or by its 1-based position; a column name that is
 * a number wins over the position only when it equals the option exactly. `samples` holds, per
 * column, its first cells that are not empty or spaces (firstCells), which the value fallback judges.
 */
export function chooseColumns(columns: string[], samples: string[][], options: ReadOptions, ctx: ChoiceContext): Choice {
  const list = columnList(columns);
  const place = { file: ctx.file, line: ctx.headerLine };
  const needValue = options.needValue ?? true;
  if (!ctx.hasHeader) refuseUnnamed(options, needValue, ctx, place);

  const named = (flag: Flag): { j: number; how: ColumnFound } => {
    const j = columnByOption(columns, options[flag]!, flag, place);
    const byPosition = !ctx.hasHeader || (POSITION.test(options[flag]!.trim()) && columns[j].toLowerCase() !== options[flag]!.trim().toLowerCase());
    return { j, how: byPosition ? "position" : "named" };
  };
  const byName = (names: string[], allowed: (j: number) => boolean): number => {
    for (const name of names) {
      const j = columns.findIndex((c, k) => allowed(k) && normalizeName(c) === name);
      if (j >= 0) return j;
    }
    return -1;
  };
  const pick = (flag: Flag, names: string[], allowed: (j: number) => boolean) =>
    options[flag] !== undefined ? named(flag) : { j: byName(names, allowed), how: "detected" as ColumnFound };

  let x = pick("x", X_NAMES, () => true);
  let y = pick("y", Y_NAMES, (k) => k !== x.j);
  // Longitude and latitude columns when no x/y names are given or found (geographic: see job.ts).
  if (options.x === undefined && options.y === undefined && x.j < 0 && y.j < 0) {
    const lon = byName(LON_NAMES, () => true), lat = byName(LAT_NAMES, (k) => k !== lon);
    if (lon >= 0 && lat >= 0) {
      x = { j: lon, how: "longitude" };
      y = { j: lat, how: "latitude" };
    }
  }
  if (x.j < 0 || y.j < 0) {
    const missing = x.j < 0 && y.j < 0 ? "are the x and y columns" : x.j < 0 ? "is the x column" : "is the y column";
    throw inputError(
      `cannot tell which ${missing} from the header (columns are: ${list}); name them with ${opt("x")} and ${opt("y")}`,
      place,
    );
  }
  if (x.j === y.j) {
    throw inputError(`x and y are both column '${messageText(columns[x.j], 40)}'; name different columns with ${opt("x")} and ${opt("y")}`, place);
  }

  const free = (k: number) => k !== x.j && k !== y.j;
  let z: { j: number; how: ColumnFound };
  if (options.z !== undefined) {
    z = named("z");
    if (!free(z.j)) {
      throw inputError(`${opt("z")} column '${messageText(columns[z.j], 40)}' is also the x or y column; name another column with ${opt("z")}`, place);
    }
  } else {
    const candidates = new Set(ctx.zCandidates);
    z = { j: byName(Z_NAMES, (k) => free(k) && candidates.has(k)), how: "detected" };
    if (z.j < 0 && ctx.zDefault !== undefined && ctx.zDefault >= 0) z = { j: ctx.zDefault, how: "coordinate" };
    if (z.j < 0 && needValue && ctx.numericFallback) {
      const j = columns.findIndex((c, k) =>
        // Laboratory values count as numbers; a column of detection limits is never the value.
        free(k) && candidates.has(k) && !isIdentifierName(c) && !isDetectionLimitName(c) && looksNumeric(samples[k] ?? [], ctx.decimalComma, true)
      );
      z = { j, how: "first numeric" };
    }
    if (z.j < 0 && needValue) {
      throw inputError(
        `cannot find the value column (columns are: ${list}); name it with ${opt("z")}`,
        place,
      );
    }
    if (z.j < 0) z = { j: -1, how: "none" };
  }
  const anyNamed = options.x !== undefined || options.y !== undefined || options.z !== undefined;
  return {
    xColumn: x.j,
    yColumn: y.j,
    zColumn: z.j,
    columnChoice: anyNamed ? "named" : "detected",
    chosenBy: { x: x.how, y: y.how, z: z.how },
  };
}

/**
 * The point id and description code columns (-1 when there is none): as named by the options (by
 * name or position), else the code is the first column named code, desc or description and the id
 * the first other column with an identifier name (id, point, pt, name, station … in names.ts). Never
 * the x, y or value column. A file without a header row has no names, so only named columns count.
 */
export function chooseTextColumns(
  table: Pick<TypedTable, "file" | "columns" | "xColumn" | "yColumn" | "zColumn">,
  options: { id?: string; code?: string },
): { id: number; code: number } {
  const place = { file: table.file };
  const taken = [table.xColumn, table.yColumn, table.zColumn];
  const pick = (option: "id" | "code", found: (name: string, j: number) => boolean): number => {
    const named = options[option];
    if (named === undefined) return table.columns.findIndex((c, j) => !taken.includes(j) && found(c, j));
    const j = columnByOption(table.columns, named, option, place);
    if (taken.includes(j)) {
      throw new RbfieldError(
        `${opt(option)} '${messageText(named, 40)}' is the x, y or value column; name the column of ${option === "id" ? "point ids" : "codes"}`,
        ExitCode.input,
        place,
        option,
      );
    }
    return j;
  };
  const code = pick("code", (c) => isCodeName(c));
  const id = pick("id", (c, j) => j !== code && isIdentifierName(c) && !isCodeName(c));
  return { id, code };
}

/** "'a', 'b', …" for messages: the first 20 column names. */
function columnList(columns: string[]): string {
  const shown = columns.slice(0, 20).map((c) => `'${messageText(c, 40)}'`);
  if (columns.length > 20) shown.push(`and ${columns.length - 20} more`);
  return shown.join(", ");
}

/**
 * The 0-based index of the column an option names (the rule of every option that takes a column:
 * --x, --y, --z, --weight, --id, --code, --where …): its name ignoring case, then ignoring spaces,
 * underscores and units in brackets, or its 1-based position; a column name that is a number wins
 * over the position only when it equals the option exactly. An error names the option and lists
 * the columns.
 */
export function columnByOption(columns: string[], wanted: string, option: string, place: SourcePlace): number {
  const want = wanted.trim();
  const exact = columns.findIndex((c) => c.toLowerCase() === want.toLowerCase());
  if (exact >= 0) return exact;
  if (POSITION.test(want)) {
    const p = Number(want);
    if (p >= 1 && p <= columns.length) return p - 1;
    throw new RbfieldError(
      `${opt(option)} ${messageText(want, 20)}: there is no column at that position; the ${columns.length} columns, ` +
        `numbered from 1, are: ${columnList(columns)}`,
      ExitCode.input,
      place,
      option,
    );
  }
  const j = columns.findIndex((c) => normalizeName(c) === normalizeName(want));
  if (j < 0) {
    throw new RbfieldError(
      `${opt(option)} column '${messageText(want, 40)}' not found; the columns are: ${columnList(columns)} (names are matched ignoring case)`,
      ExitCode.input,
      place,
      option,
    );
  }
  return j;
}

/**
 * Without a header row nothing says which column is which: refuse, showing the first row, unless
 * x, y (and the value, when needed) are named. The error's `option` is the first one missing.
 */
function refuseUnnamed(options: ReadOptions, needValue: boolean, ctx: ChoiceContext, place: SourcePlace): void {
  const missing = (["x", "y", ...(needValue ? ["z"] : [])] as Flag[]).filter((f) => options[f] === undefined);
  if (missing.length === 0) return;
  const words = missing.map((f) => (f === "z" ? "the value" : f));
  const what = words.length === 1 ? `column is ${words[0]}` : `columns are ${words.slice(0, -1).join(", ")} and ${words.at(-1)}`;
  const example = missing.map((f) => `${opt(f)} ${{ x: 1, y: 2, z: 3 }[f]}`).join(" ");
  throw new RbfieldError(
    `the file has no header row (first row: "${messageText(ctx.firstRow ?? "", 80)}"), and rbfield does not guess ` +
      `which ${what}; name the columns by position, e.g. ${example} (the first column is 1)`,
    ExitCode.input,
    place,
    missing[0],
  );
}
