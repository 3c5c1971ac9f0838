// Building a map's input from what the pipeline has: a fitted model and its grid, or a grid alone.
import type { SurfaceModel } from "../../model/model.ts";
import type { GridValues } from "../../types.ts";
import { contourLevels, contourLines } from "../contours.ts";
import { finiteRange } from "./format.ts";
import { looOf, methodSummary } from "./method.ts";
import type { MapInput } from "./types.ts";

/** A grid with its contour levels (base + k·interval within its values) and contour lines. */
export function contoured(grid: GridValues, interval: number, base = 0): Pick<MapInput, "grid" | "contours" | "levels" | "interval"> {
  const [lo, hi] = finiteRange(grid.values);
  const levels = contourLevels(lo, hi, interval, base);
  return { grid, contours: contourLines(grid, levels), levels, interval };
}

/** Options for building a map input from a fitted model and its grid. */
export interface ModelMapOptions {
  interval: number;
  base?: number;
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
  return {
    ...contoured(grid, o.interval, o.base),
    points: pts.x.map((x, i) => ({ x, y: pts.y[i], value: pts.z[i], flagged: flagged.has(pts.line[i]), residual: looOf(model, i) })),
    outline: o.outline ?? [model.hull],
    outlineLabel: o.outlineLabel ?? (o.outline ? "Mask outline" : "Data outline (convex hull)"),
    title: o.title ?? `${model.source.z} surface, ${model.source.file}`,
    dataFile: model.source.file,
    date: o.date,
    crs: model.crs.label,
    unit: o.unit ?? "",
    valueName: model.source.z,
    method: methodSummary(model, o.unit ?? ""),
    notes: model.diagnostics.flags.lines.length
      ? [`Possible blunders (ringed): input lines ${[...model.diagnostics.flags.lines].sort((a, b) => a - b).join(", ")}. Check them in the field book.`]
      : [],
  };
}

/** A map input for a grid without its model (no points, no method): e.g. `map surface.tif`. */
export function mapInputFromGrid(
  grid: GridValues,
  o: { interval: number; base?: number; title: string; dataFile: string; date: string; unit?: string; valueName?: string },
): MapInput {
  return {
    ...contoured(grid, o.interval, o.base),
    title: o.title,
    dataFile: o.dataFile,
    date: o.date,
    crs: grid.crs.label,
    unit: o.unit ?? "",
    valueName: o.valueName,
    method: "",
  };
}
