// Grids in tiles: a tile of a grid computed from the part of the model that reaches it, and tiles
// put together again. The grid's layout (extent, cell, mask) is the whole grid's; tile (col, row)
// of size S holds the cells of rows [row·S, row·S + S) and columns [col·S, col·S + S), cut at the
// grid's edge. Every cell of a tile is the whole grid's cell, bit for bit:
//   - cell centres and mask crossings are computed from the whole grid's origin (evaluateRows,
//     polygonMaskWindow), never from the tile's own corner;
//   - a local model's tile is evaluated from the patches that can reach it (packForBox): the same
//     patch arrays, in the same (ascending) order, so each cell sums the same numbers in the same
//     order. The points those patches hold are the only points the tile needs (their positions in
//     the patches' frames and their weights are in the packed patches); a global model's tile needs
//     every point.
// So a grid assembled from tiles (assembleTiles) is byte-identical to the whole grid, which lets
// very large grids be computed as independent tile jobs (DEVELOPERS.md, "Tiles").
import { ExitCode, opt, RbfieldError } from "../errors.ts";
import type { SurfaceModel } from "../model/model.ts";
import type { GridSpec, GridValues } from "../types.ts";
import { type PackedSurface, packSurface } from "./evaluate.ts";
import { checkFiniteCells, gridLayout, type GridOptions, type GridWindow, MAX_CELLS, polygonMaskWindow, validRing } from "./grid.ts";
import { makeBlender, type PackedLocal, subsetPatches } from "./local.ts";
import { localErrorEstimatorPacked, localErrorWork, packLocalErrors, subsetLocalErrors } from "./local_stderr.ts";
import { evaluateWindow } from "./parallel.ts";
import { errorLattice, errorsAtNodes, fillWindow, makeErrorEstimator, nodesInWorkers, windowNodes } from "./stderr.ts";
import { workersAvailable } from "../workers.ts";
import { crc32Hex } from "../model/binary.ts";

/** Default tile side in cells. */
export const DEFAULT_TILE_SIZE = 1024;

/** Tiles along each side of a grid. */
export function tileCount(spec: GridSpec, size: number): { cols: number; rows: number } {
  return { cols: Math.ceil(spec.cols / size), rows: Math.ceil(spec.rows / size) };
}

/** The cells of tile (col, row) of size `size` (0-based, from the north-west corner). */
export function tileWindow(spec: GridSpec, col: number, row: number, size: number): GridWindow {
  if (!(Number.isInteger(size) && size >= 1)) throw new RbfieldError(`${opt("tileSize")} must be a whole number of cells ≥ 1, not ${size}`, ExitCode.usage);
  const count = tileCount(spec, size);
  if (!(Number.isInteger(col) && Number.isInteger(row) && col >= 0 && row >= 0 && col < count.cols && row < count.rows)) {
    throw new RbfieldError(
      `tile ${col},${row} is not in the grid: a ${spec.cols} × ${spec.rows} grid in tiles of ${size} cells has tiles 0…${count.cols - 1} across and ` +
        `0…${count.rows - 1} down; check ${opt("tile")} and ${opt("tileSize")}`,
      ExitCode.usage,
    );
  }
  return { r0: row * size, r1: Math.min(spec.rows, (row + 1) * size), c0: col * size, c1: Math.min(spec.cols, (col + 1) * size) };
}

/** The layout of a window as a grid of its own: its corner is the whole grid's corner moved by whole cells. */
export function windowSpec(spec: GridSpec, w: GridWindow): GridSpec {
  const xmin = spec.xmin + w.c0 * spec.cell, ymax = spec.ymax - w.r0 * spec.cell;
  const cols = w.c1 - w.c0, rows = w.r1 - w.r0;
  return { xmin, ymax, cols, rows, cell: spec.cell, xmax: xmin + cols * spec.cell, ymin: ymax - rows * spec.cell };
}

