// Coordinate reference systems: what a CRS code means (kind, name, linear unit, PROJ definition) and
// transforms between CRSs for whole coordinate arrays, with proj4js doing the geodesy.
//
// Accepted spellings (our own, used by --crs and in messages):
//   EPSG:NNNN, epsg:NNNN or NNNN   an EPSG code from the bundled index (src/crs/epsg.ts);
//   local                          a local site grid, unit not stated;
//   local:m, local:ft, local:usft  a local site grid in metres, international feet or US survey feet.
// Axis order in every array rbfield passes around is (x, y) = (easting, northing) or
// (longitude, latitude), whatever order the EPSG dataset gives the axes.
import proj4 from "proj4";
import { ExitCode, printable, RbfieldError } from "../errors.ts";
import type { Crs, SourcePlace } from "../types.ts";
import { datumName, loadEpsgEntry, projDefinition } from "./epsg.ts";
import { type LinearUnit, unitOfProjDefinition } from "./units.ts";
import { utmZoneFor } from "./utm.ts";

export { EPSG_DEGREE, type LinearUnit, metresPerUnit, projLinearUnitsGeoKey, unitLabel, unitOfEpsgCode } from "./units.ts";
export { utmZoneFor, utmZoneNumber } from "./utm.ts";

export type CrsKind = "geographic" | "projected" | "local";

/** A CRS with what rbfield needs to know about it. Usable wherever a `Crs` is expected. */
export interface CrsInfo extends Crs {
  kind: CrsKind;
  /** EPSG name, e.g. "NAD83 / California zone 5 (ftUS)", or "local site grid". */
  name: string;
  /** Unit of x and y: a linear unit, "degree" for geographic CRSs, null for `local` with no unit. */
  unit: LinearUnit | "degree" | null;
  /** PROJ definition (the bundled EPSG index's, ellipsoid as in EPSG); undefined for a local grid. */
  proj4?: string;
  /** Name of the geodetic datum as the EPSG WKT spells it, e.g. "North_American_Datum_1983". */
  datum?: string;
}

const LOCAL_UNITS: Record<string, LinearUnit> = { m: "metre", ft: "foot", usft: "US survey foot" };
const PLURAL: Record<LinearUnit, string> = { "metre": "metres", "foot": "feet", "US survey foot": "US survey feet" };
/** Words for the EPSG index's kinds rbfield cannot use. */
const KIND_WORDS: Record<string, string> = {
  "CRS-VERTCRS": "vertical",
  "CRS-COMPOUNDCRS": "compound (horizontal + vertical)",
  "CRS-GCENCRS": "geocentric",
  "CRS-ENGCRS": "engineering",
  "CRS-DRVDCRS": "derived",
};
const SPELLINGS = "EPSG:NNNN, local, local:m, local:ft or local:usft";

/** A local site grid, with or without a stated unit. */
export function localCrs(unit: LinearUnit | null): CrsInfo {
  const label = unit === null ? "local site grid (no EPSG code)" : `local site grid in ${PLURAL[unit]} (no EPSG code)`;
  return { label, kind: "local", name: "local site grid", unit };
}

/**
 * What a CRS code means. `code` is an EPSG number or one of the spellings above. Errors (unknown
 * code, a vertical or compound CRS, a unit rbfield does not support) are usage errors, or input
 * errors at `place` when the code came from a file.
 */
