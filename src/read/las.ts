// LAS 1.0–1.4 point clouds (point formats 0–10) and LAZ, their LASzip-compressed form, read into
// typed arrays. Layouts from the ASPRS LAS Specification 1.4 R15 (2019): table 3 (public header
// block), tables 4–5 (VLR and EVLR headers), tables 7–17 (point data record formats 0–10), and the
// GeoKeyDirectoryTag (record 34735) and OGC WKT (record 2112) records of user "LASF_Projection".
// LAS 1.2 (2008) and 1.3 (2011) headers are the first 227 and 235 bytes of the 1.4 header.
// LAZ is decompressed by laz-perf (WebAssembly, Apache-2.0) into the same records.
import { createLazPerf } from "laz-perf";
import { ExitCode, inputError, printable, RbfieldError } from "../errors.ts";

export interface LasOptions {
  /** Keep only these ASPRS classification codes (e.g. [2] for ground); default all. */
  classes?: number[];
}

export interface LasPoints {
  /** Coordinates with scale and offset applied, in the file's CRS units. */
  x: Float64Array;
  y: Float64Array;
  z: Float64Array;
  /** ASPRS classification code of each kept point. */
  classification: Uint8Array;
  /** Points kept. */
  count: number;
  /** The CRS from the OGC WKT or GeoKeyDirectory record, when the file has one. */
  crs?: { epsg?: number; wkt?: string };
  /** Points not kept: withheld (flagged deleted by the spec) or outside `classes`. */
  skipped: number;
  /** Of `skipped`, the points flagged withheld. */
  withheld: number;
}

/** What rbfield uses of the public header block. */
export interface LasHeader {
  versionMajor: number;
  versionMinor: number;
  headerSize: number;
  pointOffset: number;
  vlrCount: number;
  /** Point data record format 0–10 (compression bits removed). */
  format: number;
  compressed: boolean;
  recordLength: number;
  /** Number of point records (the 64-bit count from LAS 1.4 on). */
  count: number;
  scale: [number, number, number];
  offset: [number, number, number];
  globalEncoding: number;
  /** LAS 1.4: first extended VLR's byte offset and the number of them. */
  evlrStart: number;
  evlrCount: number;
}

/** A variable-length record: who wrote it, its record ID and where its payload lies in the file. */
interface Vlr {
  userId: string;
  recordId: number;
  start: number;
  length: number;
}

const SIGNATURE = "LASF";
/** Header size by minor version (1.0–1.2: 227, 1.3: 235, 1.4: 375 bytes). */
const MIN_HEADER = [227, 227, 227, 235, 375];
/** Bytes of each point format's fields before any extra bytes (spec tables 7–17). */
const CORE_RECORD_LENGTH = [20, 28, 26, 34, 57, 63, 30, 36, 38, 59, 67];
const VLR_HEADER = 54;
const EVLR_HEADER = 60;
const PROJECTION_USER = "LASF_Projection";
const GEOKEY_RECORD = 34735;
const WKT_RECORD = 2112;
const LASZIP_USER = "laszip encoded";
const LASZIP_RECORD = 22204;
/** Point formats laz-perf decompresses (not the waveform formats 4, 5, 9 and 10). */
const LAZ_FORMATS = [0, 1, 2, 3, 6, 7, 8];
/** Global encoding bit 4: the CRS is given as WKT (required for point formats 6–10). */
const WKT_BIT = 1 << 4;
/** GeoTIFF keys (OGC GeoTIFF 1.1): ProjectedCRSGeoKey, GeographicTypeGeoKey; 32767 = user-defined. */
const PROJECTED_KEY = 3072;
const GEOGRAPHIC_KEY = 2048;
const USER_DEFINED = 32767;

const ascii = (bytes: Uint8Array, start: number, length: number): string => {
  let s = "";
  for (let i = start; i < start + length && bytes[i] !== 0; i++) s += String.fromCharCode(bytes[i]);
  return s;
};

