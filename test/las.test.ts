// LAS/LAZ reading, checked against files written byte by byte here from the ASPRS LAS
// Specification 1.4 R15 (2019): table 3 (public header block; LAS 1.2's header is its first 227
// bytes, as in the LAS 1.2 specification's table "Public Header Block"), table 4 (VLR header),
// table 5 (EVLR header), tables 7, 10, 13 and 15 (point formats 0, 3, 6 and 8), and the
// GeoKeyDirectoryTag (OGC GeoTIFF 1.1 §7.1) and OGC WKT records of user "LASF_Projection".
//
// No independent LAZ writer is available here (Debian 12 packages neither PDAL nor LASzip, and the
// npm LAZ packages only decompress), so the LAZ files are written by the small encoder below, which
// follows the LASzip format (Isenburg 2013, "LASzip: lossless compression of LiDAR data", PE&RS 79(2);
// its arithmetic coder is Amir Said's FastAC): chunks of one point each, whose first (here: only)
// point is stored raw, and the arithmetic-coded chunk table. The points are then decoded by
// laz-perf, the library under rbfield's reader, which also reads the VLRs on its own.
import { describe, expect, it } from "vitest";
import { epsgFromWkt, readLas, readLasHeader } from "../src/read/las.ts";
import { RbfieldError } from "../src/errors.ts";
import { main } from "../src/cli.ts";

// ---- A LAS writer from the specification's tables ----

interface TestPoint {
  /** Integer record coordinates (before scale and offset). */
  X: number;
  Y: number;
  Z: number;
  cls: number;
  withheld?: boolean;
}

interface Record {
  user: string;
  id: number;
  payload: Uint8Array;
}

interface LasSpec {
  minor: 2 | 4;
  format: 0 | 1 | 3 | 6 | 8;
  /** Default POINTS, SCALE and OFFSET below. */
  points?: TestPoint[];
  scale?: [number, number, number];
  offset?: [number, number, number];
  vlrs?: Record[];
  evlrs?: Record[];
  globalEncoding?: number;
  /** Extra bytes after each record's standard fields. */
  extraBytes?: number;
  /** LASzip-compressed point data (built by `lazPoints`) in place of the raw records. */
  compressed?: (records: Uint8Array[], pointOffset: number) => Uint8Array;
}

const FORMAT_LENGTH: { [format: number]: number } = { 0: 20, 1: 28, 3: 34, 6: 30, 8: 38 };

function text(bytes: Uint8Array, at: number, s: string, length: number): void {
  for (let i = 0; i < Math.min(s.length, length); i++) bytes[at + i] = s.charCodeAt(i);
}

/** One point record (spec tables 7, 8, 10, 13, 15). */
function pointRecord(p: TestPoint, format: number, length: number): Uint8Array {
  const r = new Uint8Array(length);
  const v = new DataView(r.buffer);
  v.setInt32(0, p.X, true);
  v.setInt32(4, p.Y, true);
  v.setInt32(8, p.Z, true);
  v.setUint16(12, 1000, true); // intensity
  if (format < 6) {
    r[14] = 0b00001001; // return 1 of 1
    r[15] = (p.cls & 0x1f) | (p.withheld ? 0x80 : 0); // classification bits 0–4, withheld bit 7
    v.setInt8(16, -5); // scan angle rank
    r[17] = 0; // user data
    v.setUint16(18, 7, true); // point source ID
    if (format === 1 || format === 3) v.setFloat64(20, 1234.5, true); // GPS time
    if (format === 3) [28, 30, 32].forEach((at) => v.setUint16(at, 0xabcd, true)); // R, G, B
  } else {
    r[14] = 0x11; // return 1 of 1
    r[15] = p.withheld ? 0x04 : 0; // classification flags: bit 2 withheld
    r[16] = p.cls; // full 8-bit classification
    r[17] = 0;
    v.setInt16(18, -300, true); // scan angle
    v.setUint16(20, 7, true); // point source ID
    v.setFloat64(22, 1234.5, true); // GPS time
    if (format === 8) [30, 32, 34, 36].forEach((at) => v.setUint16(at, 0x1234, true)); // R, G, B, NIR
  }
  return r;
}

function vlrBytes(rec: Record, extended: boolean): Uint8Array {
  const headerSize = extended ? 60 : 54;
  const out = new Uint8Array(headerSize + rec.payload.length);
  const v = new DataView(out.buffer);
  text(out, 2, rec.user, 16);
  v.setUint16(18, rec.id, true);
  if (extended) v.setBigUint64(20, BigInt(rec.payload.length), true);
  else v.setUint16(20, rec.payload.length, true);
  text(out, extended ? 28 : 22, "test record", 32);
  out.set(rec.payload, headerSize);
  return out;
}

