// CRS descriptions and transforms, checked against GDAL (Debian gdal-bin: gdaltransform and
// gdalsrsinfo, which use PROJ and its EPSG database) and against published worked examples.
import { describe, expect, it } from "vitest";
import { spawnSync } from "node:child_process";
import process from "node:process";
import {
  type CrsInfo,
  describeCrs,
  makeProjector,
  metresPerUnit,
  projectPoints,
  projLinearUnitsGeoKey,
  unitLabel,
  utmZoneFor,
} from "../src/crs/crs.ts";
import { RbfieldError } from "../src/errors.ts";
import { mulberry32 } from "./helpers.ts";

/** Degrees from degrees, minutes and seconds (sign from the degrees, or `negative`). */
function dms(d: number, m: number, s: number, negative = false): number {
  return (negative ? -1 : 1) * (d + m / 60 + s / 3600);
}

async function project(from: number, to: number, lon: number, lat: number): Promise<[number, number]> {
  const p = await makeProjector(from, to);
  const out = p.forward(new Float64Array([lon]), new Float64Array([lat]));
  return [out.x[0], out.y[0]];
}

async function rejection(promise: Promise<unknown>): Promise<RbfieldError> {
  try {
    await promise;
  } catch (e) {
    if (e instanceof RbfieldError) return e;
    throw e;
  }
  throw new Error("expected an RbfieldError");
}

describe("published worked examples (no GDAL needed)", () => {
  // ICSM, Geocentric Datum of Australia Technical Manual (GDA94 v2.4 and GDA2020 v1.x), worked
  // example "Flinders Peak": GDA94 φ = −37°57′03.7203″, λ = 144°25′29.5244″ → MGA zone 55
  // E 273 741.297 m, N 5 796 489.777 m (values from memory). Checked to half the last digit.
  it("ICSM GDA Technical Manual: Flinders Peak in MGA zone 55", async () => {
    const [e, n] = await project(4283, 28355, dms(144, 25, 29.5244), dms(37, 57, 3.7203, true));
    expect(Math.abs(e - 273741.297)).toBeLessThanOrEqual(0.0005);
    expect(Math.abs(n - 5796489.777)).toBeLessThanOrEqual(0.0005);
  });

  // Snyder, J. P. (1987), Map Projections — A Working Manual, USGS Professional Paper 1395, p. 269:
  // Clarke 1866 ellipsoid, UTM zone 18 (λ0 = 75°W, k0 = 0.9996), φ = 40°30′N, λ = 73°30′W gives
  // x = 127 106.5 m, y = 4 484 124.4 m before the false easting of 500 000 m (values from memory).
  it("Snyder 1987, p. 269: UTM zone 18 on Clarke 1866 (NAD27 / UTM zone 18N)", async () => {
    const [e, n] = await project(4267, 26718, -73.5, 40.5);
    expect(Math.abs(e - 500000 - 127106.5)).toBeLessThanOrEqual(0.05);
    expect(Math.abs(n - 4484124.4)).toBeLessThanOrEqual(0.05);
  });

  // Ordnance Survey, A Guide to Coordinate Systems in Great Britain, annex C (projection example):
  // OSGB36 φ = 52°39′27.2531″N, λ = 1°43′4.5177″E → National Grid E 651 409.903 m, N 313 177.270 m
  // (values from memory).
  it("Ordnance Survey guide: the annex C example on the British National Grid", async () => {
    const [e, n] = await project(4277, 27700, dms(1, 43, 4.5177), dms(52, 39, 27.2531));
    expect(Math.abs(e - 651409.903)).toBeLessThanOrEqual(0.0005);
    expect(Math.abs(n - 313177.270)).toBeLessThanOrEqual(0.0005);
  });
});

