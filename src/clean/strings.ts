// Strings from field codes (--strings COL=CODE[,CODE…]): shots that share a code, taken in file order,
// joined into 3-D breaklines. A string ends where the code's run is interrupted (a shot with another
// code comes between, as a surveyor leaves one feature for another) or where two consecutive shots
// lie farther apart than the gap: `--string-gap` in map units, or by default STRING_GAP_FACTOR times
// the median distance between consecutive shots of that code (a string is shot at a steady interval;
// a jump of five intervals is a new feature of the same code, common practice). A string of one
// shot is no line and is listed as left out; consecutive shots at one position (x, y) keep the first.
import { ExitCode, RbfieldError } from "../errors.ts";

/** Default gap: this many times the median spacing along the strings of a code. */
export const STRING_GAP_FACTOR = 5;

export interface CodedString {
  /** "CODE n": the nth string of that code, in file order. */
  name: string;
  code: string;
  /** Clean point numbers of its shots, in file order. */
  points: number[];
  x: number[];
  y: number[];
  z: number[];
  /** Plan length along the shots (map units). */
  length: number;
  firstLine: number;
  lastLine: number;
}

export interface StringsResult {
  strings: CodedString[];
  /** Shots of the codes that stayed single (no neighbour in their run), by input line. */
  single: number[];
  /** The gap used per code (map units). */
  gaps: { code: string; gap: number; given: boolean }[];
}

const median = (a: number[]): number => {
  if (a.length === 0) return NaN;
  const s = a.slice().sort((p, q) => p - q);
  const h = s.length >> 1;
  return s.length % 2 ? s[h] : 0.5 * (s[h - 1] + s[h]);
};

/**
 * Join coded shots into strings. `code[i]` the code of clean point i, `line[i]` its input line (the
 * file order); codes compare ignoring case and surrounding spaces. `gap`: a fixed gap, else per code
 * STRING_GAP_FACTOR × the median distance between consecutive shots of the code's runs.
 */
export function stringsFromCodes(
  points: { x: ArrayLike<number>; y: ArrayLike<number>; z: ArrayLike<number>; lines: number[] },
  code: string[],
  codes: string[],
  gap?: number,
): StringsResult {
  if (gap !== undefined && !(gap > 0 && Number.isFinite(gap))) throw new RbfieldError(`the string gap must be a positive distance, not ${gap}`, ExitCode.usage, undefined, "stringGap");
  const want = new Set(codes.map((c) => c.trim().toLowerCase()));
  const order = Array.from(points.lines.keys()).sort((a, b) => points.lines[a] - points.lines[b] || a - b);
  const key = (i: number) => code[i].trim().toLowerCase();
  // Runs: maximal sequences in file order of one wanted code.
  const runs: number[][] = [];
  let run: number[] | null = null;
  for (const i of order) {
    const c = key(i);
    if (!want.has(c)) {
      run = null;
      continue;
    }
    if (run && key(run[0]) === c) run.push(i);
    else runs.push(run = [i]);
  }
  const dist = (a: number, b: number) => Math.hypot(points.x[b] - points.x[a], points.y[b] - points.y[a]);
  const gaps = new Map<string, number>();
  for (const c of want) {
    const steps: number[] = [];
    for (const r of runs) if (key(r[0]) === c) for (let k = 1; k < r.length; k++) steps.push(dist(r[k - 1], r[k]));
    const d = median(steps.filter((s) => s > 0));
    gaps.set(c, gap ?? (Number.isFinite(d) ? STRING_GAP_FACTOR * d : Infinity));
  }
  const strings: CodedString[] = [];
  const single: number[] = [];
  const count = new Map<string, number>();
  const close = (shots: number[]) => {
    if (shots.length < 2) {
      single.push(...shots.map((i) => points.lines[i]));
      return;
    }
    const c = code[shots[0]].trim();
    const k = (count.get(c.toLowerCase()) ?? 0) + 1;
    count.set(c.toLowerCase(), k);
    let length = 0;
    for (let t = 1; t < shots.length; t++) length += dist(shots[t - 1], shots[t]);
    strings.push({
      name: `${c} ${k}`,
      code: c,
      points: shots,
      x: shots.map((i) => points.x[i]),
      y: shots.map((i) => points.y[i]),
      z: shots.map((i) => points.z[i]),
      length,
      firstLine: points.lines[shots[0]],
      lastLine: points.lines[shots[shots.length - 1]],
    });
  };
  for (const r of runs) {
    const g = gaps.get(key(r[0]))!;
    let cur: number[] = [r[0]];
    for (let k = 1; k < r.length; k++) {
      const d = dist(cur[cur.length - 1], r[k]);
      if (d === 0) continue;
      if (d > g) {
        close(cur);
        cur = [r[k]];
      } else cur.push(r[k]);
    }
    close(cur);
  }
  const spelled = new Map(codes.map((c) => [c.trim().toLowerCase(), c.trim()]));
  return { strings, single, gaps: [...gaps].map(([c, v]) => ({ code: spelled.get(c) ?? c, gap: v, given: gap !== undefined })) };
}