function concat(parts: Uint8Array[]): Uint8Array {
  const out = new Uint8Array(parts.reduce((n, p) => n + p.length, 0));
  let at = 0;
  for (const p of parts) {
    out.set(p, at);
    at += p.length;
  }
  return out;
}

/** A whole LAS (or LAZ) file: public header block (table 3), VLRs, points, EVLRs. */
function lasFile(given: LasSpec): Uint8Array {
  const spec = { points: POINTS, scale: SCALE, offset: OFFSET, ...given };
  const headerSize = spec.minor === 4 ? 375 : 227;
  const vlrs = (spec.vlrs ?? []).map((r) => vlrBytes(r, false));
  const pointOffset = headerSize + vlrs.reduce((n, v) => n + v.length, 0);
  const length = FORMAT_LENGTH[spec.format] + (spec.extraBytes ?? 0);
  const records = spec.points.map((p) => pointRecord(p, spec.format, length));
  const points = spec.compressed ? spec.compressed(records, pointOffset) : concat(records);
  const evlrs = (spec.evlrs ?? []).map((r) => vlrBytes(r, true));

  const h = new Uint8Array(headerSize);
  const v = new DataView(h.buffer);
  text(h, 0, "LASF", 4); // file signature
  v.setUint16(4, 0, true); // file source ID
  v.setUint16(6, spec.globalEncoding ?? 0, true); // global encoding
  h[24] = 1; // version major
  h[25] = spec.minor; // version minor
  text(h, 26, "rbfield test", 32); // system identifier
  text(h, 58, "las.test.ts", 32); // generating software
  v.setUint16(90, 1, true); // creation day of year
  v.setUint16(92, 2026, true); // creation year
  v.setUint16(94, headerSize, true); // header size
  v.setUint32(96, pointOffset, true); // offset to point data
  v.setUint32(100, vlrs.length, true); // number of VLRs
  h[104] = spec.format | (spec.compressed ? 0x80 : 0); // point data record format (LASzip: bit 7)
  v.setUint16(105, length, true); // point data record length
  const n = spec.points.length;
  v.setUint32(107, spec.format >= 6 ? 0 : n, true); // legacy number of point records
  v.setUint32(111, spec.format >= 6 ? 0 : n, true); // legacy number of points by return [1]
  spec.scale.forEach((s, i) => v.setFloat64(131 + 8 * i, s, true)); // X, Y, Z scale factors
  spec.offset.forEach((o, i) => v.setFloat64(155 + 8 * i, o, true)); // X, Y, Z offsets
  const real = (i: number, k: "X" | "Y" | "Z") => spec.points[i][k] * spec.scale["XYZ".indexOf(k)] + spec.offset["XYZ".indexOf(k)];
  ["X", "Y", "Z"].forEach((k, axis) => {
    const values = spec.points.map((_, i) => real(i, k as "X" | "Y" | "Z"));
    v.setFloat64(179 + 16 * axis, Math.max(...values), true); // max
    v.setFloat64(187 + 16 * axis, Math.min(...values), true); // min
  });
  if (spec.minor === 4) {
    v.setBigUint64(227, 0n, true); // start of waveform data packet record
    const evlrStart = pointOffset + points.length;
    v.setBigUint64(235, BigInt(evlrs.length ? evlrStart : 0), true); // start of first EVLR
    v.setUint32(243, evlrs.length, true); // number of EVLRs
    v.setBigUint64(247, BigInt(n), true); // number of point records
    v.setBigUint64(255, BigInt(n), true); // number of points by return [1]
  }
  return concat([h, ...vlrs, points, ...evlrs]);
}

/** GeoKeyDirectoryTag payload (GeoTIFF 1.1 §7.1.3): version 1.1.0, keys stored in place. */
function geoKeys(keys: [number, number][]): Uint8Array {
  const values = [1, 1, 0, keys.length];
  for (const [id, value] of keys) values.push(id, 0, 1, value);
  const out = new Uint8Array(values.length * 2);
  const v = new DataView(out.buffer);
  values.forEach((x, i) => v.setUint16(2 * i, x, true));
  return out;
}

