// The report: one self-contained HTML file a client or reviewer can open with no network. A strict
// Content-Security-Policy allows nothing but the page's own style block (by its SHA-256 hash) and
// data: images (the relief inside the maps); there are no scripts. Every string that came from an
// input (file and column names, CRS text, skipped-row reasons, warnings) is escaped.
import { createHash } from "node:crypto";
import { CAUTION } from "../caution.ts";
import { printable } from "../errors.ts";
import type { SurfaceModel } from "../model/model.ts";
import type { GridValues, MergedGroup, SkippedRow } from "../types.ts";
import { contoured, finiteRange, type MapInput, type MapOptions, renderMap } from "./map.ts";
import { gcvChart, histogramChart, scatterChart } from "./map/charts.ts";
import { crsText, formatFixed, formatSignificant, formatUncertainty, MINUS, perUnitText } from "../text.ts";
import { intervalRule } from "./levels.ts";
import { roundStepBelow } from "./map/format.ts";
import { candidateTrendOf, looOf, methodSummary, residualUnit, stretchText, trendOf } from "./map/method.ts";
import { escapeXml } from "./map/svg.ts";
import { evenSample } from "./map/sample.ts";
import { FONT_STACK } from "./map/text.ts";
import { KERNEL_TABLE } from "../fit/kernels.ts";
import { breaklineText, localPatchText } from "./summary.ts";

export interface ReportInput {
  model: SurfaceModel;
  /** The surface map's input (e.g. mapInputFromModel(model, grid, …)). */
  map: MapInput;
  /** Sheet for the maps; default A4 landscape with relief, points coloured by residual. */
  mapOptions?: Partial<MapOptions>;
  /** Standard-error grid (gridStandardError(model, grid).grid), on the surface grid's cells. */
  stderrGrid?: GridValues;
  /** The standard errors as drawn, when coarser than stderrGrid (job/run.ts: drawingView). */
  stderrDrawing?: GridValues;
  /** How the standard-error grid was computed (e.g. "computed every 3 cells and interpolated"). */
  stderrNote?: string;
  /** Rows the cleaning stage skipped or merged, with their input lines. */
  cleaning?: { rowsRead?: number; skipped: Pick<SkippedRow, "line" | "reason">[]; merged: Pick<MergedGroup, "lines" | "x" | "y" | "spread" | "value">[] };
  /** Warnings besides the model's own. */
  warnings?: string[];
  title: string;
  /** Date as printed (from the caller: output is byte-identical for the same inputs). */
  date: string;
  /** Unit of the values ("" when unknown). */
  unit?: string;
}

const STYLE = `
:root { color: #1a1a1a; background: #ffffff; font-family: ${FONT_STACK}; font-size: 15px; line-height: 1.45; }
body { max-width: 1100px; margin: 0 auto; padding: 1.5rem; }
h1 { font-size: 1.7rem; margin: 0 0 0.3rem; }
h2 { font-size: 1.25rem; margin: 2rem 0 0.6rem; border-bottom: 2px solid #1a1a1a; padding-bottom: 0.2rem; }
h3 { font-size: 1.05rem; margin: 1.2rem 0 0.4rem; }
.meta { color: #555555; margin: 0 0 1rem; }
.caution { background: #fff4d6; border: 1px solid #1a1a1a; padding: 0.7rem 1rem; font-weight: bold; }
nav ol { columns: 2; margin: 0.5rem 0 0; }
svg.sheet { width: 100%; height: auto; border: 1px solid #cccccc; display: block; }
svg.chart { width: 100%; max-width: 720px; height: auto; display: block; }
table { border-collapse: collapse; margin: 0.5rem 0; font-size: 0.92rem; }
th, td { border: 1px solid #cccccc; padding: 0.25rem 0.6rem; text-align: left; vertical-align: top; }
td.num, th.num { text-align: right; font-variant-numeric: tabular-nums; }
tr.chosen td { background: #eef6e8; font-weight: bold; }
.figures { display: grid; grid-template-columns: repeat(auto-fit, minmax(420px, 1fr)); gap: 1rem; }
.note { color: #555555; font-size: 0.9rem; }
ul.warnings li { margin: 0.2rem 0; }
@media print { body { max-width: none; padding: 0; } section { break-inside: avoid-page; } nav { display: none; } }
`;

