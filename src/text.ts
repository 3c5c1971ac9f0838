// Text helpers every stage may use: how numbers, lengths and the CRS are written in outputs and
// messages, and input text made safe to quote in a one-line message. A neutral module, so that no
// stage imports them from another.
//
// Numbers for people (summaries, messages, maps, reports; README "Numbers"):
// - figures of a fit (λ, ε, edf, GCV, RMSE, σ, ranges of values) to 4 significant digits: fmt in
//   plain text, formatSignificant with a true minus sign on maps and in reports;
// - standard errors to 2 significant digits, trailing zeros kept (formatUncertainty; the Guide to the
//   Expression of Uncertainty in Measurement, JCGM 100:2008 §7.2.6);
// - coordinates to the decimals of the step they lie on (formatFixed with decimalsOf) or, for grid
//   edges, rounded to a millionth of the cell (coordinateText);
// - lengths with the CRS's unit ("m", "US ft", "ft"), "map units" where the CRS does not say.
// Every path rounds first (toPrecision, toFixed) and prints the shortest text of the rounded number,
// so no text shows a binary artefact such as 5712401.300000001. Machine files keep their own
// precision: CSV cells use formatNumber (10 significant digits unless a column says otherwise).
import { unitLabel } from "./crs/units.ts";
import { printable } from "./errors.ts";
import type { Crs } from "./types.ts";

/** The minus sign for printed numbers on maps and in reports (U+2212), as wide as a digit. */
export const MINUS = "\u2212";

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

/**
 * v to `digits` significant digits, trailing zeros trimmed: plain decimals for |v| in [1e-4, 1e6),
 * else "1.5e-7" or "6.87e+8"; NaN prints "—", ±Infinity "∞". Negative numbers start with `minus`.
 */
export function formatSignificant(v: number, digits = 4, minus = MINUS): string {
  if (Number.isNaN(v)) return "—";
  const sign = v < 0 ? minus : "";
  if (!Number.isFinite(v)) return `${sign}∞`;
  if (v === 0) return "0";
  const d = Math.min(17, Math.max(1, Math.round(digits)));
  const rounded = Math.abs(Number(v.toPrecision(d)));
  if (rounded >= 1e-4 && rounded < 1e6) return sign + String(rounded);
  const [mantissa, exponent] = rounded.toExponential(d - 1).split("e");
  return `${sign}${mantissa.includes(".") ? mantissa.replace(/\.?0+$/, "") : mantissa}e${exponent}`;
}

/** Plain-text figures (summaries, messages): formatSignificant with an ASCII minus. */
export function fmt(v: number, digits = 4): string {
  return formatSignificant(v, digits, "-");
}

/**
 * A standard error or other uncertainty: 2 significant digits with trailing zeros kept (0.10, 0.013,
 * 160), as the GUM (JCGM 100:2008 §7.2.6) recommends; exponent form outside [1e-4, 1e6).
 */
export function formatUncertainty(v: number, minus = "-"): string {
  if (!Number.isFinite(v) || v === 0) return formatSignificant(v, 2, minus);
  const rounded = Number(v.toPrecision(2));
  const a = Math.abs(rounded);
  if (a < 1e-4 || a >= 1e6) return formatSignificant(v, 2, minus);
  return formatFixed(rounded, Math.max(0, 1 - Math.floor(Math.log10(a))), minus);
}

/**
 * A cell of residuals.csv, written as the first release wrote it (its bytes do not change): `digits`
 * significant digits, and outside [1e-3, 1e6) toExponential's form with its trailing zeros (6.79781e-4).
 */
export function formatResidualCell(v: number, digits: number): string {
  if (!Number.isFinite(v)) return String(v);
  if (v === 0) return "0";
  const a = Math.abs(v);
  if (a >= 1e6 || a < 1e-3) return v.toExponential(digits - 1);
  return String(Number(v.toPrecision(digits)));
}