describe("UTM zones (zone definition: NGA/DMA TM 8358.2, 6° zones from 180°W, Norway and Svalbard exceptions)", () => {
  it("gives 326zz north and 327zz south", () => {
    expect(utmZoneFor(dms(144, 25, 29.5244), -37.95)).toBe(32755); // the ICSM example is in zone 55
    expect(utmZoneFor(-73.5, 40.5)).toBe(32618); // Snyder's example is in zone 18
    expect(utmZoneFor(-180, 10)).toBe(32601);
    expect(utmZoneFor(179.99, -10)).toBe(32760);
    expect(utmZoneFor(180, -10)).toBe(32760);
    expect(utmZoneFor(0, 0)).toBe(32631);
    expect(utmZoneFor(-0.0001, -0.0001)).toBe(32730);
  });

  it("handles southern Norway and Svalbard", () => {
    expect(utmZoneFor(5.32, 60.39)).toBe(32632); // Bergen: zone 32, not 31
    expect(utmZoneFor(5.32, 55.9)).toBe(32631); // south of 56°N: standard zone 31
    expect(utmZoneFor(15.6, 78.2)).toBe(32633); // Longyearbyen
    expect(utmZoneFor(8.0, 78.0)).toBe(32631);
    expect(utmZoneFor(10.0, 78.0)).toBe(32633);
    expect(utmZoneFor(22.0, 79.0)).toBe(32635);
    expect(utmZoneFor(40.0, 80.0)).toBe(32637);
  });

  it("refuses latitudes outside UTM (80°S to 84°N)", () => {
    expect(() => utmZoneFor(0, 85)).toThrow(/UTM covers latitudes -80° to 84°/);
    expect(() => utmZoneFor(0, -80.5)).toThrow(RbfieldError);
    expect(() => utmZoneFor(Number.NaN, 0)).toThrow(RbfieldError);
  });
});