/** Reads and checks the public header block. Any damage is an input error naming the file. */
export function readLasHeader(bytes: Uint8Array, file: string): LasHeader {
  const fail = (message: string) => inputError(message, { file });
  const head = bytes.subarray(0, 4);
  if (ascii(head, 0, 4) !== SIGNATURE) {
    const shown = head.length === 0
      ? "is empty"
      : head.every((b) => b >= 0x20 && b < 0x7f)
      ? `starts with "${String.fromCharCode(...head)}"`
      : `starts with bytes ${Array.from(head, (b) => b.toString(16).padStart(2, "0")).join(" ")}`;
    throw fail(`not a LAS/LAZ file: it ${shown}, not the LAS signature "LASF" (byte 0)`);
  }
  if (bytes.length < MIN_HEADER[0]) {
    throw fail(`truncated LAS header: ${bytes.length} bytes, a LAS header has at least ${MIN_HEADER[0]}`);
  }
  const view = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  const versionMajor = bytes[24], versionMinor = bytes[25];
  if (versionMajor !== 1 || versionMinor > 4) {
    throw fail(`LAS version ${versionMajor}.${versionMinor} is not supported (rbfield reads LAS 1.0 to 1.4; byte 24)`);
  }
  const minHeader = MIN_HEADER[versionMinor];
  const headerSize = view.getUint16(94, true);
  if (headerSize < minHeader) {
    throw fail(`header size ${headerSize} (byte 94) is below the ${minHeader} bytes of a LAS 1.${versionMinor} header`);
  }
  if (bytes.length < headerSize) {
    throw fail(`truncated LAS header: ${bytes.length} bytes, the header says it has ${headerSize}`);
  }
  const pointOffset = view.getUint32(96, true);
  if (pointOffset < headerSize || pointOffset > bytes.length) {
    throw fail(`offset to point data ${pointOffset} (byte 96) lies outside the file (header ${headerSize}, file ${bytes.length} bytes)`);
  }
  const formatByte = bytes[104];
  const format = formatByte & 0x3f;
  // LASzip marks compressed point data by setting bit 7 (and, in some versions, bit 6).
  const compressed = (formatByte & 0xc0) !== 0;
  if (format >= CORE_RECORD_LENGTH.length) {
    throw fail(`point data record format ${format} (byte 104) is not one of LAS 1.4's formats 0 to 10`);
  }
  const recordLength = view.getUint16(105, true);
  if (recordLength < CORE_RECORD_LENGTH[format]) {
    throw fail(
      `point record length ${recordLength} (byte 105) is shorter than the ${CORE_RECORD_LENGTH[format]} bytes of point format ${format}`,
    );
  }
  let count = view.getUint32(107, true);
  if (versionMinor >= 4) {
    const count64 = view.getBigUint64(247, true);
    if (count64 > BigInt(Number.MAX_SAFE_INTEGER)) throw fail(`point count ${count64} (byte 247) is not plausible`);
    if (count64 > 0n || count === 0) count = Number(count64);
  }
  const scale: [number, number, number] = [view.getFloat64(131, true), view.getFloat64(139, true), view.getFloat64(147, true)];
  const offset: [number, number, number] = [view.getFloat64(155, true), view.getFloat64(163, true), view.getFloat64(171, true)];
  scale.forEach((s, i) => {
    if (!Number.isFinite(s) || s === 0) throw fail(`${"XYZ"[i]} scale factor ${s} (byte ${131 + 8 * i}) must be a finite non-zero number`);
  });
  offset.forEach((o, i) => {
    if (!Number.isFinite(o)) throw fail(`${"XYZ"[i]} offset ${o} (byte ${155 + 8 * i}) must be a finite number`);
  });
  let evlrStart = 0, evlrCount = 0;
  if (versionMinor >= 4) {
    const start = view.getBigUint64(235, true);
    evlrCount = view.getUint32(243, true);
    if (evlrCount > 0 && (start < BigInt(pointOffset) || start > BigInt(bytes.length))) {
      throw fail(`start of extended VLRs ${start} (byte 235) lies outside the file (${bytes.length} bytes)`);
    }
    evlrStart = Number(start);
  }
  return {
    versionMajor,
    versionMinor,
    headerSize,
    pointOffset,
    vlrCount: view.getUint32(100, true),
    format,
    compressed,
    recordLength,
    count,
    scale,
    offset,
    globalEncoding: view.getUint16(6, true),
    evlrStart,
    evlrCount,
  };
}

