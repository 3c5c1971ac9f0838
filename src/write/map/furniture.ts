// Map furniture, hand-written: coordinate ticks, scale bar, north arrow, legend, title block, caution.
// Every function returns SVG text in paper millimetres; text from inputs goes through `text()`,
// which escapes it.
import { decimalsOf, formatFixed } from "../../text.ts";
import { roundStepBelow } from "./format.ts";
import { hex, paletteRgb, type PaletteName, scalePosition } from "./palette.ts";
import { LOG_125, LOG_DECADES, logLevels } from "../levels.ts";
import { el, escapeXml, n } from "./svg.ts";
import { textWidth, wrapText } from "./text.ts";

export const INK = "#1a1a1a";
export const MUTED = "#555555";

export interface TextStyle {
  size: number;
  bold?: boolean;
  anchor?: "start" | "middle" | "end";
  fill?: string;
  id?: string;
  transform?: string;
}

/** One line of text with its baseline at y (escaped). */
export function text(x: number, y: number, content: string, s: TextStyle): string {
  return el("text", {
    id: s.id,
    x,
    y,
    "font-size": s.size,
    "font-weight": s.bold ? "bold" : undefined,
    "text-anchor": s.anchor && s.anchor !== "start" ? s.anchor : undefined,
    fill: s.fill ?? INK,
    transform: s.transform,
  }, escapeXml(content));
}

/** Wrapped lines from y (first baseline at y + size); returns the SVG and the height used. */
export function paragraph(x: number, y: number, width: number, content: string, s: TextStyle, leading = 1.3): { svg: string; height: number } {
  const lines = wrapText(content, s.size, width, s.bold);
  const svg = lines.map((line, i) => text(x, y + s.size + i * s.size * leading, line, { ...s, id: undefined })).join("");
  return { svg: s.id ? `<g id="${s.id}">${svg}</g>` : svg, height: lines.length * s.size * leading };
}

/** The map's placement on paper: frame rectangle and the ground coordinates of its edges. */
export interface MapFrame {
  x: number;
  y: number;
  width: number;
  height: number;
  /** Ground coordinates of the frame's west, south, east, north edges. */
  west: number;
  south: number;
  east: number;
  north: number;
  /** Millimetres on paper per map unit. */
  k: number;
}

export const toPaper = (f: MapFrame, x: number, y: number): [number, number] => [f.x + (x - f.west) * f.k, f.y + (f.north - y) * f.k];

/**
 * Coordinate ticks at round map units on all four edges, labelled on the west and south edges,
 * crosses where they meet inside the frame, and the coordinate system named under the frame.
 */