const PROJECTION = "LASF_Projection";
// GTModelTypeGeoKey 1024 = 1 (projected), GTRasterTypeGeoKey 1025 = 1 (pixel is area),
// ProjectedCSTypeGeoKey 3072 = 32633 (WGS 84 / UTM zone 33N).
const UTM33_KEYS: Record = { user: PROJECTION, id: 34735, payload: geoKeys([[1024, 1], [1025, 1], [3072, 32633]]) };
// EPSG:2229 as gdalsrsinfo -o wkt1 prints it (abridged to the parts a reader looks at).
const WKT_2229 = 'PROJCS["NAD83 / California zone 5 (ftUS)",GEOGCS["NAD83",DATUM["North_American_Datum_1983",' +
  'SPHEROID["GRS 1980",6378137,298.257222101,AUTHORITY["EPSG","7019"]],AUTHORITY["EPSG","6269"]],' +
  'PRIMEM["Greenwich",0,AUTHORITY["EPSG","8901"]],UNIT["degree",0.0174532925199433,AUTHORITY["EPSG","9122"]],' +
  'AUTHORITY["EPSG","4269"]],PROJECTION["Lambert_Conformal_Conic_2SP"],UNIT["US survey foot",0.304800609601219,' +
  'AUTHORITY["EPSG","9003"]],AXIS["Easting",EAST],AXIS["Northing",NORTH],AUTHORITY["EPSG","2229"]]';
const wktRecord = (wkt: string): Record => ({ user: PROJECTION, id: 2112, payload: new TextEncoder().encode(wkt + "\0") });

// Six points with known integers; scale 0.01/0.01/0.001 and offsets as a survey file would have.
const POINTS: TestPoint[] = [
  { X: 123456, Y: -98765, Z: 45678, cls: 2 },
  { X: 0, Y: 0, Z: 0, cls: 2 },
  { X: -1, Y: 1, Z: -1, cls: 1 },
  { X: 2147483647, Y: -2147483648, Z: 7, cls: 6 },
  { X: 500, Y: 600, Z: 700, cls: 2 },
  { X: 999, Y: 888, Z: 777, cls: 7 },
];
const SCALE: [number, number, number] = [0.01, 0.01, 0.001];
const OFFSET: [number, number, number] = [500000, 5500000, 100];
/** Coordinates by the specification's formula X·scale + offset, written out as decimals. */
const EXPECTED = {
  x: [501234.56, 500000, 499999.99, 21974836.47, 500005, 500009.99],
  y: [5499012.35, 5500000, 5500000.01, -15974836.48, 5500006, 5500008.88],
  z: [145.678, 100, 99.999, 100.007, 100.7, 100.777],
};

function expectCoordinates(got: { x: Float64Array; y: Float64Array; z: Float64Array }, rows: number[]): void {
  rows.forEach((row, i) => {
    expect(got.x[i]).toBeCloseTo(EXPECTED.x[row], 6);
    expect(got.y[i]).toBeCloseTo(EXPECTED.y[row], 6);
    expect(got.z[i]).toBeCloseTo(EXPECTED.z[row], 9);
  });
}

async function rejection(bytes: Uint8Array, options = {}): Promise<RbfieldError> {
  try {
    await readLas(bytes, "survey/tile.las", options);
  } catch (e) {
    if (e instanceof RbfieldError) return e;
    throw e;
  }
  throw new Error("expected an RbfieldError");
}

describe("LAS 1.2 (point format 3, GeoKeyDirectory CRS)", () => {
  const bytes = lasFile({ minor: 2, format: 3, vlrs: [UTM33_KEYS] });

  it("reads count, coordinates with scale and offset, classes and the EPSG code", async () => {
    const las = await readLas(bytes, "tile.las");
    expect(las.count).toBe(6);
    expect(las.skipped).toBe(0);
    expectCoordinates(las, [0, 1, 2, 3, 4, 5]);
    expect(Array.from(las.classification)).toEqual([2, 2, 1, 6, 2, 7]);
    expect(las.crs).toEqual({ epsg: 32633 });
    const header = readLasHeader(bytes, "tile.las");
    expect(header).toMatchObject({ versionMinor: 2, format: 3, recordLength: 34, count: 6, compressed: false });
  });

  it("keeps only the classes asked for (ASPRS 2 = ground)", async () => {
    const ground = await readLas(bytes, "tile.las", { classes: [2] });
    expect(ground.count).toBe(3);
    expect(ground.skipped).toBe(3);
    expect(ground.x.length).toBe(3);
    expectCoordinates(ground, [0, 1, 4]);
    const two = await readLas(bytes, "tile.las", { classes: [6, 7] });
    expect(Array.from(two.classification)).toEqual([6, 7]);
  });

  it("says which classes exist when the filter keeps nothing", async () => {
    const e = await rejection(bytes, { classes: [9] });
    expect(e.message).toBe("survey/tile.las: no point has class 9; classes present: 1 (1), 2 (3), 6 (1), 7 (1)");
    expect(e.exitCode).toBe(3);
  });

  it("skips withheld points (bit 7 of the classification byte)", async () => {
    const points = POINTS.map((p, i) => (i === 1 ? { ...p, withheld: true } : p));
    const las = await readLas(lasFile({ minor: 2, format: 0, points }), "tile.las");
    expect(las.count).toBe(5);
    expect(las.skipped).toBe(1);
    expect(las.withheld).toBe(1);
    expect(las.crs).toBeUndefined();
    expectCoordinates(las, [0, 2, 3, 4, 5]);
  });
});

