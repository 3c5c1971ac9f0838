// Contour lines and filled bands of a grid as GeoJSON (RFC 7946), in the grid's map coordinates.
//
// Both work on the cell-centre lattice: the grid value of a cell sits at its centre, and values
// between centres are interpolated linearly along lattice edges. Consequences:
// - Nothing is drawn in the outer half cell of the grid (beyond the outermost cell centres).
// - Lines: a lattice square with any masked (NaN) corner produces no segment.
// - Bands: masked cells count as lower than every level, so a band stops at the centres of the
//   last valid cells; a lattice square with exactly one masked corner keeps the triangle of its
//   three valid centres. Masked cell areas are never inside a band.
import { contours as d3Contours } from "d3-contour";
import { difference, featureCollection, multiPolygon, polygon, rewind } from "@turf/turf";
import { ExitCode, RbfieldError } from "../errors.ts";
import { ringArea } from "../geometry.ts";
import { valueRange } from "../numbers.ts";
import { coordinateDecimals } from "../text.ts";
import type { GridSpec, GridValues } from "../types.ts";
import { bandLevels, indexTest, type LevelRule, levelsWithin } from "./levels.ts";

export { contourLevels, MAX_LEVELS } from "./levels.ts";

// Minimal GeoJSON types (RFC 7946) for what this module writes.
export type Position = [number, number];
export interface LineString {
  type: "LineString";
  coordinates: Position[];
}
export interface MultiLineString {
  type: "MultiLineString";
  coordinates: Position[][];
}
export interface Polygon {
  type: "Polygon";
  coordinates: Position[][];
}
export interface MultiPolygon {
  type: "MultiPolygon";
  coordinates: Position[][][];
}
export interface Feature<G, P> {
  type: "Feature";
  geometry: G;
  properties: P;
}
export interface FeatureCollection<G, P> {
  type: "FeatureCollection";
  features: Feature<G, P>[];
}
/** Contour lines: one feature per level; `index` marks index contours (see indexTest in levels.ts). */
export type ContourLineCollection = FeatureCollection<LineString | MultiLineString, { level: number; index: boolean }>;
/** Filled bands; a bound is null on the open side of a band below or above every listed level. */
export type ContourBandCollection = FeatureCollection<Polygon | MultiPolygon, { lower: number | null; upper: number | null }>;

function makeRounder(cell: number): (v: number) => number {
  // Cells below 1e-9 would need more than 15 decimals (rounding would merge every point): keep
  // such coordinates as computed.
  if (!(6 - Math.floor(Math.log10(cell)) <= 15)) return (v) => v;
  const scale = 10 ** coordinateDecimals(cell);
  return (v) => {
    const s = v * scale;
    return Math.abs(s) < 2 ** 52 ? Math.round(s) / scale : v;
  };
}

/** Progress of a loop: a message and the fraction done (src/cli.ts draws it). */
export type ProgressReport = (message: string, fraction?: number) => void;

/**
 * Contour lines by marching squares on the cell-centre lattice: one MultiLineString feature per
 * level that has lines (one geometry type for the whole collection, as GIS layers want), in the
 * order of `levels`, with properties `level` and `index` (from `index`, default none). Points at or
 * above a level count as above it; lines run with the higher side on their left, so rings around a
 * high are counter-clockwise. Saddle squares are resolved by the mean of their four corners.
 */
export function contourLines(
  grid: GridValues,
  levels: number[],
  options: { index?: (level: number) => boolean; progress?: ProgressReport } = {},
): ContourLineCollection {
  grid = finiteOnly(grid);
  const isIndex = options.index ?? (() => false);
  const features: Feature<MultiLineString, { level: number; index: boolean }>[] = [];
  levels.forEach((level, k) => {
    options.progress?.(`contour lines at ${levels.length} levels`, k / levels.length);
    if (!Number.isFinite(level)) return;
    const pieces = traceLevel(grid, level);
    if (pieces.length === 0) return;
    features.push({ type: "Feature", geometry: { type: "MultiLineString", coordinates: pieces }, properties: { level, index: isIndex(level) } });
  });
  return { type: "FeatureCollection", features };
}

