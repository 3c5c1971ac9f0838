// Contour levels: the three ways to ask for them (an interval from a base, a list, log-spaced
// 1, 2, 5 × 10ᵏ), which levels fall on a surface, which are index contours, and how a level is
// written. One definition serves the GeoJSON writer (the `index` property), the map (heavier,
// labelled lines) and the summaries.
import { ExitCode, opt, RbfieldError } from "../errors.ts";
import { niceFloor, valueRange } from "../numbers.ts";
import { decimalsOf, fmt, formatFixed, formatSignificant, MINUS } from "../text.ts";

/**
 * How contour levels are chosen: base + k·interval; the levels listed (thresholds, concentrations);
 * or m × 10ᵏ for each mantissa m (log-spaced, for values fitted with the log transform).
 */
export type LevelRule =
  | { kind: "interval"; interval: number; base: number }
  | { kind: "list"; levels: number[] }
  | { kind: "log"; mantissas: readonly number[] };

/** Most levels a rule may produce. */
export const MAX_LEVELS = 10_000;

/** Every fifth level counted from the base is an index contour (a drafting convention). */
export const INDEX_EVERY = 5;

/** The log-spaced sequence 1, 2, 5 × 10ᵏ, and the decades alone for ranges of many decades. */
export const LOG_125 = [1, 2, 5] as const;
export const LOG_DECADES = [1] as const;

/** Levels base + k·interval, checked. */
export function intervalRule(interval: number, base = 0): LevelRule {
  if (!(interval > 0) || !Number.isFinite(interval)) {
    throw new RbfieldError(`${opt("interval")} must be a positive number, not ${fmt(interval)}`, ExitCode.usage);
  }
  if (!Number.isFinite(base)) throw new RbfieldError(`${opt("base")} must be a finite number, not ${fmt(base)}`, ExitCode.usage);
  return { kind: "interval", interval, base };
}

/** The levels listed, sorted ascending, each once. */
export function listRule(levels: number[]): LevelRule {
  if (levels.length === 0) throw new RbfieldError(`${opt("levels")} needs at least one level, e.g. 1,10,100`, ExitCode.usage);
  const bad = levels.find((v) => !Number.isFinite(v));
  if (bad !== undefined) throw new RbfieldError(`${opt("levels")} must be finite numbers, not ${fmt(bad)}`, ExitCode.usage);
  const sorted = [...new Set(levels.map((v) => (v === 0 ? 0 : v)))].sort((a, b) => a - b);
  if (sorted.length > MAX_LEVELS) throw new RbfieldError(`${opt("levels")} lists ${sorted.length} levels, more than ${MAX_LEVELS}`, ExitCode.usage);
  return { kind: "list", levels: sorted };
}

/**
 * The rule a caller asked for (an interval from a base, or a list), else the default for these grid
 * values: log-spaced 1, 2, 5 × 10ᵏ when the values were fitted as logarithms and span at least a
 * decade, otherwise a round interval giving about ten levels.
 */
export function chooseLevelRule(
  ask: { interval?: number; base?: number; levels?: number[] },
  values: ArrayLike<number>,
  transform: "none" | "log" = "none",
): LevelRule {
  if (ask.levels !== undefined) {
    if (ask.interval !== undefined) throw new RbfieldError(`give ${opt("interval")} or ${opt("levels")}, not both`, ExitCode.usage);
    if (ask.base !== undefined && ask.base !== 0) {
      throw new RbfieldError(`${opt("base")} applies to ${opt("interval")}; a level given with ${opt("levels")} is a contour`, ExitCode.usage);
    }
    return listRule(ask.levels);
  }
  if (ask.interval !== undefined) return intervalRule(ask.interval, ask.base ?? 0);
  const { lo, hi } = valueRange(values);
  if (transform === "log" && lo > 0 && hi >= 10 * lo) {
    return { kind: "log", mantissas: logLevels(lo, hi, LOG_125).length > 20 ? LOG_DECADES : LOG_125 };
  }
  return intervalRule(hi > lo ? niceFloor((hi - lo) / 10) : 1, ask.base ?? 0);
}

/**
 * Levels base + k·interval that lie within [min, max], ascending. Each level is computed directly
 * from k (no running sum); when base and interval are short decimals the sum is done in scaled
 * integers, so e.g. interval 0.1 gives 0.3 rather than 0.30000000000000004.
 */
export function contourLevels(min: number, max: number, interval: number, base = 0): number[] {
  intervalRule(interval, base);
  // No data (e.g. a fully masked grid) gives no levels.
  if (!Number.isFinite(min) || !Number.isFinite(max) || min > max) return [];
  const first = Math.ceil((min - base) / interval) - 1;
  const last = Math.floor((max - base) / interval) + 1;
  if (last - first - 1 > MAX_LEVELS) {
    throw new RbfieldError(
      `contour interval ${fmt(interval)} gives about ${fmt(Math.round((max - min) / interval), 2)} levels between ${fmt(min)} and ${fmt(max)}` +
        ` (at most ${MAX_LEVELS}); pick a larger interval`,
      ExitCode.usage,
    );
  }
  const level = levelFunction(base, interval);
  const levels: number[] = [];
  for (let k = first; k <= last; k++) {
    const v = level(k);
    if (v >= min && v <= max) levels.push(v);
  }
  return levels;
}

/** k ↦ base + k·interval, in scaled integers when both are short decimals. */
function levelFunction(base: number, interval: number): (k: number) => number {
  const digits = Math.max(decimalsOf(base), decimalsOf(interval));
  const scale = 10 ** digits;
  const b = Math.round(base * scale);
  const i = Math.round(interval * scale);
  if (Math.abs(b) < 2 ** 52 && i < 2 ** 52 && b / scale === base && i / scale === interval) {
    return (k) => {
      const n = b + k * i;
      return Math.abs(n) < 2 ** 53 ? n / scale : base + k * interval;
    };
  }
  return (k) => base + k * interval;
}

