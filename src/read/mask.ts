// Mask polygon files (--mask FILE.geojson): the polygons, the CRS the file declares, and the polygons
// brought into the points' CRS. Which CRS a mask is in, first rule that applies:
//   1. the CRS its "crs" member declares (GeoJSON 2008; RFC 7946 dropped the member, files still carry it);
//   2. without one, WGS 84 longitude/latitude (RFC 7946 §4) when every position lies within ±180°, ±90°
//      while the points do not: the mask is then clearly in degrees and the points in a grid;
//   3. else the points' own CRS (a mask drawn over the points, as rbfield's own GeoJSON outputs are).
// A mask in another CRS is projected (crs/crs.ts) when both CRSs are known, and refused, naming both,
// when the points are on a local site grid. A mask that misses the points is refused.
import * as fs from "node:fs";
import { describeCrs, makeProjector } from "../crs/crs.ts";
import { ExitCode, opt, printable, RbfieldError } from "../errors.ts";
import { jsonErrorPlace } from "../json_syntax.ts";
import { crsText } from "../text.ts";
import type { Crs } from "../types.ts";
import { readCrs } from "./geojson.ts";

/** A polygon as rings of [x, y]; the first ring is the outer boundary, the rest holes. */
export type PolygonRings = [number, number][][];

/** A mask file as read: its polygons and the CRS its "crs" member declares, if any. */
export interface MaskFile {
  file: string;
  polygons: PolygonRings[];
  crs?: Crs;
}

/** Read a mask polygon file (GeoJSON Polygon/MultiPolygon); errors name the file, line and column. */
export function readMaskFile(file: string): MaskFile {
  let text: string;
  try {
    text = fs.readFileSync(file, "utf8");
  } catch {
    throw new RbfieldError("cannot read the mask file (missing or not readable)", ExitCode.io, { file });
  }
  let data: unknown;
  const body = text.replace(/^\uFEFF/, "");
  try {
    data = JSON.parse(body);
  } catch (e) {
    const { line, column } = jsonErrorPlace(body, e);
    throw new RbfieldError("the mask file is not valid GeoJSON; give Polygon or MultiPolygon features", ExitCode.input, { file, line, column });
  }
  const polygons = polygonsFromGeoJson(data, file);
  const crs = data && typeof data === "object" ? readCrs((data as { crs?: unknown }).crs) : undefined;
  return { file, polygons, ...(crs ? { crs } : {}) };
}

/** Read Polygon/MultiPolygon rings from a parsed GeoJSON object (Feature, FeatureCollection or geometry). */
export function polygonsFromGeoJson(data: unknown, file: string): PolygonRings[] {
  const out: PolygonRings[] = [];
  const visit = (g: unknown): void => {
    const o = g as { type?: string; coordinates?: unknown; geometry?: unknown; features?: unknown[]; geometries?: unknown[] };
    if (!o || typeof o !== "object") return;
    if (o.type === "FeatureCollection" && Array.isArray(o.features)) o.features.forEach(visit);
    else if (o.type === "Feature") visit(o.geometry);
    else if (o.type === "GeometryCollection" && Array.isArray(o.geometries)) o.geometries.forEach(visit);
    else if (o.type === "Polygon") out.push(o.coordinates as PolygonRings);
    else if (o.type === "MultiPolygon") for (const p of o.coordinates as PolygonRings[]) out.push(p);
  };
  visit(data);
  const ok = out.length > 0 && out.every((p) => Array.isArray(p) && p.every((ring) =>
    Array.isArray(ring) && ring.length >= 4 && ring.every((pt) => Array.isArray(pt) && Number.isFinite(pt[0]) && Number.isFinite(pt[1]))
  ));
  if (!ok) {
    throw new RbfieldError(
      "the mask file holds no valid Polygon or MultiPolygon (RFC 7946 §3.1.6: closed rings of at least four [x, y] positions); " +
        `give polygons in the points' coordinates, or use ${opt("mask")} hull or none`,
      ExitCode.input,
      { file },
    );
  }
  return out;
}

type Box = { xmin: number; ymin: number; xmax: number; ymax: number };