/** Map box of a window's cell centres, widened by `margin` cells on every side. */
export function windowBox(spec: GridSpec, w: GridWindow, margin = 0): { xmin: number; ymin: number; xmax: number; ymax: number } {
  return {
    xmin: spec.xmin + (w.c0 - margin + 0.5) * spec.cell,
    xmax: spec.xmin + (w.c1 - 1 + margin + 0.5) * spec.cell,
    ymax: spec.ymax - (w.r0 - margin + 0.5) * spec.cell,
    ymin: spec.ymax - (w.r1 - 1 + margin + 0.5) * spec.cell,
  };
}

/** Which patches of a packed local model can take part in the blend anywhere in a map box (ascending). */
export function patchesReaching(p: Pick<PackedLocal, "cu" | "cv" | "radius" | "scaling" | "stretch" | "coverage">, box: { xmin: number; ymin: number; xmax: number; ymax: number }): Int32Array {
  // The box in the global scaled frame: the bounding box of its mapped corners (the map is affine).
  const map = makeBlender({ ...p, cu: new Float64Array(0), cv: new Float64Array(0), radius: new Float64Array(0) }).map;
  const uv = new Float64Array(2);
  let u0 = Infinity, u1 = -Infinity, v0 = Infinity, v1 = -Infinity;
  for (const [x, y] of [[box.xmin, box.ymin], [box.xmin, box.ymax], [box.xmax, box.ymin], [box.xmax, box.ymax]]) {
    map(x, y, uv);
    u0 = Math.min(u0, uv[0]);
    u1 = Math.max(u1, uv[0]);
    v0 = Math.min(v0, uv[1]);
    v1 = Math.max(v1, uv[1]);
  }
  const { cu, cv, radius, coverage } = p;
  const count = cu.length;
  // At every place x of the box the smallest relative distance τ(x) = minⱼ ‖x − cⱼ‖/ρⱼ is at most
  // T = minⱼ (farthest distance from cⱼ to the box)/ρⱼ, so the evaluator (local.ts) never enlarges
  // the discs by more than K = max(1, T/coverage), and only patches whose disc enlarged by K meets
  // the box can have a weight there. Keeping every such patch keeps the nearest disc of every place
  // too, so each cell's blend is the same in the tile as in the whole grid.
  let t = Infinity;
  for (let j = 0; j < count; j++) {
    const fu = Math.max(Math.abs(cu[j] - u0), Math.abs(cu[j] - u1)), fv = Math.max(Math.abs(cv[j] - v0), Math.abs(cv[j] - v1));
    t = Math.min(t, Math.hypot(fu, fv) / radius[j]);
  }
  const k = Math.max(1, t / coverage) * (1 + 1e-9);
  const out: number[] = [];
  for (let j = 0; j < count; j++) {
    const du = Math.max(u0 - cu[j], 0, cu[j] - u1), dv = Math.max(v0 - cv[j], 0, cv[j] - v1);
    if (Math.hypot(du, dv) <= k * radius[j]) out.push(j);
  }
  return Int32Array.from(out);
}

/**
 * The packed surface that evaluates a map box exactly as the whole model does: a local model's
 * patches that reach the box (patchesReaching), or a global model whole (its every point reaches
 * every place). `patches` and `points` say how much of the model that is.
 */
export function packForBox(model: SurfaceModel, box: { xmin: number; ymin: number; xmax: number; ymax: number }): { packed: PackedSurface; patches: number | null; points: number } {
  const packed = packSurface(model);
  if (packed.method !== "local") return { packed, patches: null, points: model.points.x.length };
  const l = (model as Extract<SurfaceModel, { method: "local" }>).local;
  // With breaklines the sides are found per disc over all patches: the whole model is used.
  if (packed.sides) return { packed, patches: packed.cu.length, points: model.points.x.length };
  const chosen = patchesReaching(packed, box);
  const used = new Set<number>();
  for (const j of chosen) for (let k = l.start[j]; k < l.start[j + 1]; k++) used.add(l.index[k]);
  return { packed: subsetPatches(packed, chosen), patches: chosen.length, points: used.size };
}