export function coordinateTicks(f: MapFrame, crsText: string, u: number, prefix: string): { outside: string; crosses: string } {
  const step = roundStepBelow(Math.max(35 * u, f.width / 6) / f.k);
  const decimals = decimalsOf(step);
  const tick = 1.8 * u, size = 2 * u;
  const xs: number[] = [], ys: number[] = [];
  for (let i = Math.ceil(f.west / step); i * step <= f.east; i++) xs.push(Number((i * step).toFixed(decimals)));
  for (let i = Math.ceil(f.south / step); i * step <= f.north; i++) ys.push(Number((i * step).toFixed(decimals)));
  let marks = "", labels = "", crosses = "";
  const bottom = f.y + f.height, right = f.x + f.width;
  for (const gx of xs) {
    const [px] = toPaper(f, gx, 0);
    marks += `M${n(px, 3)} ${n(f.y, 3)}v${n(-tick, 3)}M${n(px, 3)} ${n(bottom, 3)}v${n(tick, 3)}`;
    // A label that would reach past the frame's corner into the other edge's labels is left out.
    const label = formatFixed(gx, decimals, "-");
    const half = textWidth(label, size) / 2;
    if (px - half < f.x - 0.5 * tick || px + half > right + 0.5 * tick) continue;
    labels += text(px, bottom + tick + size * 1.05, label, { size, anchor: "middle", id: `${prefix}tick-x-${xs.indexOf(gx)}` });
  }
  for (const gy of ys) {
    const [, py] = toPaper(f, 0, gy);
    marks += `M${n(f.x, 3)} ${n(py, 3)}h${n(-tick, 3)}M${n(right, 3)} ${n(py, 3)}h${n(tick, 3)}`;
    const lx = f.x - tick - 0.6 * u;
    const label = formatFixed(gy, decimals, "-");
    const half = textWidth(label, size) / 2;
    if (py + half <= bottom + 0.5 * tick && py - half >= f.y - 0.5 * tick) {
      labels += text(lx, py, label, {
        size,
        anchor: "middle",
        transform: `rotate(-90 ${n(lx, 3)} ${n(py, 3)})`,
        id: `${prefix}tick-y-${ys.indexOf(gy)}`,
      });
    }
    for (const gx of xs) {
      const [px] = toPaper(f, gx, 0);
      const c = 1.2 * u;
      crosses += `M${n(px - c, 3)} ${n(py, 3)}h${n(2 * c, 3)}M${n(px, 3)} ${n(py - c, 3)}v${n(2 * c, 3)}`;
    }
  }
  return {
    outside: `<g id="${prefix}ticks"><path d="${marks}" stroke="${INK}" stroke-width="${n(0.25 * u, 3)}" fill="none"/>` + labels +
      text(f.x, bottom + tick + size * 2.4, crsText, { size: 1.9 * u, fill: MUTED, id: `${prefix}crs-note` }) + `</g>`,
    crosses: `<path id="${prefix}grid-crosses" d="${crosses}" stroke="${INK}" stroke-width="${n(0.15 * u, 3)}" stroke-opacity="0.6" fill="none"/>`,
  };
}

/**
 * Scale bar of a round length (1, 2 or 5 × 10^k map units) at most `maxWidth` mm long, alternating
 * filled and open segments, labelled at both ends and the middle.
 */
export function scaleBar(x: number, y: number, maxWidth: number, k: number, unitName: string, u: number, prefix: string): { svg: string; height: number; width: number } {
  const length = roundStepBelow(maxWidth / k);
  const mantissa = Number(length.toExponential().split("e")[0]);
  const segments = mantissa === 5 ? 5 : 4;
  const w = length * k, h = 1.6 * u, size = 2 * u;
  const seg = w / segments;
  let bars = "";
  for (let i = 0; i < segments; i++) {
    bars += el("rect", { x: x + i * seg, y: y + size * 1.3, width: seg, height: h, fill: i % 2 === 0 ? INK : "#ffffff", stroke: INK, "stroke-width": 0.2 * u });
  }
  const decimals = decimalsOf(length / segments);
  const yLabel = y + size;
  let labels = text(x, yLabel, "0", { size, anchor: "middle" });
  if (segments % 2 === 0) labels += text(x + w / 2, yLabel, formatFixed(length / 2, decimals), { size, anchor: "middle" });
  labels += text(x + w, yLabel, `${formatFixed(length, decimals)} ${unitName}`, { size, anchor: "middle", id: `${prefix}scale-bar-end` });
  return {
    svg: `<g id="${prefix}scale-bar" data-length="${n(length, 12)}"><g id="${prefix}scale-bar-body">${bars}</g>${labels}</g>`,
    height: size * 1.3 + h,
    width: w,
  };
}

