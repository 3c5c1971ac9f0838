// Plain-text summary of a fit, for the CLI and the run folder. Strings from input files (column
// names, file names) are passed through printableText so control characters cannot reach a terminal.
import { CAUTION } from "../caution.ts";
import { printable } from "../errors.ts";
import type { SurfaceModel } from "../model/model.ts";
import { MIN_SELECTION_POINTS } from "../fit/select.ts";
import { KERNEL_TABLE } from "../fit/kernels.ts";
import { coordinateText, crsText, fmt, formatUncertainty, lengthText, perUnitText } from "../text.ts";
import type { Crs, GridSpec } from "../types.ts";
import { describeLevels, type LevelRule } from "./levels.ts";

export { fmt };

/** Replace control characters (terminal escapes, newlines) in text that came from an input. */
export const printableText = printable;

/**
 * "400 × 300 cells of 1 m, extent 512300, 5402100 to 512700, 5402400 (outer cell edges)": the
 * grid in words, edges rounded to a millionth of the cell, lengths in the CRS's unit.
 */
export function gridText(spec: GridSpec, crs: Crs): string {
  const c = (v: number) => coordinateText(v, spec.cell);
  return `${spec.cols} × ${spec.rows} cells of ${lengthText(spec.cell, crs)}, extent ${c(spec.xmin)}, ${c(spec.ymin)} to ${c(spec.xmax)}, ${c(spec.ymax)} (outer cell edges)`;
}

/**
 * How the contours were drawn, for summaries: "interval 0.5, 19 levels; index contours every 2.5",
 * "log-spaced at 1, 2 and 5 × 10ᵏ, 16 levels; …", "at 1, 10 and 100 as listed, 2 within the
 * surface's range; each an index contour".
 */
export function contourText(rule: LevelRule, levels: number): string {
  const said = describeLevels(rule, "", "-");
  const count = `${levels} ${levels === 1 ? "level" : "levels"}`;
  const how = rule.kind === "interval"
    ? `interval ${said.at.replace(/^every /, "")}, ${count}`
    : rule.kind === "log"
    ? `log-spaced ${said.at}, ${count}`
    : `${said.at} as listed, ${levels} within the surface's range`;
  return `${how}; ${said.index === null ? "each an index contour" : `index contours ${said.index}`}`;
}


/**
 * How people find a point: "point 1047 (code GS, line 52)" with a point id, "line 52 (code GS)" with a
 * code only, "line 52" otherwise (README "Points": the id and code columns).
 */
export function pointLabel(model: SurfaceModel, i: number): string {
  const texts = model.points.text ?? [];
  const text = (role: string) => {
    const t = texts.find((c) => c.role === role)?.values[i]?.trim();
    return t ? printableText(t).slice(0, 40) : undefined;
  };
  const id = text("id"), code = text("code"), line = `line ${model.points.line[i]}`;
  if (id !== undefined) return `point ${id} (${code !== undefined ? `code ${code}, ` : ""}${line})`;
  return code !== undefined ? `${line} (code ${code})` : line;
}

/**
 * Listed levels (thresholds, action levels) that readings cross but the surface does not reach:
 * smoothing lowers peaks and fills pits, so a reading above 50 can sit under a surface whose highest
 * value is 46 and the 50 contour is then missing from the map. One warning per such level, naming
 * the readings (up to five) beyond it. Only for listed levels: an interval's levels come from the
 * surface's own range.
 */
export function missedLevelWarnings(model: SurfaceModel, rule: LevelRule, surface: { lo: number; hi: number }): string[] {
  if (rule.kind !== "list" || !(surface.hi >= surface.lo)) return [];
  const z = model.points.z;
  const out: string[] = [];
  for (const level of rule.levels) {
    const above = level > surface.hi, below = level < surface.lo;
    if (!above && !below) continue;
    const beyond: number[] = [];
    for (let i = 0; i < z.length; i++) if (above ? z[i] >= level : z[i] <= level) beyond.push(i);
    if (beyond.length === 0) continue;
    beyond.sort((a, b) => (above ? z[b] - z[a] : z[a] - z[b]));
    const one = beyond.length === 1;
    const named = beyond.slice(0, 5).map((i) => `${pointLabel(model, i)}: ${fmt(z[i])}`).join("; ");
    out.push(
      `level ${fmt(level)} is ${above ? "above the surface's highest" : "below the surface's lowest"} value (${fmt(above ? surface.hi : surface.lo)}), ` +
        `but ${beyond.length} reading${one ? "" : "s"} ${above ? (one ? "reaches" : "reach") : one ? "falls to" : "fall to"} it (${named}${beyond.length > 5 ? "; …" : ""}): ` +
        `the surface smooths ${above ? "peaks" : "pits"}, so there is no ${fmt(level)} contour there; show these readings beside it`,
    );
  }
  return out;
}

/** pointLabel of the point at an input line (the flags and robust lists hold lines). */
function labelOfLine(model: SurfaceModel): (line: number) => string {
  const at = new Map(model.points.line.map((l, i) => [l, i]));
  return (line) => (at.has(line) ? pointLabel(model, at.get(line)!) : `line ${line}`);
}

