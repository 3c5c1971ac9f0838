// Clean stage: drop rows without usable numbers and merge coincident points. It works on the typed
// table a reader returns (numbers only; the reader has said why a cell is not a number).
import { ExitCode, inputError, opt, RbfieldError } from "../errors.ts";
import { formatNumber, messageText } from "../text.ts";
import { COORDINATE_LIMIT, VALUE_LIMIT } from "../numbers.ts";
import type { CleanPoints, DuplicateRule, MergedGroup, PointTable, SkippedRow, TypedTable } from "../types.ts";

/** The points must span at least this many map units (below it the units are surely wrong)... */
export const MIN_SPAN = 1e-9;
/**
 * ...and at least this fraction of their largest coordinate magnitude: below it the positions,
 * once centred, keep fewer than about four significant digits (2.2e-16 relative precision).
 */
export const MIN_RELATIVE_SPAN = 1e-12;

export interface CleanOptions {
  /** Points closer than this (map units) are coincident; default 0 = exactly equal coordinates. */
  tolerance?: number;
  /** Refuse when merged values differ by more than this, unless mergeConflicts; default 0. */
  maxSpread?: number;
  mergeConflicts?: boolean;
  /**
   * Refuse, naming the file and why rows were skipped or merged, when fewer points at distinct
   * positions remain; default 0 (no check).
   */
  minPoints?: number;
  /** How coincident points become one (default "mean"). */
  duplicates?: DuplicateRule;
  /**
   * Vertical faces: a key per table row ("" for most); coincident rows merge only when their keys
   * are equal, so two shots at one position on different strings (a kerb top and its channel) stay
   * two points. Default: every key "".
   */
  faceKey?: (row: number) => string;
}

export const DUPLICATE_RULES: readonly DuplicateRule[] = ["mean", "max", "min", "first"];

/**
 * Relative percent difference of merged values, the environmental QA measure of field duplicates:
 * |a − b| / |mean(a, b)| × 100 for a pair (US EPA, SW-846 Chapter One); for three or more the
 * relative range (max − min) / |mean| × 100, which is the same for a pair; null when the mean is 0.
 */
export function relativePercentDifference(values: ArrayLike<number>): number | null {
  let lo = Infinity, hi = -Infinity, sum = 0;
  for (let i = 0; i < values.length; i++) {
    lo = Math.min(lo, values[i]);
    hi = Math.max(hi, values[i]);
    sum += values[i];
  }
  const mean = Math.abs(sum / values.length);
  return values.length > 1 && mean > 0 ? ((hi - lo) / mean) * 100 : null;
}

/** What cleaning reads of a table: a TypedTable, or a PointTable as the readers return it (typed parts filled). */
export type CleanInput = TypedTable | PointTable;

