// EPSG definitions, bundled: the npm package epsg-index (ISC licence) ships one small JSON file per
// code (name, kind, PROJ string, WKT, unit), generated from the EPSG dataset. Only the file of the
// code asked for is loaded, so nothing is fetched and no large table is parsed at start-up.

/** One entry of epsg-index, as shipped in `epsg-index/s/CODE.json`. */
export interface EpsgEntry {
  code: string;
  /** "CRS-GEOGCRS", "CRS-GEOG3DCRS", "CRS-PROJCRS", "CRS-VERTCRS", "CRS-COMPOUNDCRS", … */
  kind: string;
  name: string;
  wkt: string | null;
  proj4: string | null;
  unit: string | null;
}

/** Largest code epsg-index holds is six digits; anything longer cannot be an entry. */
const MAX_CODE = 999_999;

const cache = new Map<number, Promise<EpsgEntry | undefined>>();

/** The bundled entry for an EPSG code, or undefined when the index has no such code. */
export function loadEpsgEntry(code: number): Promise<EpsgEntry | undefined> {
  // The code becomes part of a module specifier: accept plain positive integers only.
  if (!Number.isSafeInteger(code) || code <= 0 || code > MAX_CODE) return Promise.resolve(undefined);
  let entry = cache.get(code);
  if (!entry) {
    entry = import(`epsg-index/s/${code}.json`, { with: { type: "json" } }).then(
      (module) => module.default as EpsgEntry,
      () => undefined,
    );
    cache.set(code, entry);
  }
  return entry;
}

/**
 * The entry's PROJ string with its ellipsoid written out from the entry's WKT (+a and +rf, the
 * EPSG dataset's defining parameters) instead of a +ellps name. proj4js's table of named
 * ellipsoids differs from EPSG for some (Airy 1830 by 0.8 mm in b; WGS 72 and GSK-2011 are
 * missing and silently become WGS 84), which would move projected coordinates.
 */
export function projDefinition(entry: EpsgEntry): string | undefined {
  const def = entry.proj4 ?? undefined;
  if (def === undefined || !/\+ellps=\S+/.test(def) || !entry.wkt) return def;
  const m = /(?:SPHEROID|ELLIPSOID)\["[^"]*",\s*([\d.eE+-]+),\s*([\d.eE+-]+)/.exec(entry.wkt);
  const a = Number(m?.[1]), rf = Number(m?.[2]);
  if (!m || !(a > 0) || !(rf >= 0)) return def;
  return def.replace(/\+ellps=\S+/, rf === 0 ? `+a=${m[1]} +b=${m[1]}` : `+a=${m[1]} +rf=${m[2]}`);
}

/** The geodetic datum's name in the entry's WKT (WKT 1 DATUM or WKT 2 DATUM/ENSEMBLE), if any. */
export function datumName(entry: EpsgEntry): string | undefined {
  return entry.wkt ? /\b(?:DATUM|ENSEMBLE)\["([^"]+)"/.exec(entry.wkt)?.[1] : undefined;
}