/** The VLRs (between header and point data) and, for LAS 1.4, the extended VLRs after the points. */
function readVlrs(bytes: Uint8Array, header: LasHeader, file: string): Vlr[] {
  const view = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  const out: Vlr[] = [];
  let at = header.headerSize;
  for (let i = 0; i < header.vlrCount; i++) {
    if (at + VLR_HEADER > header.pointOffset) {
      throw inputError(`VLR ${i + 1} of ${header.vlrCount} (byte ${at}) runs into the point data at byte ${header.pointOffset}`, { file });
    }
    const length = view.getUint16(at + 20, true); // record length after header (table 4)
    if (at + VLR_HEADER + length > header.pointOffset) {
      throw inputError(`VLR ${i + 1} (byte ${at}) of ${length} bytes runs into the point data at byte ${header.pointOffset}`, { file });
    }
    out.push({ userId: ascii(bytes, at + 2, 16), recordId: view.getUint16(at + 18, true), start: at + VLR_HEADER, length });
    at += VLR_HEADER + length;
  }
  at = header.evlrStart;
  for (let i = 0; i < header.evlrCount; i++) {
    const length = at + EVLR_HEADER <= bytes.length ? Number(view.getBigUint64(at + 20, true)) : Infinity;
    if (at + EVLR_HEADER + length > bytes.length) {
      throw inputError(`extended VLR ${i + 1} of ${header.evlrCount} (byte ${at}) runs past the end of the file (truncated?)`, { file });
    }
    out.push({ userId: ascii(bytes, at + 2, 16), recordId: view.getUint16(at + 18, true), start: at + EVLR_HEADER, length });
    at += EVLR_HEADER + length;
  }
  return out;
}

/** The EPSG code in a GeoKeyDirectoryTag record (projected CRS key first), if it names one. */
function epsgFromGeoKeys(bytes: Uint8Array, vlr: Vlr, file: string): number | undefined {
  const view = new DataView(bytes.buffer, bytes.byteOffset + vlr.start, vlr.length);
  const keys = vlr.length >= 8 ? view.getUint16(6, true) : -1;
  if (keys < 0 || 8 + 8 * keys > vlr.length) {
    throw inputError(`GeoKeyDirectory record (byte ${vlr.start}) is damaged: ${vlr.length} bytes for ${keys} keys`, { file });
  }
  const values = new Map<number, number>();
  for (let k = 0; k < keys; k++) {
    const at = 8 + 8 * k;
    // Location 0: the value is stored in the key entry itself (GeoTIFF 1.1, §7.1.3).
    if (view.getUint16(at + 2, true) === 0) values.set(view.getUint16(at, true), view.getUint16(at + 6, true));
  }
  for (const key of [PROJECTED_KEY, GEOGRAPHIC_KEY]) {
    const code = values.get(key);
    if (code !== undefined && code > 0 && code < USER_DEFINED) return code;
  }
  return undefined;
}