export function cleanPoints(table: CleanInput, options: CleanOptions = {}): CleanPoints {
  const tol = options.tolerance ?? 0;
  const maxSpread = options.maxSpread ?? 0;
  if (!(tol >= 0) || !Number.isFinite(tol)) {
    throw new RbfieldError(`tolerance must be a finite number >= 0, got ${tol}`, ExitCode.usage);
  }
  if (!(maxSpread >= 0)) {
    throw new RbfieldError(`maximum spread must be a number >= 0, got ${maxSpread}`, ExitCode.usage);
  }
  const rule = options.duplicates ?? "mean";
  if (!DUPLICATE_RULES.includes(rule)) {
    throw new RbfieldError(`${opt("duplicates")} must be ${DUPLICATE_RULES.join(", ")}, not "${messageText(String(rule), 20)}"`, ExitCode.usage);
  }
  if (table.zColumn < 0) {
    throw inputError(`no value column was chosen; name it with ${opt("z")}`, { file: table.file, line: 1 });
  }

  // 1. Keep rows whose x, y and value are numbers within range; the others go to `skipped`.
  const { data, unusable } = typedParts(table);
  const n = table.lines.length;
  const px = new Float64Array(n);
  const py = new Float64Array(n);
  const pz = new Float64Array(n);
  const pline: number[] = [];
  const prow: number[] = [];
  const skipped: SkippedRow[] = [];
  const cols = [table.xColumn, table.yColumn, table.zColumn];
  const columns = cols.map((j) => numberColumn(data, j));
  const reasons = new Map(unusable.map((u) => [u.row, u]));
  const vals = [0, 0, 0];
  let m = 0;
  rows: for (let i = 0; i < n; i++) {
    for (let k = 0; k < 3; k++) {
      const v = columns[k][i];
      const name = table.columns[cols[k]];
      if (Number.isNaN(v)) {
        const u = reasons.get(i);
        skipped.push({
          line: table.lines[i],
          row: i,
          reason: u?.reason ?? `value in column '${messageText(name, 40)}' is not a number`,
          ...(u?.cause ? { cause: u.cause } : {}),
        });
        continue rows;
      }
      if (Math.abs(v) > (k < 2 ? COORDINATE_LIMIT : VALUE_LIMIT)) {
        skipped.push({ line: table.lines[i], row: i, reason: outOfRangeReason(v, name, k < 2) });
        continue rows;
      }
      vals[k] = v;
    }
    px[m] = vals[0];
    py[m] = vals[1];
    pz[m] = vals[2];
    pline.push(table.lines[i]);
    prow.push(i);
    m++;
  }

  // 2. Group coincident points; a group's first point decides membership.
  // Hash table of groups keyed by exact coordinates (tol 0) or by cells of size tol.
  const groupOf = new Int32Array(m);
  const faceKey = options.faceKey;
  const sameFace = (a: number, b: number) => !faceKey || faceKey(prow[a]) === faceKey(prow[b]);
  const firstOf: number[] = [];
  let multi = false;
  let size = 16;
  while (size < 2 * m) size *= 2;
  const mask = size - 1;
  const head = new Int32Array(size).fill(-1); // first group in each bucket
  const next = new Int32Array(Math.max(m, 1)); // next group in the same bucket
  const addGroup = (p: number, bucket: number) => {
    const g = firstOf.length;
    firstOf.push(p);
    next[g] = head[bucket];
    head[bucket] = g;
    groupOf[p] = g;
  };
  if (tol === 0) {
    for (let p = 0; p < m; p++) {
      const b = hashPair(floatHash(px[p]), floatHash(py[p])) & mask;
      let g = head[b];
      while (g >= 0 && !(px[firstOf[g]] === px[p] && py[firstOf[g]] === py[p] && sameFace(firstOf[g], p))) g = next[g];
      if (g >= 0) {
        groupOf[p] = g;
        multi = true;
      } else addGroup(p, b);
    }
  } else {
    const tol2 = tol * tol;
    for (let p = 0; p < m; p++) {
      const cx = Math.floor(px[p] / tol);
      const cy = Math.floor(py[p] / tol);
      let found = -1;
      for (let dx = -1; dx <= 1; dx++) {
        for (let dy = -1; dy <= 1; dy++) {
          // Hash collisions only add candidates; the distance test decides.
          for (let g = head[hashPair(cx + dx, cy + dy) & mask]; g >= 0; g = next[g]) {
            const q = firstOf[g];
            const ex = px[p] - px[q];
            const ey = py[p] - py[q];
            if (ex * ex + ey * ey < tol2 && sameFace(q, p) && (found < 0 || g < found)) found = g;
          }
        }
      }
      if (found >= 0) {
        groupOf[p] = found;
        multi = true;
      } else addGroup(p, hashPair(cx, cy) & mask);
    }
  }

  // 3. One output point per group, in order of first occurrence; a merged group's value by the rule.
  const G = firstOf.length;
  const x = new Float64Array(G);
  const y = new Float64Array(G);
  const z = new Float64Array(G);
  for (let g = 0; g < G; g++) {
    const p = firstOf[g];
    x[g] = px[p];
    y[g] = py[p];
    z[g] = pz[p];
  }
  /** The member whose line, row and texts the point keeps. */
  const keptOf = firstOf.slice();
  const merged: MergedGroup[] = [];
  if (multi) {
    const members = new Map<number, number[]>();
    for (let p = 0; p < m; p++) {
      const g = groupOf[p];
      if (firstOf[g] === p) continue;
      const list = members.get(g);
      if (list) list.push(p);
      else members.set(g, [firstOf[g], p]);
    }
    for (const [g, list] of [...members].sort((a, b) => a[0] - b[0])) {
      const values = list.map((p) => pz[p]);
      const lo = values.reduce((a, b) => Math.min(a, b)), hi = values.reduce((a, b) => Math.max(a, b));
      const spread = hi - lo;
      const groupLines = list.map((p) => pline[p]);
      if (spread > maxSpread && !options.mergeConflicts) {
        const limit = maxSpread === 0 ? "" : ` (more than the allowed ${formatNumber(maxSpread, 6)})`;
        throw inputError(
          `coincident points on lines ${groupLines.join(", ")} have values that differ by ` +
            `${formatNumber(spread, 6)}${limit}; correct or remove the wrong one, ` +
            `or use --merge-conflicts to average them`,
          { file: table.file, line: groupLines[0] },
        );
      }
      let kept = list[0];
      if (rule === "max") kept = list.find((p) => pz[p] === hi)!;
      else if (rule === "min") kept = list.find((p) => pz[p] === lo)!;
      keptOf[g] = kept;
      let value = pz[kept], gx = px[kept], gy = py[kept];
      if (rule === "mean") {
        let sx = 0, sy = 0, sz = 0;
        for (const p of list) {
          sx += px[p];
          sy += py[p];
          sz += pz[p];
        }
        [gx, gy, value] = [sx / list.length, sy / list.length, sz / list.length];
      }
      x[g] = gx;
      y[g] = gy;
      z[g] = value;
      merged.push({
        x: gx,
        y: gy,
        lines: groupLines,
        spread,
        value,
        values,
        rows: list.map((p) => prow[p]),
        rule,
        line: pline[kept],
        rpd: relativePercentDifference(values),
      });
    }
  }
  const lines: number[] = new Array(G);
  const rowOf: number[] = new Array(G);
  for (let g = 0; g < G; g++) {
    const p = keptOf[g];
    lines[g] = pline[p];
    rowOf[g] = prow[p];
  }
  const texts = data.flatMap((col) =>
    col.kind === "text" ? [{ name: col.name, values: rowOf.map((r) => col.values[r]) }] : []
  );
  const result = { x, y, z, lines, rows: rowOf, skipped, merged, rowsRead: n, texts };
  if (G < (options.minPoints ?? 0)) throw tooFewPoints(table, result, options.minPoints!);
  checkSpan(table, result);
  return result;
}