/** Polylines of one level, as map coordinates; closed rings repeat their first point. */
function traceLevel(grid: GridValues, level: number): Position[][] {
  const { spec, values: v } = grid;
  const { cols, rows } = spec;
  // Segments run from an "exit" crossing to an "entry" crossing; crossings are named by lattice
  // edge: 2·node for the edge east of a node, 2·node + 1 for the edge south of it.
  const from: number[] = [];
  const to: number[] = [];
  const edges = new Int32Array(4);
  const exits = new Uint8Array(4);
  for (let r = 0; r + 1 < rows; r++) {
    for (let c = 0; c + 1 < cols; c++) {
      const nw = r * cols + c;
      const sw = nw + cols;
      const tl = v[nw], tr = v[nw + 1], bl = v[sw], br = v[sw + 1];
      // NaN fails every comparison, so this also skips squares with a masked corner.
      if (!(tl === tl && tr === tr && bl === bl && br === br)) continue;
      const aTl = tl >= level, aTr = tr >= level, aBl = bl >= level, aBr = br >= level;
      if (aTl === aTr && aTl === aBl && aTl === aBr) continue;
      // Walk the square's edges counter-clockwise in map terms: W (tl→bl), S (bl→br), E (br→tr),
      // N (tr→tl). Leaving the above region is an exit, coming back an entry.
      let n = 0;
      if (aTl !== aBl) { edges[n] = 2 * nw + 1; exits[n++] = aTl ? 1 : 0; }
      if (aBl !== aBr) { edges[n] = 2 * sw; exits[n++] = aBl ? 1 : 0; }
      if (aBr !== aTr) { edges[n] = 2 * (nw + 1) + 1; exits[n++] = aBr ? 1 : 0; }
      if (aTr !== aTl) { edges[n] = 2 * nw; exits[n++] = aTr ? 1 : 0; }
      if (n === 2) {
        const e = exits[0] ? 0 : 1;
        from.push(edges[e]);
        to.push(edges[1 - e]);
      } else {
        // Saddle: if the centre (mean of the corners) is above, the above corners connect through
        // it and each exit joins the next entry; otherwise each exit joins the previous entry.
        const centreAbove = (tl + tr + bl + br) / 4 >= level;
        for (let i = 0; i < 4; i++) {
          if (!exits[i]) continue;
          from.push(edges[i]);
          to.push(edges[(i + (centreAbove ? 1 : 3)) % 4]);
        }
      }
    }
  }
  if (from.length === 0) return [];

  // Each crossing starts at most one segment and ends at most one, so chains are unambiguous.
  const startAt = new Map<number, number>();
  const ends = new Set<number>();
  for (let i = 0; i < from.length; i++) {
    startAt.set(from[i], i);
    ends.add(to[i]);
  }
  const used = new Uint8Array(from.length);
  const chains: number[][] = [];
  const follow = (first: number): number[] => {
    const chain = [from[first]];
    let s: number | undefined = first;
    while (s !== undefined && !used[s]) {
      used[s] = 1;
      chain.push(to[s]);
      s = startAt.get(to[s]);
    }
    return chain;
  };
  // Open lines start where no segment ends (at the lattice border or a masked area)...
  for (let i = 0; i < from.length; i++) {
    if (!used[i] && !ends.has(from[i])) chains.push(follow(i));
  }
  // ...and what remains forms closed rings.
  for (let i = 0; i < from.length; i++) {
    if (!used[i]) chains.push(follow(i));
  }

  const round = makeRounder(spec.cell);
  const pieces: Position[][] = [];
  for (const chain of chains) {
    const closed = chain[0] === chain[chain.length - 1];
    const line: Position[] = [];
    for (const edge of chain) {
      const p = crossing(spec, v, edge, level);
      const point: Position = [round(p[0]), round(p[1])];
      const prev = line[line.length - 1];
      // Crossings exactly at a lattice node repeat a point; keep it once.
      if (prev && prev[0] === point[0] && prev[1] === point[1]) continue;
      line.push(point);
    }
    if (closed) {
      if (line.length >= 4) pieces.push(line);
    } else if (line.length >= 2) {
      pieces.push(line);
    }
  }
  return pieces;
}

/** Map position where `level` crosses a lattice edge, interpolated linearly between its nodes. */
function crossing(spec: GridSpec, v: Float64Array, edge: number, level: number): Position {
  const node = edge >> 1;
  const r = Math.floor(node / spec.cols);
  const c = node - r * spec.cols;
  const other = edge & 1 ? node + spec.cols : node + 1;
  const a = v[node];
  const t = (level - a) / (v[other] - a);
  if (edge & 1) {
    return [spec.xmin + (c + 0.5) * spec.cell, spec.ymax - (r + 0.5 + t) * spec.cell];
  }
  return [spec.xmin + (c + 0.5 + t) * spec.cell, spec.ymax - (r + 0.5) * spec.cell];
}

