// The files of a run, in one list: each output has its file name, a label for people and a render
// function over the products of the run. `run`, its --help, the summary's file list and the tests
// all read this list; a new output (a map, a report) is one more entry.
import { type SurfaceModel } from "../model/model.ts";
import type { GridValues, PointTable } from "../types.ts";
import { type MapInput, renderMap } from "./map.ts";
import { mapToPdf } from "./map/print.ts";
import { renderReport, type ReportInput } from "./report.ts";
import { bandText, encodeGeoTiff } from "./geotiff.ts";
import { type DuplicateGroup, duplicatesCsv, type SkippedEntry, skippedCsv } from "./tables.ts";
import type { FileData } from "./atomic.ts";
import { estimatesCsvPieces } from "./csv.ts";
import { residualsCsvPieces } from "./residuals.ts";

/** Everything a run has computed, which the outputs render. */
export interface RunProducts {
  model: SurfaceModel;
  /** The model as written (encodeModel): its JSON text and, for a local model, its binary part. */
  modelFiles: { json: string; binary: Uint8Array | null };
  grid: GridValues;
  stderrGrid: GridValues;
  contours: string;
  bands: string;
  /** The locations table and the columns added to it. */
  estimates: { table: PointTable; columns: { name: string; values: Float64Array | number[] | string[]; digits?: number }[] };
  summary: string;
  /** Every skipped input row, and every group of coincident points merged. */
  input: { skipped: SkippedEntry[]; duplicates: DuplicateGroup[] };
  /** The map's input (surface, contours, points, title block) and the report's extra parts. */
  map: MapInput;
  report: Omit<ReportInput, "model" | "map">;
  /** The run's date (YYYY-MM-DD), printed on the map and the report and stamped in the PDF. */
  date: string;
}

export interface OutputWriter {
  /** Key in the run's file list (and in --json). */
  key: string;
  /** File name inside the output folder. */
  file: string;
  /** Label in the summary's file list. */
  label: string;
  /** Written only by some runs (render gives null otherwise): the model's binary part, for local models. */
  optional?: true;
  render(p: RunProducts): FileData | null | Promise<Uint8Array>;
}

/** The printed map of a run: A4 landscape, colour relief with hillshade, fitted to the page. */
export const RUN_MAP_OPTIONS = { paper: "A4", orientation: "landscape", relief: true, labelPoints: false } as const;

export const RUN_OUTPUTS: readonly OutputWriter[] = [
  { key: "model", file: "model.rbfield.json", label: "model", render: (p) => p.modelFiles.json },
  // The arrays of a local model (model/binary.ts): the file name is sidecarPath of the model's.
  { key: "modelData", file: "model.rbfield.bin", label: "model data", optional: true, render: (p) => p.modelFiles.binary },
  { key: "surface", file: "surface.tif", label: "grid", render: (p) => encodeGeoTiff(p.grid, { band: bandText(p.model.source.z, "values") }) },
  { key: "stderr", file: "stderr.tif", label: "std error", render: (p) => encodeGeoTiff(p.stderrGrid, { band: bandText(p.model.source.z, "standard errors") }) },
  { key: "contours", file: "contours.geojson", label: "contours", render: (p) => p.contours },
  { key: "bands", file: "bands.geojson", label: "bands", render: (p) => p.bands },
  { key: "estimates", file: "estimates.csv", label: "estimates", render: (p) => estimatesCsvPieces(p.estimates.table, p.estimates.columns) },
  { key: "residuals", file: "residuals.csv", label: "residuals", render: (p) => residualsCsvPieces(p.model) },
  { key: "skipped", file: "skipped.csv", label: "skipped", render: (p) => skippedCsv(p.input.skipped) },
  { key: "duplicates", file: "duplicates.csv", label: "duplicates", render: (p) => duplicatesCsv(p.input.duplicates) },
  { key: "map", file: "map.pdf", label: "map", render: (p) => mapToPdf(renderMap(p.map, RUN_MAP_OPTIONS), { creationDate: new Date(`${p.date}T00:00:00Z`) }) },
  { key: "report", file: "report.html", label: "report", render: (p) => renderReport({ model: p.model, map: p.map, ...p.report }) },
  // Not "summary.txt": GDAL reads a file of that name beside a GeoTIFF as satellite (ALOS) metadata.
  { key: "summary", file: "run-summary.txt", label: "summary", render: (p) => p.summary },
];

/** The summary's list of files: "Files:" and one line per output written, label padded to a column. */
export function fileListLines(files: Record<string, string>): string[] {
  return ["Files:", ...RUN_OUTPUTS.filter((o) => o.key in files).map((o) => `  ${o.label.padEnd(11)}${files[o.key]}`)];
}

/** The output file names joined for help texts: "a, b, … and z", in lines of at most `width` characters. */
export function outputNamesText(width = 100): string {
  const names = RUN_OUTPUTS.map((o) => (o.optional ? `${o.file} (local models)` : o.file));
  const words = `${names.slice(0, -1).join(", ")} and ${names.at(-1)}`.split(" ");
  const lines = [""];
  for (const w of words) {
    const last = lines.length - 1;
    if (lines[last] && lines[last].length + 1 + w.length > width) lines.push(w);
    else lines[last] = lines[last] ? `${lines[last]} ${w}` : w;
  }
  return lines.join("\n");
}