/** The EPSG code of the outermost CRS of a WKT 1 (AUTHORITY["EPSG","n"]) or WKT 2 (ID["EPSG",n]) text. */
export function epsgFromWkt(wkt: string): number | undefined {
  // The outer CRS's own identifier is a direct child of the outermost brackets; for a compound
  // CRS, take the horizontal (first) component's. Quoted names may hold brackets: skip them.
  const compound = /^\s*(COMPD_CS|COMPOUNDCRS)\b/i.test(wkt);
  const want = compound ? 2 : 1;
  let depth = 0, quoted = false;
  for (let i = 0; i < wkt.length; i++) {
    const c = wkt[i];
    if (c === '"') quoted = !quoted; // a doubled "" inside a name toggles twice
    else if (quoted) continue;
    else if (c === "[" || c === "(") depth++;
    else if (c === "]" || c === ")") {
      depth--;
      if (compound && depth === 1) return undefined; // first component ended without an EPSG code
    } else if (depth === want && /[A-Z]/i.test(c) && /[\s,[(]/.test(wkt[i - 1] ?? ",")) {
      const m = /^(?:AUTHORITY|ID)\[\s*"EPSG"\s*,\s*"?(\d+)"?\s*\]/i.exec(wkt.slice(i, i + 40));
      if (m) return Number(m[1]);
    }
  }
  return undefined;
}

function readCrs(bytes: Uint8Array, header: LasHeader, vlrs: Vlr[], file: string): LasPoints["crs"] {
  const projection = (id: number) => vlrs.find((v) => v.userId === PROJECTION_USER && v.recordId === id);
  const wktVlr = projection(WKT_RECORD), geoVlr = projection(GEOKEY_RECORD);
  let wkt: string | undefined;
  if (wktVlr) {
    wkt = new TextDecoder().decode(bytes.subarray(wktVlr.start, wktVlr.start + wktVlr.length)).replace(/\0[\s\S]*$/, "").trim();
    if (wkt === "") wkt = undefined;
  }
  const fromWkt = wkt === undefined ? undefined : epsgFromWkt(wkt);
  const fromKeys = geoVlr ? epsgFromGeoKeys(bytes, geoVlr, file) : undefined;
  // The global-encoding WKT bit says which of the two is authoritative.
  const epsg = header.globalEncoding & WKT_BIT ? fromWkt ?? fromKeys : fromKeys ?? fromWkt;
  if (epsg === undefined && wkt === undefined) return undefined;
  return { ...(epsg !== undefined ? { epsg } : {}), ...(wkt !== undefined ? { wkt } : {}) };
}

/** Where a format keeps the classification and the withheld flag (spec tables 7–17). */
function classLayout(format: number): { at: number; mask: number; withheldAt: number; withheldBit: number } {
  return format < 6
    ? { at: 15, mask: 0x1f, withheldAt: 15, withheldBit: 0x80 } // bits 0–4 class, bit 7 withheld
    : { at: 16, mask: 0xff, withheldAt: 15, withheldBit: 0x04 }; // class byte; flags bit 2 withheld
}

/** Collects kept points from point records, applying scale, offset and the class filter. */
class PointSink {
  readonly x: Float64Array;
  readonly y: Float64Array;
  readonly z: Float64Array;
  readonly classification: Uint8Array;
  kept = 0;
  withheld = 0;
  /** Points seen per class (for the message when none is kept). */
  readonly seen = new Float64Array(256);
  private readonly layout: ReturnType<typeof classLayout>;

  constructor(
    capacity: number,
    private readonly header: LasHeader,
    private readonly keep: ((cls: number) => boolean) | undefined,
  ) {
    this.x = new Float64Array(capacity);
    this.y = new Float64Array(capacity);
    this.z = new Float64Array(capacity);
    this.classification = new Uint8Array(capacity);
    this.layout = classLayout(header.format);
  }

  /** Class of the record at `at`, or -1 when it is withheld. */
  classOf(view: DataView, at: number): number {
    const { at: c, mask, withheldAt, withheldBit } = this.layout;
    return view.getUint8(at + withheldAt) & withheldBit ? -1 : view.getUint8(at + c) & mask;
  }

  /** Adds the record at `at` if it is not withheld and its class is wanted. */
  push(view: DataView, at: number): void {
    const cls = this.classOf(view, at);
    if (cls < 0) {
      this.withheld++;
      return;
    }
    this.seen[cls]++;
    if (this.keep && !this.keep(cls)) return;
    const { scale, offset } = this.header;
    const k = this.kept++;
    this.x[k] = view.getInt32(at, true) * scale[0] + offset[0];
    this.y[k] = view.getInt32(at + 4, true) * scale[1] + offset[1];
    this.z[k] = view.getInt32(at + 8, true) * scale[2] + offset[2];
    this.classification[k] = cls;
  }
}

/**
 * Reads a LAS or LAZ file's points. `file` names it in messages. A damaged header (signature,
 * version, sizes, a point count larger than the data), damaged VLRs or LAZ data that cannot be
 * decompressed are input errors naming the file and the byte offset where it applies. Withheld
 * points (spec: "synonymous with deleted") are skipped and counted.
 */
export async function readLas(bytes: Uint8Array, file: string, options: LasOptions = {}): Promise<LasPoints> {
  const header = readLasHeader(bytes, file);
  const vlrs = readVlrs(bytes, header, file);
  const crs = readCrs(bytes, header, vlrs, file);
  const keep = classFilter(options.classes);
  if (header.count === 0) throw inputError("the file holds no points (point count 0)", { file });

  let sink: PointSink;
  if (header.compressed) {
    if (!vlrs.some((v) => v.userId === LASZIP_USER && v.recordId === LASZIP_RECORD)) {
      throw inputError("point format byte (104) says LAZ-compressed, but the file has no LASzip VLR", { file });
    }
    if (!LAZ_FORMATS.includes(header.format)) {
      throw inputError(`LAZ with point format ${header.format} (waveform data) is not supported: decompress it to LAS first`, { file });
    }
    sink = await decompressLaz(bytes, header, file, keep);
  } else {
    const available = bytes.length - header.pointOffset;
    if (header.count > Math.floor(available / header.recordLength)) {
      throw inputError(
        `the header says ${header.count} points of ${header.recordLength} bytes from byte ${header.pointOffset}, ` +
          `but the file holds only ${Math.floor(available / header.recordLength)} (truncated?)`,
        { file },
      );
    }
    const view = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
    // First pass: count what will be kept, so the arrays are allocated once at their final size.
    let wanted = 0;
    const probe = new PointSink(0, header, keep);
    for (let i = 0, at = header.pointOffset; i < header.count; i++, at += header.recordLength) {
      const cls = probe.classOf(view, at);
      if (cls >= 0 && (!keep || keep(cls))) wanted++;
    }
    sink = new PointSink(wanted, header, keep);
    for (let i = 0, at = header.pointOffset; i < header.count; i++, at += header.recordLength) sink.push(view, at);
  }
  if (sink.kept === 0) throw nothingKept(sink, header, options.classes, file);
  const n = sink.kept;
  // A LAZ sink is allocated for every point; copy out only when the filter dropped some.
  const fit = <T extends Float64Array | Uint8Array>(a: T): T => (a.length === n ? a : a.slice(0, n) as T);
  return {
    x: fit(sink.x),
    y: fit(sink.y),
    z: fit(sink.z),
    classification: fit(sink.classification),
    count: n,
    ...(crs ? { crs } : {}),
    skipped: header.count - n,
    withheld: sink.withheld,
  };
}

function classFilter(classes: number[] | undefined): ((cls: number) => boolean) | undefined {
  if (classes === undefined) return undefined;
  const bad = classes.find((c) => !Number.isInteger(c) || c < 0 || c > 255);
  if (bad !== undefined || classes.length === 0) {
    throw new RbfieldError(`classes must be ASPRS codes 0 to 255, not "${classes.join(",")}"`, ExitCode.usage);
  }
  const wanted = new Uint8Array(256);
  for (const c of classes) wanted[c] = 1;
  return (cls) => wanted[cls] === 1;
}

function nothingKept(sink: PointSink, header: LasHeader, classes: number[] | undefined, file: string): RbfieldError {
  const present: string[] = [];
  sink.seen.forEach((n, cls) => {
    if (n > 0) present.push(`${cls} (${n})`);
  });
  const why = classes && present.length
    ? `no point has class ${classes.join(" or ")}; classes present: ${present.join(", ")}`
    : `all ${header.count} points are flagged withheld`;
  return inputError(why, { file });
}

/** Decompresses LAZ point records with laz-perf, one record at a time, into a sink. */
async function decompressLaz(
  bytes: Uint8Array,
  header: LasHeader,
  file: string,
  keep: ((cls: number) => boolean) | undefined,
): Promise<PointSink> {
  const fail = (message: string) => inputError(message, { file });
  const tableAt = header.pointOffset + 8;
  if (tableAt > bytes.length) throw fail(`LAZ data truncated: no chunk table offset at byte ${header.pointOffset}`);
  const chunkTable = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength).getBigInt64(header.pointOffset, true);
  if (chunkTable < BigInt(tableAt) || chunkTable + 8n > BigInt(bytes.length)) {
    throw fail(`LAZ chunk table offset ${chunkTable} (byte ${header.pointOffset}) lies outside the file (truncated?)`);
  }
  const lazPerf = await createLazPerf();
  const filePtr = lazPerf._malloc(bytes.length);
  const pointPtr = lazPerf._malloc(header.recordLength);
  const laszip = new lazPerf.LASZip();
  try {
    lazPerf.HEAPU8.set(bytes, filePtr);
    try {
      laszip.open(filePtr, bytes.length);
    } catch (error) {
      throw fail(`LAZ data cannot be opened: ${lazPerfReason(error, lazPerf.HEAPU8)}`);
    }
    if (laszip.getCount() !== header.count || laszip.getPointLength() !== header.recordLength) {
      throw fail(
        `LAZ decoder sees ${laszip.getCount()} points of ${laszip.getPointLength()} bytes, ` +
          `the header says ${header.count} of ${header.recordLength}`,
      );
    }
    const sink = new PointSink(header.count, header, keep);
    let view = new DataView(lazPerf.HEAPU8.buffer);
    for (let i = 0; i < header.count; i++) {
      try {
        laszip.getPoint(pointPtr);
      } catch (error) {
        throw fail(`LAZ data damaged at point ${i + 1} of ${header.count}: ${lazPerfReason(error, lazPerf.HEAPU8)}`);
      }
      if (view.buffer !== lazPerf.HEAPU8.buffer) view = new DataView(lazPerf.HEAPU8.buffer); // memory grew
      sink.push(view, pointPtr);
    }
    return sink;
  } finally {
    laszip.delete();
    lazPerf._free(pointPtr);
    lazPerf._free(filePtr);
  }
}

/**
 * laz-perf's reason for an error. Its WebAssembly build cannot catch C++ exceptions, so JavaScript
 * receives the address of the thrown std::runtime_error; in libc++ its message pointer is the word
 * after the vtable pointer. The text is used only when it reads as a short printable sentence.
 */
function lazPerfReason(error: unknown, heap: Uint8Array): string {
  const fallback = "the decoder stopped (damaged or unsupported LASzip data)";
  if (error instanceof Error && !/^\d+\b/.test(error.message)) return printable(error.message);
  const address = Number(/^\d+/.exec(String(error instanceof Error ? error.message : error))?.[0]);
  if (!Number.isSafeInteger(address) || address + 8 > heap.length) return fallback;
  const view = new DataView(heap.buffer, heap.byteOffset, heap.byteLength);
  const text = view.getUint32(address + 4, true);
  let message = "";
  for (let i = text; i < heap.length && heap[i] !== 0 && message.length <= 120; i++) message += String.fromCharCode(heap[i]);
  return message.length >= 8 && message.length <= 120 && /^[\x20-\x7e]+$/.test(message) ? message : fallback;
}
