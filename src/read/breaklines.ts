// Breakline files (--breaklines FILE.geojson): LineString and MultiLineString features (RFC 7946
// §3.1.4, §3.1.5), each line either with z on every vertex (a 3-D line: the surface passes through it
// and may change slope across it) or with none (a 2-D barrier, such as a fault: the surface may jump
// across it). Refused, naming the file, the feature's line and its 1-based index: other geometry
// types (polygons, points), missing or non-numeric coordinates, z on some vertices only, lines of
// fewer than two distinct vertices, and lines that cross or touch themselves (a closed line, last
// vertex = first, is allowed). Consecutive repeated vertices (same x, y and z) are dropped, as
// exports often repeat them. The CRS is found and the lines projected as for masks (read/mask.ts).
import * as fs from "node:fs";
import { projectorFor } from "./mask.ts";
import { ExitCode, opt, printable, RbfieldError } from "../errors.ts";
import { jsonErrorPlace } from "../json_syntax.ts";
import { crsText } from "../text.ts";
import type { Crs } from "../types.ts";
import { featureOffsets, readCrs } from "./geojson.ts";
import { LineIndex, normalizeText } from "./textfile.ts";

/** One breakline in the file's coordinates; `z` null for a 2-D barrier line. */
export interface Breakline {
  name: string;
  x: number[];
  y: number[];
  z: number[] | null;
}

export interface BreaklineFile {
  file: string;
  lines: Breakline[];
  crs?: Crs;
}

/** Read a breakline file; every error names the file and, where it can, the line and column. */
export function readBreaklineFile(file: string): BreaklineFile {
  let text: string;
  try {
    text = fs.readFileSync(file, "utf8");
  } catch {
    throw new RbfieldError("cannot read the breakline file (missing or not readable)", ExitCode.io, { file });
  }
  return parseBreaklines(text, file);
}

/** Parse breakline GeoJSON text (exported for tests). */
export function parseBreaklines(text: string, file: string): BreaklineFile {
  const body = normalizeText(text);
  const index = new LineIndex(body);
  let data: unknown;
  try {
    data = JSON.parse(body);
  } catch (e) {
    const { line, column } = jsonErrorPlace(body, e);
    throw new RbfieldError("the breakline file is not valid GeoJSON (JSON syntax error); give LineString or MultiLineString features", ExitCode.input, { file, line, column });
  }
  const top = data as { type?: unknown; features?: unknown; crs?: unknown };
  if (!top || typeof top !== "object" || Array.isArray(top)) {
    throw new RbfieldError("the breakline file must be a GeoJSON FeatureCollection, Feature or geometry of LineString or MultiLineString", ExitCode.input, { file, line: 1, column: 1 });
  }
  const features: unknown[] = top.type === "FeatureCollection" ? (Array.isArray(top.features) ? top.features : []) : [top];
  const offsets = top.type === "FeatureCollection" ? featureOffsets(body) : [];
  const placeOf = (k: number) => {
    const offset = offsets.length === features.length ? offsets[k] : 0;
    return { file, line: index.lineOf(offset), column: index.columnOf(offset) };
  };
  if (features.length === 0) throw new RbfieldError("the breakline file holds no features; give LineString or MultiLineString features", ExitCode.input, { file, line: 1 });
  const lines: Breakline[] = [];
  features.forEach((f, k) => {
    const feature = f as { type?: unknown; geometry?: unknown; properties?: Record<string, unknown> | null };
    const geometry = (feature?.type === "Feature" ? feature.geometry : feature) as { type?: unknown; coordinates?: unknown } | null;
    const what = `feature ${k + 1}`;
    const fail = (why: string): never => {
      throw new RbfieldError(`breakline ${what}: ${why}`, ExitCode.input, placeOf(k));
    };
    if (!geometry || typeof geometry !== "object") fail("has no geometry; give a LineString or MultiLineString");
    const type = geometry!.type;
    if (type !== "LineString" && type !== "MultiLineString") {
      fail(`is a ${typeof type === "string" ? printable(type) : "geometry of no type"}, not a LineString or MultiLineString (areas and points are not breaklines)`);
    }
    const props = feature?.type === "Feature" && feature.properties && typeof feature.properties === "object" ? feature.properties : {};
    const label = ["name", "id", "code"].map((key) => props[key]).find((v) => typeof v === "string" || typeof v === "number");
    const base = label !== undefined ? `${what} (${printable(String(label))})` : what;
    const parts = type === "LineString" ? [geometry!.coordinates] : geometry!.coordinates;
    if (!Array.isArray(parts) || parts.length === 0) fail("has no coordinates");
    (parts as unknown[]).forEach((part, p) => {
      const name = (parts as unknown[]).length > 1 ? `${base} part ${p + 1}` : base;
      lines.push(checkLine(part, (why) => fail((parts as unknown[]).length > 1 ? `part ${p + 1} ${why}` : why), name));
    });
  });
  const crs = readCrs(top.crs);
  return { file, lines, ...(crs ? { crs } : {}) };
}

