// The compact form of a saved model: the JSON record with its large number arrays moved into a binary
// sidecar (format version 3; DEVELOPERS.md, "Model file"). Local models are written this way: at 10⁶
// points their arrays are some 10⁷ numbers, which as JSON text take about 300 MiB and come close to
// the longest string a JavaScript engine holds.
//
// The sidecar (`NAME.rbfield.bin` beside `NAME.rbfield.json`): a 16-byte header — the eight ASCII
// bytes "RBFIELDB", the layout version (uint32, 1) and the number of arrays (uint32) — then each array,
// little-endian Float64 or Int32, starting at a multiple of 8 bytes (zero padding between). The
// JSON's `binary` member records the sidecar's file name, its size in bytes, its CRC-32 (ISO-HDLC,
// the checksum of zlib and PNG, as 8 hexadecimal digits) and, per array, its key path, type, offset and
// length; each moved array's place in the JSON holds the string "binary". On reading, the size, the header, the checksum and every array's bounds are checked before
// any number is used; the model's own checks (model.ts) then check every array's length and values.
// In the file, NaN in `loo` and `looStandardised` stands for JSON's null (undefined residuals).
import * as fs from "node:fs";
import * as zlib from "node:zlib";
import { ExitCode, RbfieldError } from "../errors.ts";

/** Layout version of the sidecar bytes (the header's second field). */
export const BINARY_LAYOUT = 1;
const MAGIC = "RBFIELDB";
/** Does `file` start as a sidecar does (its first bytes are MAGIC)? False when it cannot be read. */
export function isSidecarFile(file: string): boolean {
  try {
    const fd = fs.openSync(file, "r");
    const head = new Uint8Array(MAGIC.length);
    try {
      fs.readSync(fd, head, 0, head.length, 0);
    } finally {
      fs.closeSync(fd);
    }
    return String.fromCharCode(...head) === MAGIC;
  } catch {
    return false;
  }
}

/** What a moved array's place in the JSON holds. */
export const MARKER = "binary";
const HEADER = 16;

/** Arrays moved into the sidecar, by key path in the model record; nullable ones may hold null entries. */
const ARRAY_KEYS: readonly { key: string; nullable?: boolean; integer?: boolean }[] = [
  { key: "points.x" },
  { key: "points.y" },
  { key: "points.z" },
  { key: "points.line", integer: true },
  { key: "points.weight" },
  { key: "points.robustWeight" },
  { key: "fitted" },
  { key: "loo", nullable: true },
  { key: "looStandardised", nullable: true },
  { key: "global.weights" },
  { key: "local.cu" },
  { key: "local.cv" },
  { key: "local.radius" },
  { key: "local.zc" },
  { key: "local.zs" },
  { key: "local.epsilonScaled" },
  { key: "local.lambdaScaled" },
  { key: "local.start", integer: true },
  { key: "local.index", integer: true },
  { key: "local.weights" },
  { key: "local.memberWeights" },
  { key: "local.trendCoefficients" },
  { key: "local.pointStdErrors" },
];

export interface BinaryArray {
  type: "float64" | "int32";
  offset: number;
  length: number;
}

/** The JSON's `binary` member. */
export interface BinaryPart {
  /** The sidecar's file name when written (the reader derives the name from the model file's own). */
  file: string;
  bytes: number;
  /** CRC-32 (ISO-HDLC) of the whole sidecar, 8 lower-case hexadecimal digits. */
  crc32: string;
  layout: number;
  arrays: Record<string, BinaryArray>;
}

/**
 * The sidecar's path for a model file: `X.rbfield.json` → `X.rbfield.bin`, any other name with
 * `.bin` added (`site.json` → `site.json.bin`), so that it never takes a name the user chose for
 * something else.
 */
export function sidecarPath(modelFile: string): string {
  return /\.rbfield\.json$/i.test(modelFile) ? modelFile.replace(/\.json$/i, ".bin") : `${modelFile}.bin`;
}

/** CRC-32 (ISO-HDLC: reflected polynomial 0xEDB88320, the checksum of zlib, gzip and PNG) as 8 hex digits. */
export function crc32Hex(bytes: Uint8Array): string {
  return (zlib.crc32(bytes) >>> 0).toString(16).padStart(8, "0");
}

const LITTLE_ENDIAN = new Uint8Array(new Uint16Array([1]).buffer)[0] === 1;

function getPath(record: Record<string, unknown>, key: string): unknown {
  let o: unknown = record;
  for (const part of key.split(".")) {
    if (typeof o !== "object" || o === null) return undefined;
    o = (o as Record<string, unknown>)[part];
  }
  return o;
}

function setPath(record: Record<string, unknown>, key: string, value: unknown): void {
  const parts = key.split(".");
  let o = record;
  for (const part of parts.slice(0, -1)) {
    const next = o[part];
    if (typeof next !== "object" || next === null) return;
    o = next as Record<string, unknown>;
  }
  o[parts[parts.length - 1]] = value;
}

/**
 * Split a model record (any method) into its JSON text, without the arrays of ARRAY_KEYS, and the
 * sidecar bytes holding them. `sidecarName` is recorded for people reading the JSON.
 */