describe("LAS 1.4 (point formats 6 and 8, WKT CRS, 64-bit count)", () => {
  // 8-bit classes beyond 31 exist only in formats 6–10 (e.g. 40 bathymetric point, spec table 17).
  const points14 = POINTS.map((p, i) => (i === 5 ? { ...p, cls: 40 } : p));

  it("reads format 6 with the CRS from an OGC WKT VLR", async () => {
    const bytes = lasFile({
      minor: 4,
      format: 6,
      points: points14,
      vlrs: [wktRecord(WKT_2229)],
      globalEncoding: 1 << 4, // WKT bit
    });
    const las = await readLas(bytes, "tile.las");
    expect(las.count).toBe(6);
    expectCoordinates(las, [0, 1, 2, 3, 4, 5]);
    expect(Array.from(las.classification)).toEqual([2, 2, 1, 6, 2, 40]);
    expect(las.crs).toEqual({ epsg: 2229, wkt: WKT_2229 });
    expect((await readLas(bytes, "tile.las", { classes: [40] })).count).toBe(1);
  });

  it("reads format 8 with extra bytes, a WKT extended VLR and a withheld point (flags bit 2)", async () => {
    const points = points14.map((p, i) => (i === 2 ? { ...p, withheld: true } : p));
    const bytes = lasFile({
      minor: 4,
      format: 8,
      extraBytes: 4,
      points,
      evlrs: [wktRecord(WKT_2229)],
      globalEncoding: 1 << 4,
    });
    const las = await readLas(bytes, "tile.las");
    expect(readLasHeader(bytes, "tile.las").recordLength).toBe(42);
    expect(las.count).toBe(5);
    expect(las.withheld).toBe(1);
    expectCoordinates(las, [0, 1, 3, 4, 5]);
    expect(las.crs?.epsg).toBe(2229);
  });
});

describe("EPSG code of a WKT CRS (WKT 1: OGC 01-009; WKT 2: ISO 19162:2019)", () => {
  it("takes the outermost CRS's identifier, not its base CRS's or its unit's", () => {
    expect(epsgFromWkt(WKT_2229)).toBe(2229);
    const wkt2 = 'PROJCRS["NAD83(2011) / UTM zone 10N",BASEGEOGCRS["NAD83(2011)",DATUM["NAD83 (National Spatial ' +
      'Reference System 2011)",ELLIPSOID["GRS 1980",6378137,298.257222101]],ID["EPSG",6318]],CONVERSION["UTM zone 10N",' +
      'METHOD["Transverse Mercator",ID["EPSG",9807]]],CS[Cartesian,2],LENGTHUNIT["metre",1,ID["EPSG",9001]],ID["EPSG",6339]]';
    expect(epsgFromWkt(wkt2)).toBe(6339);
    const compound = 'COMPD_CS["NAD83 / California zone 5 (ftUS) + NAVD88 height (ftUS)",' + WKT_2229 +
      ',VERT_CS["NAVD88 height (ftUS)",VERT_DATUM["North American Vertical Datum 1988",2005],AUTHORITY["EPSG","6360"]],' +
      'AUTHORITY["EPSG","6425"]]';
    expect(epsgFromWkt(compound)).toBe(2229);
    expect(epsgFromWkt('LOCAL_CS["site grid (a [local] one)",UNIT["metre",1]]')).toBeUndefined();
  });
});

