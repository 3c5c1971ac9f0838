// Linear units of the CRSs rbfield accepts: their labels, their size in metres and their EPSG unit
// codes (which GeoTIFF's ProjLinearUnitsGeoKey uses).
//
// Sizes (exact by definition): the international foot is 0.3048 m (international yard and pound
// agreement of 1959; NIST SP 811, 2008, appendix B.8); the US survey foot is 1200/3937 m (NIST
// SP 811 appendix B.6 note; EPSG dataset unit 9003, factor 12/39.37). Codes from the EPSG dataset:
// 9001 metre, 9002 foot, 9003 US survey foot; 9102 degree for angles.

/** A linear unit rbfield can report and write. */
export type LinearUnit = "metre" | "US survey foot" | "foot";

interface UnitFacts {
  /** Short label for summaries and axis titles. */
  label: string;
  /** Length of one unit in metres (exact). */
  metres: number;
  /** EPSG unit code, as GeoTIFF's ProjLinearUnitsGeoKey wants it. */
  epsg: number;
  /** The unit's spelling in a PROJ string's +units= parameter. */
  proj: string;
}

const UNITS: Record<LinearUnit, UnitFacts> = {
  "metre": { label: "m", metres: 1, epsg: 9001, proj: "m" },
  "foot": { label: "ft", metres: 0.3048, epsg: 9002, proj: "ft" },
  "US survey foot": { label: "US ft", metres: 1200 / 3937, epsg: 9003, proj: "us-ft" },
};

/** EPSG code of the degree, for GeoTIFF's GeogAngularUnitsGeoKey. */
export const EPSG_DEGREE = 9102;

/** "m", "US ft" or "ft". */
export function unitLabel(unit: LinearUnit): string {
  return UNITS[unit].label;
}

/** Metres in one unit: 1, 1200/3937 (US survey foot) or 0.3048 (foot). */
export function metresPerUnit(unit: LinearUnit): number {
  return UNITS[unit].metres;
}

/** GeoTIFF ProjLinearUnitsGeoKey value: EPSG unit code 9001 metre, 9002 foot, 9003 US survey foot. */
export function projLinearUnitsGeoKey(unit: LinearUnit): number {
  return UNITS[unit].epsg;
}

/** The linear unit with this EPSG unit code, or undefined. */
export function unitOfEpsgCode(code: number): LinearUnit | undefined {
  return (Object.keys(UNITS) as LinearUnit[]).find((u) => UNITS[u].epsg === code);
}

/**
 * The linear unit a PROJ definition uses: its +units= value, or its +to_meter= factor (matched to
 * 1e-12 relative), metre when it names neither (PROJ's default). Undefined for any other unit.
 */
export function unitOfProjDefinition(def: string): LinearUnit | undefined {
  const units = /\+units=(\S+)/.exec(def)?.[1];
  const toMeter = /\+to_meter=(\S+)/.exec(def)?.[1];
  const all = Object.keys(UNITS) as LinearUnit[];
  if (units !== undefined) return all.find((u) => UNITS[u].proj === units);
  if (toMeter !== undefined) {
    const f = Number(toMeter);
    return all.find((u) => Math.abs(f - UNITS[u].metres) <= 1e-12 * UNITS[u].metres);
  }
  return "metre";
}