describe("describeCrs", () => {
  it("reads EPSG codes in any spelling", async () => {
    for (const code of [2229, "2229", "EPSG:2229", " epsg:2229 "]) {
      const d = await describeCrs(code);
      expect(d).toMatchObject({ epsg: 2229, label: "EPSG:2229", kind: "projected", unit: "US survey foot" });
    }
  });

  it("accepts local grids with our unit spellings", async () => {
    const plain = await describeCrs("local");
    expect(plain).toMatchObject({ kind: "local", unit: null });
    expect(plain.epsg).toBeUndefined();
    expect((await describeCrs("local:m")).unit).toBe("metre");
    expect((await describeCrs("LOCAL:ft")).unit).toBe("foot");
    expect((await describeCrs("local:usft")).unit).toBe("US survey foot");
    expect((await describeCrs("local:usft")).label).toBe("local site grid in US survey feet (no EPSG code)");
  });

  it("refuses what it cannot use, in one line naming the code", async () => {
    const cases: [string | number, RegExp][] = [
      [999999, /EPSG:999999 is not in rbfield's bundled EPSG index/],
      ["EPSG:5703", /EPSG:5703 \(NAVD88 height\) is a vertical CRS/], // EPSG: NAVD88 height
      [3167, /measures in British chain/], // EPSG: Kertau (RSO) / RSO Malaya (ch)
      ["local:yd", /unknown unit "yd"/],
      ["UTM33", /"UTM33" is not a CRS rbfield knows/],
      ["../../etc/passwd", /is not a CRS rbfield knows/],
    ];
    for (const [code, message] of cases) {
      const e = await rejection(describeCrs(code));
      expect(e.message).toMatch(message);
      expect(e.message).not.toContain("\n");
      expect(e.exitCode).toBe(2);
    }
    const inFile = await rejection(describeCrs(999999, { file: "survey.las" }));
    expect(inFile.message).toMatch(/^survey\.las: EPSG:999999/);
    expect(inFile.exitCode).toBe(3);
  });

  it("labels units and gives GeoTIFF unit codes (EPSG: 9001 metre, 9002 foot, 9003 US survey foot)", () => {
    expect([unitLabel("metre"), unitLabel("US survey foot"), unitLabel("foot")]).toEqual(["m", "US ft", "ft"]);
    expect([projLinearUnitsGeoKey("metre"), projLinearUnitsGeoKey("foot"), projLinearUnitsGeoKey("US survey foot")])
      .toEqual([9001, 9002, 9003]);
    // NIST SP 811 (2008), appendix B: foot = 0.3048 m exactly; US survey foot = 1200/3937 m exactly.
    expect(metresPerUnit("foot")).toBe(0.3048);
    expect(metresPerUnit("US survey foot")).toBe(1200 / 3937);
    expect(metresPerUnit("metre")).toBe(1);
  });
});

describe("transforms that cannot be done are refused", () => {
  it("refuses a datum shift that needs a grid rbfield does not bundle", async () => {
    const e = await rejection(makeProjector(4326, 27700));
    expect(e.message).toMatch(/^EPSG:4326 → EPSG:27700 changes datum .* needs the datum-shift grid OSTN15/);
  });

  it("refuses a change of datum the bundled definitions give no parameters for", async () => {
    // EPSG:4322 (WGS 72) has no towgs84 in the index: WGS 72 → WGS 84 would silently be a null shift.
    const e = await rejection(makeProjector(4322, 32633));
    expect(e.message).toMatch(/^EPSG:4322 → EPSG:32633 changes datum .* gives no datum-shift parameters/);
  });

  it("refuses local grids and impossible points, naming the point", async () => {
    expect((await rejection(makeProjector("local:m", 32633))).message).toMatch(/local grid/);
    const bad = await rejection(projectPoints(new Float64Array([10, 11]), new Float64Array([50, 95])));
    expect(bad.message).toMatch(/point 2 has longitude 11, latitude 95/);
    const p = await makeProjector(4326, 32633);
    const e = (() => {
      try {
        p.forward(new Float64Array([15, Number.NaN]), new Float64Array([50, 50]));
      } catch (err) {
        return err as RbfieldError;
      }
    })();
    expect(e).toBeInstanceOf(RbfieldError);
    expect(e!.message).toMatch(/^point 2 \(NaN, 50\) cannot be transformed from EPSG:4326 to EPSG:32633/);
  });
});

// ---- Cross-checks with GDAL (gdaltransform and gdalsrsinfo from Debian gdal-bin) ----

const haveGdal = spawnSync("gdaltransform", ["--version"], { encoding: "utf8" }).status === 0;
const skipGdal = !haveGdal && !process.env.CI;
if (skipGdal) console.warn("gdaltransform not found: GDAL cross-checks skipped (they fail instead when CI is set)");

/** `gdaltransform -s_srs EPSG:from -t_srs EPSG:to -output_xy` on the points. */
function gdaltransform(from: number, to: number, x: Float64Array, y: Float64Array): { x: Float64Array; y: Float64Array } {
  const input = Array.from(x, (xi, i) => `${xi.toPrecision(17)} ${y[i].toPrecision(17)}`).join("\n") + "\n";
  const run = spawnSync("gdaltransform", ["-s_srs", `EPSG:${from}`, "-t_srs", `EPSG:${to}`, "-output_xy"], {
    input,
    encoding: "utf8",
  });
  expect(run.error, "gdaltransform must be installed (Debian gdal-bin)").toBeUndefined();
  expect(run.status, run.stderr).toBe(0);
  const lines = run.stdout.trim().split("\n");
  expect(lines.length).toBe(x.length);
  const ox = new Float64Array(x.length), oy = new Float64Array(x.length);
  lines.forEach((line, i) => {
    const [a, b] = line.trim().split(/\s+/).map(Number);
    ox[i] = a;
    oy[i] = b;
  });
  return { x: ox, y: oy };
}

interface GdalSrs {
  kind: "projected" | "geographic";
  name: string;
  unitName: string;
  unitFactor: number;
  unitCode: number;
}

/** Kind, name and unit of a CRS from `gdalsrsinfo -o wkt1` (the top-level UNIT is the CRS's own). */
function gdalsrsinfo(epsg: number): GdalSrs {
  const run = spawnSync("gdalsrsinfo", ["--single-line", "-o", "wkt1", `EPSG:${epsg}`], { encoding: "utf8" });
  expect(run.status, run.stderr).toBe(0);
  const wkt = run.stdout.trim();
  const head = /^(PROJCS|GEOGCS)\["([^"]+)"/.exec(wkt);
  expect(head, wkt).not.toBeNull();
  // Find the UNIT at bracket depth 1 (a child of the outermost object).
  let depth = 0, unit: RegExpExecArray | null = null;
  for (let i = 0; i < wkt.length; i++) {
    if (wkt[i] === "[") depth++;
    else if (wkt[i] === "]") depth--;
    else if (depth === 1 && wkt.startsWith("UNIT[", i)) {
      unit = /^UNIT\["([^"]+)",([\d.eE+-]+)(?:,AUTHORITY\["EPSG","(\d+)"\])?/.exec(wkt.slice(i));
    }
  }
  expect(unit, wkt).not.toBeNull();
  return {
    kind: head![1] === "PROJCS" ? "projected" : "geographic",
    name: head![2],
    unitName: unit![1],
    unitFactor: Number(unit![2]),
    unitCode: Number(unit![3]),
  };
}