export async function describeCrs(code: string | number, place?: SourcePlace): Promise<CrsInfo> {
  const fail = (message: string) =>
    place ? new RbfieldError(message, ExitCode.input, place) : new RbfieldError(message, ExitCode.usage);
  let epsg: number;
  if (typeof code === "number") {
    epsg = code;
  } else {
    const text = code.trim();
    const local = /^local(?::(\w+))?$/i.exec(text);
    if (local) {
      if (local[1] === undefined) return localCrs(null);
      const unit = LOCAL_UNITS[local[1].toLowerCase()];
      if (!unit) throw fail(`unknown unit "${printable(local[1])}" for a local grid: give ${SPELLINGS}`);
      return localCrs(unit);
    }
    const m = /^(?:epsg:)?(\d{1,7})$/i.exec(text);
    if (!m) throw fail(`"${printable(text.slice(0, 60))}" is not a CRS rbfield knows: give ${SPELLINGS}`);
    epsg = Number(m[1]);
  }
  const label = `EPSG:${epsg}`;
  const entry = await loadEpsgEntry(epsg);
  if (!entry) throw fail(`${label} is not in rbfield's bundled EPSG index: check the code`);
  const named = `${label} (${entry.name})`;
  const kind = entry.kind === "CRS-PROJCRS"
    ? "projected"
    : entry.kind === "CRS-GEOGCRS" || entry.kind === "CRS-GEOG3DCRS"
    ? "geographic"
    : undefined;
  if (!kind) {
    const what = KIND_WORDS[entry.kind] ?? "non-horizontal";
    throw fail(`${named} is a ${what} CRS, not a geographic or projected one: give its horizontal CRS`);
  }
  const proj = projDefinition(entry);
  if (!proj) throw fail(`${named} has no PROJ definition in the bundled EPSG index, so rbfield cannot use it`);
  let unit: CrsInfo["unit"];
  if (kind === "geographic") {
    if (entry.unit !== null && !entry.unit.startsWith("degree")) {
      throw fail(`${named} measures angles in ${entry.unit}; rbfield supports geographic CRSs in degrees`);
    }
    unit = "degree";
  } else {
    const linear = unitOfProjDefinition(proj);
    if (!linear) {
      throw fail(`${named} measures in ${entry.unit ?? "an unusual unit"}; rbfield supports metre, US survey foot and foot`);
    }
    unit = linear;
  }
  return { epsg, label, kind, name: entry.name, unit, proj4: proj, datum: datumName(entry) };
}

// ---- Transforms ----

/** Coordinate arrays, x = easting or longitude, y = northing or latitude. */
export interface XY {
  x: Float64Array;
  y: Float64Array;
}

export interface Projector {
  from: CrsInfo;
  to: CrsInfo;
  /** from → to. Throws an RbfieldError naming the first point (1-based) that cannot be transformed. */
  forward(x: Float64Array, y: Float64Array): XY;
  /** to → from. */
  inverse(x: Float64Array, y: Float64Array): XY;
}

/** What proj4js keeps of a definition's datum (lib/datum.js). */
interface ParsedDatum {
  datum_type: number;
  a: number;
  es: number;
  grids?: { name: string; isNull?: boolean }[];
}
/** proj4js's datum types (lib/constants/values.js). */
const PJD_GRIDSHIFT = 3;
const PJD_NODATUM = 5;

function datumOf(def: string): ParsedDatum {
  return (new proj4.Proj(def) as unknown as { datum: ParsedDatum }).datum;
}

/** Grids a definition needs that rbfield does not have (every grid but PROJ's "null" grid). */
function missingGrids(datum: ParsedDatum): string[] {
  if (datum.datum_type !== PJD_GRIDSHIFT || !datum.grids || datum.grids.some((g) => g.isNull)) return [];
  return datum.grids.map((g) => g.name);
}

/**
 * A definition without its datum shift: +nadgrids, +towgs84 and +datum removed, the ellipsoid kept
 * (written out as +a/+b when it came from +datum). proj4js then projects without any datum step.
 */
function withoutDatumShift(def: string): string {
  const datum = datumOf(def);
  const hadEllipsoid = /\+(ellps|a|R)=/.test(def);
  let out = def.replace(/\s*\+(nadgrids|towgs84|datum)=\S+/g, "");
  if (!hadEllipsoid) out += ` +a=${datum.a} +b=${datum.a * Math.sqrt(1 - datum.es)}`;
  return out;
}

/**
 * The two PROJ definitions proj4js should use. CRSs on the same datum (by the EPSG datum of their
 * WKT) are projected with no datum step, as PROJ does; this also avoids grids rbfield does not
 * bundle and datum parameters the index gives for one CRS of a datum but not another. A change of
 * datum needs shift parameters on both sides and no missing grid, else it is refused.
 */