describe("damaged files are refused with the file and what is wrong", () => {
  const good = () => lasFile({ minor: 2, format: 0, vlrs: [UTM33_KEYS] });
  const edit = (b: Uint8Array, change: (b: Uint8Array, v: DataView) => void) => {
    change(b, new DataView(b.buffer));
    return b;
  };
  const patch = (change: (b: Uint8Array, v: DataView) => void) => edit(good(), change);
  const cases: [string, Uint8Array, RegExp][] = [
    ["bad signature", patch((b) => b.set([0x4c, 0x41, 0x53, 0x47], 0)), /not a LAS\/LAZ file: it starts with "LASG"/],
    ["a text file", new TextEncoder().encode("x,y,z\n1,2,3\n"), /not a LAS\/LAZ file: it starts with "x,y,"/],
    ["empty file", new Uint8Array(0), /not a LAS\/LAZ file: it is empty/],
    ["a binary file", Uint8Array.from([0x89, 0x50, 0x4e, 0x47, 13, 10]), /it starts with bytes 89 50 4e 47, not the LAS signature/],
    ["truncated header", good().slice(0, 150), /truncated LAS header: 150 bytes/],
    ["unsupported version 2.0", patch((b) => b.set([2, 0], 24)), /LAS version 2\.0 is not supported/],
    ["unsupported version 1.5", patch((b) => (b[25] = 5)), /LAS version 1\.5 is not supported/],
    // Point data starts at byte 313: 227 (header) + 54 (VLR header) + 32 (three GeoKeys).
    ["point count larger than the data", patch((_, v) => v.setUint32(107, 7, true)), /header says 7 points of 20 bytes from byte 313, but the file holds only 6 \(truncated\?\)/],
    ["truncated point data", good().slice(0, -5), /header says 6 points .* holds only 5/],
    ["point data offset past the end", patch((_, v) => v.setUint32(96, 99999, true)), /offset to point data 99999 \(byte 96\) lies outside the file/],
    ["record shorter than its format", patch((_, v) => v.setUint16(105, 12, true)), /point record length 12 \(byte 105\) is shorter than the 20 bytes of point format 0/],
    ["unknown point format", patch((b) => (b[104] = 11)), /point data record format 11 \(byte 104\)/],
    ["zero scale", patch((_, v) => v.setFloat64(139, 0, true)), /Y scale factor 0 \(byte 139\)/],
    ["VLR longer than the space before the points", patch((_, v) => v.setUint16(227 + 20, 500, true)), /VLR 1 \(byte 227\) of 500 bytes runs into the point data/],
    ["compressed flag without LASzip VLR", patch((b) => (b[104] |= 0x80)), /says LAZ-compressed, but the file has no LASzip VLR/],
    [
      "LAZ with a waveform point format",
      edit(lasFile({ minor: 4, format: 6, vlrs: [laszipVlr(3, 1, [[10, 30, 3]])] }), (b, v) => {
        b[104] = 0x80 | 9; // format 9, compressed
        v.setUint16(105, 59, true); // its record length
      }),
      /LAZ with point format 9 \(waveform data\) is not supported/,
    ],
  ];
  for (const [what, bytes, message] of cases) {
    it(what, async () => {
      const e = await rejection(bytes);
      expect(e.message).toMatch(/^survey\/tile\.las: /);
      expect(e.message).toMatch(message);
      expect(e.message).not.toContain("\n");
      expect(e.exitCode).toBe(3);
    });
  }

  it("refuses class codes that are not ASPRS codes, as a usage error", async () => {
    const e = await rejection(good(), { classes: [2, 300] });
    expect(e.message).toMatch(/classes must be ASPRS codes 0 to 255/);
    expect(e.exitCode).toBe(2);
  });
});

// ---- LAZ: the LASzip arithmetic coder (FastAC-derived, as published with LASzip) ----

const AC_MIN_LENGTH = 0x01000000;
const AC_MAX_LENGTH = 0xffffffff;
const BM_LENGTH_SHIFT = 13;
const BM_MAX_COUNT = 1 << BM_LENGTH_SHIFT;
const DM_LENGTH_SHIFT = 15;
const DM_MAX_COUNT = 1 << DM_LENGTH_SHIFT;

class BitModel {
  bit0Count = 1;
  bitCount = 2;
  bit0Prob = 1 << (BM_LENGTH_SHIFT - 1);
  updateCycle = 4;
  bitsUntilUpdate = 4;
  update(): void {
    if ((this.bitCount += this.updateCycle) > BM_MAX_COUNT) {
      this.bitCount = (this.bitCount + 1) >>> 1;
      this.bit0Count = (this.bit0Count + 1) >>> 1;
      if (this.bit0Count === this.bitCount) ++this.bitCount;
    }
    const scale = Math.floor(0x80000000 / this.bitCount);
    this.bit0Prob = Math.floor((this.bit0Count * scale) / 2 ** (31 - BM_LENGTH_SHIFT));
    this.updateCycle = Math.min((5 * this.updateCycle) >>> 2, 64);
    this.bitsUntilUpdate = this.updateCycle;
  }
}