/** The typed columns and unusable rows; a hand-made PointTable without them is a programming error. */
function typedParts(table: CleanInput): Pick<TypedTable, "data" | "unusable"> {
  if (!table.data || !table.unusable) {
    throw new RbfieldError(
      "cleanPoints needs a typed table (from readPointTable, parsePointTable or a reader), not cells alone",
      ExitCode.internal,
    );
  }
  return { data: table.data, unusable: table.unusable };
}

/** The numbers of column j. */
function numberColumn(data: TypedTable["data"], j: number): Float64Array {
  const col = data[j];
  if (col?.kind !== "number") {
    throw new RbfieldError(`column ${j + 1} was chosen as x, y or value but is not a number column`, ExitCode.internal);
  }
  return col.values;
}

/** Refuse points whose positions differ by too little to compute with (see MIN_SPAN). */
function checkSpan(table: CleanInput, p: CleanPoints): void {
  const n = p.x.length;
  if (n < 2) return;
  let xmin = Infinity, xmax = -Infinity, ymin = Infinity, ymax = -Infinity, big = 0;
  for (let i = 0; i < n; i++) {
    xmin = Math.min(xmin, p.x[i]);
    xmax = Math.max(xmax, p.x[i]);
    ymin = Math.min(ymin, p.y[i]);
    ymax = Math.max(ymax, p.y[i]);
    big = Math.max(big, Math.abs(p.x[i]), Math.abs(p.y[i]));
  }
  const span = Math.max(xmax - xmin, ymax - ymin);
  if (span >= MIN_SPAN && span >= MIN_RELATIVE_SPAN * big) return;
  throw inputError(
    `the ${n} points span only ${shortNumber(span)} map units (coordinates up to ${shortNumber(big)}), ` +
      "too little to compute a surface with; check the coordinate columns and give the coordinates in smaller units",
    { file: table.file },
  );
}

/** Short number text for messages: exponent form for very large or small magnitudes. */
function shortNumber(v: number): string {
  const a = Math.abs(v);
  return a !== 0 && (a >= 1e6 || a < 1e-3) ? v.toExponential(2).replace(/\.?0+e/, "e").replace("e+", "e") : formatNumber(v, 6);
}

function tooFewPoints(table: CleanInput, p: CleanPoints, minPoints: number): RbfieldError {
  const n = p.x.length;
  const rows = p.rowsRead;
  let message: string;
  if (n === 0) {
    const names = [table.xColumn, table.yColumn, table.zColumn].map((j) => `'${messageText(table.columns[j] ?? "", 40)}'`);
    message = rows === 0 ? "no data rows" : `no usable points: all ${rows} data ${rows === 1 ? "row was" : "rows were"} skipped`;
    if (p.skipped.length > 0) message += ` (line ${p.skipped[0].line}: ${p.skipped[0].reason})`;
    message += `; check that x, y and value are the columns ${names.join(", ")}` +
      (table.columnChoice === "detected" ? ` or name them with ${opt("x")} ${opt("y")} ${opt("z")}` : "");
  } else {
    message = `only ${n} usable ${n === 1 ? "point" : "points"} at distinct positions, and at least ${minPoints} are needed`;
    const reasons: string[] = [];
    if (p.skipped.length > 0) {
      reasons.push(`${p.skipped.length} of ${rows} rows skipped (first: line ${p.skipped[0].line}: ${p.skipped[0].reason})`);
    }
    const mergedRows = p.merged.reduce((sum, g) => sum + g.lines.length - 1, 0);
    if (mergedRows > 0) reasons.push(`${mergedRows} rows merged into coincident points (lines ${p.merged[0].lines.slice(0, 5).join(", ")})`);
    if (reasons.length > 0) message += ` (${reasons.join("; ")})`;
    message += "; add points at other positions or fix the skipped rows";
  }
  return inputError(message, { file: table.file });
}