export function encodeWithSidecar(model: object, sidecarName: string, version: number): { json: string; binary: Uint8Array } {
  const record = model as Record<string, unknown>;
  const present = ARRAY_KEYS.filter(({ key }) => Array.isArray(getPath(record, key)));
  const layout: Record<string, BinaryArray> = {};
  let offset = HEADER;
  for (const { key, integer } of present) {
    const values = getPath(record, key) as (number | null)[];
    const type = integer && values.every((v) => Number.isInteger(v) && (v as number) >= -(2 ** 31) && (v as number) < 2 ** 31) ? "int32" : "float64";
    layout[key] = { type, offset, length: values.length };
    offset += Math.ceil((values.length * (type === "int32" ? 4 : 8)) / 8) * 8;
  }
  const binary = new Uint8Array(offset);
  const view = new DataView(binary.buffer);
  for (let i = 0; i < MAGIC.length; i++) binary[i] = MAGIC.charCodeAt(i);
  view.setUint32(8, BINARY_LAYOUT, true);
  view.setUint32(12, present.length, true);
  for (const { key } of present) {
    const values = getPath(record, key) as (number | null)[];
    const { type, offset: at, length } = layout[key];
    if (type === "int32") for (let i = 0; i < length; i++) view.setInt32(at + 4 * i, values[i] as number, true);
    else for (let i = 0; i < length; i++) view.setFloat64(at + 8 * i, values[i] ?? NaN, true);
  }
  const part: BinaryPart = { file: sidecarName, bytes: binary.length, crc32: crc32Hex(binary), layout: BINARY_LAYOUT, arrays: layout };
  // A shallow copy down each moved key's path, so the model itself is left as it was; each moved
  // array's place holds the marker, so the keys keep their order.
  const copy: Record<string, unknown> = { ...record, version };
  for (const { key } of present) {
    const parts = key.split(".");
    if (parts.length === 2) copy[parts[0]] = { ...(copy[parts[0]] as object) };
  }
  for (const { key } of present) setPath(copy, key, MARKER);
  copy.binary = part;
  return { json: JSON.stringify(copy, null, 1) + "\n", binary };
}

/**
 * Put the arrays of a sidecar back into a parsed model record (the JSON's `binary` member says
 * where they are). Every problem is an error naming the sidecar file.
 */
export function restoreFromSidecar(record: Record<string, unknown>, bytes: Uint8Array, file: string): void {
  const bad = (what: string) =>
    new RbfieldError(`the model's binary part is damaged or belongs to another fit (${what}); copy it together with its model file, or refit the points`, ExitCode.input, {
      file,
    });
  const part = record.binary as Partial<BinaryPart> | undefined;
  if (typeof part !== "object" || part === null || typeof part.arrays !== "object" || part.arrays === null) throw bad("the model file does not describe it");
  if (part.layout !== BINARY_LAYOUT) throw bad(`layout ${JSON.stringify(part.layout)}, this rbfield reads layout ${BINARY_LAYOUT}`);
  if (bytes.length !== part.bytes) throw bad(`${bytes.length} bytes, the model file says ${part.bytes}`);
  if (bytes.length < HEADER || String.fromCharCode(...bytes.subarray(0, MAGIC.length)) !== MAGIC) throw bad("no RBFIELDB header");
  if (crc32Hex(bytes) !== part.crc32) throw bad(`CRC-32 ${crc32Hex(bytes)}, the model file says ${part.crc32}`);
  const view = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  const known = new Map(ARRAY_KEYS.map((a) => [a.key, a]));
  const entries = Object.entries(part.arrays);
  if (view.getUint32(12, true) !== entries.length) throw bad("its header counts another number of arrays");
  // Typed-array views need 8-byte alignment of the data within its buffer.
  const aligned = LITTLE_ENDIAN && bytes.byteOffset % 8 === 0;
  for (const [key, a] of entries) {
    const spec = known.get(key);
    if (!spec || !a || (a.type !== "float64" && a.type !== "int32")) throw bad(`unknown array ${JSON.stringify(key).slice(0, 60)}`);
    const size = a.type === "int32" ? 4 : 8;
    if (!(Number.isInteger(a.offset) && Number.isInteger(a.length) && a.offset >= HEADER && a.offset % 8 === 0 && a.length >= 0 && a.offset + a.length * size <= bytes.length)) {
      throw bad(`array ${key} lies outside the file`);
    }
    if (getPath(record, key) !== MARKER) throw bad(`the model file's ${key} is not marked as kept in it`);
    let values: number[];
    if (a.type === "int32") {
      values = aligned ? Array.from(new Int32Array(bytes.buffer, bytes.byteOffset + a.offset, a.length)) : Array.from({ length: a.length }, (_, i) => view.getInt32(a.offset + 4 * i, true));
    } else {
      values = aligned
        ? Array.from(new Float64Array(bytes.buffer, bytes.byteOffset + a.offset, a.length))
        : Array.from({ length: a.length }, (_, i) => view.getFloat64(a.offset + 8 * i, true));
    }
    setPath(record, key, spec.nullable ? values.map((v) => (Number.isNaN(v) ? null : v)) : values);
  }
  delete record.binary;
}
