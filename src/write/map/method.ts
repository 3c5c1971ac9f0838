// Plain-language facts about a fitted model for map title blocks and the report, read through small
// accessors so a renamed model field changes one line here.
import type { RankedCandidate, SurfaceModel } from "../../model/model.ts";
import { KERNEL_TABLE } from "../../fit/kernels.ts";
import { formatSignificant, perUnitText } from "../../text.ts";

/** The model's polynomial trend (called "drift" in earlier versions). */
export function trendOf(model: SurfaceModel): string {
  return model.trend;
}

/** A ranked candidate's trend. */
export function candidateTrendOf(c: RankedCandidate): string {
  return c.trend;
}

/** The stretch (geometric anisotropy) as text, or "none". */
export function stretchText(model: SurfaceModel): string {
  const s = model.stretch;
  return s ? `${formatSignificant(s.factor)}× slower along azimuth ${formatSignificant(s.azimuth)}° than across` : "none";
}

/** Leave-one-out residual of point i, or null where it is undefined. */
export function looOf(model: SurfaceModel, i: number): number | null {
  const v = model.loo[i] as number | null;
  return v === null || !Number.isFinite(v) ? null : v;
}

/** "in log units" for log fits (σ, GCV and residuals are then in log units), else the unit given. */
export function residualUnit(model: SurfaceModel, unit: string): string {
  return model.transform === "log" ? "log units" : unit;
}

/**
 * The smoothing: one λ for the global method; for the local one, each patch's own (by GCV: its range
 * and median over the patches, the model's λ being that median).
 */
function smoothingText(model: SurfaceModel): string {
  const d = model.diagnostics;
  const how = d.smoothingChoice === "gcv" ? "by GCV" : "given";
  const local = d.local;
  if (model.method !== "local" || !local || d.smoothingChoice !== "gcv") return `smoothing λ = ${formatSignificant(model.lambda)} (${how})`;
  const l = local.lambda;
  return `smoothing λ by GCV in each of ${local.patches.toLocaleString("en")} patches (${formatSignificant(l.min)} to ${formatSignificant(l.max)}, median ${formatSignificant(l.median)})`;
}

/** One paragraph: kernel, trend, shape, λ, edf, leave-one-out RMSE, how the model was chosen. */
export function methodSummary(model: SurfaceModel, unit = ""): string {
  const d = model.diagnostics;
  const kernel = KERNEL_TABLE[model.kernel]?.text ?? model.kernel;
  const ru = residualUnit(model, unit);
  const parts = [
    `Radial-basis-function regression: ${kernel} with ${trendOf(model)} trend`,
    model.shape === null ? "" : `shape ε = ${formatSignificant(model.shape)} ${perUnitText(model.crs)}`,
    smoothingText(model),
    `${formatSignificant(d.edf)} effective degrees of freedom from ${d.n.toLocaleString("en")} points`,
    `leave-one-out RMSE ${formatSignificant(d.loocvRmse, 3)}${ru ? ` ${ru}` : ""}`,
  ].filter((p) => p !== "");
  let text = parts.join("; ") + ".";
  if (d.selection) text += ` Chosen from ${d.selection.ranking.length} candidate models by ${d.selection.by === "gcv" ? "GCV" : "leave-one-out error"}.`;
  if (model.transform === "log") text += " Fitted to ln z and back-transformed.";
  return text;
}
