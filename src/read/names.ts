// The header names rbfield recognises: x, y and value columns, and identifiers (point numbers,
// codes) that are kept as text and never taken for the value.

// Compared after normalizeName().
export const X_NAMES = ["x", "easting", "east", "e", "eastings", "mapx"];
export const Y_NAMES = ["y", "northing", "north", "n", "northings", "mapy"];
/** Geographic coordinates: x is the longitude, y the latitude (degrees; projected before fitting). */
export const LON_NAMES = ["lon", "long", "longitude", "lng"];
export const LAT_NAMES = ["lat", "latitude"];
export const Z_NAMES = [
  "z", "elevation", "elev", "height", "value", "level", "rl", "reducedlevel",
  "h", "val", "reading", "concentration", "head",
];
const ID_NAMES = new Set([
  "id", "fid", "oid", "objectid", "pointid", "ptid", "pt", "point", "no", "num", "number",
  "index", "idx", "name", "label", "station", "site", "code",
]);

/** Lower case, without units in brackets, spaces, underscores or hyphens. */
export function normalizeName(name: string): string {
  // The bracket body excludes opening brackets too, so a run of "(" cannot make the match quadratic.
  return name.toLowerCase().replace(/[([{][^()[\]{}]*[)\]}]/g, "").replace(/[\s_-]+/g, "");
}

/** A name of point numbers, labels or codes ("Point ID", "code", "station"…). */
export function isIdentifierName(name: string): boolean {
  return ID_NAMES.has(normalizeName(name));
}