/** One line's vertices, checked (see the top of this file). */
function checkLine(coords: unknown, fail: (why: string) => never, name: string): Breakline {
  if (!Array.isArray(coords)) fail("has no coordinates");
  const pts = coords as unknown[];
  if (!pts.every((q) => Array.isArray(q) && q.length >= 2 && q.slice(0, 3).every((c) => typeof c === "number" && Number.isFinite(c)))) {
    fail("has a position that is not two or three numbers");
  }
  const arr = pts as number[][];
  const withZ = arr.filter((q) => q.length >= 3).length;
  if (withZ !== 0 && withZ !== arr.length) fail(`has z on ${withZ} of its ${arr.length} vertices; give z on every vertex (a 3-D line) or on none (a 2-D barrier)`);
  const x: number[] = [], y: number[] = [], z: number[] = [];
  for (const q of arr) {
    const n = x.length;
    if (n > 0 && x[n - 1] === q[0] && y[n - 1] === q[1]) {
      if (withZ && z[n - 1] !== q[2]) fail(`has two levels (${z[n - 1]} and ${q[2]}) at one vertex (${q[0]}, ${q[1]}); a vertical face is two lines, one on each side`);
      continue;
    }
    x.push(q[0]);
    y.push(q[1]);
    if (withZ) z.push(q[2]);
  }
  if (x.length < 2) fail(`has ${x.length === 1 ? "one distinct vertex" : "no vertex"}; a breakline needs at least two`);
  const crossing = selfCrossing(x, y);
  if (crossing) fail(`crosses itself (segments ${crossing[0] + 1} and ${crossing[1] + 1}); split it into lines that do not`);
  return { name, x, y, z: withZ ? z : null };
}

/** Orientation sign of (a, b, c). */
function orient(ax: number, ay: number, bx: number, by: number, cx: number, cy: number): number {
  const d = (bx - ax) * (cy - ay) - (by - ay) * (cx - ax);
  return d > 0 ? 1 : d < 0 ? -1 : 0;
}

function onSegment(ax: number, ay: number, bx: number, by: number, px: number, py: number): boolean {
  return Math.min(ax, bx) <= px && px <= Math.max(ax, bx) && Math.min(ay, by) <= py && py <= Math.max(ay, by);
}

/** Do closed segments p1–p2 and p3–p4 meet (Cormen et al. 2009 §33.1)? */
function meet(x: number[], y: number[], a: number, b: number, c: number, d: number): boolean {
  const d1 = orient(x[c], y[c], x[d], y[d], x[a], y[a]), d2 = orient(x[c], y[c], x[d], y[d], x[b], y[b]);
  const d3 = orient(x[a], y[a], x[b], y[b], x[c], y[c]), d4 = orient(x[a], y[a], x[b], y[b], x[d], y[d]);
  if (d1 * d2 < 0 && d3 * d4 < 0) return true;
  return (d1 === 0 && onSegment(x[c], y[c], x[d], y[d], x[a], y[a])) || (d2 === 0 && onSegment(x[c], y[c], x[d], y[d], x[b], y[b])) ||
    (d3 === 0 && onSegment(x[a], y[a], x[b], y[b], x[c], y[c])) || (d4 === 0 && onSegment(x[a], y[a], x[b], y[b], x[d], y[d]));
}

/**
 * The first pair of segments (0-based) of the polyline that cross or touch, other than consecutive
 * segments at their shared vertex (and the first and last of a closed line at theirs); consecutive
 * segments that fold back over each other count as crossing. O(k²) for k segments.
 */
