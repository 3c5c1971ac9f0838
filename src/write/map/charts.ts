// Small SVG charts for the report: the GCV curve, a histogram and a scatter plot. Scales and their
// round tick values come from d3-scale; axes and marks are drawn here. Every text goes through
// escapeXml. Sizes are CSS pixels in a viewBox, so charts scale with the page.
import { scaleLinear, scaleLog } from "d3-scale";
import { decimalsOf, formatFixed, formatSignificant } from "../../text.ts";
import { INK, MUTED } from "./furniture.ts";
import { paletteHex } from "./palette.ts";
import { el, escapeXml, n } from "./svg.ts";
import { FONT_STACK } from "./text.ts";

const W = 640, H = 340;
const M = { left: 64, right: 16, top: 16, bottom: 48 };
const FLAG = "#c51b7d";

interface Scale {
  (v: number): number;
  ticks(count?: number): number[];
  domain(): number[];
}

function frame(id: string, label: string, body: string): string {
  return `<svg id="${escapeXml(id)}" class="chart" xmlns="http://www.w3.org/2000/svg" viewBox="0 0 ${W} ${H}" role="img" ` +
    `aria-label="${escapeXml(label)}" font-family="${escapeXml(FONT_STACK)}" font-size="12">${el("title", {}, escapeXml(label))}${body}</svg>`;
}

const SUPERSCRIPT = "⁰¹²³⁴⁵⁶⁷⁸⁹";

/** 10^k as "10⁻⁶" for |k| ≥ 4, else as the plain number ("0.001", "1000"). */
function powerOfTen(v: number): string {
  const k = Math.round(Math.log10(v));
  if (Math.abs(k) < 4) return formatSignificant(Number(`1e${k}`), 1);
  return "10" + (k < 0 ? "⁻" : "") + [...String(Math.abs(k))].map((c) => SUPERSCRIPT[Number(c)]).join("");
}

/** Tick text: a fixed number of decimals from the tick step, or powers of ten on log axes. */
function tickText(values: number[], log: boolean): (v: number) => string {
  if (log) return powerOfTen;
  const step = values.length > 1 ? Math.abs(values[1] - values[0]) : 1;
  const d = decimalsOf(Number(step.toPrecision(6)));
  return (v) => formatFixed(v, d);
}

function axes(x: Scale, y: Scale, xLabel: string, yLabel: string, xLog = false, yLog = false): string {
  const x0 = M.left, x1 = W - M.right, y0 = H - M.bottom, y1 = M.top;
  let out = el("path", { d: `M${x0} ${y1}V${y0}H${x1}`, fill: "none", stroke: INK, "stroke-width": 1 });
  const xt = xLog ? logTicks(x) : x.ticks(6), yt = yLog ? logTicks(y) : y.ticks(5);
  const fx = tickText(xt, xLog), fy = tickText(yt, yLog);
  for (const v of xt) {
    const px = x(v);
    out += el("path", { d: `M${n(px)} ${y0}v5`, stroke: INK }) + el("text", { x: px, y: y0 + 18, "text-anchor": "middle", fill: INK }, escapeXml(fx(v)));
  }
  for (const v of yt) {
    const py = y(v);
    out += el("path", { d: `M${x0} ${n(py)}h-5`, stroke: INK }) +
      el("path", { d: `M${x0} ${n(py)}H${x1}`, stroke: "#dddddd" }) +
      el("text", { x: x0 - 8, y: py + 4, "text-anchor": "end", fill: INK }, escapeXml(fy(v)));
  }
  out += el("text", { x: (x0 + x1) / 2, y: H - 10, "text-anchor": "middle", fill: INK }, escapeXml(xLabel));
  out += el("text", { x: 14, y: (y0 + y1) / 2, "text-anchor": "middle", fill: INK, transform: `rotate(-90 14 ${n((y0 + y1) / 2)})` }, escapeXml(yLabel));
  return out;
}

/** Powers of ten within a log scale's domain (at most about eight, thinned evenly). */
function logTicks(s: Scale): number[] {
  const [a, b] = s.domain();
  const lo = Math.ceil(Math.log10(Math.min(a, b))), hi = Math.floor(Math.log10(Math.max(a, b)));
  const every = Math.max(1, Math.ceil((hi - lo + 1) / 8));
  const out: number[] = [];
  for (let k = lo; k <= hi; k += every) out.push(Number(`1e${k}`));
  return out;
}

/**
 * GCV score over λ (log axes where the values span more than a factor of 20), the chosen λ marked.
 */
export function gcvChart(curve: { lambda: number; gcv: number }[], chosen: { lambda: number; gcv: number }, unitsNote: string): string {
  const pts = curve.filter((c) => c.lambda > 0 && Number.isFinite(c.gcv) && c.gcv > 0).sort((a, b) => a.lambda - b.lambda);
  if (pts.length < 2) return "";
  const lambdas = pts.map((c) => c.lambda).concat(chosen.lambda > 0 ? [chosen.lambda] : []);
  const gcvs = pts.map((c) => c.gcv).concat([chosen.gcv]);
  const x = scaleLog().domain([Math.min(...lambdas), Math.max(...lambdas)]).range([M.left, W - M.right]) as unknown as Scale;
  const gLo = Math.min(...gcvs), gHi = Math.max(...gcvs);
  const yLog = gHi / gLo > 20;
  const y = (yLog ? scaleLog().domain([gLo, gHi]) : scaleLinear().domain([gLo, gHi]).nice()).range([H - M.bottom, M.top]) as unknown as Scale;
  const d = pts.map((c, i) => `${i ? "L" : "M"}${n(x(c.lambda))} ${n(y(c.gcv))}`).join("");
  let body = axes(x, y, "smoothing λ (log scale)", `GCV score${unitsNote}${yLog ? " (log scale)" : ""}`, true, yLog);
  body += el("path", { d, fill: "none", stroke: paletteHex("values", 0.15), "stroke-width": 2 });
  if (chosen.lambda > 0) {
    const cx = x(chosen.lambda), cy = y(chosen.gcv);
    body += `<g id="gcv-chosen">` + el("path", { d: `M${n(cx)} ${M.top}V${H - M.bottom}`, stroke: FLAG, "stroke-dasharray": "4 3" }) +
      el("circle", { cx, cy, r: 5, fill: FLAG }) +
      el("text", { x: cx + (cx > W / 2 ? -8 : 8), y: M.top + 14, "text-anchor": cx > W / 2 ? "end" : "start", fill: FLAG }, escapeXml(`chosen λ = ${formatSignificant(chosen.lambda)}`)) +
      `</g>`;
  }
  return frame("gcv-chart", "GCV score against the smoothing λ, chosen λ marked", body);
}

