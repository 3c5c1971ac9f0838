// Building a map's input from what the pipeline has: a fitted model and its grid, or a grid alone.
import type { SurfaceModel } from "../../model/model.ts";
import { crsText, metresPerMapUnit, unitText } from "../../text.ts";
import type { Crs, GridValues } from "../../types.ts";
import { contourLines } from "../contours.ts";
import { indexTest, type LevelRule, levelsWithin } from "../levels.ts";
import { finiteRange } from "./format.ts";
import { looOf, methodSummary } from "./method.ts";
import type { MapInput } from "./types.ts";
import { evenSample } from "./sample.ts";

/** "input lines 12, 40, 41" — at most 20, then how many more (residuals.csv lists them all). */
function blunderLines(lines: readonly number[]): string {
  const sorted = [...lines].sort((a, b) => a - b);
  const more = sorted.length - 20;
  return `input line${sorted.length === 1 ? "" : "s"} ${sorted.slice(0, 20).join(", ")}` + (more > 0 ? ` and ${more.toLocaleString("en")} more (residuals.csv lists them)` : "");
}

/** A grid with the rule's contour levels within its values and their contour lines. */
export function contoured(grid: GridValues, rule: LevelRule): Pick<MapInput, "grid" | "contours" | "levels" | "rule"> {
  const [lo, hi] = finiteRange(grid.values);
  const levels = levelsWithin(rule, lo, hi);
  return { grid, contours: contourLines(grid, levels, { index: indexTest(rule) }), levels, rule };
}

/** The map's coordinate unit from the CRS: its label and size, or "map units" and no print scale. */
export function mapUnitOf(crs: Crs): NonNullable<MapInput["mapUnit"]> {
  return { name: unitText(crs), metres: metresPerMapUnit(crs) };
}

/** Options for building a map input from a fitted model and its grid. */
export interface ModelMapOptions {
  /** Contour levels (intervalRule, listRule or chooseLevelRule in ../levels.ts). */
  rule: LevelRule;
  title?: string;
  date: string;
  unit?: string;
  /** Outline rings (e.g. a mask); default the model's convex hull. */
  outline?: [number, number][][];
  outlineLabel?: string;
}

/** Everything renderMap needs, from a model and a grid made from it (gridModel). */
export function mapInputFromModel(model: SurfaceModel, grid: GridValues, o: ModelMapOptions): MapInput {
  const flagged = new Set(model.diagnostics.flags.lines);
  const pts = model.points;
  // At most MAX_DRAWN_POINTS, spread evenly, every possible blunder among them.
  const shown = evenSample(pts.x, pts.y, (i) => flagged.has(pts.line[i]));
  return {
    ...contoured(grid, o.rule),
    points: shown.map((i) => ({ x: pts.x[i], y: pts.y[i], value: pts.z[i], flagged: flagged.has(pts.line[i]), residual: looOf(model, i) })),
    ...(shown.length < pts.x.length ? { pointsTotal: pts.x.length } : {}),
    outline: o.outline ?? [model.hull],
    outlineLabel: o.outlineLabel ?? (o.outline ? "Mask outline" : "Data outline (convex hull)"),
    ...(model.method === "local" && model.local.breaklines
      ? { breaklines: model.local.breaklines.lines.map((l) => l.x.map((x, k) => [x, l.y[k]] as [number, number])) }
      : {}),
    title: o.title ?? `${model.source.z} surface, ${model.source.file}`,
    dataFile: model.source.file,
    date: o.date,
    crs: crsText(model.crs),
    mapUnit: mapUnitOf(model.crs),
    unit: o.unit ?? "",
    valueName: model.source.z,
    method: methodSummary(model, o.unit ?? ""),
    notes: model.diagnostics.flags.lines.length
      ? [`Possible blunders (ringed): ${blunderLines(model.diagnostics.flags.lines)}. Check them in the field book.`]
      : [],
  };
}

/** A map input for a grid without its model (no points, no method): e.g. `map surface.tif`. */
export function mapInputFromGrid(
  grid: GridValues,
  o: { rule: LevelRule; title: string; dataFile: string; date: string; unit?: string; valueName?: string },
): MapInput {
  return {
    ...contoured(grid, o.rule),
    title: o.title,
    dataFile: o.dataFile,
    date: o.date,
    crs: crsText(grid.crs),
    mapUnit: mapUnitOf(grid.crs),
    unit: o.unit ?? "",
    valueName: o.valueName,
    method: "",
  };
}