/** Bounding box of polygons' vertices. */
export function polygonsBox(polygons: PolygonRings[]): Box {
  const b = { xmin: Infinity, ymin: Infinity, xmax: -Infinity, ymax: -Infinity };
  for (const p of polygons) {
    for (const ring of p) {
      for (const [x, y] of ring) {
        b.xmin = Math.min(b.xmin, x);
        b.ymin = Math.min(b.ymin, y);
        b.xmax = Math.max(b.xmax, x);
        b.ymax = Math.max(b.ymax, y);
      }
    }
  }
  return b;
}

const inDegrees = (b: Box) => b.xmin >= -180 && b.xmax <= 180 && b.ymin >= -90 && b.ymax <= 90;
const WGS84 = 4326;

/**
 * The projector from a mask's (or breaklines file's) CRS to the points'. A refusal of the projection
 * itself (a change of datum needing a grid rbfield does not bundle) names the file and its option,
 * which the CRS module cannot know.
 */
export async function projectorFor(
  source: number,
  crs: Crs,
  o: { file: string; what: string; option: string; how: string },
): Promise<Awaited<ReturnType<typeof makeProjector>>> {
  const from = await describeCrs(source, { file: o.file });
  const to = await describeCrs(crs.epsg!);
  try {
    return await makeProjector(from, to);
  } catch (e) {
    if (!(e instanceof RbfieldError) || e.place) throw e;
    const why = e.template.replace(/:\s*give the coordinates in a CRS on the target's own datum$/, "");
    throw new RbfieldError(
      `the ${opt(o.option)} file is in ${o.how} and cannot be brought into the points' CRS (${crsText(crs)}): ${why}; ` +
        `give the ${o.what} in ${crsText(crs)} (or declare a CRS on its datum in a crs member)`,
      e.exitCode,
      { file: o.file },
      o.option,
    );
  }
}

/**
 * The mask's polygons in the points' CRS (`crs`; `data` the points' extent), and a sentence for the
 * summary saying which CRS the mask was taken to be in.
 */
export async function maskInCrs(mask: MaskFile, crs: Crs, data: Box): Promise<{ polygons: PolygonRings[]; note: string }> {
  const box = polygonsBox(mask.polygons);
  let source: number | undefined, how: string;
  if (mask.crs?.epsg !== undefined) {
    source = mask.crs.epsg;
    how = `EPSG:${source} (declared in the file)`;
  } else if (inDegrees(box) && !inDegrees(data)) {
    source = WGS84;
    how = "WGS 84 longitude/latitude (no crs member; RFC 7946)";
  } else {
    how = "the points' CRS";
  }
  let polygons = mask.polygons;
  let note = `Mask: ${printable(mask.file)}, in ${how === "the points' CRS" ? `the points' CRS (${crsText(crs)})` : how}`;
  if (source !== undefined && source !== crs.epsg) {
    if (crs.epsg === undefined) {
      throw new RbfieldError(
        `the mask is in ${how} but the points are in ${crsText(crs)}, and nothing relates the two; ` +
          `give the mask in the points' coordinates, or the points' EPSG code with ${opt("crs")}`,
        ExitCode.input,
        { file: mask.file },
      );
    }
    const projector = await projectorFor(source, crs, { file: mask.file, what: "mask", option: "mask", how });
    polygons = mask.polygons.map((p) =>
      p.map((ring) => {
        const t = projector.forward(Float64Array.from(ring, (q) => q[0]), Float64Array.from(ring, (q) => q[1]));
        return Array.from(t.x, (x, k) => [x, t.y[k]] as [number, number]);
      })
    );
    note += `, projected to ${crsText(crs)}`;
  }
  const b = polygonsBox(polygons);
  if (b.xmax < data.xmin || b.xmin > data.xmax || b.ymax < data.ymin || b.ymin > data.ymax) {
    const r = (v: number) => String(Number(v.toPrecision(7)));
    throw new RbfieldError(
      `the mask (taken to be in ${how}${source !== undefined && source !== crs.epsg ? `, projected to ${crsText(crs)}` : ""}) spans ` +
        `${r(b.xmin)}, ${r(b.ymin)} to ${r(b.xmax)}, ${r(b.ymax)} and misses the points (${r(data.xmin)}, ${r(data.ymin)} to ` +
        `${r(data.xmax)}, ${r(data.ymax)} in ${crsText(crs)}); give the mask in the points' CRS or declare its own in a crs member`,
      ExitCode.input,
      { file: mask.file },
    );
  }
  return { polygons, note };
}