/** A grid tile: its cells as a grid of their own, the tile's place in the whole grid, and what it was computed from. */
export interface GridTile {
  grid: GridValues;
  /** The whole grid's layout and the window of it. */
  whole: GridSpec;
  window: GridWindow;
  col: number;
  row: number;
  size: number;
  tiles: { cols: number; rows: number };
  /** Patches and points the tile was computed from (patches null for a global model, which uses them all). */
  patches: number | null;
  points: number;
}

/**
 * Tile (col, row) of the grid `options` describe (the whole grid's layout and mask), computed from
 * the part of the model that reaches it. A tile may have up to MAX_CELLS cells whatever the size of
 * the whole grid.
 */
export async function gridTile(
  model: SurfaceModel,
  options: GridOptions,
  tile: { col: number; row: number; size: number },
  threads = navigator.hardwareConcurrency || 1,
): Promise<GridTile> {
  const whole = gridLayout(model, { ...options, force: true });
  const w = tileWindow(whole, tile.col, tile.row, tile.size);
  const cells = (w.r1 - w.r0) * (w.c1 - w.c0);
  if (cells > MAX_CELLS && !options.force) {
    throw new RbfieldError(`a tile of ${tile.size} × ${tile.size} cells is larger than the ${MAX_CELLS.toLocaleString("en")}-cell limit; choose a smaller ${opt("tileSize")}`, ExitCode.usage);
  }
  const maskOpt = options.mask ?? "hull";
  if (maskOpt === "hull" && !validRing(model.hull)) {
    throw new RbfieldError("the model's hull is not a ring of [x, y] numbers; the model file is damaged: refit the points", ExitCode.input);
  }
  const mask = maskOpt === "none" ? undefined : polygonMaskWindow(whole, maskOpt === "hull" ? [[model.hull]] : maskOpt, w);
  const { packed, patches, points } = packForBox(model, windowBox(whole, w));
  const values = new Float64Array(cells);
  options.progress?.(`tile ${tile.col},${tile.row}: ${w.c1 - w.c0} × ${w.r1 - w.r0} cells${patches === null ? "" : ` from ${patches} patches`}`);
  // A fresh pack for each worker: its buffers are transferred (a breakline model's pack is the whole
  // model, which subsetPatches returns as it is, so it is packed again).
  const pack = () => (packed.method === "local" && !packed.sides ? subsetPatches(packed, Int32Array.from({ length: packed.cu.length }, (_, j) => j)) : packSurface(model));
  const work = cells * points;
  await evaluateWindow(pack, whole, w, mask, values, work < 2e7 ? 1 : threads, options.progress);
  const spec = windowSpec(whole, w);
  checkFiniteCells(spec, values, mask);
  return { grid: { spec, values, crs: model.crs }, whole, window: w, col: tile.col, row: tile.row, size: tile.size, tiles: tileCount(whole, tile.size), patches, points };
}

/**
 * The standard-error grid of a tile: the whole grid's lattice (its stride from the whole model's
 * work, errorLattice), the nodes the tile's cells need (windowNodes, up to one stride beyond the
 * tile), computed from the patches that reach them, and the same fill as the whole grid's.
 */