interface Case {
  what: string;
  from: number;
  to: number;
  lon: [number, number];
  lat: [number, number];
  n: number;
}

// Points spread over each CRS's area of use. Sources are the geographic CRS of the target's own
// datum, so the comparison is of the projection (no datum-shift choice involved), except the WGS 84
// UTM zones, which are on WGS 84 itself.
const CASES: Case[] = [
  { what: "WGS 84 / UTM 33N", from: 4326, to: 32633, lon: [12, 18], lat: [0, 84], n: 40 },
  { what: "WGS 84 / UTM 55S", from: 4326, to: 32755, lon: [144, 150], lat: [-80, 0], n: 40 },
  { what: "WGS 84 / UTM 18N", from: 4326, to: 32618, lon: [-78, -72], lat: [0, 84], n: 30 },
  { what: "WGS 84 / UTM 1S (at 180°)", from: 4326, to: 32701, lon: [-180, -174], lat: [-80, 0], n: 30 },
  { what: "WGS 84 / UTM 60N (at 180°)", from: 4326, to: 32660, lon: [174, 180], lat: [0, 84], n: 30 },
  { what: "NAD83 / California zone 5 (US survey feet, LCC)", from: 4269, to: 2229, lon: [-121.4, -114.1], lat: [32.8, 35.8], n: 40 },
  { what: "NAD83 / Arizona East (international feet, TM)", from: 4269, to: 2222, lon: [-111, -109.05], lat: [31.4, 37], n: 40 },
  { what: "OSGB36 / British National Grid (Airy 1830)", from: 4277, to: 27700, lon: [-7.5, 1.7], lat: [49.9, 60.8], n: 30 },
  { what: "NAD27 / UTM 18N (Clarke 1866)", from: 4267, to: 26718, lon: [-78, -72], lat: [35, 45], n: 20 },
  { what: "WGS 72 / UTM 33N (WGS 72 ellipsoid)", from: 4322, to: 32233, lon: [12, 18], lat: [0, 84], n: 20 },
  { what: "GDA94 / MGA 55", from: 4283, to: 28355, lon: [144, 150], lat: [-43.7, -10], n: 20 },
  { what: "ETRS89 / LAEA Europe", from: 4258, to: 3035, lon: [-10, 35], lat: [35, 70], n: 20 },
  { what: "WGS 84 / Antarctic Polar Stereographic", from: 4326, to: 3031, lon: [-180, 180], lat: [-90, -60], n: 20 },
];

function scatter(c: Case, seed: number): { x: Float64Array; y: Float64Array } {
  const r = mulberry32(seed);
  const x = new Float64Array(c.n), y = new Float64Array(c.n);
  for (let i = 0; i < c.n; i++) {
    x[i] = c.lon[0] + (c.lon[1] - c.lon[0]) * r();
    y[i] = c.lat[0] + (c.lat[1] - c.lat[0]) * r();
  }
  return { x, y };
}

function maxAbsDiff(a: Float64Array, b: Float64Array): number {
  let m = 0;
  for (let i = 0; i < a.length; i++) m = Math.max(m, Math.abs(a[i] - b[i]));
  return m;
}