/**
 * Filled bands between consecutive levels: the band [lower, upper) holds the points where
 * lower ≤ value < upper. Geometry is Polygon or MultiPolygon with RFC 7946 winding (exterior rings
 * counter-clockwise, holes clockwise). Levels are sorted; bands that are empty are left out.
 *
 * d3-contour gives the region value ≥ level (values at pixel centres, masked cells as −∞); the
 * region of the upper level is subtracted with turf's difference.
 */
export function contourBands(grid: GridValues, levels: number[], options: { progress?: ProgressReport } = {}): ContourBandCollection {
  const { spec, values } = finiteOnly(grid);
  const sorted = [...new Set(levels.filter(Number.isFinite))].sort((a, b) => a - b);
  const features: Feature<Polygon | MultiPolygon, { lower: number | null; upper: number | null }>[] = [];
  if (sorted.length < 2 || spec.cols < 2 || spec.rows < 2) return { type: "FeatureCollection", features };

  // Pad the grid with one ring of masked cells: d3 then closes every region at the outermost
  // cell centres, which is exactly the lattice border, instead of at the outer pixel edges.
  const pc = spec.cols + 2, pr = spec.rows + 2;
  const padded = new Float64Array(pc * pr).fill(NaN);
  for (let r = 0; r < spec.rows; r++) {
    padded.set(values.subarray(r * spec.cols, (r + 1) * spec.cols), (r + 1) * pc + 1);
  }
  const generator = d3Contours().size([pc, pr]);
  // Region value ≥ level, in map coordinates: padded pixel (px, py) is at
  // (xmin + (px − 1)·cell, ymax − (py − 1)·cell).
  const region = (level: number) => {
    const raw = generator.contour(padded, level) as { coordinates: number[][][][] };
    const coordinates: Position[][][] = [];
    for (const poly of raw.coordinates) {
      const rings = poly.map((ring) =>
        dropAxisRuns(ring.map(([px, py]): Position => [spec.xmin + (px - 1) * spec.cell, spec.ymax - (py - 1) * spec.cell]))
      );
      if (rings[0].length >= 4) coordinates.push(rings.filter((ring) => ring.length >= 4));
    }
    return coordinates.length === 0 ? null : multiPolygon(coordinates);
  };

  type Area = ReturnType<typeof polygon>["geometry"] | ReturnType<typeof multiPolygon>["geometry"];
  const round = makeRounder(spec.cell);
  let upperRegion = region(sorted[0]);
  for (let k = 0; k + 1 < sorted.length; k++) {
    options.progress?.(`filled bands between ${sorted.length} levels`, k / (sorted.length - 1));
    const lower = sorted[k], upper = sorted[k + 1];
    const lowerRegion = upperRegion;
    upperRegion = region(upper);
    if (lowerRegion === null) continue;
    const band = upperRegion === null ? lowerRegion : difference(featureCollection<Area>([lowerRegion, upperRegion]));
    if (band === null) continue;
    const polygons = band.geometry.type === "Polygon"
      ? [band.geometry.coordinates]
      : band.geometry.coordinates;
    const cleaned = cleanPolygons(polygons as Position[][][], round);
    if (cleaned.length === 0) continue;
    const geometry: Polygon | MultiPolygon = cleaned.length === 1
      ? { type: "Polygon", coordinates: cleaned[0] }
      : { type: "MultiPolygon", coordinates: cleaned };
    // RFC 7946 §3.1.6: exterior rings counter-clockwise, holes clockwise.
    rewind(geometry as Parameters<typeof rewind>[0], { mutate: true, reverse: false });
    features.push({ type: "Feature", geometry, properties: { lower, upper } });
  }
  return { type: "FeatureCollection", features };
}

/** The grid with ±Infinity cells treated as masked (NaN), so no coordinate can become NaN. */
function finiteOnly(grid: GridValues): GridValues {
  if (grid.values.every((v) => Number.isFinite(v) || Number.isNaN(v))) return grid;
  return { ...grid, values: grid.values.map((v) => (Number.isFinite(v) ? v : NaN)) };
}