/**
 * Histogram of values in about 24 round bins over the median ± 6 robust standard deviations
 * (1.4826 · median absolute deviation), so one blunder does not squeeze the rest into two bars;
 * values beyond are counted in a note under the axis.
 */
export function histogramChart(values: number[], xLabel: string): string {
  const v = values.filter(Number.isFinite).sort((a, b) => a - b);
  if (v.length === 0) return "";
  const median = v[Math.floor((v.length - 1) / 2)];
  const mad = [...v].map((x) => Math.abs(x - median)).sort((a, b) => a - b)[Math.floor((v.length - 1) / 2)];
  const s = 1.4826 * mad;
  let lo = v[0], hi = v[v.length - 1];
  if (s > 0) {
    lo = Math.max(lo, median - 6 * s);
    hi = Math.min(hi, median + 6 * s);
  }
  if (lo === hi) {
    lo -= 1;
    hi += 1;
  }
  const edges = scaleLinear().domain([lo, hi]).nice(24).ticks(24);
  const width = edges[1] - edges[0];
  while (edges[0] > lo) edges.unshift(edges[0] - width);
  while (edges[edges.length - 1] < hi) edges.push(edges[edges.length - 1] + width);
  const counts = new Array(edges.length - 1).fill(0);
  let below = 0, above = 0;
  for (const value of v) {
    if (value < edges[0]) below++;
    else if (value > edges[edges.length - 1]) above++;
    else counts[Math.min(counts.length - 1, Math.floor((value - edges[0]) / width))]++;
  }
  const x = scaleLinear().domain([edges[0], edges[edges.length - 1]]).range([M.left, W - M.right]) as unknown as Scale;
  const y = scaleLinear().domain([0, Math.max(...counts)]).nice().range([H - M.bottom, M.top]) as unknown as Scale;
  const reach = Math.max(Math.abs(edges[0]), Math.abs(edges[edges.length - 1]));
  let body = axes(x, y, xLabel, "number of points");
  body += `<g id="histogram-bars">`;
  counts.forEach((c, i) => {
    if (c === 0) return;
    body += el("rect", {
      x: x(edges[i]) + 0.5,
      y: y(c),
      width: Math.max(0.5, x(edges[i + 1]) - x(edges[i]) - 1),
      height: y(0) - y(c),
      fill: paletteHex("residuals", 0.5 + (edges[i] + width / 2) / (2 * reach)),
      stroke: INK,
      "stroke-width": 0.5,
      "data-count": String(c),
    });
  });
  body += `</g>`;
  const beyond = [below ? `${below} below ${formatSignificant(edges[0], 3)}` : "", above ? `${above} above ${formatSignificant(edges[edges.length - 1], 3)}` : ""]
    .filter((t) => t).join(", ");
  if (beyond) body += el("text", { id: "histogram-beyond", x: W - M.right, y: M.top + 12, "text-anchor": "end", fill: FLAG }, escapeXml(`beyond the axis: ${beyond}`));
  return frame("residual-histogram", `Histogram of ${xLabel}`, body);
}

/** Scatter of y against x with the 1:1 line; flagged points ringed. */
export function scatterChart(points: { x: number; y: number; flagged: boolean }[], xLabel: string, yLabel: string): string {
  const p = points.filter((q) => Number.isFinite(q.x) && Number.isFinite(q.y));
  if (p.length === 0) return "";
  const all = p.flatMap((q) => [q.x, q.y]);
  const lo = Math.min(...all), hi = Math.max(...all);
  const domain = lo === hi ? [lo - 1, hi + 1] : [lo, hi];
  const x = scaleLinear().domain(domain).nice().range([M.left, W - M.right]) as unknown as Scale;
  const y = scaleLinear().domain(domain).nice().range([H - M.bottom, M.top]) as unknown as Scale;
  const [a, b] = x.domain();
  let body = axes(x, y, xLabel, yLabel);
  body += el("path", { d: `M${n(x(a))} ${n(y(a))}L${n(x(b))} ${n(y(b))}`, stroke: MUTED, "stroke-dasharray": "5 4" });
  body += `<g id="scatter-points" fill="${paletteHex("values", 0.15)}" fill-opacity="0.7">` +
    p.map((q) => el("circle", { cx: x(q.x), cy: y(q.y), r: 2.5 })).join("") + `</g>`;
  body += `<g id="scatter-flagged" fill="none" stroke="${FLAG}" stroke-width="2">` +
    p.filter((q) => q.flagged).map((q) => el("circle", { cx: x(q.x), cy: y(q.y), r: 7 })).join("") + `</g>`;
  return frame("loo-scatter", `${yLabel} against ${xLabel}`, body);
}