export async function tileStandardError(model: SurfaceModel, t: GridTile, threads = navigator.hardwareConcurrency || 1): Promise<{ grid: GridValues; stride: number }> {
  const whole = t.whole, w = t.window;
  const full = model.method === "local" ? packLocalErrors(model) : undefined;
  const est = full ? undefined : makeErrorEstimator(model);
  const lattice = errorLattice(whole, full ? { work: localErrorWork(full) } : est!, model.points.x.length);
  const sub = windowNodes(lattice, w);
  const width = w.c1 - w.c0;
  const masked = lattice.stride === 1 ? Uint8Array.from(t.grid.values, (v) => (Number.isNaN(v) ? 1 : 0)) : null;
  const maskedRows = (from: number, to: number) => (masked ? masked.slice(from * width, to * width) : null);
  let nodes: Float64Array = new Float64Array(sub.rows.length * sub.cols.length);
  if (full) {
    const box = {
      xmin: whole.xmin + (sub.cols[0] + 0.5) * whole.cell,
      xmax: whole.xmin + (sub.cols[sub.cols.length - 1] + 0.5) * whole.cell,
      ymax: whole.ymax - (sub.rows[0] + 0.5) * whole.cell,
      ymin: whole.ymax - (sub.rows[sub.rows.length - 1] + 0.5) * whole.cell,
    };
    const chosen = patchesReaching(full.surface, box);
    // A fresh pack for each worker (its buffers are transferred; a breakline model's is packed again).
    const pack = () => (full.surface.sides ? packLocalErrors(model as Extract<SurfaceModel, { method: "local" }>) : subsetLocalErrors(full, chosen, box));
    if (workersAvailable(threads) && sub.rows.length >= 2) nodes = await nodesInWorkers(pack, whole, sub, maskedRows, threads);
    else errorsAtNodes(localErrorEstimatorPacked(pack()), whole, sub, 0, sub.rows.length, masked, nodes);
  } else errorsAtNodes(est!, whole, sub, 0, sub.rows.length, masked, nodes);
  const values = fillWindow(t.grid.values, w, lattice, nodes, sub.i0, sub.j0, sub.cols.length);
  return { grid: { spec: t.grid.spec, values, crs: t.grid.crs }, stride: lattice.stride };
}

/** What a tile holds: the surface's values or their standard errors (grid --stderr). */
export type TileContent = "values" | "standard errors";

/**
 * The identity of the grid a tile belongs to: CRC-32 (ISO-HDLC) of the model file's bytes (a local
 * model's JSON holds its sidecar's CRC-32, so the JSON stands for both), the whole grid's layout and
 * the mask, 8 hexadecimal digits. Tiles of another model or mask over the same layout differ in it,
 * so assembleTiles never mixes them.
 */
export function tileGridId(modelBytes: Uint8Array, whole: GridSpec, mask: GridOptions["mask"]): string {
  const layout = new TextEncoder().encode(JSON.stringify([whole.xmin, whole.ymax, whole.cols, whole.rows, whole.cell, mask ?? "hull"]));
  const all = new Uint8Array(modelBytes.length + layout.length);
  all.set(modelBytes);
  all.set(layout, modelBytes.length);
  return crc32Hex(all);
}

/** The description a tile's GeoTIFF carries (TIFF ImageDescription), which assembleTiles checks. */
export function tileDescription(t: Pick<GridTile, "col" | "row" | "size" | "tiles" | "whole">, content: TileContent, gridId: string): string {
  return `rbfield tile ${t.col},${t.row} of ${t.tiles.cols} x ${t.tiles.rows}; tile size ${t.size}; grid ${t.whole.cols} x ${t.whole.rows}; ${content}; grid id ${gridId}`;
}

/** The parts of a tile description, or undefined when the text is not one. */
export function parseTileDescription(
  text: string,
): { col: number; row: number; tilesCols: number; tilesRows: number; size: number; cols: number; rows: number; content: TileContent; gridId: string } | undefined {
  const m = /^rbfield tile (\d+),(\d+) of (\d+) x (\d+); tile size (\d+); grid (\d+) x (\d+); (values|standard errors); grid id ([0-9a-f]{8})$/.exec(text.replace(/\0+$/, ""));
  if (!m) return undefined;
  const [col, row, tilesCols, tilesRows, size, cols, rows] = m.slice(1, 8).map(Number);
  return { col, row, tilesCols, tilesRows, size, cols, rows, content: m[8] as TileContent, gridId: m[9] };
}

/** A tile as read back: its grid, its description, and the file it came from. */
export interface TileFile {
  file: string;
  grid: GridValues;
  description: string | undefined;
}

/**
 * Put tiles written by `grid --tile` together into the whole grid. Every tile of the grid must be
 * there exactly once, with the same cell size, CRS and grid; errors name the file. The tiles' cells
 * are placed by their position in the description and checked against their corners.
 */