const esc = escapeXml;
/** Most rows of the table of flagged points. */
const MAX_FLAGGED_ROWS = 500;
const sig = (v: number | null | undefined, d = 4) => (typeof v === "number" && Number.isFinite(v) ? formatSignificant(v, d) : "—");

function table(head: string[], rows: string[][], numeric: boolean[] = [], rowClass: (i: number) => string = () => ""): string {
  const cell = (tag: string, text: string, i: number) => `<${tag}${numeric[i] ? ` class="num"` : ""}>${text}</${tag}>`;
  return `<table><thead><tr>${head.map((h, i) => cell("th", esc(h), i)).join("")}</tr></thead><tbody>` +
    rows.map((r, ri) => {
      const cls = rowClass(ri);
      return `<tr${cls ? ` class="${cls}"` : ""}>${r.map((c, i) => cell("td", c, i)).join("")}</tr>`;
    }).join("") + `</tbody></table>`;
}

/** A map SVG for inlining in HTML: without its XML declaration, sized by the page's CSS. */
function inlineSheet(svg: string): string {
  return svg.replace(/^<\?xml[^>]*>\s*/, "").replace(/^<svg /, `<svg class="sheet" `);
}

/** Line numbers as text: "12, 40, 41" (at most 30, then a count). */
function lineList(lines: number[]): string {
  return lines.slice(0, 30).join(", ") + (lines.length > 30 ? `, … (${lines.length} in all)` : "");
}

