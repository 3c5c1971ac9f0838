// The number grammar of the text readers: a plain finite decimal number, with a decimal point or
// (in files that use one) a decimal comma. Laboratory values built on it are in cells.ts.

// Written so that no text can match in more than one way: "\d+\.?\d*" would let a long run of
// digits split between the two \d parts, and a failing match would then take quadratic time.
const PLAIN_NUMBER = /^[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?$/;
const COMMA_NUMBER = /^[+-]?(?:\d+(?:,\d*)?|,\d+)(?:[eE][+-]?\d+)?$/;

/**
 * Parse a plain finite decimal number; NaN for anything else ("", "NaN", "Infinity", "1e999",
 * "12abc", "0x10"). With decimalComma the decimal mark is "," and a "." is refused.
 */
export function parseNumber(cell: string, decimalComma: boolean): number {
  let s = cell.trim();
  if (decimalComma) {
    if (!COMMA_NUMBER.test(s)) return NaN;
    s = s.replace(",", ".");
  } else if (!PLAIN_NUMBER.test(s)) {
    return NaN;
  }
  const v = Number(s);
  return Number.isFinite(v) ? v : NaN;
}
