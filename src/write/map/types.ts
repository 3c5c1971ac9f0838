// The records the map writer takes: what to draw (MapInput) and on what sheet (MapOptions).
import type { GridValues } from "../../types.ts";
import type { ContourLineCollection } from "../contours.ts";
import type { LevelRule } from "../levels.ts";
import type { Orientation, PaperName } from "./paper.ts";

export interface MapPoint {
  x: number;
  y: number;
  value: number;
  /** A possible blunder (leave-one-out test). */
  flagged: boolean;
  /** Leave-one-out residual (reading minus the surface fitted without it), for residual colouring. */
  residual?: number | null;
}

export interface MapInput {
  /** The surface the contours come from; its extent is the mapped area. */
  grid: GridValues;
  /** Contour lines as made by contourLines(grid, levels, { index: indexTest(rule) }). */
  contours: ContourLineCollection;
  levels: number[];
  /** How the levels were chosen: it decides the index contours (heavier, labelled) and the level texts. */
  rule: LevelRule;
  points?: MapPoint[];
  /** The number of survey points when `points` is a sample of them (evenSample in sample.ts). */
  pointsTotal?: number;
  /** Rings outlining the data (convex hull or mask), map coordinates. */
  outline?: [number, number][][];
  /** Legend text for the outline, e.g. "Data outline (convex hull)". */
  outlineLabel?: string;
  /** Breaklines the surface was fitted with (open polylines, map coordinates). */
  breaklines?: [number, number][][];
  title: string;
  dataFile: string;
  /** Date as printed (given by the caller, so output is byte-identical for the same inputs). */
  date: string;
  /** Coordinate reference system as printed (crsText), e.g. "EPSG:32632" or "local site grid (no EPSG code)". */
  crs: string;
  /** Unit of the values, e.g. "m" ("" when unknown). */
  unit: string;
  /** What the values are, e.g. the value column's name; default "Value". */
  valueName?: string;
  /** Method summary (kernel, trend, λ, edf, leave-one-out RMSE); "" for a grid without a model. */
  method: string;
  /** Short notes printed under the method (e.g. which input lines are possible blunders). */
  notes?: string[];
  /** Grid to colour instead of `grid` (same layout not required). */
  reliefGrid?: GridValues;
  /**
   * Unit of the coordinates; default metres. `metres: null` (a CRS that does not state its unit, or
   * degrees) means no print scale: the map is fitted to the sheet.
   */
  mapUnit?: { name: string; metres: number | null };
}

export interface MapOptions {
  paper: PaperName;
  orientation: Orientation;
  /** Print scale 1:scale; default the largest round scale that fits the page. */
  scale?: number;
  /** Colour relief (with hillshade unless shade is false); else plain lines. */
  relief: boolean;
  /** Label survey points with their values. */
  labelPoints: boolean;
  /** Hillshade under the colour relief (default true). */
  shade?: boolean;
  /** Colour survey points by their leave-one-out residual (diverging palette). */
  pointColour?: "plain" | "residual";
  /** Prefix for element ids, so several maps can share one HTML page. */
  idPrefix?: string;
}