/** North arrow pointing to grid north (up the page), with "N" and "grid north" under it. */
export function northArrow(cx: number, y: number, u: number, prefix: string): { svg: string; height: number } {
  const h = 9 * u, w = 3.2 * u, size = 3 * u;
  const top = y + size * 1.1;
  const d = `M${n(cx, 3)} ${n(top, 3)}L${n(cx + w / 2, 3)} ${n(top + h, 3)}L${n(cx, 3)} ${n(top + 0.72 * h, 3)}Z`;
  const d2 = `M${n(cx, 3)} ${n(top, 3)}L${n(cx - w / 2, 3)} ${n(top + h, 3)}L${n(cx, 3)} ${n(top + 0.72 * h, 3)}Z`;
  return {
    svg: `<g id="${prefix}north-arrow">${text(cx, y + size, "N", { size, bold: true, anchor: "middle" })}` +
      `<path d="${d}" fill="${INK}"/><path d="${d2}" fill="#ffffff" stroke="${INK}" stroke-width="${n(0.25 * u, 3)}"/>` +
      text(cx, top + h + 2.6 * u, "grid north", { size: 1.8 * u, anchor: "middle", fill: MUTED }) + `</g>`,
    height: size * 1.1 + h + 2.6 * u,
  };
}

/**
 * A horizontal colour ramp in `steps` blocks (flat colours: every renderer draws them alike), with
 * round ticks in the data's units; on a log scale (`log`, scalePosition) ticks at 1, 2, 5 × 10ᵏ, or
 * at the decades when the range spans more than three.
 */
export function colourRamp(
  x: number,
  y: number,
  width: number,
  domain: [number, number],
  palette: PaletteName,
  title: string,
  u: number,
  id: string,
  log = false,
): { svg: string; height: number } {
  const size = 2 * u, h = 3.5 * u;
  const [lo, hi] = domain;
  const position = scalePosition(domain, log);
  const steps = 64;
  let blocks = "";
  for (let i = 0; i < steps; i++) {
    blocks += el("rect", { x: x + (i * width) / steps, y: y + size * 1.4, width: width / steps + 0.05, height: h, fill: hex(paletteRgb(palette, (i + 0.5) / steps)) });
  }
  const tickValues: { v: number; label: string }[] = [];
  if (log && lo > 0 && hi > lo) {
    const values = logLevels(lo, hi, Math.log10(hi / lo) > 3 ? LOG_DECADES : LOG_125);
    for (const v of values) tickValues.push({ v, label: formatFixed(v, Math.max(0, decimalsOf(v))) });
  } else {
    const span = hi - lo || 1;
    const tickStep = roundStepBelow(span / 4);
    const decimals = decimalsOf(tickStep);
    for (let i = Math.ceil(lo / tickStep); i * tickStep <= hi + 1e-9 * span; i++) tickValues.push({ v: i * tickStep, label: formatFixed(i * tickStep, decimals) });
  }
  let ticks = "", labels = "";
  for (const { v, label } of tickValues) {
    const px = x + position(v) * width;
    ticks += `M${n(px, 3)} ${n(y + size * 1.4 + h, 3)}v${n(1.2 * u, 3)}`;
    labels += text(px, y + size * 1.4 + h + 1.2 * u + size, label, { size, anchor: "middle" });
  }
  const frame = el("rect", { x, y: y + size * 1.4, width, height: h, fill: "none", stroke: INK, "stroke-width": 0.2 * u });
  return {
    svg: `<g id="${id}">${text(x, y + size, title, { size, bold: true })}${blocks}${frame}` +
      `<path d="${ticks}" stroke="${INK}" stroke-width="${n(0.2 * u, 3)}"/>${labels}</g>`,
    height: size * 1.4 + h + 1.2 * u + size * 1.3,
  };
}

/** Rows of "name  value" text, values wrapped to the width; returns SVG and height. */
export function keyValueRows(x: number, y: number, width: number, rows: [string, string][], u: number, prefix: string): { svg: string; height: number } {
  const size = 2.2 * u, keyWidth = 19 * u;
  let svg = "", dy = 0;
  for (const [key, value] of rows) {
    const id = `${prefix}info-${key.toLowerCase().replace(/[^a-z]+/g, "-")}`;
    const body = paragraph(x + keyWidth, y + dy, width - keyWidth, value, { size, id });
    svg += text(x, y + dy + size, key, { size, fill: MUTED }) + body.svg;
    dy += Math.max(body.height, size * 1.3) + 0.5 * u;
  }
  return { svg, height: dy };
}
