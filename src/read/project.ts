// The coordinate reference system of a points table, and projection of geographic coordinates before
// any later stage sees them: rbfield never fits degrees as planar coordinates (a degree of longitude
// is cos(latitude) of a degree of latitude, so every distance, shape and smoothing would be wrong).
//
// Which CRS the points are in, first rule that applies:
//   1. the CRS given (--crs);
//   2. the CRS the file declares (GeoJSON "crs" member);
//   3. longitude/latitude columns found by their names (lon, long, longitude; lat, latitude): WGS 84;
//   4. GeoJSON without a "crs" member whose coordinates are all within ±180, ±90: WGS 84 (RFC 7946 §4);
//   5. else a local site grid.
// A geographic CRS is projected to `toCrs` (--to-crs), by default the WGS 84 UTM zone of the centre of
// the data (utmZoneFor).
import { type CrsInfo, describeCrs, localCrs, makeProjector, utmZoneFor } from "../crs/crs.ts";
import { ExitCode, RbfieldError } from "../errors.ts";
import type { Crs, TextTable } from "../types.ts";
import { valuesToChange } from "./table.ts";

export interface CrsChoice {
  /** The CRS the points were given in. */
  source: CrsInfo;
  /** The CRS they are fitted in (the source, or its projection). */
  target: CrsInfo;
  /** Why the source CRS was taken (for the summary). */
  how: string;
}

/** The CRS record kept in models and grids: code, label, kind and unit (no PROJ string). */
export function crsRecord(info: CrsInfo): Crs {
  const { epsg, label, kind, unit } = info;
  return { ...(epsg !== undefined ? { epsg } : {}), label, kind, unit };
}

const WGS84 = 4326;

function withinDegrees(table: TextTable): boolean {
  const x = numeric(table, table.xColumn), y = numeric(table, table.yColumn);
  let any = false;
  for (let i = 0; i < x.length; i++) {
    if (Number.isNaN(x[i]) || Number.isNaN(y[i])) continue;
    if (Math.abs(x[i]) > 180 || Math.abs(y[i]) > 90) return false;
    any = true;
  }
  return any;
}

function numeric(table: TextTable, j: number): Float64Array {
  const col = table.data[j];
  if (!col || col.kind !== "number") throw new RbfieldError(`column ${j + 1} of ${table.file} holds no numbers`, ExitCode.internal);
  return col.values;
}

/** Decide the CRS of a table (rules above). */
export async function tableCrs(table: TextTable, given?: string, toCrs?: string): Promise<CrsChoice> {
  let source: CrsInfo, how: string;
  if (given) {
    source = await describeCrs(given);
    how = "as given";
  } else if (table.crs?.epsg !== undefined) {
    source = await describeCrs(table.crs.epsg, { file: table.file });
    how = "declared in the file";
  } else if (table.chosenBy?.x === "longitude") {
    source = await describeCrs(WGS84);
    how = "longitude and latitude columns, taken as WGS 84";
  } else if (table.format === "geojson" && withinDegrees(table)) {
    source = await describeCrs(WGS84);
    how = "GeoJSON without a crs member: WGS 84 longitude/latitude (RFC 7946)";
  } else {
    source = localCrs(null);
    how = "no CRS given";
  }
  let target = source;
  if (toCrs) target = await describeCrs(toCrs);
  else if (source.kind === "geographic") {
    const x = numeric(table, table.xColumn), y = numeric(table, table.yColumn);
    let lo = [Infinity, Infinity], hi = [-Infinity, -Infinity];
    for (let i = 0; i < x.length; i++) {
      if (!(Math.abs(x[i]) <= 180 && Math.abs(y[i]) <= 90)) continue;
      lo = [Math.min(lo[0], x[i]), Math.min(lo[1], y[i])];
      hi = [Math.max(hi[0], x[i]), Math.max(hi[1], y[i])];
    }
    if (!(hi[0] >= lo[0])) throw new RbfieldError("no point has a longitude within ±180° and a latitude within ±90°", ExitCode.input, { file: table.file });
    target = await describeCrs(utmZoneFor(0.5 * (lo[0] + hi[0]), 0.5 * (lo[1] + hi[1])));
  }
  if (target.kind === "geographic") {
    throw new RbfieldError(`${target.label} is geographic: give a projected CRS to fit in (degrees are not planar coordinates)`, ExitCode.usage);
  }
  return { source, target, how };
}

/**
 * Project the table's x and y columns from `choice.source` to `choice.target`: the typed values are
 * replaced by the projected ones (valuesToChange; cell texts stay as written). Rows whose geographic
 * coordinates are outside ±180°, ±90° are made unusable with their reason.
 */
export async function projectTable(table: TextTable, choice: CrsChoice): Promise<void> {
  if (choice.source === choice.target) return;
  numeric(table, table.xColumn);
  numeric(table, table.yColumn);
  const x = valuesToChange(table, table.xColumn), y = valuesToChange(table, table.yColumn);
  const geographic = choice.source.kind === "geographic";
  const keep: number[] = [];
  for (let i = 0; i < x.length; i++) {
    if (Number.isNaN(x[i]) || Number.isNaN(y[i])) continue;
    if (geographic && !(Math.abs(x[i]) <= 180 && Math.abs(y[i]) <= 90)) {
      table.unusable.push({
        line: table.lines[i],
        row: i,
        column: Math.abs(x[i]) > 180 ? table.xColumn : table.yColumn,
        reason: `longitude ${x[i]} or latitude ${y[i]} is outside ±180°, ±90° (x must be the longitude, y the latitude)`,
      });
      x[i] = NaN;
      continue;
    }
    keep.push(i);
  }
  const projector = await makeProjector(choice.source, choice.target);
  const out = projector.forward(Float64Array.from(keep, (i) => x[i]), Float64Array.from(keep, (i) => y[i]));
  keep.forEach((i, k) => {
    x[i] = out.x[k];
    y[i] = out.y[k];
  });
}