class SymbolModel {
  readonly distribution: number[];
  readonly symbolCount: number[];
  totalCount = 0;
  updateCycle: number;
  symbolsUntilUpdate = 0;
  constructor(readonly symbols: number) {
    this.distribution = new Array(symbols).fill(0);
    this.symbolCount = new Array(symbols).fill(1);
    this.updateCycle = symbols;
    this.update();
    this.symbolsUntilUpdate = this.updateCycle = (symbols + 6) >>> 1;
  }
  update(): void {
    if ((this.totalCount += this.updateCycle) > DM_MAX_COUNT) {
      this.totalCount = 0;
      for (let k = 0; k < this.symbols; k++) this.totalCount += this.symbolCount[k] = (this.symbolCount[k] + 1) >>> 1;
    }
    const scale = Math.floor(0x80000000 / this.totalCount);
    let sum = 0;
    for (let k = 0; k < this.symbols; k++) {
      this.distribution[k] = Math.floor((scale * sum) / 2 ** (31 - DM_LENGTH_SHIFT));
      sum += this.symbolCount[k];
    }
    this.updateCycle = Math.min((5 * this.updateCycle) >>> 2, (this.symbols + 6) << 3);
    this.symbolsUntilUpdate = this.updateCycle;
  }
}

class ArithmeticEncoder {
  readonly out: number[] = [];
  base = 0;
  length = AC_MAX_LENGTH;

  private carry(): void {
    let p = this.out.length - 1;
    while (this.out[p] === 0xff) this.out[p--] = 0;
    this.out[p]++;
  }
  private renorm(): void {
    do {
      this.out.push(this.base >>> 24);
      this.base = (this.base << 8) >>> 0;
      this.length = (this.length << 8) >>> 0;
    } while (this.length < AC_MIN_LENGTH);
  }
  private add(x: number): void {
    const init = this.base;
    this.base = (this.base + x) >>> 0;
    if (init > this.base) this.carry();
  }
  encodeBit(m: BitModel, bit: number): void {
    const x = m.bit0Prob * (this.length >>> BM_LENGTH_SHIFT);
    if (bit === 0) {
      this.length = x;
      ++m.bit0Count;
    } else {
      this.add(x);
      this.length = (this.length - x) >>> 0;
    }
    if (this.length < AC_MIN_LENGTH) this.renorm();
    if (--m.bitsUntilUpdate === 0) m.update();
  }
  encodeSymbol(m: SymbolModel, sym: number): void {
    let x: number;
    if (sym === m.symbols - 1) {
      x = m.distribution[sym] * (this.length >>> DM_LENGTH_SHIFT);
      this.add(x);
      this.length = (this.length - x) >>> 0;
    } else {
      this.length = this.length >>> DM_LENGTH_SHIFT;
      x = m.distribution[sym] * this.length;
      this.add(x);
      this.length = (m.distribution[sym + 1] * this.length - x) >>> 0;
    }
    if (this.length < AC_MIN_LENGTH) this.renorm();
    ++m.symbolCount[sym];
    if (--m.symbolsUntilUpdate === 0) m.update();
  }
  done(): Uint8Array {
    let anotherByte = true;
    if (this.length > 2 * AC_MIN_LENGTH) {
      this.add(AC_MIN_LENGTH);
      this.length = AC_MIN_LENGTH >>> 1;
    } else {
      this.add(AC_MIN_LENGTH >>> 1);
      this.length = AC_MIN_LENGTH >>> 9;
      anotherByte = false;
    }
    this.renorm();
    this.out.push(0, 0);
    if (anotherByte) this.out.push(0);
    return Uint8Array.from(this.out);
  }
}

/** LASzip's IntegerCompressor with 32 bits, `contexts` contexts and bits_high 8 (compress only). */
class IntegerCompressor {
  private readonly bits: SymbolModel[];
  private readonly corrector0 = new BitModel();
  private readonly corrector: SymbolModel[] = [];
  constructor(private readonly enc: ArithmeticEncoder, contexts: number) {
    this.bits = Array.from({ length: contexts }, () => new SymbolModel(33));
    for (let i = 1; i <= 32; i++) this.corrector[i] = new SymbolModel(1 << Math.min(i, 8));
  }
  compress(pred: number, real: number, context: number): void {
    let c = (real - pred) | 0;
    let c1 = c <= 0 ? -c : c - 1;
    let k = 0;
    while (c1) {
      c1 >>>= 1;
      k++;
    }
    this.enc.encodeSymbol(this.bits[context], k);
    if (k === 0) {
      this.enc.encodeBit(this.corrector0, c);
      return;
    }
    if (k > 8) throw new Error("test encoder: corrections above 8 bits are not needed here");
    c = c < 0 ? c + ((1 << k) - 1) : c - 1;
    this.enc.encodeSymbol(this.corrector[k], c);
  }
}