describe.skipIf(skipGdal)("transforms against GDAL's gdaltransform (Debian gdal-bin)", () => {
  const report: string[] = [];

  CASES.forEach((c, k) => {
    it(`${c.what}: EPSG:${c.from} → EPSG:${c.to} to 1 mm, inverse to 1e-9°`, async () => {
      const pts = scatter(c, 1000 + k);
      const projector = await makeProjector(c.from, c.to);
      const ours = projector.forward(pts.x, pts.y);
      const gdal = gdaltransform(c.from, c.to, pts.x, pts.y);
      // Differences in metres (feet converted with the factor gdalsrsinfo gives for the unit).
      const toMetres = gdalsrsinfo(c.to).unitFactor;
      const dx = maxAbsDiff(ours.x, gdal.x) * toMetres, dy = maxAbsDiff(ours.y, gdal.y) * toMetres;
      expect(dx).toBeLessThanOrEqual(0.001);
      expect(dy).toBeLessThanOrEqual(0.001);
      // Inverse: our own round trip, and our inverse of GDAL's projected coordinates.
      const back = projector.inverse(ours.x, ours.y);
      const roundTrip = Math.max(maxAbsDiff(back.x, pts.x), maxAbsDiff(back.y, pts.y));
      expect(roundTrip).toBeLessThanOrEqual(1e-9);
      const fromGdal = projector.inverse(gdal.x, gdal.y);
      // 1 mm on the ground is about 1e-8° of latitude.
      const lonScale = (i: number) => Math.cos((pts.y[i] * Math.PI) / 180);
      let inv = 0;
      for (let i = 0; i < c.n; i++) {
        const dLon = Math.abs(((fromGdal.x[i] - pts.x[i] + 540) % 360) - 180) * lonScale(i);
        inv = Math.max(inv, dLon, Math.abs(fromGdal.y[i] - pts.y[i]));
      }
      expect(inv).toBeLessThanOrEqual(2e-8);
      report.push(
        `${c.what}: ${c.n} points, max |Δx| ${(dx * 1000).toExponential(1)} mm, |Δy| ${(dy * 1000).toExponential(1)} mm, ` +
          `round trip ${roundTrip.toExponential(1)}°, inverse of GDAL's ${inv.toExponential(1)}°`,
      );
      if (k === CASES.length - 1) console.info(report.join("\n"));
    });
  });

  it("projectPoints picks the UTM zone of the data's centre and agrees with gdaltransform", async () => {
    // Around Melbourne (zone 55 south) and across the 180° meridian near Fiji (zone 60 or 1).
    const r = mulberry32(7);
    const n = 50;
    const lon = new Float64Array(n), lat = new Float64Array(n);
    for (let i = 0; i < n; i++) {
      lon[i] = 144.5 + r();
      lat[i] = -38.2 + r() * 0.6;
    }
    const p = await projectPoints(lon, lat);
    expect(p.crs.epsg).toBe(32755);
    const gdal = gdaltransform(4326, 32755, lon, lat);
    expect(maxAbsDiff(p.x, gdal.x)).toBeLessThanOrEqual(0.001);
    expect(maxAbsDiff(p.y, gdal.y)).toBeLessThanOrEqual(0.001);

    const across = await projectPoints(new Float64Array([179.6, 179.9, -179.9]), new Float64Array([-17, -17.5, -18]));
    expect(across.crs.epsg).toBe(32760); // centre 179.95°E: zone 60 south
    const gdal2 = gdaltransform(4326, 32760, new Float64Array([179.6, 179.9, -179.9]), new Float64Array([-17, -17.5, -18]));
    expect(maxAbsDiff(across.x, gdal2.x)).toBeLessThanOrEqual(0.001);

    const named = await projectPoints(lon, lat, 28355, 4283);
    expect(named.crs.epsg).toBe(28355);
    expect(maxAbsDiff(named.x, gdaltransform(4283, 28355, lon, lat).x)).toBeLessThanOrEqual(0.001);
  });

  it("describes each CRS as gdalsrsinfo does: kind, name, unit, factor and EPSG unit code", async () => {
    const codes = new Set<number>();
    for (const c of CASES) codes.add(c.from).add(c.to);
    for (const epsg of codes) {
      const ours: CrsInfo = await describeCrs(epsg);
      const gdal = gdalsrsinfo(epsg);
      expect(ours.kind, `EPSG:${epsg}`).toBe(gdal.kind);
      expect(ours.name, `EPSG:${epsg}`).toBe(gdal.name);
      if (gdal.kind === "geographic") {
        expect(ours.unit).toBe("degree");
        expect(gdal.unitName).toBe("degree");
        continue;
      }
      expect(ours.unit, `EPSG:${epsg}`).toBe(gdal.unitName);
      const unit = ours.unit as "metre" | "foot" | "US survey foot";
      // GDAL prints the factor to 15 significant digits.
      expect(Math.abs(metresPerUnit(unit) - gdal.unitFactor)).toBeLessThanOrEqual(1e-15);
      expect(projLinearUnitsGeoKey(unit), `EPSG:${epsg}`).toBe(gdal.unitCode);
    }
  });
});
