// The printed map: one self-contained SVG sheet (paper millimetres as user units) with the colour
// relief and hillshade, contour lines with index contours labelled on the line, survey points and
// possible blunders, the data outline, coordinate ticks, scale bar, north arrow, legend, title block
// and the caution. PDF and PNG are made from the same SVG by ./map/print.ts.
//
// Hand-written here and in ./map/: layout, projection to paper, contour label placement and line
// gapping, hillshade, furniture. Libraries: d3-scale-chromatic (palettes), fast-png (the relief
// image), fontkit + DejaVu Sans (text measurement), flatbush (collision index).
import { CAUTION } from "../caution.ts";
import { ExitCode, RbfieldError } from "../errors.ts";
import { formatFixed, formatSignificant } from "../text.ts";
import { describeLevels, indexTest, levelText } from "./levels.ts";
import { finiteRange } from "./map/format.ts";
import {
  colourRamp,
  coordinateTicks,
  INK,
  keyValueRows,
  type MapFrame,
  MUTED,
  northArrow,
  paragraph,
  scaleBar,
  text,
  toPaper,
} from "./map/furniture.ts";
import { type ContourInput, placeContourLabels, type Xy } from "./map/labels.ts";
import { LIGHT, pngDataUri, reliefPng } from "./map/palette.ts";
import { pageSize, PAPER_MM, paperLabel, type PaperName, roundScaleAtLeast } from "./map/paper.ts";
import { drawPoints, pointLabels, residualDomain, symbolRows } from "./map/points.ts";
import { el, escapeXml, n, pathData } from "./map/svg.ts";
import { FONT_STACK, textWidth } from "./map/text.ts";
import type { MapInput, MapOptions } from "./map/types.ts";

export type { Orientation, PaperName } from "./map/paper.ts";
export type { MapInput, MapOptions, MapPoint } from "./map/types.ts";
export { contoured, mapInputFromGrid, mapInputFromModel, mapUnitOf, type ModelMapOptions } from "./map/inputs.ts";
export { methodSummary, trendOf } from "./map/method.ts";
export { finiteRange } from "./map/format.ts";

/** Text and line scale per paper: sheets viewed from further away get larger type. */
const PAPER_UNIT: Record<PaperName, number> = { A4: 1, letter: 1, A3: 1.2, tabloid: 1.2, A1: 1.6 };

/** Relief image resolution on paper (dots per inch) and its largest size in pixels. */
const RELIEF_DPI = 200;
const RELIEF_MAX_PIXELS = 8e6;

/** A block of the information panel: its height for a width, and its drawing. */
interface Block {
  height(width: number): number;
  draw(x: number, y: number, width: number): string;
}