/** LASzip VLR payload: arithmetic coder, LASzip 2.2 (point formats 0–5) or 3.4 (6–10), items as given. */
function laszipVlr(compressor: 2 | 3, chunkSize: number, items: [type: number, size: number, version: number][]): Record {
  const out = new Uint8Array(34 + 6 * items.length);
  const v = new DataView(out.buffer);
  v.setUint16(0, compressor, true); // 2 = POINTWISE_CHUNKED, 3 = LAYERED_CHUNKED
  v.setUint16(2, 0, true); // coder: arithmetic
  out[4] = compressor === 2 ? 2 : 3; // LASzip version major
  out[5] = compressor === 2 ? 2 : 4; // minor
  v.setUint16(6, compressor === 2 ? 0 : 3, true); // revision
  v.setUint32(8, 0, true); // options
  v.setUint32(12, chunkSize, true); // chunk size
  v.setBigInt64(16, -1n, true); // number of special EVLRs
  v.setBigInt64(24, -1n, true); // offset of special EVLRs
  v.setUint16(32, items.length, true);
  items.forEach(([type, size, version], i) => {
    v.setUint16(34 + 6 * i, type, true);
    v.setUint16(36 + 6 * i, size, true);
    v.setUint16(38 + 6 * i, version, true);
  });
  return { user: "laszip encoded", id: 22204, payload: out };
}

/**
 * What follows the raw first point of a one-point chunk. Pointwise (formats 0–5): the arithmetic
 * coder's closing bytes. Layered POINT14 (format 6): the chunk's point count, the byte sizes of its
 * nine layers (XY, Z, classification, flags, intensity, scan angle, user data, point source, GPS
 * time), and the layers; only XY and Z are always closed, the others are empty when unchanged.
 */
function chunkTail(layered: boolean): Uint8Array {
  if (!layered) return new ArithmeticEncoder().done();
  const closed = new ArithmeticEncoder().done();
  const head = new Uint8Array(4 + 9 * 4);
  const v = new DataView(head.buffer);
  v.setUint32(0, 1, true);
  v.setUint32(4, closed.length, true);
  v.setUint32(8, closed.length, true);
  return concat([head, closed, closed]);
}

/**
 * LASzip point data with one point per chunk: the chunk-table offset (I64), then each chunk (its
 * point raw, then `chunkTail`), then the chunk table (version 0, chunk count, chunk byte sizes coded
 * with an IntegerCompressor(32 bits, 2 contexts), context 1).
 */
function lazPoints(layered: boolean): (records: Uint8Array[], pointOffset: number) => Uint8Array {
  return (records, pointOffset) => {
    const chunks = records.map((r) => concat([r, chunkTail(layered)]));
    const tableStart = pointOffset + 8 + chunks.reduce((n, c) => n + c.length, 0);
    const enc = new ArithmeticEncoder();
    const ic = new IntegerCompressor(enc, 2);
    chunks.forEach((c, i) => ic.compress(i ? chunks[i - 1].length : 0, c.length, 1));
    const head = new Uint8Array(8);
    new DataView(head.buffer).setBigInt64(0, BigInt(tableStart), true);
    const tableHead = new Uint8Array(8);
    new DataView(tableHead.buffer).setUint32(4, chunks.length, true);
    return concat([head, ...chunks, tableHead, enc.done()]);
  };
}