function pairDefinitions(from: CrsInfo, to: CrsInfo): [string, string] {
  const a = from.proj4!, b = to.proj4!;
  if (from.datum !== undefined && from.datum === to.datum) return [withoutDatumShift(a), withoutDatumShift(b)];
  const refuse = (why: string) =>
    new RbfieldError(
      `${from.label} → ${to.label} changes datum (${from.datum ?? "?"} → ${to.datum ?? "?"}) and ${why}: ` +
        "give the coordinates in a CRS on the target's own datum",
      ExitCode.usage,
    );
  const da = datumOf(a), db = datumOf(b);
  const grids = [...missingGrids(da), ...missingGrids(db)];
  if (grids.length) throw refuse(`needs the datum-shift grid ${grids.join(" or ")}, which rbfield does not bundle`);
  if (da.datum_type === PJD_NODATUM || db.datum_type === PJD_NODATUM) {
    throw refuse("the bundled EPSG index gives no datum-shift parameters for it");
  }
  return [a, b];
}

async function resolve(crs: string | number | CrsInfo): Promise<CrsInfo> {
  return typeof crs === "object" ? crs : await describeCrs(crs);
}

/** Forward and inverse transforms between two EPSG CRSs (local grids cannot be transformed). */
export async function makeProjector(from: string | number | CrsInfo, to: string | number | CrsInfo): Promise<Projector> {
  const src = await resolve(from), dst = await resolve(to);
  for (const c of [src, dst]) {
    if (!c.proj4) {
      throw new RbfieldError(`${c.label} is a local grid and cannot be transformed to another CRS`, ExitCode.usage);
    }
  }
  const [a, b] = pairDefinitions(src, dst);
  const converter = proj4(a, b);
  const forwardPoint = (p: number[]) => converter.forward(p);
  // Some proj4js inverses are series approximations (LAEA's is off by up to ~6e-9°); Newton steps
  // on the forward transform make the inverse agree with the forward to the tolerances below.
  const inverseTol = dst.kind === "geographic" ? 1e-11 : 1e-6;
  const step = src.kind === "geographic" ? 1e-6 : 1e-2;
  const inversePoint = (p: number[]) =>
    refineInverse(forwardPoint, converter.inverse(p), p, step, inverseTol, dst.kind === "geographic");
  return {
    from: src,
    to: dst,
    forward: (x, y) => transformArrays(x, y, forwardPoint, src, dst),
    inverse: (x, y) => transformArrays(x, y, inversePoint, dst, src),
  };
}

/** Applies a point transform to coordinate arrays; a point it cannot transform is an error. */
function transformArrays(
  x: Float64Array,
  y: Float64Array,
  step: (p: number[]) => number[] | undefined,
  inCrs: CrsInfo,
  outCrs: CrsInfo,
): XY {
  if (x.length !== y.length) throw new RbfieldError(`x and y differ in length (${x.length}, ${y.length})`, ExitCode.internal);
  const n = x.length;
  const ox = new Float64Array(n), oy = new Float64Array(n);
  const p = [0, 0];
  for (let i = 0; i < n; i++) {
    p[0] = x[i];
    p[1] = y[i];
    let q: number[] | undefined;
    try {
      q = step(p);
    } catch {
      q = undefined;
    }
    if (!q || !Number.isFinite(q[0]) || !Number.isFinite(q[1])) {
      throw new RbfieldError(
        `point ${i + 1} (${x[i]}, ${y[i]}) cannot be transformed from ${inCrs.label} to ${outCrs.label}` +
          (inCrs.kind === "geographic" ? " (x must be the longitude, y the latitude)" : ""),
        ExitCode.input,
      );
    }
    ox[i] = q[0];
    oy[i] = q[1];
  }
  return { x: ox, y: oy };
}

/**
 * Newton steps (finite-difference Jacobian, `h` in source units) that move `guess` until
 * forward(guess) is within `tol` of `target`; at most three steps, the guess kept if they fail.
 * `wrapX`: x is a longitude, so residuals in x are taken the short way round.
 */
