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
  /** Geographic (degrees), projected, or a local site grid (absent in older models: unknown). */
  kind?: "geographic" | "projected" | "local";
  /** Unit of x and y: "metre", "foot", "US survey foot", "degree", or null when not stated. */
  unit?: "metre" | "foot" | "US survey foot" | "degree" | null;
}

/** One column of a read table: numbers (NaN where a cell is not a number) or text carried through. */
export type TableColumn =
  | { name: string; kind: "number"; values: Float64Array }
  | { name: string; kind: "text"; values: string[] };

/**
 * How a chosen column was found: "named" (an option matched a column name), "position" (an option
 * gave its 1-based position), "detected" (a recognised header name), "first numeric" (the first
 * numeric column, for the value), "coordinate" (a GeoJSON Point's third coordinate), "none".
 */
export type ColumnFound = "named" | "position" | "detected" | "first numeric" | "coordinate" | "longitude" | "latitude" | "none";

/** A row that cannot be used as a point: its x, y or value is not a number. */
export interface UnusableRow extends SkippedRow {
  /** 0-based index of the row in the table. */
  row: number;
  /** 0-based index of the column whose cell is not a number. */
  column: number;
}

/**
 * Points as any reader returns them (src/read/): typed columns, the source line of each row, the
 * rows that cannot be used, the x, y and value columns chosen, and the CRS the file declares.
 */
export interface TypedTable {
  file: string;
  /** What was read: "csv", "semicolon", "tsv", "whitespace" or "geojson". */
  format: string;
  /** Column names in file order; "1", "2", … (1-based positions) when the file has no header row. */
  columns: string[];
  /** The columns' contents, in the same order. */
  data: TableColumn[];
  /** False when the first row was data, not names. */
  hasHeader: boolean;
  /** 1-based line (GeoJSON: line of the feature) where each row starts. */
  lines: number[];
  /** Rows whose x, y or value (when a value column is chosen) is not a number, in row order. */
  unusable: UnusableRow[];
  xColumn: number;
  yColumn: number;
  /** -1 when no value column was chosen (prediction locations). */
  zColumn: number;
  /** "named" when any of x, y, value was named by an option, else "detected". */
  columnChoice: "named" | "detected";
  /** How each of the x, y and value columns was found. */
  chosenBy: { x: ColumnFound; y: ColumnFound; z: ColumnFound };
  /** CRS declared inside the file, if any (GeoJSON "crs" member). */
  crs?: Crs;
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
  // The typed parts (TypedTable); the readers always fill them, hand-made tables may leave them out.
  format?: string;
  data?: TableColumn[];
  hasHeader?: boolean;
  unusable?: UnusableRow[];
  chosenBy?: TypedTable["chosenBy"];
}

/** What the text readers return: the typed table and every cell's text as read. */
export type TextTable = PointTable & TypedTable;

/** A row that could not be used, with the reason. */
export interface SkippedRow {
  line: number;
  reason: string;
  /** 0-based row of the table, where known. */
  row?: number;
  /** Why, when the row holds a reading on purpose left out: a non-detect (--non-detects omit) or a value qualified R (rejected). */
  cause?: "non-detect" | "rejected";
}

/**
 * How coincident points become one: the mean of their values (default), the largest, the smallest,
 * or the first in file order.
 */
export type DuplicateRule = "mean" | "max" | "min" | "first";

/** A set of coincident input points merged into one. */
export interface MergedGroup {
  x: number;
  y: number;
  /** Input line numbers merged, in file order. */
  lines: number[];
  /** Max minus min of the merged values. */
  spread: number;
  /** Value kept (by `rule`). */
  value: number;
  /** The value of each merged row, in the order of `lines`. */
  values: number[];
  /** The 0-based table row of each merged row, in the order of `lines`. */
  rows: number[];
  /** How the value was chosen. */
  rule: DuplicateRule;
  /** The kept point's line: the first for mean and first, the row whose value was kept for max and min. */
  line: number;
  /**
   * Relative percent difference: |a − b| / |mean| × 100 for a pair; (max − min) / |mean| × 100 (the
   * relative range) for three or more; null when the mean is 0.
   */
  rpd: number | null;
}

/** Points ready to fit: finite coordinates and values, no coincident pairs. */
export interface CleanPoints {
  x: Float64Array;
  y: Float64Array;
  z: Float64Array;
  /**
   * For each kept point, its input line: the first line of a merged group, or (duplicates max or
   * min) the line whose value was kept.
   */
  lines: number[];
  /** For each kept point, the 0-based table row of that line (absent in hand-made records). */
  rows?: number[];
  skipped: SkippedRow[];
  merged: MergedGroup[];
  /** Number of data rows read before cleaning. */
  rowsRead: number;
  /**
   * The table's text columns (point ids, codes), one value per kept point; a merged point keeps the
   * texts of the row of its line.
   */
  texts?: { name: string; values: string[] }[];
}

/**
 * A text column carried with the points into the model and residuals.csv: the point id, the
 * description code, the qualifier stripped from a laboratory value, the detection limit of a
 * non-detect, or another text column of the input; one string per point ("" where there is none).
 */
export interface PointText {
  name: string;
  role: "id" | "code" | "qualifier" | "detection limit" | "text";
  values: string[];
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