/** Decimals needed to print every multiple of `step` exactly (0.5 → 1, 0.25 → 2, 10 → 0; at most 12). */
export function decimalsOf(step: number): number {
  if (!Number.isFinite(step) || step === 0) return 0;
  // Shortest round-trip text of the step, so 0.1 counts as one decimal, not 0.1000000000000000055….
  const [mantissa, exponent] = String(Math.abs(step)).split("e");
  const dot = mantissa.indexOf(".");
  const fraction = dot < 0 ? 0 : mantissa.length - dot - 1;
  return Math.min(12, Math.max(0, fraction - (exponent ? Number(exponent) : 0)));
}

/** v with exactly `decimals` decimals; −0 prints as 0; negative numbers use `minus`. */
export function formatFixed(v: number, decimals: number, minus = MINUS): string {
  if (!Number.isFinite(v)) return "";
  const text = Math.abs(v).toFixed(Math.min(20, Math.max(0, decimals)));
  const zero = /^[0.]*$/.test(text);
  return v < 0 && !zero ? minus + text : text;
}

/**
 * Decimals kept in coordinates on a grid of this cell size: the rounding step is the largest power
 * of ten not above cell/1e6, so rounding moves a point by less than cell·1e-6 (at most 15).
 */
export function coordinateDecimals(cell: number): number {
  return Math.min(15, Math.max(0, 6 - Math.floor(Math.log10(cell))));
}

/**
 * A coordinate on a grid of this cell size, rounded to a millionth of the cell and trailing zeros
 * trimmed: 5712401.300000001 on a 0.1 grid prints 5712401.3.
 */
export function coordinateText(v: number, cell: number, minus = "-"): string {
  const decimals = Number.isFinite(cell) && cell > 0 ? coordinateDecimals(cell) : 6;
  const text = formatFixed(v, decimals, minus);
  return text.includes(".") ? text.replace(/\.?0+$/, "") : text;
}

/** The linear unit a CRS record names, if any (Crs.unit; undefined until the CRS is described). */
function linearUnit(crs: Crs | undefined): "metre" | "US survey foot" | "foot" | undefined {
  const u = crs?.unit;
  return u === "metre" || u === "US survey foot" || u === "foot" ? u : undefined;
}

/** Unit of lengths in this CRS: "m", "US ft" or "ft"; "degrees" for a geographic CRS; else "map units". */
export function unitText(crs: Crs | undefined): string {
  const u = linearUnit(crs);
  if (u) return unitLabel(u);
  return crs?.unit === "degree" ? "degrees" : "map units";
}

/** Length of one unit of this CRS in metres, or null when the CRS does not say (or it is angular). */
export function metresPerMapUnit(crs: Crs | undefined): number | null {
  const u = linearUnit(crs);
  return u === "metre" ? 1 : u === "foot" ? 0.3048 : u === "US survey foot" ? 1200 / 3937 : null;
}

/** A length with the CRS's unit: "2.5 m", "12.3 US ft", "1 map unit", "0.5 map units". */
export function lengthText(v: number, crs: Crs | undefined, digits = 4): string {
  const unit = unitText(crs);
  const number = fmt(v, digits);
  if (number === "1" && (unit === "map units" || unit === "degrees")) return `1 ${unit.slice(0, -1)}`;
  return `${number} ${unit}`;
}

/** "per m", "per US ft", "per map unit": the unit of a shape parameter ε. */
export function perUnitText(crs: Crs | undefined): string {
  const unit = unitText(crs);
  return `per ${unit === "map units" || unit === "degrees" ? unit.slice(0, -1) : unit}`;
}

const LOCAL_PLURAL: Record<string, string> = { "metre": "metres", "foot": "feet", "US survey foot": "US survey feet" };

/**
 * The CRS as every summary, map and report names it: the label of an EPSG CRS; for a site grid with
 * no EPSG code always "local site grid (no EPSG code)", with the unit when it is known ("local site
 * grid in metres (no EPSG code)"), whatever older model files stored.
 */
export function crsText(crs: Crs): string {
  if (crs.epsg !== undefined) return printable(crs.label);
  const u = linearUnit(crs);
  return u ? `local site grid in ${LOCAL_PLURAL[u]} (no EPSG code)` : "local site grid (no EPSG code)";
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