/** The local method's patches in words (summary and report), or null for a global model. */
export function localPatchText(model: SurfaceModel): string | null {
  const l = model.diagnostics.local;
  if (!l) return null;
  return `${l.patches.toLocaleString("en")} patches of ${l.pointsPerPatch.min}–${l.pointsPerPatch.max} points (median ${fmt(l.pointsPerPatch.median)}) blended with Wendland weights; ` +
    `λ by GCV in each patch from ${fmt(l.lambda.min)} to ${fmt(l.lambda.max)}`;
}

/** A breakline model's lines and sides in words (summary and report), or null without breaklines. */
export function breaklineText(model: SurfaceModel): string | null {
  const bl = model.method === "local" ? model.local.breaklines : undefined;
  if (!bl) return null;
  const sidesOf = new Map<number, number>();
  for (const d of bl.parent) sidesOf.set(d, (sidesOf.get(d) ?? 0) + 1);
  const cut = [...sidesOf.values()].filter((c) => c > 1).length;
  const three = bl.lines.filter((l) => l.z).length;
  return `${bl.lines.length} (${three} 3-D, ${bl.lines.length - three} 2-D barriers); ${cut} of ${sidesOf.size} patch discs cut into sides, each side fitted on its own ` +
    `(3-D lines add ${bl.points.x.length} points along them, near-exact; on a 3-D line the surface is the line's linear interpolation)`;
}

/**
 * Lines describing the model and its diagnostics. `projectedFrom`: the CRS of the input's
 * coordinates when they were projected into the model's before fitting (the "Coordinates:" line
 * above says so), so the model's CRS reads as the result, not a contradiction.
 */
export function modelSummaryLines(model: SurfaceModel, projectedFrom?: string): string[] {
  const d = model.diagnostics;
  const lines: string[] = [];
  const src = model.source;
  lines.push(
    `Input: ${printableText(src.file)} (x = ${printableText(src.x)}, y = ${printableText(src.y)}, value = ${printableText(src.z)}); ` +
      `CRS ${crsText(model.crs)}${projectedFrom ? ` (projected from ${printableText(projectedFrom)})` : ""}`,
  );
  const sel = d.selection;
  if (sel) {
    const byText = sel.by === "gcv" ? "GCV score" : sel.by === "loocv" ? "leave-one-out RMSE" : "leave-one-out RMSE, simplest within one standard error of the best";
    lines.push(
      `Selection: ${sel.ranking.length} candidate models ranked by ${byText}` +
        (sel.onSubsample
          ? model.method === "local" && d.local?.consensus
            ? ` on ${d.local.consensus.samples} sample patches (${sel.onSubsample.toLocaleString("en")} patch members pooled${d.local.consensus.distinctPoints ? `, ${d.local.consensus.distinctPoints.toLocaleString("en")} distinct points` : ""})`
            : ` on a ${sel.onSubsample}-point subsample`
          : "") + " (best first):",
    );
    lines.push("  kernel                trend      shape ε     λ           edf      GCV         LOO RMSE ± SE         note");
    for (const c of sel.ranking) {
      const note = c.excluded ? `not eligible: ${c.excluded}` : c.heldAtFloor ? "λ held at the numerical floor" : "";
      const loo = `${fmt(c.loocvRmse)}${c.loocvSe === undefined ? "" : ` ± ${formatUncertainty(c.loocvSe)}`}`;
      lines.push(
        `${c.chosen ? "* " : "  "}${c.kernel.padEnd(22)}${c.trend.padEnd(11)}${(c.shape === null ? "—" : fmt(c.shape)).padEnd(12)}` +
          `${fmt(c.lambda).padEnd(12)}${fmt(c.edf).padEnd(9)}${fmt(c.gcv).padEnd(12)}${loo.padEnd(22)}${note}`.trimEnd(),
      );
    }
    const chosen = sel.ranking.find((c) => c.chosen);
    if (sel.decision === "parsimony" && chosen && sel.best) {
      lines.push(
        `  parsimony decided: ${chosen.kernel} with ${chosen.trend} trend is the simplest candidate within one standard error of the ` +
          `best leave-one-out error (${sel.best.kernel} with ${sel.best.trend} trend); --select loocv takes the raw minimum`,
      );
    } else if (sel.decision === "few-points" && chosen) {
      lines.push(
        `  with fewer than ${MIN_SELECTION_POINTS} points the leave-one-out errors differ mostly by chance, so the simplest candidate ` +
          `(${chosen.kernel} with ${chosen.trend} trend) was taken; name a kernel to use another`,
      );
    }
  }
  lines.push(`Model: ${KERNEL_TABLE[model.kernel].text}, ${model.trend} trend, ${d.n.toLocaleString("en")} points`);
  if (d.methodChoice) lines.push(`  ${d.methodChoice}`);
  if (d.local) {
    const l = d.local;
    lines.push(`  ${localPatchText(model)!} (the λ below is their median)`);
    if (l.lambdaByLeaveOneOut) {
      lines.push(`  ${l.lambdaByLeaveOneOut} patches had two GCV minima (near-coincident readings); their λ was taken where the leave-one-out error is smaller`);
    }
    lines.push("  blunder test: Pope's τ of each point in its nearest patch, at the survey-wide level (not iterated)");
  }
  const bl = model.method === "local" ? model.local.breaklines : undefined;
  if (bl) {
    lines.push(`  breaklines: ${breaklineText(model)!}`);
    if (bl.faces) lines.push(`  vertical faces: ${bl.faces} places where two 3-D lines share a position with different levels; each side keeps its own level`);
    if (bl.constant.length) lines.push(`  ${bl.constant.length} sides too small for the ${model.trend} trend were fitted as their mean level`);
    const shots = model.looStandardised.filter((t, i) => t === null && model.loo[i] === null).length;
    if (shots) lines.push(`  shots at a 3-D line's vertices (string shots) are represented by the line: no leave-one-out residual or blunder test for them`);
  }
  if (model.transform === "log") {
    lines.push("  values fitted as ln z; estimates back-transformed as exp(f + σ²/2) (lognormal bias correction); σ, GCV and residuals are in log units");
  }
  if (model.points.weight) lines.push("  weighted least squares with the given observation weights");
  if (model.stretch) {
    lines.push(`  stretched ${fmt(model.stretch.factor)}× along ${fmt(model.stretch.azimuth)}° (the surface varies that many times more slowly along that azimuth than across it)`);
  }
  const shape = model.shape === null ? "none (scale-free kernel)" : `ε = ${fmt(model.shape)} ${perUnitText(model.crs)} (${d.shapeChoice === "auto" ? "chosen by GCV" : "given"})`;
  lines.push(`  shape: ${shape}`);
  const how = d.smoothingChoice === "gcv" ? "chosen by GCV" : d.smoothingChoice === "given" ? "given" : "given, raised for stability";
  lines.push(`  smoothing λ = ${fmt(model.lambda)} (${how}); effective degrees of freedom ${fmt(d.edf)} of ${d.n.toLocaleString("en")}`);
  lines.push(
    `  GCV score ${fmt(d.gcv)}; leave-one-out RMSE ${fmt(d.loocvRmse)}; fit RMSE ${fmt(d.rmse)}; noise σ estimate ${fmt(d.sigma)}` +
      (d.sigma === 0 ? " (the surface passes through every reading, which it takes as exact)" : ""),
  );
  lines.push(`  condition estimate ${fmt(d.condition, 3)}`);
  const order = model.loo.map((_, i) => i).filter((i) => model.loo[i] !== null)
    .sort((a, b) => Math.abs(model.loo[b]) - Math.abs(model.loo[a])).slice(0, 3);
  if (order.length > 0) {
    lines.push(
      "  largest leave-one-out residuals: " +
        order.map((i) => `${pointLabel(model, i)}: ${model.loo[i] >= 0 ? "+" : ""}${fmt(model.loo[i], 3)}`).join("; "),
    );
  }
  lines.push(...blunderLines(model));
  for (const w of d.warnings) lines.push(`WARNING: ${w}`);
  return lines;
}