/** m × 10ᵏ within [lo, hi] (lo > 0) for each mantissa m, ascending, written exactly (2e-3 is 0.002). */
export function logLevels(lo: number, hi: number, mantissas: readonly number[]): number[] {
  if (!(lo > 0) || !(hi >= lo) || !Number.isFinite(hi)) return [];
  const out: number[] = [];
  for (let k = Math.floor(Math.log10(lo)) - 1; k <= Math.ceil(Math.log10(hi)) + 1; k++) {
    for (const m of mantissas) {
      const v = Number(`${m}e${k}`);
      if (v >= lo && v <= hi) out.push(v);
    }
  }
  if (out.length > MAX_LEVELS) throw new RbfieldError(`log-spaced levels between ${fmt(lo)} and ${fmt(hi)} are more than ${MAX_LEVELS}`, ExitCode.usage);
  return out;
}

/** The rule's levels that lie within [lo, hi], ascending. */
export function levelsWithin(rule: LevelRule, lo: number, hi: number): number[] {
  if (!(hi >= lo)) return [];
  if (rule.kind === "interval") return contourLevels(lo, hi, rule.interval, rule.base);
  if (rule.kind === "list") return rule.levels.filter((v) => v >= lo && v <= hi);
  return logLevels(lo, hi, rule.mantissas);
}

/**
 * Levels that bound filled bands covering [lo, hi]: the levels within it and the next one on each
 * side. A list has no next level: `openBelow`/`openAbove` are then set when the surface reaches
 * below its first or above its last level, and those bands are open on that side.
 */
export function bandLevels(rule: LevelRule, lo: number, hi: number): { levels: number[]; openBelow: boolean; openAbove: boolean } {
  if (!(hi >= lo)) return { levels: [], openBelow: false, openAbove: false };
  if (rule.kind === "interval") {
    return { levels: contourLevels(lo - rule.interval, hi + rule.interval, rule.interval, rule.base), openBelow: false, openAbove: false };
  }
  if (rule.kind === "log") {
    const wide = logLevels(lo / 10, hi * 10, rule.mantissas);
    const below = wide.filter((v) => v <= lo).at(-1);
    const above = wide.find((v) => v > hi);
    return { levels: [...(below === undefined ? [] : [below]), ...wide.filter((v) => v > lo && v <= hi), ...(above === undefined ? [] : [above])], openBelow: false, openAbove: false };
  }
  const levels = rule.levels;
  return { levels, openBelow: lo < levels[0], openAbove: hi >= levels[levels.length - 1] };
}

/**
 * Which levels are index contours: for an interval, every fifth level counted from the base; for
 * log-spaced levels, the powers of ten; for a list, every level listed (each was asked for).
 */
export function indexTest(rule: LevelRule): (level: number) => boolean {
  if (rule.kind === "interval") {
    const step = INDEX_EVERY * rule.interval;
    return (level) => {
      const q = (level - rule.base) / step;
      return Math.abs(q - Math.round(q)) < 1e-6;
    };
  }
  if (rule.kind === "log") {
    return (level) => {
      if (!(level > 0)) return false;
      const k = Math.log10(level);
      return Math.abs(k - Math.round(k)) < 1e-9;
    };
  }
  return () => true;
}

/**
 * How each level is written: an interval's levels with the decimals of the interval and base
 * (0.5 → "84.5", "85.0"); listed and log-spaced levels in their shortest form ("0.002", "1000").
 */
export function levelText(rule: LevelRule, minus = MINUS): (level: number) => string {
  if (rule.kind === "interval") {
    const d = Math.max(decimalsOf(rule.interval), decimalsOf(rule.base));
    return (v) => formatFixed(v, d, minus);
  }
  return (v) => formatSignificant(v, 10, minus);
}

/** "1, 10, 100 and 1000": a list of level texts joined for a sentence. */
function joined(texts: string[]): string {
  return texts.length <= 1 ? texts.join("") : `${texts.slice(0, -1).join(", ")} and ${texts[texts.length - 1]}`;
}

const SUPERSCRIPT_K = "10\u1d4f";

/**
 * The rule in words for summaries, title blocks and legends: `at` ("every 0.5 m", "at 1, 10, 100
 * and 1000", "at 1, 2 and 5 × 10ᵏ"), `levels` the same with "(listed)" or "(log-spaced)" after it,
 * and `index` ("every 2.5 m", "at each power of ten"; null when every level is an index contour).
 */
export function describeLevels(rule: LevelRule, unit = "", minus = MINUS): { at: string; levels: string; index: string | null } {
  const u = unit ? ` ${unit}` : "";
  if (rule.kind === "interval") {
    const d = decimalsOf(rule.interval);
    const at = `every ${formatFixed(rule.interval, d, minus)}${u}`;
    return { at, levels: at, index: `every ${formatFixed(INDEX_EVERY * rule.interval, d, minus)}${u}` };
  }
  if (rule.kind === "log") {
    const at = `at ${joined(rule.mantissas.map(String))} × ${SUPERSCRIPT_K}${u}`;
    return { at, levels: `${at} (log-spaced)`, index: rule.mantissas.length > 1 ? "at each power of ten" : null };
  }
  const text = levelText(rule, minus);
  const shown = rule.levels.length > 12 ? [...rule.levels.slice(0, 11).map(text), "…"] : rule.levels.map(text);
  const at = `at ${rule.levels.length > 12 ? shown.join(", ") : joined(shown)}${u}`;
  return { at, levels: `${at} (listed)`, index: null };
}