const hashView = new Float64Array(1);
const hashBits = new Uint32Array(hashView.buffer);

/** 32-bit hash of a double's bits; -0 hashes as 0. */
function floatHash(v: number): number {
  hashView[0] = v + 0;
  return Math.imul(hashBits[0], 0x9e3779b1) ^ hashBits[1];
}

/** 32-bit hash of two numbers (integers up to 2^53 stay distinct modulo 2^32). */
function hashPair(a: number, b: number): number {
  let h = Math.imul(a | 0, 0x85ebca6b) ^ Math.imul((a / 4294967296) | 0, 0xc2b2ae35);
  h = Math.imul(h ^ (h >>> 16), 0x27d4eb2f) ^ Math.imul(b | 0, 0x165667b1) ^ ((b / 4294967296) | 0);
  h = Math.imul(h ^ (h >>> 15), 0x2c1b3c6d);
  return (h ^ (h >>> 13)) >>> 0;
}

function outOfRangeReason(v: number, column: string, coordinate: boolean): string {
  const t = exponentText(v);
  const c = messageText(column, 40);
  return coordinate
    ? `coordinate ${t} in column '${c}' is beyond ±${COORDINATE_LIMIT.toExponential()} map units (check the column and the units)`
    : `value ${t} in column '${c}' is beyond ±${VALUE_LIMIT.toExponential()}, more than a 32-bit float grid holds (rescale the values)`;
}

/** A large number as it is usually written: "1e300", "-2.5e16". */
function exponentText(v: number): string {
  return v.toExponential().replace("e+", "e");
}

const OUT_OF_RANGE = / is beyond ±/;

const RULE_WORDS: Record<DuplicateRule, string> = {
  mean: "mean value",
  max: "largest value kept",
  min: "smallest value kept",
  first: "first row kept",
};

/** Short summary lines, e.g. "skipped 3 rows with missing or non-numeric values (lines 7, 12, 40)". */
export function describeCleaning(points: CleanPoints, maxListed = 5): string[] {
  const out: string[] = [];
  const s = points.skipped.length;
  if (s > 0) {
    const lines = listLines(points.skipped.map((r) => r.line), maxListed);
    const leftOut = points.skipped.filter((r) => r.cause === "non-detect").length;
    const rejected = points.skipped.filter((r) => r.cause === "rejected").length;
    const other = s - leftOut - rejected;
    const what = points.skipped.some((r) => OUT_OF_RANGE.test(r.reason))
      ? "missing, non-numeric or out-of-range values"
      : "missing or non-numeric values";
    if (other === s) out.push(`skipped ${s} ${s === 1 ? "row" : "rows"} with ${what} (${lines})`);
    else {
      const parts = [
        ...(other ? [`${other} with ${what}`] : []),
        ...(leftOut ? [`${leftOut} ${leftOut === 1 ? "non-detect" : "non-detects"} left out (--non-detects omit)`] : []),
        ...(rejected ? [`${rejected} rejected (qualifier R)`] : []),
      ];
      out.push(`skipped ${s} ${s === 1 ? "row" : "rows"} (${lines}): ${parts.join(", ")}`);
    }
  }
  const g = points.merged.length;
  if (g > 0) {
    let largest = 0, rpd: number | null = null;
    for (const group of points.merged) {
      largest = Math.max(largest, group.spread);
      if (group.rpd !== null && group.rpd !== undefined) rpd = Math.max(rpd ?? 0, group.rpd);
    }
    const rule = points.merged[0].rule ?? "mean";
    out.push(
      `merged ${g} ${g === 1 ? "group" : "groups"} of coincident points (${RULE_WORDS[rule]}; largest spread ${formatNumber(largest, 6)}` +
        `${rpd === null ? "" : `, largest RPD ${formatNumber(rpd, 3)}%`})`,
    );
  }
  return out;
}

function listLines(lines: number[], maxListed: number): string {
  const shown = lines.slice(0, Math.max(0, maxListed));
  const rest = lines.length - shown.length;
  const word = lines.length === 1 ? "line" : "lines";
  if (shown.length === 0) return `${lines.length} ${word}`;
  return `${word} ${shown.join(", ")}${rest > 0 ? ` and ${rest} more` : ""}`;
}