/** The whole plain-text summary, ending with the caution. */
export function summaryText(title: string, sections: string[][]): string {
  const out = [title, "=".repeat(title.length)];
  for (const s of sections) {
    if (s.length === 0) continue;
    out.push("", ...s);
  }
  out.push("", CAUTION, "");
  return out.join("\n");
}

/** What the blunder test found, and what to do about it. */
function blunderLines(model: SurfaceModel): string[] {
  const d = model.diagnostics;
  const f = d.flags;
  const lines: string[] = [];
  const label = labelOfLine(model);
  const named = (model.points.text ?? []).some((t) => t.role === "id" || t.role === "code");
  // With point ids or codes each point is its label, separated by semicolons; else line numbers.
  const list = (l: number[]) =>
    named
      ? `${l.slice(0, 10).map(label).join("; ")}${l.length > 10 ? `; … (${l.length} in all)` : ""}`
      : `lines ${l.slice(0, 10).join(", ")}${l.length > 10 ? `, … (${l.length} in all)` : ""}`;
  if (f.critical === null) return ["  no blunder test: too few points are left over after the trend for Pope's tau test"];
  const test = f.test === "tau"
    ? `Pope's tau test on studentised leave-one-out residuals, ${fmt(100 * f.level!)}% false-alarm rate for the whole survey, critical value ${fmt(f.critical, 3)}`
    : `|standardised leave-one-out residual| > ${fmt(f.critical)}`;
  if (f.lines.length) {
    lines.push(`  possible blunders (${test}): ${list(f.lines)}`);
    if (!d.robust) lines.push("  check them in the field book; --robust refits with blunders down-weighted");
  } else lines.push(`  no possible blunder (${test})`);
  if (d.robust) {
    lines.push(
      `  robust fit (Tukey's biweight, ${d.robust.passes} passes): ` +
        (d.robust.downweighted.length ? `down-weighted below 0.5: ${list(d.robust.downweighted)}` : "no point down-weighted below 0.5"),
    );
  }
  return lines;
}
