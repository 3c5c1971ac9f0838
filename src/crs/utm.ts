// The WGS 84 / UTM zone of a place, as an EPSG code (326zz north, 327zz south).
//
// Zones are 6° wide from 180°W (zone 1) and UTM covers 80°S to 84°N (NGA, "The Universal Grids",
// DMA TM 8358.2, 1989). The two standard exceptions are handled: southern Norway (56°N–64°N,
// 3°E–12°E) is zone 32, and Svalbard (72°N–84°N) uses zones 31, 33, 35 and 37 only.
import { ExitCode, RbfieldError } from "../errors.ts";

/** Southern and northern limits of UTM in degrees of latitude. */
const UTM_SOUTH = -80;
const UTM_NORTH = 84;

/** UTM zone number (1–60) of a longitude/latitude in degrees, with the Norway and Svalbard exceptions. */
export function utmZoneNumber(lon: number, lat: number): number {
  if (!Number.isFinite(lon) || !Number.isFinite(lat) || lat < UTM_SOUTH || lat > UTM_NORTH || Math.abs(lon) > 180) {
    throw new RbfieldError(
      `no UTM zone for longitude ${lon}, latitude ${lat}: UTM covers latitudes ${UTM_SOUTH}° to ${UTM_NORTH}° ` +
        "(give a projected CRS with --crs, e.g. a polar stereographic one)",
      ExitCode.numerical,
    );
  }
  // 180°E is the same meridian as 180°W; keep it in zone 60.
  const zone = lon === 180 ? 60 : Math.floor((lon + 180) / 6) + 1;
  if (lat >= 56 && lat < 64 && lon >= 3 && lon < 12) return 32;
  if (lat >= 72) {
    if (lon >= 0 && lon < 9) return 31;
    if (lon >= 9 && lon < 21) return 33;
    if (lon >= 21 && lon < 33) return 35;
    if (lon >= 33 && lon < 42) return 37;
  }
  return zone;
}

/** EPSG code of the WGS 84 / UTM zone of a point: 32601–32660 north of the equator, 32701–32760 south. */
export function utmZoneFor(lon: number, lat: number): number {
  const zone = utmZoneNumber(lon, lat);
  return (lat >= 0 ? 32600 : 32700) + zone;
}
