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
  "id", "fid", "oid", "objectid", "pointid", "ptid", "pt", "point", "pointno", "pointnumber", "ptno", "ptnum", "no", "num", "number",
  "index", "idx", "name", "label", "station", "site", "code", "desc", "descr", "description",
  // Groundwater and soil sampling: wells, boreholes and samples (well_id, Sample ID, BH …; common practice).
  "well", "wellid", "wellname", "wellno", "siteid", "stationid", "sample", "sampleid", "sampleno", "borehole", "boreholeid", "bh", "bhid",
]);
/** Description codes of survey shots (GS, KB …): the code column named in blunder flags. */
export const CODE_NAMES = ["code", "desc", "descr", "description"];
/**
 * Columns of laboratory detection limits: DL, LOD (limit of detection), MDL (method detection
 * limit), reporting limit, LOQ/PQL (quantitation limits), NWG and BG (German Nachweis- and
 * Bestimmungsgrenze). Not "RL": surveyors use it for the reduced level (a value column).
 */
export const DETECTION_LIMIT_NAMES = [
  "dl", "detectionlimit", "lod", "limitofdetection", "mdl", "methoddetectionlimit", "reportinglimit",
  "loq", "pql", "nwg", "nachweisgrenze", "bg", "bestimmungsgrenze",
];

/** Lower case, without units in brackets, spaces, underscores or hyphens. */
export function normalizeName(name: string): string {
  // The bracket body excludes opening brackets too, so a run of "(" cannot make the match quadratic.
  return name.toLowerCase().replace(/[([{][^()[\]{}]*[)\]}]/g, "").replace(/[\s_-]+/g, "");
}

/** A name of point numbers, labels or codes ("Point ID", "code", "station"…). */
export function isIdentifierName(name: string): boolean {
  return ID_NAMES.has(normalizeName(name));
}

/** A name of description codes ("code", "desc", "Description"). */
export function isCodeName(name: string): boolean {
  return CODE_NAMES.includes(normalizeName(name));
}

/** A name of a detection-limit column ("DL", "LOD", "Nachweisgrenze" …). */
export function isDetectionLimitName(name: string): boolean {
  return DETECTION_LIMIT_NAMES.includes(normalizeName(name));
}