export function renderReport(input: ReportInput): string {
  const { model } = input;
  const d = model.diagnostics;
  const unit = input.unit ?? input.map.unit ?? "";
  const ru = residualUnit(model, unit);
  const ruText = ru ? ` (${ru})` : "";
  const withUnit = (v: number, squared = false) => `${sig(v)}${ru ? (ru === "log units" ? ` ${squared ? "(log units)²" : "log units"}` : ` ${ru}${squared ? "²" : ""}`) : ""}`;
  const sheet: MapOptions = { paper: "A4", orientation: "landscape", relief: true, labelPoints: false, pointColour: "residual", ...input.mapOptions };
  const sections: { id: string; title: string; html: string }[] = [];

  sections.push({
    id: "map",
    title: "Surface map",
    html: `<p class="note">Colours show the surface; points are coloured by their leave-one-out residual (reading minus the surface fitted without that point).</p>` +
      inlineSheet(renderMap(input.map, { ...sheet, idPrefix: "map-" })),
  });

  if (input.stderrGrid) {
    const [lo, hi] = finiteRange(input.stderrGrid.values);
    // Few lines: the error dips at every reading, so close contours would only draw rings around points.
    const interval = hi > lo ? roundStepBelow((hi - lo) / 2) : 1;
    const seMap: MapInput = {
      ...input.map,
      // Drawn from stderrDrawing when given (the grid as a sheet shows it); the range above is the whole grid's.
      ...contoured(input.stderrDrawing ?? input.stderrGrid, intervalRule(interval)),
      reliefGrid: undefined,
      title: `Standard error of the estimate: ${input.map.title}`,
      valueName: "Standard error",
      method: "Model-based standard error of the surface estimate (kriging reading of the fit, noise σ from the GCV residuals). " +
        "It assumes the kernel, trend and independent errors are right; it is not a survey tolerance." +
        (input.stderrNote ? ` ${input.stderrNote}.` : ""),
    };
    sections.push({
      id: "standard-error",
      title: "Standard error of the estimate",
      html: `<p class="note">How far the surface may be from the true one under the model, from ${esc(formatUncertainty(lo, MINUS))} to ${esc(formatUncertainty(hi, MINUS))}${esc(unit ? ` ${unit}` : "")}. ` +
        `It grows away from the readings. A model-based figure, not a survey tolerance: a new reading would scatter by a further ${model.transform === "log" ? `factor of about exp(σ) = ${esc(sig(Math.exp(d.sigma), 3))} (σ = ${esc(withUnit(d.sigma))})` : `σ = ${esc(withUnit(d.sigma))}`}.</p>` +
        (hi >= lo ? inlineSheet(renderMap(seMap, { ...sheet, shade: false, pointColour: "plain", idPrefix: "se-" })) : "<p>No unmasked cells.</p>"),
    });
  }

  // ---- Model ----
  const kernelText = KERNEL_TABLE[model.kernel]?.text ?? model.kernel;
  const smoothing = d.smoothingChoice === "gcv" ? "chosen by GCV" : d.smoothingChoice === "given" ? "given" : "given, raised for numerical stability";
  const modelRows: [string, string][] = [
    ["Method", localPatchText(model) ? `local (partition of unity): ${localPatchText(model)}` : "global (one fit to every point)"],
    ...(breaklineText(model) ? [["Breaklines", breaklineText(model)!] as [string, string]] : []),
    ["Kernel", kernelText],
    ["Shape ε", model.shape === null ? "none (scale-free kernel)" : `${sig(model.shape)} ${perUnitText(model.crs)} (${d.shapeChoice === "auto" ? "chosen by GCV" : "given"})`],
    ["Trend", trendOf(model)],
    ["Smoothing λ", `${sig(model.lambda)} (${smoothing}${d.heldAtFloor ? "; held at the numerical floor" : ""})`],
    ["Effective degrees of freedom", `${sig(d.edf)} of ${d.n}`],
    ["GCV score", withUnit(d.gcv, true)],
    ["Leave-one-out RMSE", withUnit(d.loocvRmse)],
    ["Fit RMSE", withUnit(d.rmse)],
    ["Noise σ estimate", withUnit(d.sigma)],
    ["Condition estimate", sig(d.condition, 3)],
    ["Points used (n)", String(d.n)],
    ["Value transform", model.transform === "log" ? "ln z, back-transformed with the lognormal bias correction" : "none"],
    ["Weights", model.points.weight ? "observation weights (normalised to mean 1)" : "none"],
    ["Stretch (anisotropy)", stretchText(model)],
    ["Robust fit", d.robust ? `Tukey's biweight, ${d.robust.passes} passes${d.robust.downweighted.length ? `; down-weighted: lines ${lineList(d.robust.downweighted)}` : ""}` : "no"],
    ["Input", `${model.source.file} (x = ${model.source.x}, y = ${model.source.y}, value = ${model.source.z}); ${crsText(model.crs)}`],
  ];
  const cleaning = input.cleaning ?? model.cleaning;
  if (cleaning) {
    if (cleaning.rowsRead !== undefined) modelRows.push(["Rows read", String(cleaning.rowsRead)]);
    modelRows.push(["Rows skipped", cleaning.skipped.length ? `${cleaning.skipped.length}: line${cleaning.skipped.length === 1 ? "" : "s"} ${lineList(cleaning.skipped.map((s) => s.line))}` : "none"]);
    modelRows.push(["Coincident points merged", cleaning.merged.length ? `${cleaning.merged.length} group${cleaning.merged.length === 1 ? "" : "s"}: lines ${cleaning.merged.map((m) => m.lines.join(" + ")).slice(0, 30).join("; ")}` : "none"]);  } else {
    modelRows.push(["Rows skipped or merged", "not recorded in this model file (written before rbfield kept them): see skipped.csv and duplicates.csv of the run that fitted it"]);
  }
  sections.push({
    id: "model",
    title: "Model",
    html: `<p>${esc(methodSummary(model, unit))}</p>` + table(["Quantity", "Value"], modelRows.map(([k, v]) => [esc(k), esc(v)])),
  });

  // ---- Selection ----
  const chosen = { lambda: model.lambda, gcv: d.gcv };
  let selection = gcvChart(d.gcvCurve, chosen, ru ? (ru === "log units" ? " (log units²)" : ` (${ru}²)`) : "");
  if (!selection) {
    selection = localPatchText(model)
      ? `<p class="note">λ was chosen by GCV in each patch of the local method (from ${esc(sig(d.local!.lambda.min))} to ${esc(sig(d.local!.lambda.max))}): there is no single GCV curve.</p>`
      : `<p class="note">No GCV curve in the model (smoothing given).</p>`;
  }
  if (d.selection) {
    const by = d.selection.by === "gcv" ? "GCV score" : d.selection.by === "loocv" ? "leave-one-out RMSE" : "leave-one-out RMSE, simplest within one standard error of the best";
    selection += `<h3>Candidate models</h3><p class="note">Ranked by ${esc(by)}${d.selection.onSubsample ? (d.local?.consensus ? `, on ${d.local.consensus.samples} sample patches of the local method (${d.selection.onSubsample} patch members pooled${d.local.consensus.distinctPoints ? `, ${d.local.consensus.distinctPoints} distinct points; the standard errors allow for the overlap` : ""})` : `, on a ${d.selection.onSubsample}-point subsample`) : ""}; the chosen model is marked.</p>` +
      table(
        ["", "kernel", "trend", "shape ε", "λ", "edf", "GCV", `LOO RMSE${ruText}`, "± SE", "note"],
        d.selection.ranking.map((c) => [
          c.chosen ? "chosen" : "",
          esc(c.kernel),
          esc(candidateTrendOf(c)),
          esc(c.shape === null ? "—" : sig(c.shape)),
          esc(sig(c.lambda)),
          esc(sig(c.edf)),
          esc(sig(c.gcv)),
          esc(sig(c.loocvRmse)),
          esc(typeof c.loocvSe === "number" ? formatUncertainty(c.loocvSe, MINUS) : "—"),
          esc(c.excluded ? `not eligible: ${c.excluded}` : c.heldAtFloor ? "λ at the numerical floor" : ""),
        ]),
        [false, false, false, true, true, true, true, true, true, false],
        (i) => (d.selection!.ranking[i].chosen ? "chosen" : ""),
      );
  }
  sections.push({ id: "selection", title: "Choice of smoothing and model", html: selection });

  // ---- Residuals ----
  const flaggedLines = new Set(d.flags.lines);
  const pts = model.points;
  const loo = pts.x.map((_, i) => looOf(model, i));
  const read = (i: number) => (model.transform === "log" ? Math.log(pts.z[i]) : pts.z[i]);
  // The scatter draws at most MAX_DRAWN_POINTS, spread evenly over the site, every flagged point among them.
  const shown = evenSample(pts.x, pts.y, (i) => flaggedLines.has(pts.line[i]));
  const scatter = shown.map((i) => ({ x: loo[i] === null ? NaN : read(i) - loo[i]!, y: read(i), flagged: flaggedLines.has(pts.line[i]) }));
  const sampleNote = shown.length < pts.x.length
    ? ` The plot of readings shows ${shown.length.toLocaleString("en")} of the ${pts.x.length.toLocaleString("en")} points, spread evenly over the site; the histogram counts all.`
    : "";
  const axisUnit = model.transform === "log" ? " (ln)" : unit ? ` (${unit})` : "";
  sections.push({
    id: "residuals",
    title: "Leave-one-out residuals",
    html: `<p class="note">Each reading compared with the surface fitted without it (Rippa 1999). Possible blunders are ringed.${sampleNote}</p><div class="figures">` +
      histogramChart(loo.filter((v): v is number => v !== null), `leave-one-out residual${ruText}`) +
      scatterChart(scatter, `leave-one-out estimate${axisUnit}`, `reading${axisUnit}`) + `</div>`,
  });

  // ---- Flagged ----
  const f = d.flags;
  const test = f.critical === null
    ? "No blunder test: too few points are left over after the trend."
    : f.test === "tau"
    ? `Pope's tau test on studentised leave-one-out residuals, ${sig(100 * (f.level ?? 0), 3)}% false-alarm rate for the whole survey, critical value ${sig(f.critical, 3)}.`
    : `|standardised leave-one-out residual| above ${sig(f.critical, 3)}.`;
  const flaggedAll = pts.line.map((l, i) => (flaggedLines.has(l) ? i : -1)).filter((i) => i >= 0);
  // The table lists the first MAX_FLAGGED_ROWS; residuals.csv has every one.
  const flaggedIdx = flaggedAll.slice(0, MAX_FLAGGED_ROWS);
  const dx = (v: number) => esc(formatFixed(v, 3, "-"));
  // Point ids and codes, where the input had them: surveyors find shots by point number.
  const named = (pts.text ?? []).filter((t) => t.role === "id" || t.role === "code");
  sections.push({
    id: "flagged",
    title: "Possible blunders",
    html: `<p class="note">${esc(test)} Flagged points are kept in the fit: check them in the field book, correct or remove them, and refit.</p>` +
      (flaggedIdx.length
        ? table(
          ["input line", ...named.map((t) => (t.role === "id" ? "point" : "code")), "x", "y", "reading", "fitted", `leave-one-out residual${ruText}`, "τ"],
          flaggedIdx.map((i) => [
            String(pts.line[i]),
            ...named.map((t) => esc(printable(t.values[i]).slice(0, 40))),
            dx(pts.x[i]),
            dx(pts.y[i]),
            esc(sig(pts.z[i], 6)),
            esc(sig(model.fitted[i], 6)),
            esc(sig(loo[i], 3)),
            esc(sig(model.looStandardised[i], 3)),
          ]),
          [true, ...named.map(() => false), true, true, true, true, true, true],
        )
        : "<p>No point is flagged.</p>") +
      (flaggedAll.length > flaggedIdx.length ? `<p class="note">The first ${flaggedIdx.length} of ${flaggedAll.length.toLocaleString("en")} flagged points; residuals.csv lists them all.</p>` : ""),
  });

  // ---- Input rows ----
  if (cleaning && (cleaning.skipped.length || cleaning.merged.length)) {
    let html = "";
    if (cleaning.skipped.length) {
      html += `<h3>Skipped rows</h3>` + table(["input line", "reason"], cleaning.skipped.map((s) => [String(s.line), esc(s.reason)]), [true, false]);
    }
    if (cleaning.merged.length) {
      html += `<h3>Merged coincident points</h3>` + table(
        ["input lines", "x", "y", "values spread", "value kept"],
        cleaning.merged.map((m) => [esc(m.lines.join(", ")), dx(m.x), dx(m.y), esc(sig(m.spread, 3)), esc(sig(m.value, 6))]),
        [false, true, true, true, true],
      );
    }
    sections.push({ id: "input-rows", title: "Skipped and merged rows", html });
  }

  // ---- Warnings ----
  const warnings = [...d.warnings, ...(input.warnings ?? [])];
  sections.push({
    id: "warnings",
    title: "Warnings",
    html: warnings.length ? `<ul class="warnings">${warnings.map((w) => `<li>${esc(w)}</li>`).join("")}</ul>` : "<p>None.</p>",
  });

  const styleHash = createHash("sha256").update(STYLE, "utf8").digest("base64");
  const csp = `default-src 'none'; img-src data:; style-src 'sha256-${styleHash}'; base-uri 'none'; form-action 'none'`;
  return [
    `<!DOCTYPE html>`,
    `<html lang="en">`,
    `<head>`,
    `<meta charset="utf-8">`,
    `<meta http-equiv="Content-Security-Policy" content="${csp}">`,
    `<meta name="viewport" content="width=device-width, initial-scale=1">`,
    `<meta name="referrer" content="no-referrer">`,
    `<title>${esc(input.title)}</title>`,
    `<style>${STYLE}</style>`,
    `</head>`,
    `<body>`,
    `<header id="top"><h1>${esc(input.title)}</h1>`,
    `<p class="meta">Data: ${esc(model.source.file)} · ${esc(crsText(model.crs))} · ${esc(input.date)}</p>`,
    `<p class="caution" id="caution-top">${esc(CAUTION)}</p>`,
    `<nav><ol>${sections.map((s) => `<li><a href="#${s.id}">${esc(s.title)}</a></li>`).join("")}</ol></nav></header>`,
    `<main>`,
    ...sections.map((s) => `<section id="${s.id}"><h2>${esc(s.title)}</h2>${s.html}</section>`),
    `</main>`,
    `<footer><p class="caution" id="caution">${esc(CAUTION)}</p></footer>`,
    `</body>`,
    `</html>`,
    ``,
  ].join("\n");
}