export function assembleTiles(tiles: TileFile[]): GridValues {
  if (tiles.length === 0) throw new RbfieldError("no tiles given", ExitCode.usage);
  const parts = tiles.map((t) => {
    const d = t.description === undefined ? undefined : parseTileDescription(t.description);
    if (!d) throw new RbfieldError("not a tile written by 'rbfield grid --tile' (no tile description); give the tiles' GeoTIFF files", ExitCode.input, { file: t.file });
    return { ...t, d };
  });
  const first = parts[0];
  const { tilesCols, tilesRows, size, cols, rows, content, gridId } = first.d;
  const seen = new Map<string, string>();
  for (const p of parts) {
    const d = p.d;
    if (d.tilesCols !== tilesCols || d.tilesRows !== tilesRows || d.size !== size || d.cols !== cols || d.rows !== rows) {
      throw new RbfieldError(`is a tile of another grid (${d.cols} × ${d.rows} cells in tiles of ${d.size}) than ${first.file} (${cols} × ${rows} in tiles of ${size})`, ExitCode.input, {
        file: p.file,
      });
    }
    if (d.content !== content) {
      throw new RbfieldError(`holds ${d.content} and ${first.file} ${content}; put the value tiles and the standard-error tiles together separately`, ExitCode.input, { file: p.file });
    }
    if (d.gridId !== gridId) {
      throw new RbfieldError(`is a tile of another grid (another model, extent or mask: grid id ${d.gridId}) than ${first.file} (grid id ${gridId})`, ExitCode.input, { file: p.file });
    }
    const key = `${d.col},${d.row}`;
    if (seen.has(key)) throw new RbfieldError(`tile ${key} is given twice (also ${seen.get(key)})`, ExitCode.input, { file: p.file });
    seen.set(key, p.file);
    const s = p.grid.spec, f = first.grid.spec;
    const wantCols = Math.min(cols, (d.col + 1) * size) - d.col * size, wantRows = Math.min(rows, (d.row + 1) * size) - d.row * size;
    if (s.cols !== wantCols || s.rows !== wantRows) throw new RbfieldError(`tile ${key} has ${s.cols} × ${s.rows} cells, not ${wantCols} × ${wantRows}`, ExitCode.input, { file: p.file });
    if (s.cell !== f.cell || p.grid.crs.label !== first.grid.crs.label || p.grid.crs.epsg !== first.grid.crs.epsg) {
      throw new RbfieldError(`has another cell size or CRS than ${first.file}`, ExitCode.input, { file: p.file });
    }
  }
  const missing: string[] = [];
  for (let r = 0; r < tilesRows; r++) for (let c = 0; c < tilesCols; c++) if (!seen.has(`${c},${r}`)) missing.push(`${c},${r}`);
  if (missing.length) {
    throw new RbfieldError(
      `the tiles do not cover the grid: tile${missing.length > 1 ? "s" : ""} ${missing.slice(0, 5).join("; ")}${missing.length > 5 ? "; …" : ""} missing (${tilesCols} × ${tilesRows} tiles)`,
      ExitCode.input,
      { file: first.file },
    );
  }
  // The whole grid's corner is tile 0,0's corner; every other tile's lies whole cells from it.
  const origin = parts.find((p) => p.d.col === 0 && p.d.row === 0)!;
  const o = origin.grid.spec;
  const cell = o.cell;
  for (const p of parts) {
    const s = p.grid.spec;
    const dc = (s.xmin - o.xmin) / cell, dr = (o.ymax - s.ymax) / cell;
    if (Math.abs(dc - p.d.col * size) > 1e-6 || Math.abs(dr - p.d.row * size) > 1e-6) {
      throw new RbfieldError(`tile ${p.d.col},${p.d.row}'s corner is not where that tile of this grid lies`, ExitCode.input, { file: p.file });
    }
  }
  const values = new Float64Array(cols * rows);
  for (const p of parts) {
    const s = p.grid.spec, r0 = p.d.row * size, c0 = p.d.col * size;
    for (let r = 0; r < s.rows; r++) values.set(p.grid.values.subarray(r * s.cols, (r + 1) * s.cols), (r0 + r) * cols + c0);
  }
  const spec = { xmin: o.xmin, ymax: o.ymax, cols, rows, cell, xmax: o.xmin + cols * cell, ymin: o.ymax - rows * cell };
  return { spec, values, crs: origin.grid.crs };
}
