// Text helpers every stage may use: number text for outputs and messages, and input text made safe
// to quote in a one-line message. A neutral module, so that no stage imports them from another.
import { printable } from "./errors.ts";

/**
 * Deterministic number text: up to `digits` significant digits (1..17), trailing zeros trimmed,
 * plain decimal form for |v| in [1e-6, 1e21); NaN and ±Infinity give "".
 */
export function formatNumber(v: number, digits = 10): string {
  if (!Number.isFinite(v)) return "";
  const d = Math.min(17, Math.max(1, Math.round(digits)));
  // toPrecision rounds once; String() then gives the shortest text for that rounded value.
  return String(Number(v.toPrecision(d)));
}

/** Longest piece of input text quoted in a message. */
const QUOTE_LIMIT = 60;

/**
 * Input text made safe for a one-line message: control characters (terminal escapes, line breaks),
 * Unicode line separators and bidirectional controls become "?", and long text is cut short.
 */
export function messageText(text: string, limit = QUOTE_LIMIT): string {
  const safe = printable(text);
  const chars = Array.from(safe);
  return chars.length > limit ? chars.slice(0, limit - 1).join("") + "…" : safe;
}
