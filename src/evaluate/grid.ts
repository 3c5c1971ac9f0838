// Grid layout, masks and gridding. Cells are areas (PixelIsArea in OGC GeoTIFF 1.1 terms): the
// extent is the outer edge of the outer cells; cell centres sit half a cell inside.
import { ExitCode, opt, RbfieldError } from "../errors.ts";
import type { SurfaceModel } from "../model/model.ts";
import type { GridSpec, GridValues } from "../types.ts";
import { niceFloor } from "../numbers.ts";
import { coordinateText } from "../text.ts";
import { type Evaluator, makeEvaluator } from "./evaluate.ts";
import { type PolygonRings, polygonsBox } from "../read/mask.ts";

export { type PolygonRings, polygonsFromGeoJson } from "../read/mask.ts";

/** Grids with more cells than this are refused unless forced (100 M cells ≈ 400 MB as Float32). */
export const MAX_CELLS = 100_000_000;

/** Default cell: half the median point spacing, and at least 200 cells along the longer side. */
export function defaultCell(model: SurfaceModel): number {
  const { xmin, ymin, xmax, ymax } = model.extent;
  const side = Math.max(xmax - xmin, ymax - ymin) || 1;
  return niceFloor(Math.min(model.spacing / 2 || side / 200, side / 200));
}

/**
 * Cells along the longer side of a grid made only to be drawn — `map` or `report` from a model without
 * `cell` — about four per millimetre across a 250 mm map frame: finer cells cannot be seen on the
 * sheet and only cost time (a 200,000-point model's default grid has 12 million cells).
 */
export const DRAWING_CELLS = 1000;

/**
 * A grid as it is drawn (the run's map and report): unchanged up to DRAWING_CELLS cells along the
 * longer side; above, blocks of k × k cells (k = ⌈longer side / DRAWING_CELLS⌉; partial blocks at the
 * east and south edges) become one cell holding their mean, masked when any of them is. The block
 * mean of a surface's cell values is its value at the block's centre to second order, and the sheet
 * cannot show the difference; the grid files keep every cell.
 */
export function drawingView(grid: GridValues): GridValues {
  const { spec, values } = grid;
  const k = Math.ceil(Math.max(spec.cols, spec.rows) / DRAWING_CELLS);
  if (k <= 1) return grid;
  const cols = Math.ceil(spec.cols / k), rows = Math.ceil(spec.rows / k), cell = spec.cell * k;
  const sum = new Float64Array(cols * rows), count = new Float64Array(cols * rows);
  for (let r = 0; r < spec.rows; r++) {
    const o = Math.floor(r / k) * cols;
    for (let c = 0; c < spec.cols; c++) {
      const b = o + Math.floor(c / k);
      sum[b] += values[r * spec.cols + c];
      count[b]++;
    }
  }
  // NaN in any cell of a block makes its sum NaN: the block is masked.
  const out = Float64Array.from(sum, (s, b) => s / count[b]);
  return {
    spec: { xmin: spec.xmin, ymax: spec.ymax, xmax: spec.xmin + cols * cell, ymin: spec.ymax - rows * cell, cell, cols, rows },
    values: out,
    crs: grid.crs,
  };
}

/** The cell of a grid made only to be drawn: the default cell, or coarser so the longer side has about DRAWING_CELLS cells. */
export function drawingCell(model: SurfaceModel, options: GridLayoutOptions = {}): number {
  const cell = defaultCell(model);
  const spec = gridLayout(model, { ...options, cell });
  const side = Math.max(spec.xmax - spec.xmin, spec.ymax - spec.ymin);
  return Math.max(cell, niceFloor(side / DRAWING_CELLS));
}

export interface GridLayoutOptions {
  cell?: number;
  /** [xmin, ymin, xmax, ymax], outer edges of the outer cells. */
  extent?: [number, number, number, number];
  /** Allow grids above MAX_CELLS. */
  force?: boolean;
  /** "hull" (default), "none", or polygons to keep (in the model's CRS): their bounding box is the default extent. */
  mask?: "hull" | "none" | PolygonRings[];
  /** The file the mask polygons came from, named when the mask leaves no cell. */
  maskFile?: string;
}

/**
 * Grid layout. With an extent given, its north-west corner is kept and the east and south edges are
 * moved out to whole cells; without one, the data's bounding box (the mask polygons' bounding box
 * when there are mask polygons) is snapped outward to multiples of the cell size.
 */