export function renderMap(input: MapInput, options: MapOptions): string {
  if (!PAPER_MM[options.paper]) throw new RbfieldError(`unknown paper ${options.paper}; use A4, A3, A1, letter or tabloid`, ExitCode.usage);
  if (options.orientation !== "portrait" && options.orientation !== "landscape") {
    throw new RbfieldError(`unknown orientation ${options.orientation}; use portrait or landscape`, ExitCode.usage);
  }
  if (options.scale !== undefined && !(options.scale > 0 && Number.isFinite(options.scale))) {
    throw new RbfieldError(`the print scale must be a positive number (1:SCALE), not ${options.scale}`, ExitCode.usage);
  }
  const p = options.idPrefix ?? "";
  const u = PAPER_UNIT[options.paper];
  const page = pageSize(options.paper, options.orientation);
  const mapUnit = input.mapUnit ?? { name: "m", metres: 1 };
  const spec = input.grid.spec;
  const reliefGrid = input.reliefGrid ?? input.grid;
  const domain = finiteRange(reliefGrid.values);
  if (!(domain[1] >= domain[0])) throw new RbfieldError("the grid has no unmasked cells to map", ExitCode.input);
  // Log-spaced contours (values fitted as logarithms) get a colour scale in the logarithm too.
  const logColour = input.rule.kind === "log" && domain[0] > 0;
  const valueTitle = `${input.valueName ?? "Value"}${input.unit ? ` (${input.unit})` : ""}${logColour ? ", log scale" : ""}`;
  const residualColour = options.pointColour === "residual" && (input.points ?? []).some((q) => typeof q.residual === "number");
  const residualRange = residualColour ? residualDomain(input.points!) : 0;
  // Index contours (heavier, labelled) by the one definition the GeoJSON writer also uses.
  const isIndex = indexTest(input.rule);
  const indexed = input.levels.some(isIndex);
  const levelLabel = levelText(input.rule);

  // ---- Information panel blocks (sizes do not depend on the print scale) ----
  const pad = 2.5 * u;
  const titleSize = 4.2 * u;
  const said = describeLevels(input.rule, input.unit);
  const contourText = said.levels + (indexed && said.index ? `; index contours ${said.index}, labelled` : "; all labelled");
  const infoRows: [string, string][] = [
    ["Data", input.dataFile],
    ["Date", input.date],
    ["Coordinates", input.crs],
    ["Values", valueTitle],
    ["Contours", contourText],
  ];
  const titleBlock: Block = {
    height: (w) => paragraph(0, 0, w, input.title, { size: titleSize, bold: true }, 1.15).height + 1.5 * u + keyValueRows(0, 0, w, infoRows, u, p).height,
    draw: (x, y, w) => {
      const t = paragraph(x, y, w, input.title, { size: titleSize, bold: true, id: `${p}title` }, 1.15);
      return t.svg + keyValueRows(x, y + t.height + 1.5 * u, w, infoRows, u, p).svg;
    },
  };
  // The method paragraph, then each note as its own paragraph.
  const methodParts = [input.method, ...(input.notes ?? [])].filter((t) => t);
  const methodBlock: Block = {
    height: (w) => (methodParts.length ? 3.4 * u + methodParts.reduce((h, t) => h + paragraph(0, 0, w, t, { size: 2.1 * u }).height + u, 0) : 0),
    draw: (x, y, w) => {
      if (!methodParts.length) return "";
      let svg = text(x, y + 2.5 * u, input.method ? "Surface" : "Notes", { size: 2.5 * u, bold: true });
      let dy = 3.4 * u;
      methodParts.forEach((t, i) => {
        const part = paragraph(x, y + dy, w, t, { size: 2.1 * u, id: i === 0 && input.method ? `${p}method` : undefined });
        svg += part.svg;
        dy += part.height + u;
      });
      return svg;
    },
  };
  const cautionBlock: Block = {
    height: (w) => paragraph(0, 0, w - 2 * pad, CAUTION, { size: 2.1 * u, bold: true }).height + 2 * pad,
    draw: (x, y, w) => {
      const body = paragraph(x + pad, y + pad * 0.8, w - 2 * pad, CAUTION, { size: 2.1 * u, bold: true, id: `${p}caution` });
      return el("rect", { x, y, width: w, height: body.height + 2 * pad, fill: "#fff4d6", stroke: INK, "stroke-width": 0.3 * u }) + body.svg;
    },
  };
  const legendRows = symbolRows(input, options, u, indexed, residualColour);
  const legendBlock: Block = {
    height: (w) => legendHeight(w),
    draw: (x, y, w) => drawLegend(x, y, w),
  };
  const rampHeight = (w: number) => colourRamp(0, 0, w, [0, 1], "values", "", u, "").height;
  function legendHeight(w: number): number {
    let h = 0;
    if (options.relief) h += rampHeight(w) + (options.shade === false ? 0 : 3.2 * u);
    if (residualColour) h += rampHeight(w);
    return h + legendRows.length * 3.6 * u;
  }
  function drawLegend(x: number, y: number, w: number): string {
    let svg = "", dy = 0;
    if (options.relief) {
      const r = colourRamp(x, y, w, domain, "values", valueTitle, u, `${p}legend-values`, logColour);
      svg += r.svg;
      dy += r.height;
      if (options.shade !== false) {
        svg += text(x, y + dy + 1.8 * u, `Hillshade lit from azimuth ${LIGHT.azimuth}°, altitude ${LIGHT.altitude}°`, { size: 1.8 * u, fill: MUTED });
        dy += 3.2 * u;
      }
    }
    if (residualColour) {
      const title = `Points: leave-one-out residual${input.unit ? ` (${input.unit})` : ""}`;
      const r = colourRamp(x, y + dy, w, [-residualRange, residualRange], "residuals", title, u, `${p}legend-residuals`);
      svg += r.svg;
      dy += r.height;
    }
    for (const row of legendRows) {
      svg += row.symbol(x + 3 * u, y + dy + 1.6 * u) + text(x + 8 * u, y + dy + 2.3 * u, row.label, { size: 2 * u });
      dy += 3.6 * u;
    }
    return `<g id="${p}legend">${svg}</g>`;
  }
  // The scale block's drawing needs the frame and print scale, known only after the layout.
  const laid: { frame?: MapFrame; printScale: number | null } = { printScale: null };
  const scaleBlock: Block = {
    height: () => Math.max(8 * u + 4 * u, northArrow(0, 0, u, "").height),
    draw: (x, y, w) => {
      const f = laid.frame!;
      const printScale = laid.printScale;
      const arrow = northArrow(x + w - 3 * u, y, u, p);
      const scaleText = printScale === null
        ? `No print scale: ${mapUnit.name === "map units" ? "the CRS does not state its unit" : `coordinates in ${mapUnit.name}`}`
        : `Scale 1:${formatFixed(printScale, 0)} on ${paperLabel(options.paper)} ${options.orientation}`;
      const bar = scaleBar(x + 1 * u, y + 4.5 * u, Math.min(w - 12 * u, 60 * u), f.k, mapUnit.name, u, p);
      return text(x, y + 2.4 * u, scaleText, { size: 2.3 * u, bold: true, id: `${p}print-scale` }) + bar.svg + arrow.svg;
    },
  };

  // ---- Page layout ----
  const margin = 10 * u, gutter = 4 * u;
  const inner = { x: margin, y: margin, w: page.width - 2 * margin, h: page.height - 2 * margin };
  let panelRect: { x: number; y: number; w: number; h: number };
  let mapArea: { x: number; y: number; w: number; h: number };
  let columns: { x: number; w: number; blocks: Block[] }[];
  if (options.orientation === "landscape") {
    const pw = 80 * u;
    panelRect = { x: inner.x + inner.w - pw, y: inner.y, w: pw, h: inner.h };
    mapArea = { x: inner.x, y: inner.y, w: inner.w - pw - gutter, h: inner.h };
    columns = [{ x: panelRect.x + pad, w: pw - 2 * pad, blocks: [titleBlock, scaleBlock, legendBlock, methodBlock, cautionBlock] }];
  } else {
    const widths = [0.36, 0.3, 0.34].map((f) => f * inner.w);
    const xs = [inner.x, inner.x + widths[0], inner.x + widths[0] + widths[1]];
    columns = [
      { x: xs[0] + pad, w: widths[0] - 2 * pad, blocks: [titleBlock] },
      { x: xs[1] + pad, w: widths[1] - 2 * pad, blocks: [legendBlock, scaleBlock] },
      { x: xs[2] + pad, w: widths[2] - 2 * pad, blocks: [methodBlock, cautionBlock] },
    ];
    const ph = Math.max(...columns.map((c) => columnHeight(c))) + 2 * pad;
    panelRect = { x: inner.x, y: inner.y + inner.h - ph, w: inner.w, h: ph };
    mapArea = { x: inner.x, y: inner.y, w: inner.w, h: inner.h - ph - gutter };
  }
  function columnHeight(c: { w: number; blocks: Block[] }): number {
    return c.blocks.reduce((s, b) => s + b.height(c.w), 0) + (c.blocks.length - 1) * 2 * pad;
  }

  // ---- Map frame and print scale ----
  const band = { left: 7 * u, bottom: 10 * u, top: 3 * u, right: 3 * u };
  const fw = mapArea.w - band.left - band.right, fh = mapArea.h - band.top - band.bottom;
  if (!(fw > 20 && fh > 20)) {
    throw new RbfieldError(`the ${paperLabel(options.paper)} ${options.orientation} sheet leaves no room for the map; choose a larger paper`, ExitCode.usage);
  }
  const gw = spec.xmax - spec.xmin, gh = spec.ymax - spec.ymin;
  let k: number;
  if (mapUnit.metres !== null && mapUnit.metres > 0) {
    const printScale = options.scale ?? roundScaleAtLeast(1000 * mapUnit.metres * Math.max(gw / fw, gh / fh));
    laid.printScale = printScale;
    k = (1000 * mapUnit.metres) / printScale;
    if (gw * k > fw * (1 + 1e-9) || gh * k > fh * (1 + 1e-9)) {
      const fits = roundScaleAtLeast(1000 * mapUnit.metres * Math.max(gw / fw, gh / fh));
      throw new RbfieldError(
        `at 1:${printScale} the mapped area (${formatSignificant(gw)} × ${formatSignificant(gh)} ${mapUnit.name}) needs ` +
          `${formatFixed(gw * k, 0)} × ${formatFixed(gh * k, 0)} mm, more than the ${formatFixed(fw, 0)} × ${formatFixed(fh, 0)} mm map frame on ` +
          `${paperLabel(options.paper)} ${options.orientation}; choose a larger paper, the other orientation, or a scale of 1:${fits} or smaller`,
        ExitCode.usage,
      );
    }
  } else {
    if (options.scale !== undefined) {
      throw new RbfieldError(
        `a print scale (1:${formatSignificant(options.scale, 10, "-")}) needs the unit of the coordinates, which the CRS (${input.crs}) does not state; ` +
          "fit with a CRS that has one (an EPSG code, or local:m, local:ft, local:usft), or leave out the scale to fit the map to the sheet",
        ExitCode.usage,
      );
    }
    k = Math.min(fw / gw, fh / gh);
  }
  // The frame fills the space for the map (a tidy sheet); the mapped area sits at its centre.
  const fx = mapArea.x + band.left, fy = mapArea.y + band.top;
  const cx = (spec.xmin + spec.xmax) / 2, cy = (spec.ymin + spec.ymax) / 2;
  const f: MapFrame = { x: fx, y: fy, width: fw, height: fh, k, west: cx - fw / 2 / k, east: cx + fw / 2 / k, south: cy - fh / 2 / k, north: cy + fh / 2 / k };
  laid.frame = f;
  const P = (x: number, y: number): Xy => toPaper(f, x, y);

  // ---- Map body ----
  let body = "";
  if (options.relief) {
    const rs = reliefGrid.spec;
    const [x0, y0] = P(rs.xmin, rs.ymax), [x1, y1] = P(rs.xmax, rs.ymin);
    const dpmm = Math.min(RELIEF_DPI / 25.4, Math.sqrt(RELIEF_MAX_PIXELS / ((x1 - x0) * (y1 - y0))));
    const width = Math.max(1, Math.round((x1 - x0) * dpmm)), height = Math.max(1, Math.round((y1 - y0) * dpmm));
    const png = reliefPng(reliefGrid, { width, height, domain, log: logColour, palette: "values", shade: options.shade !== false });
    body += el("image", { id: `${p}relief`, x: x0, y: y0, width: x1 - x0, height: y1 - y0, preserveAspectRatio: "none", "xlink:href": pngDataUri(png) });
  }
  const ticks = coordinateTicks(f, `Grid coordinates: ${input.crs}; ${mapUnit.name === "m" ? "metres" : mapUnit.name}; grid north up`, u, p);
  body += ticks.crosses;

  // Contours in paper coordinates, thinned to points at least 0.08 mm apart.
  const contourInputs: ContourInput[] = [];
  const labelAll = !input.contours.features.some((c) => isIndex(c.properties.level));
  for (const feature of input.contours.features) {
    const level = feature.properties.level;
    const lines = feature.geometry.type === "LineString" ? [feature.geometry.coordinates] : feature.geometry.coordinates;
    contourInputs.push({
      level,
      text: levelLabel(level),
      pieces: lines.map((line) => thin(line.map(([x, y]) => P(x, y)), 0.08)),
      labelled: labelAll || isIndex(level),
    });
  }
  const points = input.points ?? [];
  const pointR = (residualColour ? 0.7 : 0.45) * u;
  const outlines = (input.outline ?? []).map((ring) => ring.map(([x, y]) => P(x, y)));
  const breaklines = (input.breaklines ?? []).map((line) => line.map(([x, y]) => P(x, y)));
  const labelSize = 2 * u;
  const placed = placeContourLabels(contourInputs, {
    lines: [...outlines, ...breaklines],
    points: points.map((q) => {
      const [x, y] = P(q.x, q.y);
      return { x, y, r: (q.flagged ? 1.5 * u : pointR) + 0.15 * u };
    }),
    frame: [f.x, f.y, f.x + f.width, f.y + f.height],
  }, { size: labelSize, width: (t) => textWidth(t, labelSize), spacing: 65 * u, gap: 0.5 * u });

  const minor: string[] = [], major: string[] = [];
  contourInputs.forEach((c, i) => {
    const d = placed.lines[i].filter((l) => l.length >= 2).map((l) => pathData(l)).join("");
    if (!d) return;
    const isMajor = isIndex(c.level);
    (isMajor ? major : minor).push(el("path", { d, "data-level": c.text.replace("\u2212", "-") }));
  });
  body += `<g id="${p}contours" fill="none" stroke="${INK}" stroke-width="${n(0.13 * u, 3)}" stroke-opacity="0.85" stroke-linejoin="round" stroke-linecap="round">${minor.join("")}</g>`;
  body += `<g id="${p}index-contours" fill="none" stroke="${INK}" stroke-width="${n(0.35 * u, 3)}" stroke-linejoin="round" stroke-linecap="round">${major.join("")}</g>`;
  if (outlines.length) {
    body += `<g id="${p}outline" fill="none" stroke="${INK}" stroke-width="${n(0.25 * u, 3)}" stroke-dasharray="${n(1.6 * u, 3)} ${n(0.9 * u, 3)}">` +
      outlines.map((r) => el("path", { d: pathData(r, true) })).join("") + `</g>`;
  }
  if (breaklines.length) {
    body += `<g id="${p}breaklines" fill="none" stroke="${INK}" stroke-width="${n(0.5 * u, 3)}" stroke-linejoin="round" stroke-linecap="round" stroke-dasharray="${n(3 * u, 3)} ${n(0.6 * u, 3)} ${n(0.4 * u, 3)} ${n(0.6 * u, 3)}">` +
      breaklines.map((l) => el("path", { d: pathData(l) })).join("") + `</g>`;
  }
  body += drawPoints(points, P, pointR, residualColour ? residualRange : 0, u, p);
  body += `<g id="${p}contour-labels" font-size="${n(labelSize, 3)}" text-anchor="middle" fill="${INK}">` +
    placed.labels.map((l) => {
      // Baseline 0.3645 em below the line: DejaVu Sans digits are 0.729 em tall, so they centre on it.
      const t = `translate(${n(l.box.cx, 3)} ${n(l.box.cy, 3)}) rotate(${n(l.degrees, 2)})`;
      return el("text", { x: 0, y: 0.3645 * labelSize, transform: t, "data-level": l.text.replace("\u2212", "-") }, escapeXml(l.text));
    }).join("") + `</g>`;
  if (options.labelPoints && points.length) {
    body += pointLabels(points, P, pointR, placed.labels.map((l) => l.box), f, u, p, input.rule);
  }

  // ---- Assemble ----
  let panel = el("rect", { x: panelRect.x, y: panelRect.y, width: panelRect.w, height: panelRect.h, fill: "#ffffff", stroke: INK, "stroke-width": 0.35 * u });
  for (const [ci, c] of columns.entries()) {
    let y = panelRect.y + pad;
    c.blocks.forEach((b, bi) => {
      // The caution sits at the foot of its column.
      if (b === cautionBlock) y = Math.max(y, panelRect.y + panelRect.h - pad - b.height(c.w));
      panel += b.draw(c.x, y, c.w);
      y += b.height(c.w) + 2 * pad;
      const last = bi === c.blocks.length - 1;
      if (!last && options.orientation === "landscape") {
        panel += el("path", { d: `M${n(panelRect.x, 3)} ${n(y - pad, 3)}h${n(panelRect.w, 3)}`, stroke: INK, "stroke-width": 0.15 * u });
      }
    });
    if (ci > 0) panel += el("path", { d: `M${n(c.x - pad, 3)} ${n(panelRect.y, 3)}v${n(panelRect.h, 3)}`, stroke: INK, "stroke-width": 0.15 * u });
  }
  const svg = [
    `<?xml version="1.0" encoding="UTF-8"?>`,
    `<svg xmlns="http://www.w3.org/2000/svg" xmlns:xlink="http://www.w3.org/1999/xlink" version="1.1" ` +
    `width="${n(page.width, 3)}mm" height="${n(page.height, 3)}mm" viewBox="0 0 ${n(page.width, 3)} ${n(page.height, 3)}" ` +
    `font-family="${escapeXml(FONT_STACK)}">`,
    el("title", {}, escapeXml(input.title)),
    `<defs><clipPath id="${p}frame-clip">${el("rect", { x: f.x, y: f.y, width: f.width, height: f.height })}</clipPath></defs>`,
    el("rect", { x: 0, y: 0, width: page.width, height: page.height, fill: "#ffffff" }),
    `<g id="${p}map" clip-path="url(#${p}frame-clip)">${body}</g>`,
    el("rect", { id: `${p}frame`, x: f.x, y: f.y, width: f.width, height: f.height, fill: "none", stroke: INK, "stroke-width": 0.35 * u }),
    ticks.outside,
    `<g id="${p}panel">${panel}</g>`,
    `</svg>`,
    ``,
  ];
  return svg.join("\n");
}

/** Drop points closer than `min` to the last kept one (the last point is always kept). */
function thin(line: Xy[], min: number): Xy[] {
  if (line.length <= 2) return line;
  const out: Xy[] = [line[0]];
  for (let i = 1; i < line.length - 1; i++) {
    const last = out[out.length - 1];
    if (Math.hypot(line[i][0] - last[0], line[i][1] - last[1]) >= min) out.push(line[i]);
  }
  out.push(line[line.length - 1]);
  return out;
}