describe("LAZ (LAS 1.2, point format 1, LASzip-compressed, decoded by laz-perf)", () => {
  // LASzip item types: 6 = POINT10 (20 bytes), 7 = GPSTIME11 (8 bytes), both version 2.
  const laz = () =>
    lasFile({
      minor: 2,
      format: 1,
      vlrs: [UTM33_KEYS, laszipVlr(2, 1, [[6, 20, 2], [7, 8, 2]])],
      compressed: lazPoints(false),
    });

  it("reads the same points, classes and CRS as the LAS file", async () => {
    const bytes = laz();
    expect(readLasHeader(bytes, "tile.laz")).toMatchObject({ compressed: true, format: 1, count: 6 });
    const las = await readLas(bytes, "tile.laz");
    expect(las.count).toBe(6);
    expectCoordinates(las, [0, 1, 2, 3, 4, 5]);
    expect(Array.from(las.classification)).toEqual([2, 2, 1, 6, 2, 7]);
    expect(las.crs).toEqual({ epsg: 32633 });
    const ground = await readLas(bytes, "tile.laz", { classes: [2] });
    expect(ground.count).toBe(3);
    expect(ground.x.length).toBe(3);
    expectCoordinates(ground, [0, 1, 4]);
  });

  it("passes on laz-perf's reason when it cannot open the data", async () => {
    const bytes = lasFile({
      minor: 2,
      format: 1,
      vlrs: [laszipVlr(3, 1, [[6, 20, 2], [7, 8, 2]])], // layered compressor for a LAS 1.2 format
      compressed: lazPoints(false),
    });
    const e = await rejection(bytes);
    expect(e.message).toBe(
      "survey/tile.las: LAZ data cannot be opened: Mismatch between point format of 1 and compressor version of 3.",
    );
  });

  it("refuses a chunk table offset outside the file", async () => {
    const bytes = laz();
    const pointOffset = readLasHeader(bytes, "tile.laz").pointOffset;
    new DataView(bytes.buffer).setBigInt64(pointOffset, 10n ** 9n, true);
    const e = await rejection(bytes);
    expect(e.message).toMatch(/^survey\/tile\.las: LAZ chunk table offset 1000000000 \(byte \d+\) lies outside the file/);
  });

  it("refuses a truncated LAZ file", async () => {
    const e = await rejection(laz().slice(0, -20));
    expect(e.message).toMatch(/LAZ chunk table offset .* lies outside the file \(truncated\?\)/);
  });
});

describe("LAZ (LAS 1.4, point format 6, layered LASzip compression)", () => {
  it("reads points, 8-bit classes and the WKT CRS", async () => {
    const points = POINTS.map((p, i) => (i === 5 ? { ...p, cls: 40 } : p));
    const bytes = lasFile({
      minor: 4,
      format: 6,
      points,
      // LASzip item type 10 = POINT14 (30 bytes), version 3.
      vlrs: [wktRecord(WKT_2229), laszipVlr(3, 1, [[10, 30, 3]])],
      globalEncoding: 1 << 4,
      compressed: lazPoints(true),
    });
    const las = await readLas(bytes, "tile.laz");
    expect(las.count).toBe(6);
    expectCoordinates(las, [0, 1, 2, 3, 4, 5]);
    expect(Array.from(las.classification)).toEqual([2, 2, 1, 6, 2, 40]);
    expect(las.crs?.epsg).toBe(2229);
  });
});

describe("a point cloud through the whole tool (fit --class)", () => {
  // 36 ground returns (class 2) on a tilted plane and 12 vegetation returns (class 5) 8 m above it,
  // in UTM zone 33N (GeoKey directory): --class 2 keeps the ground only.
  const pts: TestPoint[] = [];
  for (let i = 0; i < 6; i++) {
    for (let j = 0; j < 6; j++) pts.push({ X: 1000 * i + 37 * j, Y: 1000 * j + 13 * i, Z: 2 * i + 3 * j, cls: 2 });
  }
  for (let k = 0; k < 12; k++) pts.push({ X: 400 * k + 250, Y: 350 * (k % 5) + 120, Z: 8000, cls: 5 });
  it("reads the LAS file by its signature, keeps class 2, takes the file's CRS, and fits the ground plane", async () => {
    const dir = await Deno.makeTempDir({ prefix: "rbfield-las-" });
    const file = `${dir}/cloud.las`, model = `${dir}/cloud.json`;
    await Deno.writeFile(file, lasFile({ minor: 2, format: 1, points: pts, vlrs: [UTM33_KEYS] }));
    let out = "", err = "";
    const code = await main(["fit", file, "--class", "2", "--kernel", "thin-plate", "--out", model], { out: (s) => (out += s), err: (s) => (err += s) });
    expect(code, err).toBe(0);
    expect(out).toContain("EPSG:32633");
    const m = JSON.parse(await Deno.readTextFile(model));
    expect(m.points.x).toHaveLength(36);
    // On the plane z = 100 + 0.002·(x − 500000) + 0.003·(y − 5500000) (scale 0.01 m, 0.001 m): every ground
    // return, and the surface between them (linear trend), lies on it.
    expect(Math.max(...m.fitted.map((f: number, i: number) => Math.abs(f - m.points.z[i])))).toBeLessThan(1e-6);
  });
});