export function gridLayout(model: SurfaceModel, options: GridLayoutOptions = {}): GridSpec {
  const cell = options.cell ?? defaultCell(model);
  if (!(cell > 0) || !Number.isFinite(cell)) throw new RbfieldError(`cell size must be a positive number, not ${cell}`, ExitCode.usage);
  let xmin: number, ymin: number, xmax: number, ymax: number;
  if (options.extent) {
    [xmin, ymin, xmax, ymax] = options.extent;
    if (!(xmax > xmin && ymax > ymin) || ![xmin, ymin, xmax, ymax].every(Number.isFinite)) {
      throw new RbfieldError("extent must be XMIN,YMIN,XMAX,YMAX with XMAX > XMIN and YMAX > YMIN", ExitCode.usage);
    }
    const e = model.extent;
    if (xmax < e.xmin || xmin > e.xmax || ymax < e.ymin || ymin > e.ymax) {
      throw new RbfieldError(
        `the extent ${xmin},${ymin},${xmax},${ymax} does not overlap the data (${e.xmin},${e.ymin},${e.xmax},${e.ymax}); ` +
          "check the coordinate order and the CRS",
        ExitCode.usage,
      );
    }
  } else {
    const e = Array.isArray(options.mask) ? polygonsBox(options.mask) : model.extent;
    if (![e?.xmin, e?.ymin, e?.xmax, e?.ymax].every((v) => typeof v === "number" && Number.isFinite(v))) {
      throw new RbfieldError("the model's data extent is missing or not finite numbers; the model file is damaged: refit the points", ExitCode.input);
    }
    xmin = Math.floor(e.xmin / cell) * cell;
    ymin = Math.floor(e.ymin / cell) * cell;
    xmax = Math.ceil(e.xmax / cell) * cell;
    ymax = Math.ceil(e.ymax / cell) * cell;
    if (xmax <= xmin) xmax = xmin + cell;
    if (ymax <= ymin) ymin = ymax - cell;
  }
  const cols = Math.max(1, Math.ceil((xmax - xmin) / cell - 1e-9));
  const rows = Math.max(1, Math.ceil((ymax - ymin) / cell - 1e-9));
  // A cell far smaller than the coordinates (e.g. 1e-320) makes the edges or the counts overflow.
  if (![xmin, ymin, xmax, ymax, cols, rows].every(Number.isFinite) || cols * rows > Number.MAX_SAFE_INTEGER) {
    throw new RbfieldError(
      `a cell of ${cell} map units gives a grid too large to count over this extent; choose a larger ${opt("cell")}`,
      ExitCode.usage,
    );
  }
  if (cols * rows > MAX_CELLS && !options.force) {
    throw new RbfieldError(
      `a ${cols} × ${rows} grid (${(cols * rows).toLocaleString("en")} cells) is larger than the ${MAX_CELLS.toLocaleString("en")}-cell limit; ` +
        `choose a larger ${opt("cell")} or pass ${opt("force")}`,
      ExitCode.usage,
    );
  }
  return { xmin, ymax, cols, rows, cell, xmax: xmin + cols * cell, ymin: ymax - rows * cell };
}

/**
 * Cells whose centre lies inside any of the polygons (even-odd rule within each polygon, union
 * across polygons), by scanline crossing (common practice; O(cells + edges·rows)).
 */
export function polygonMask(spec: GridSpec, polygons: PolygonRings[]): Uint8Array {
  return polygonMaskWindow(spec, polygons, { r0: 0, r1: spec.rows, c0: 0, c1: spec.cols });
}

/** Rows [r0, r1) and columns [c0, c1) of a grid: a tile, or the whole grid. */
export interface GridWindow {
  r0: number;
  r1: number;
  c0: number;
  c1: number;
}

/**
 * polygonMask for a window of the grid only (row-major over the window). The crossings are
 * computed from the whole grid's rows, so every cell gets the same answer as in the whole mask.
 */
export function polygonMaskWindow(spec: GridSpec, polygons: PolygonRings[], w: GridWindow): Uint8Array {
  const width = w.c1 - w.c0;
  const inside = new Uint8Array(width * (w.r1 - w.r0));
  const xs: number[] = [];
  for (let r = w.r0; r < w.r1; r++) {
    const yc = spec.ymax - (r + 0.5) * spec.cell;
    for (const poly of polygons) {
      xs.length = 0;
      for (const ring of poly) {
        for (let i = 0; i + 1 < ring.length; i++) {
          const [x1, y1] = ring[i];
          const [x2, y2] = ring[i + 1];
          // Half-open rule so a vertex on the scanline is counted once.
          if ((y1 <= yc && y2 > yc) || (y2 <= yc && y1 > yc)) xs.push(x1 + ((yc - y1) / (y2 - y1)) * (x2 - x1));
        }
      }
      xs.sort((a, b) => a - b);
      for (let k = 0; k + 1 < xs.length; k += 2) {
        // columns whose centre x lies in [xs[k], xs[k+1]), within the window
        const c0 = Math.max(w.c0, Math.ceil((xs[k] - spec.xmin) / spec.cell - 0.5));
        const c1 = Math.min(w.c1 - 1, Math.ceil((xs[k + 1] - spec.xmin) / spec.cell - 0.5) - 1);
        for (let c = c0; c <= c1; c++) inside[(r - w.r0) * width + c - w.c0] = 1;
      }
    }
  }
  return inside;
}

export interface GridOptions extends GridLayoutOptions {
  progress?: (message: string) => void;
}