/**
 * Drops repeated points and the inner points of runs along one x or one y (the padded border gives
 * one point per border cell); the ring stays closed.
 */
function dropAxisRuns(ring: Position[]): Position[] {
  const out: Position[] = [];
  for (const p of ring) {
    const last = out[out.length - 1];
    if (last && last[0] === p[0] && last[1] === p[1]) continue;
    const before = out[out.length - 2];
    if (before && ((before[0] === last[0] && last[0] === p[0]) || (before[1] === last[1] && last[1] === p[1]))) {
      out[out.length - 1] = p;
    } else {
      out.push(p);
    }
  }
  return out;
}

/** Rounds coordinates, drops repeated points and rings that collapse, and polygons that lose their exterior. */
function cleanPolygons(polygons: Position[][][], round: (v: number) => number): Position[][][] {
  const out: Position[][][] = [];
  for (const poly of polygons) {
    const rings: Position[][] = [];
    for (let i = 0; i < poly.length; i++) {
      const ring: Position[] = [];
      for (const p of poly[i]) {
        const q: Position = [round(p[0]), round(p[1])];
        const prev = ring[ring.length - 1];
        if (prev && prev[0] === q[0] && prev[1] === q[1]) continue;
        ring.push(q);
      }
      const first = ring[0];
      const last = ring[ring.length - 1];
      if (ring.length > 1 && (first[0] !== last[0] || first[1] !== last[1])) ring.push([first[0], first[1]]);
      if (ring.length < 4 || ringArea(ring) === 0) {
        if (i === 0) break; // exterior gone: drop the polygon
        continue;
      }
      rings.push(ring);
    }
    if (rings.length > 0) out.push(rings);
  }
  return out;
}

/** What to write: filled bands instead of lines, and lines with the level as a third coordinate. */
export interface ContourFileOptions {
  bands?: boolean;
  /** Lines as 3-D positions [x, y, level] (RFC 7946 §3.1.1 allows an altitude as third element). */
  threeD?: boolean;
  progress?: ProgressReport;
}

/**
 * Contour a grid into a GeoJSON text by a level rule. Lines carry `level` and `index`; bands carry
 * `lower` and `upper` and cover the whole surface (a list's bands below its first and above its last
 * level have a null bound on the open side). `levels` are the rule's levels within the grid's values.
 */
export function contourGeoJson(grid: GridValues, rule: LevelRule, options: ContourFileOptions = {}): { text: string; levels: number[]; features: number } {
  const { lo, hi } = valueRange(grid.values);
  if (!(hi >= lo)) throw new RbfieldError("the grid has no unmasked cells to contour", ExitCode.input);
  const levels = levelsWithin(rule, lo, hi);
  let fc: ContourLineCollection | ContourBandCollection;
  if (options.bands) {
    const b = bandLevels(rule, lo, hi);
    // Open bands: below the first level the region is every cell (value ≥ lo); above the last, a
    // level past the maximum bounds an empty region. Their open bound is written as null.
    const below = lo, above = hi + Math.max(Math.abs(hi), 1) * 1e-6;
    const bands = contourBands(grid, [...(b.openBelow ? [below] : []), ...b.levels, ...(b.openAbove ? [above] : [])], options);
    for (const f of bands.features) {
      if (b.openBelow && f.properties.lower === below) f.properties.lower = null;
      if (b.openAbove && f.properties.upper === above) f.properties.upper = null;
    }
    fc = bands;
  } else {
    const lines = contourLines(grid, levels, { index: indexTest(rule), progress: options.progress });
    if (options.threeD) {
      for (const f of lines.features) {
        const z = f.properties.level;
        (f.geometry as { coordinates: unknown }).coordinates = (f.geometry as MultiLineString).coordinates.map((line) => line.map(([x, y]) => [x, y, z]));
      }
    }
    fc = lines;
  }
  // RFC 7946 dropped the "crs" member and assumes WGS 84; rbfield keeps the points' CRS (see README),
  // so it names that CRS the way GDAL and most GIS still read it (the 2008 GeoJSON "crs" member).
  const out = grid.crs.epsg === undefined ? fc : { type: fc.type, crs: { type: "name", properties: { name: `urn:ogc:def:crs:EPSG::${grid.crs.epsg}` } }, features: fc.features };
  return { text: JSON.stringify(out) + "\n", levels, features: fc.features.length };
}
