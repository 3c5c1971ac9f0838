// Shared types of the rbfield pipeline: read → clean → fit and select → evaluate → write.
// Every stage takes and returns these plain, typed records, so each module can be used alone.

/** Where a problem in an input sits; `line` and `column` are 1-based. */
export interface SourcePlace {
  file: string;
  line?: number;
  column?: number;
}

/** A coordinate reference system: an EPSG code, or a local site grid with no code. */
export interface Crs {
  /** EPSG code, e.g. 28355; undefined for a local site grid. */
  epsg?: number;
  /** Human text, e.g. "EPSG:28355" or "local site grid". */
  label: string;
}

/** Raw measured points as read from a file, before cleaning. */
export interface PointTable {
  file: string;
  /** Header names, in file order. */
  columns: string[];
  /** Raw cell text of every data row (same order as columns, missing cells as ""). */
  rows: string[][];
  /** 1-based line number in the file where each row starts. */
  lines: number[];
  /** Index (into columns) of the x, y and value columns chosen. */
  xColumn: number;
  yColumn: number;
  zColumn: number;
  /** How the x/y/z columns were picked: "named" (by option) or "detected" (by header name). */
  columnChoice: "named" | "detected";
  /** Delimiter used: ",", ";", "\t", "whitespace" or "geojson". */
  delimiter: string;
  /** True when numbers use a decimal comma (e.g. "12,5" in a semicolon file). */
  decimalComma: boolean;
  /** CRS declared inside the file, if any (GeoJSON "crs" member). */
  crs?: Crs;
}

/** A row that could not be used, with the reason. */
export interface SkippedRow {
  line: number;
  reason: string;
}

/** A set of coincident input points merged into one. */
export interface MergedGroup {
  x: number;
  y: number;
  /** Input line numbers merged. */
  lines: number[];
  /** Max minus min of the merged values. */
  spread: number;
  /** Mean value kept. */
  value: number;
}

/** Points ready to fit: finite coordinates and values, no coincident pairs. */
export interface CleanPoints {
  x: Float64Array;
  y: Float64Array;
  z: Float64Array;
  /** For each kept point, the first input line it came from. */
  lines: number[];
  skipped: SkippedRow[];
  merged: MergedGroup[];
  /** Number of data rows read before cleaning. */
  rowsRead: number;
}

export type KernelName = "thin-plate" | "gaussian" | "multiquadric" | "inverse-multiquadric";
export type TrendName = "none" | "constant" | "linear" | "quadratic";

/** A regular grid of cells; cells are areas (pixel-is-area), row 0 is the northern row. */
export interface GridSpec {
  xmin: number;
  ymin: number;
  xmax: number;
  ymax: number;
  cell: number;
  cols: number;
  rows: number;
}

/** Grid values in row-major order from the north-west cell; NaN marks masked cells. */
export interface GridValues {
  spec: GridSpec;
  values: Float64Array;
  crs: Crs;
}