export function selfCrossing(x: number[], y: number[]): [number, number] | null {
  const k = x.length - 1;
  const closed = k >= 3 && x[0] === x[k] && y[0] === y[k];
  for (let i = 0; i < k; i++) {
    // Consecutive segments: only a fold back (collinear, pointing back) is a crossing.
    if (i + 1 < k) {
      const a = i, b = i + 1, c = i + 2;
      if (orient(x[a], y[a], x[b], y[b], x[c], y[c]) === 0 && (x[c] - x[b]) * (x[b] - x[a]) + (y[c] - y[b]) * (y[b] - y[a]) < 0) return [i, i + 1];
    }
    for (let j = i + 2; j < k; j++) {
      if (closed && i === 0 && j === k - 1) continue;
      if (meet(x, y, i, i + 1, j, j + 1)) return [i, j];
    }
  }
  return null;
}

type Box = { xmin: number; ymin: number; xmax: number; ymax: number };
const inDegrees = (b: Box) => b.xmin >= -180 && b.xmax <= 180 && b.ymin >= -90 && b.ymax <= 90;

function linesBox(lines: Breakline[]): Box {
  const b = { xmin: Infinity, ymin: Infinity, xmax: -Infinity, ymax: -Infinity };
  for (const l of lines) {
    for (let k = 0; k < l.x.length; k++) {
      b.xmin = Math.min(b.xmin, l.x[k]);
      b.xmax = Math.max(b.xmax, l.x[k]);
      b.ymin = Math.min(b.ymin, l.y[k]);
      b.ymax = Math.max(b.ymax, l.y[k]);
    }
  }
  return b;
}

/**
 * The lines in the points' CRS (`crs`; `data` the points' extent) and a sentence for the summary.
 * Which CRS the file is in: as for masks (read/mask.ts): its declared crs member; else WGS 84 when
 * every vertex lies within ±180°, ±90° and the points do not; else the points'. Levels (z) are kept
 * as given. Lines that miss the points' extent altogether are refused.
 */
export async function breaklinesInCrs(b: BreaklineFile, crs: Crs, data: Box): Promise<{ lines: Breakline[]; note: string }> {
  const box = linesBox(b.lines);
  let source: number | undefined, how: string;
  if (b.crs?.epsg !== undefined) {
    source = b.crs.epsg;
    how = `EPSG:${source} (declared in the file)`;
  } else if (inDegrees(box) && !inDegrees(data)) {
    source = 4326;
    how = "WGS 84 longitude/latitude (no crs member; RFC 7946)";
  } else how = `the points' CRS (${crsText(crs)})`;
  let lines = b.lines;
  let note = `Breaklines: ${printable(b.file)}, ${lines.length} line${lines.length === 1 ? "" : "s"} (${lines.filter((l) => l.z).length} 3-D, ${lines.filter((l) => !l.z).length} 2-D barriers), in ${how}`;
  if (source !== undefined && source !== crs.epsg) {
    if (crs.epsg === undefined) {
      throw new RbfieldError(
        `the breaklines are in ${how} but the points are in ${crsText(crs)}, and nothing relates the two; ` +
          `give the breaklines in the points' coordinates, or the points' EPSG code with ${opt("crs")}`,
        ExitCode.input,
        { file: b.file },
      );
    }
    const projector = await projectorFor(source, crs, { file: b.file, what: "breaklines", option: "breaklines", how });
    lines = b.lines.map((l) => {
      const t = projector.forward(Float64Array.from(l.x), Float64Array.from(l.y));
      return { ...l, x: Array.from(t.x), y: Array.from(t.y) };
    });
    note += `, projected to ${crsText(crs)}`;
  }
  const p = linesBox(lines);
  if (p.xmax < data.xmin || p.xmin > data.xmax || p.ymax < data.ymin || p.ymin > data.ymax) {
    const r = (v: number) => String(Number(v.toPrecision(7)));
    throw new RbfieldError(
      `the breaklines (taken to be in ${how}) span ${r(p.xmin)}, ${r(p.ymin)} to ${r(p.xmax)}, ${r(p.ymax)} and miss the points ` +
        `(${r(data.xmin)}, ${r(data.ymin)} to ${r(data.xmax)}, ${r(data.ymax)} in ${crsText(crs)}); give them in the points' CRS or declare their own in a crs member`,
      ExitCode.input,
      { file: b.file },
    );
  }
  return { lines, note };
}
