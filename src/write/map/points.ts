// Survey points on the map: markers (possible blunders ringed), value labels with a white halo,
// residual colours, and the legend's symbol rows.
import { decimalsOf, formatFixed, formatSignificant } from "../../text.ts";
import { describeLevels, type LevelRule } from "../levels.ts";
import { INK, type MapFrame } from "./furniture.ts";
import { type Box, placePointLabels, type Xy } from "./labels.ts";
import { paletteHex } from "./palette.ts";
import { el, escapeXml, n } from "./svg.ts";
import { textWidth } from "./text.ts";
import type { MapInput, MapOptions, MapPoint } from "./types.ts";

/** Residual colour range: three robust standard deviations (1.4826 · median |e|), so a blunder saturates. */
export function residualDomain(points: MapPoint[]): number {
  const a = points.map((q) => (typeof q.residual === "number" ? Math.abs(q.residual) : NaN)).filter((v) => Number.isFinite(v)).sort((x, y) => x - y);
  const median = a.length ? a[Math.floor((a.length - 1) / 2)] : 0;
  const r = 3 * 1.4826 * median;
  return r > 0 ? r : Math.max(a[a.length - 1] ?? 1, 1e-12);
}

export function pointMarker(x: number, y: number, r: number, fill: string, u: number): string {
  return el("circle", { cx: x, cy: y, r, fill, stroke: fill === INK ? "#ffffff" : INK, "stroke-width": (fill === INK ? 0.15 : 0.12) * u });
}

export function blunderMarker(x: number, y: number, u: number): string {
  return el("circle", { cx: x, cy: y, r: 1.5 * u, fill: "none", stroke: "#c51b7d", "stroke-width": 0.4 * u });
}

export function drawPoints(points: MapPoint[], P: (x: number, y: number) => Xy, r: number, residualRange: number, u: number, p: string): string {
  if (!points.length) return "";
  let plain = "", flagged = "";
  for (const q of points) {
    const [x, y] = P(q.x, q.y);
    const fill = residualRange > 0 && typeof q.residual === "number"
      ? paletteHex("residuals", 0.5 + q.residual / (2 * residualRange))
      : INK;
    plain += pointMarker(x, y, r, fill, u);
    if (q.flagged) flagged += blunderMarker(x, y, u);
  }
  return `<g id="${p}points">${plain}</g><g id="${p}flagged">${flagged}</g>`;
}

export function pointLabels(
  points: MapPoint[],
  P: (x: number, y: number) => Xy,
  r: number,
  taken: Box[],
  f: MapFrame,
  u: number,
  p: string,
  rule: LevelRule,
): string {
  const size = 1.7 * u;
  // Readings one decimal finer than an interval's levels (at most 3); else 3 significant digits.
  const decimals = rule.kind === "interval" ? Math.min(3, decimalsOf(rule.interval) + 1) : -1;
  const valueText = (v: number) => (decimals >= 0 ? formatFixed(v, decimals) : formatSignificant(v, 3));
  // Possible blunders are labelled first, so they keep their labels where points crowd.
  const order = points.map((_, i) => i).sort((a, b) => Number(points[b].flagged) - Number(points[a].flagged) || a - b);
  const inputs = order.map((i) => {
    const [x, y] = P(points[i].x, points[i].y);
    return { x, y, r: points[i].flagged ? 1.5 * u : r, text: valueText(points[i].value) };
  });
  const placed = placePointLabels(inputs, taken, [f.x + 0.5, f.y + 0.5, f.x + f.width - 0.5, f.y + f.height - 0.5], size, (t) => textWidth(t, size));
  let halo = "", ink = "";
  for (const l of placed) {
    const q = inputs[l.index];
    const x = l.anchor === "start" ? l.box.cx - l.box.hw : l.anchor === "end" ? l.box.cx + l.box.hw : l.box.cx;
    const y = l.box.cy + 0.3645 * size;
    const anchor = l.anchor === "start" ? undefined : l.anchor;
    halo += el("text", { x, y, "text-anchor": anchor }, escapeXml(q.text));
    ink += el("text", { x, y, "text-anchor": anchor }, escapeXml(q.text));
  }
  // A white halo under each value keeps it readable across lines and colours.
  return `<g id="${p}point-labels" font-size="${n(size, 3)}">` +
    `<g fill="#ffffff" stroke="#ffffff" stroke-width="${n(0.5 * u, 3)}" stroke-linejoin="round">${halo}</g>` +
    `<g fill="${INK}">${ink}</g></g>`;
}

export interface LegendRow {
  label: string;
  symbol: (x: number, y: number) => string;
}

export function symbolRows(input: MapInput, options: MapOptions, u: number, indexed: boolean, residualColour: boolean): LegendRow[] {
  const said = describeLevels(input.rule, input.unit);
  const line = (w: number, dash?: string) => (x: number, y: number) =>
    el("path", { d: `M${n(x - 2.5 * u, 3)} ${n(y, 3)}h${n(5 * u, 3)}`, stroke: INK, "stroke-width": w * u, "stroke-dasharray": dash, fill: "none" });
  // Every listed level (or every decade when those are the only levels) is an index contour.
  const rows: LegendRow[] = said.index === null && indexed
    ? [{ label: `Contour, ${said.levels}, labelled`, symbol: line(0.35) }]
    : [{ label: `Contour, ${said.levels}`, symbol: line(0.13) }];
  if (indexed && said.index !== null) rows.push({ label: `Index contour, ${said.index}`, symbol: line(0.35) });
  if (input.points?.length) {
    rows.push({
      label: (options.labelPoints ? "Survey point, with its reading" : "Survey point") +
        (input.pointsTotal ? ` (${input.points.length.toLocaleString("en")} of ${input.pointsTotal.toLocaleString("en")}, spread evenly)` : ""),
      symbol: (x, y) => pointMarker(x, y, (residualColour ? 0.7 : 0.45) * u, residualColour ? "#f7f7f7" : INK, u),
    });
    if (input.points.some((q) => q.flagged)) {
      rows.push({ label: "Possible blunder (leave-one-out test)", symbol: (x, y) => pointMarker(x, y, 0.45 * u, INK, u) + blunderMarker(x, y, u) });
    }
  }
  if (input.outline?.length) {
    rows.push({ label: input.outlineLabel ?? "Data outline", symbol: line(0.25, `${n(1.6 * u, 3)} ${n(0.9 * u, 3)}`) });
  }
  if (input.breaklines?.length) {
    rows.push({ label: "Breakline (the surface is fitted on each side)", symbol: line(0.5, `${n(3 * u, 3)} ${n(0.6 * u, 3)} ${n(0.4 * u, 3)} ${n(0.6 * u, 3)}`) });
  }
  return rows;
}