function refineInverse(
  forward: (p: number[]) => number[],
  guess: number[] | undefined,
  target: number[],
  h: number,
  tol: number,
  wrapX: boolean,
): number[] | undefined {
  if (!guess || !Number.isFinite(guess[0]) || !Number.isFinite(guess[1])) return guess;
  let s = [guess[0], guess[1]];
  for (let iter = 0; iter < 3; iter++) {
    const f = forward([s[0], s[1]]);
    const dx = f[0] - target[0], ry = f[1] - target[1];
    const rx = wrapX ? dx - 360 * Math.round(dx / 360) : dx;
    if (!(Math.abs(rx) > tol || Math.abs(ry) > tol)) return s;
    const fx = forward([s[0] + h, s[1]]), fy = forward([s[0], s[1] + h]);
    const j11 = (fx[0] - f[0]) / h, j21 = (fx[1] - f[1]) / h, j12 = (fy[0] - f[0]) / h, j22 = (fy[1] - f[1]) / h;
    const det = j11 * j22 - j12 * j21;
    const next = [s[0] - (j22 * rx - j12 * ry) / det, s[1] - (j11 * ry - j21 * rx) / det];
    if (!Number.isFinite(next[0]) || !Number.isFinite(next[1])) return s;
    s = next;
  }
  return s;
}

/** Longitude of the middle of the data, taking the shorter way round across the 180° meridian. */
function centreLongitude(lon: Float64Array): number {
  let min = Infinity, max = -Infinity, minE = Infinity, maxE = -Infinity;
  for (let i = 0; i < lon.length; i++) {
    const e = ((lon[i] % 360) + 360) % 360; // on 0°–360°
    const l = e >= 180 ? e - 360 : e; // on −180°–180°
    if (l < min) min = l;
    if (l > max) max = l;
    if (e < minE) minE = e;
    if (e > maxE) maxE = e;
  }
  if (maxE - minE < max - min) {
    const c = (minE + maxE) / 2;
    return c >= 180 ? c - 360 : c;
  }
  return (min + max) / 2;
}

export interface ProjectedPoints extends XY {
  /** The projected CRS the points are now in. */
  crs: CrsInfo;
}

/**
 * Longitude/latitude (degrees, in `fromEpsg`, default 4326 = WGS 84) → a projected CRS: `toEpsg`, or
 * by default the WGS 84 / UTM zone of the middle of the data. Latitudes beyond ±90° and non-finite
 * values are refused with the point's number (1-based) in the message.
 */
export async function projectPoints(
  lon: Float64Array,
  lat: Float64Array,
  toEpsg?: number,
  fromEpsg = 4326,
): Promise<ProjectedPoints> {
  const from = await describeCrs(fromEpsg);
  if (from.kind !== "geographic") {
    throw new RbfieldError(`${from.label} (${from.name}) is not a geographic CRS of longitudes and latitudes`, ExitCode.usage);
  }
  if (lon.length === 0) throw new RbfieldError("no points to project", ExitCode.input);
  let latMin = Infinity, latMax = -Infinity;
  for (let i = 0; i < lat.length; i++) {
    if (!(Math.abs(lat[i]) <= 90) || !(Math.abs(lon[i]) <= 360)) {
      throw new RbfieldError(
        `point ${i + 1} has longitude ${lon[i]}, latitude ${lat[i]}: not degrees of longitude and latitude`,
        ExitCode.input,
      );
    }
    if (lat[i] < latMin) latMin = lat[i];
    if (lat[i] > latMax) latMax = lat[i];
  }
  const target = toEpsg ?? utmZoneFor(centreLongitude(lon), (latMin + latMax) / 2);
  const projector = await makeProjector(from, target);
  if (projector.to.kind !== "projected") {
    throw new RbfieldError(`${projector.to.label} (${projector.to.name}) is not a projected CRS`, ExitCode.usage);
  }
  return { ...projector.forward(lon, lat), crs: projector.to };
}