/** Layout, mask and value array of a grid; checks the model's hull and the memory needed. */
export function startGrid(model: SurfaceModel, options: GridOptions = {}): { spec: GridSpec; values: Float64Array; mask: Uint8Array | undefined } {
  const spec = gridLayout(model, options);
  const maskOpt = options.mask ?? "hull";
  if (maskOpt === "hull" && !validRing(model.hull)) {
    throw new RbfieldError("the model's hull is not a ring of [x, y] numbers; the model file is damaged: refit the points", ExitCode.input);
  }
  try {
    const values = new Float64Array(spec.cols * spec.rows);
    const mask = maskOpt === "none" ? undefined : polygonMask(spec, maskOpt === "hull" ? [[model.hull]] : maskOpt);
    if (Array.isArray(maskOpt) && !mask!.includes(1)) {
      throw new RbfieldError(
        `the mask leaves no cell of the ${spec.cols} × ${spec.rows} grid (${coordinateText(spec.xmin, spec.cell)}, ${coordinateText(spec.ymin, spec.cell)} to ${coordinateText(spec.xmax, spec.cell)}, ${coordinateText(spec.ymax, spec.cell)}) unmasked: ` +
          `its polygons miss the grid or are smaller than a cell; check them, ${opt("extent")} and ${opt("cell")}`,
        ExitCode.input,
        options.maskFile ? { file: options.maskFile } : undefined,
      );
    }
    return { spec, values, mask };
  } catch (e) {
    if (!(e instanceof RangeError)) throw e;
    throw new RbfieldError(
      `not enough memory for a ${spec.cols} × ${spec.rows} grid; choose a larger ${opt("cell")} or a smaller ${opt("extent")}`,
      ExitCode.usage,
    );
  }
}

/** The surface at places (NaN where x or y is not a finite number); the same code in every thread. */
export function evaluatePlaces(ev: Evaluator, x: Float64Array, y: Float64Array): Float64Array {
  const values = new Float64Array(x.length);
  for (let i = 0; i < x.length; i++) values[i] = Number.isFinite(x[i]) && Number.isFinite(y[i]) ? ev.at(x[i], y[i]) : NaN;
  return values;
}

/**
 * Evaluate grid rows [rowStart, rowEnd) into `out` (row rowStart at out[0]); cells outside the mask
 * (given for the same rows) are NaN. Shared by gridModel and the worker threads.
 */
export function evaluateRows(
  ev: Evaluator,
  spec: GridSpec,
  rowStart: number,
  rowEnd: number,
  mask: Uint8Array | null | undefined,
  out: Float64Array,
  onRow?: (row: number) => void,
  cols: { c0: number; c1: number } = { c0: 0, c1: spec.cols },
): void {
  // Cell centres from the whole grid's origin, so a tile's cells are the whole grid's, bit for bit.
  const width = cols.c1 - cols.c0;
  for (let r = rowStart; r < rowEnd; r++) {
    const yc = spec.ymax - (r + 0.5) * spec.cell;
    for (let c = cols.c0; c < cols.c1; c++) {
      const k = (r - rowStart) * width + c - cols.c0;
      out[k] = mask && !mask[k] ? NaN : ev.at(spec.xmin + (c + 0.5) * spec.cell, yc);
    }
    onRow?.(r);
  }
}

/**
 * NaN marks masked cells only: an unmasked value that is not finite (a damaged model or an unstable
 * fit) is an error, reported at the first such cell in row order.
 */
export function checkFiniteCells(spec: GridSpec, values: Float64Array, mask: Uint8Array | null | undefined): void {
  for (let k = 0; k < values.length; k++) {
    if ((!mask || mask[k]) && !Number.isFinite(values[k])) {
      const r = Math.floor(k / spec.cols), c = k % spec.cols;
      throw new RbfieldError(
        `the surface is not a finite number (${values[k]}) at ${spec.xmin + (c + 0.5) * spec.cell}, ${spec.ymax - (r + 0.5) * spec.cell} ` +
          `(cell ${c + 1}, ${r + 1}); the model file may be damaged or the fit unstable: refit the points, with more smoothing if this persists`,
        ExitCode.numerical,
      );
    }
  }
}

/** Evaluate the model on a grid; masked cells are NaN. */
export function gridModel(model: SurfaceModel, options: GridOptions = {}): GridValues {
  const { spec, values, mask } = startGrid(model, options);
  let lastReport = Date.now();
  evaluateRows(makeEvaluator(model), spec, 0, spec.rows, mask, values, (r) => {
    if (options.progress && Date.now() - lastReport > 1000) {
      lastReport = Date.now();
      options.progress(`gridding: row ${r + 1} of ${spec.rows}`);
    }
  });
  checkFiniteCells(spec, values, mask);
  return { spec, values, crs: model.crs };
}

/** A closed ring: at least four [x, y] positions of finite numbers. */
export function validRing(ring: unknown): boolean {
  return Array.isArray(ring) && ring.length >= 4 &&
    ring.every((p) => Array.isArray(p) && p.length >= 2 && Number.isFinite(p[0]) && Number.isFinite(p[1]));
}
