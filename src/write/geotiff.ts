// GeoTIFF output: one Float32 band, pixel-is-area, georeferenced by tie point and pixel scale
// (OGC GeoTIFF 1.1). Masked cells (NaN) are written as the nodata value and tagged GDAL_NODATA.
import { projLinearUnitsGeoKey, unitOfEpsgCode } from "../crs/crs.ts";
import { fromArrayBuffer, globals, writeArrayBuffer } from "geotiff";
import type { GeotiffWriterMetadata } from "geotiff";
import { ExitCode, opt, RbfieldError } from "../errors.ts";
import { fmt } from "../text.ts";
import type { Crs, GridSpec, GridValues } from "../types.ts";

/** Nodata value written for masked cells unless another is asked for. */
export const DEFAULT_NODATA = -9999;

/** GeoTIFF key values (OGC GeoTIFF 1.1, Annex). */
const MODEL_PROJECTED = 1;
const MODEL_GEOGRAPHIC = 2;
const RASTER_PIXEL_IS_AREA = 1;
const USER_DEFINED = 32767;
/** Largest finite IEEE 754 binary32 number. */
const FLOAT32_MAX = 3.4028234663852886e38;
/** Classic TIFF addresses its bytes with 32-bit offsets (TIFF 6.0, §2); keep room for the header. */
const MAX_TIFF_DATA_BYTES = 2 ** 32 - 2 ** 20;

/** TIFF tag GDAL_METADATA: GDAL's XML of dataset and band metadata (ASCII), read by GDAL's GTiff driver. */
const GDAL_METADATA = 42112;
// geotiff.js v3 names the tag but gives its writer no field type for it; GDAL writes it as ASCII.
(globals.fieldTagTypes as Record<number, string>)[GDAL_METADATA] ??= "ASCII";

/** What the band holds, for GDAL's band description and unit type. */
export interface BandText {
  /** "level", "standard error of level". */
  description: string;
  /** The values' unit when known ("m", "mg/L"), else absent. */
  unit?: string;
}

/**
 * The band text of a grid of a value column: its name without a unit in brackets, and that unit
 * ("Level (m)" → level … unit m; "nitrate_mgL" → no unit, as nothing says which part is one).
 */
export function bandText(valueName: string, content: "values" | "standard errors"): BandText {
  const text = valueName.slice(0, 200);
  const m = /^([^()[\]{}]*?)\s*[([{]\s*([^()[\]{}]+?)\s*[)\]}]\s*$/.exec(text);
  // "value (column 4)", the name of a file without a header row, holds no unit.
  const unit = m && m[1] !== "" && !/^column \d+$/.test(m[2]) ? m[2] : undefined;
  const name = (unit ? m![1] : text).trim() || "value";
  return { description: content === "values" ? name : `standard error of ${name}`, ...(unit ? { unit } : {}) };
}

/** GDAL_METADATA's XML for band 1 (sample 0): the description and unit type roles GDAL reads. */
function gdalMetadataXml(band: BandText): string {
  // XML text (W3C XML 1.0): <, > and " as entities, & as "and", other characters beyond ASCII (µ in µg/l) as
  // numeric character references, control characters left out; at most `limit` characters of the text.
  const esc = (t: string, limit: number) =>
    [...t].slice(0, limit).map((ch) => {
      const code = ch.codePointAt(0)!;
      if (ch === "&") return "and"; // GDAL's reader cut the text at &amp; (GDAL 3.x, seen here)
      if (ch === "<") return "&lt;";
      if (ch === ">") return "&gt;";
      if (ch === '"') return "&quot;";
      if (code < 0x20 || code === 0x7f) return "";
      return code > 0x7e ? `&#${code};` : ch;
    }).join("");
  const items = [`<Item name="DESCRIPTION" sample="0" role="description">${esc(band.description, 60)}</Item>`];
  if (band.unit) items.push(`<Item name="UNITTYPE" sample="0" role="unittype">${esc(band.unit, 16)}</Item>`);
  return `<GDALMetadata>${items.join("")}</GDALMetadata>`;
}

/** The band text back from GDAL_METADATA's XML as gdalMetadataXml wrote it, or undefined. */
function bandFromXml(xml: string): BandText | undefined {
  const d = /<Item name="DESCRIPTION" sample="0" role="description">([^<]*)<\/Item>/.exec(xml);
  if (!d) return undefined;
  const u = /<Item name="UNITTYPE" sample="0" role="unittype">([^<]*)<\/Item>/.exec(xml);
  const text = (t: string) =>
    t.replace(/&#(\d+);|&(amp|lt|gt|quot);/g, (_, code, name) => (code ? String.fromCodePoint(Number(code)) : { amp: "&", lt: "<", gt: ">", quot: '"' }[name as "amp"]));
  return { description: text(d[1]), ...(u ? { unit: text(u[1]) } : {}) };
}

/** Is the CRS geographic? From its kind when known (models since the CRS module), else the EPSG range 4000–4999. */
export function isGeographic(crs: { epsg?: number; kind?: string }): boolean {
  if (crs.kind !== undefined) return crs.kind === "geographic";
  return crs.epsg !== undefined && crs.epsg >= 4000 && crs.epsg <= 4999;
}

/**
 * Encodes a grid as an uncompressed, big-endian, single-band Float32 GeoTIFF.
 * The bytes depend only on the grid and options (no timestamps).
 */
export function encodeGeoTiff(grid: GridValues, options: { nodata?: number; description?: string; band?: BandText } = {}): Uint8Array {
  const { spec, values, crs } = grid;
  const nodata = options.nodata ?? DEFAULT_NODATA;
  if (!Number.isInteger(spec.cols) || !Number.isInteger(spec.rows) || spec.cols < 1 || spec.rows < 1) {
    throw new RbfieldError(`cannot write a GeoTIFF of ${spec.cols} × ${spec.rows} cells`, ExitCode.internal);
  }
  if (values.length !== spec.cols * spec.rows) {
    throw new RbfieldError(
      `grid has ${values.length} values for ${spec.cols} × ${spec.rows} cells`,
      ExitCode.internal,
    );
  }
  if (!(spec.cell > 0) || !Number.isFinite(spec.xmin) || !Number.isFinite(spec.ymax)) {
    throw new RbfieldError(`grid origin or cell size is not a finite positive number`, ExitCode.internal);
  }
  // The nodata value must survive the trip to Float32, or readers would not recognise it.
  if (!Number.isNaN(nodata) && Math.fround(nodata) !== nodata) {
    throw new RbfieldError(
      `nodata value ${nodata} cannot be stored exactly as a 32-bit float; pick e.g. -9999`,
      ExitCode.usage,
    );
  }

  const n = values.length;
  if (n * 4 > MAX_TIFF_DATA_BYTES) {
    throw new RbfieldError(
      `a ${spec.cols} × ${spec.rows} Float32 grid needs ${Math.ceil((n * 4) / 2 ** 30)} GiB, more than a classic TIFF file can hold (4 GiB); ` +
        `choose a larger ${opt("cell")} or a smaller ${opt("extent")}`,
      ExitCode.usage,
    );
  }
  const metadata = geoTiffMetadata(spec, crs, nodata);
  // A description (TIFF ImageDescription; a tile says which tile it is): printable ASCII only.
  if (options.description !== undefined) (metadata as Record<string, unknown>).ImageDescription = asciiCitation(options.description);
  // What the band holds (gdalinfo: "Description = level", "Unit Type: m").
  if (options.band !== undefined) (metadata as Record<string, unknown>).GDAL_METADATA = gdalMetadataXml(options.band);
  // geotiff.js writes the header (the first HEADER_BYTES: byte-order mark, one IFD and its values)
  // and then copies the values one at a time through a new DataView each (about 0.3–0.7 s per
  // million cells). It is asked for the header alone — one value, with the strip's true byte count
  // and one sample per pixel given, so every tag holds what it holds for the whole grid — and the
  // strip is written here: big-endian Float32, row by row, straight into the file's bytes.
  const headerOf = (m: GeotiffWriterMetadata) =>
    new Uint8Array(writeArrayBuffer(new Float32Array(1), { ...m, StripByteCounts: [4 * n], SamplesPerPixel: [1] } as GeotiffWriterMetadata));
  let header = headerOf(metadata);
  // The band text is a courtesy: when very long texts elsewhere leave it no room, it is left out.
  if (!ifdFitsHeader(header) && options.band !== undefined) {
    delete (metadata as Record<string, unknown>).GDAL_METADATA;
    header = headerOf(metadata);
  }
  if (header.length !== HEADER_BYTES + 4 || !ifdFitsHeader(header)) {
    throw new RbfieldError(`geotiff.js wrote an unexpected layout (${header.length} bytes for one value)`, ExitCode.internal);
  }
  const out = new Uint8Array(HEADER_BYTES + 4 * n);
  out.set(header.subarray(0, HEADER_BYTES));
  writeStrip(grid, nodata, new DataView(out.buffer, HEADER_BYTES));
  return out;
}

/**
 * The GeoTIFF tags and keys of a grid, as geotiff.js's writer takes them: size, Float32 samples,
 * pixel scale and tie point (pixel-is-area), GDAL_NODATA and the CRS keys.
 */
export function geoTiffMetadata(spec: GridSpec, crs: Crs, nodata = DEFAULT_NODATA): GeotiffWriterMetadata {
  const metadata: GeotiffWriterMetadata = {
    width: spec.cols,
    height: spec.rows,
    SampleFormat: [3], // IEEE float
    BitsPerSample: [32],
    ModelPixelScale: [spec.cell, spec.cell, 0],
    ModelTiepoint: [0, 0, 0, spec.xmin, spec.ymax, 0],
    GDAL_NODATA: Number.isNaN(nodata) ? "nan" : String(nodata),
    GTRasterTypeGeoKey: RASTER_PIXEL_IS_AREA,
  };
  if (crs.epsg === undefined) {
    // Local site grid: a user-defined projected CRS. Naming ProjectedCSTypeGeoKey also keeps
    // geotiff.js from adding its default EPSG:4326 keys.
    metadata.GTModelTypeGeoKey = MODEL_PROJECTED;
    metadata.ProjectedCSTypeGeoKey = USER_DEFINED;
    metadata.GTCitationGeoKey = asciiCitation(crs.label || "local site grid");
    // A stated unit (local:m, local:ft, local:usft) goes in ProjLinearUnitsGeoKey (OGC GeoTIFF 1.1,
    // §7.1.4), with a user-defined model type: GDAL reads the unit of a local grid only then.
    if (crs.unit && crs.unit !== "degree") {
      metadata.GTModelTypeGeoKey = USER_DEFINED;
      (metadata as Record<string, unknown>).ProjLinearUnitsGeoKey = projLinearUnitsGeoKey(crs.unit);
    }
  } else if (isGeographic(crs)) {
    metadata.GTModelTypeGeoKey = MODEL_GEOGRAPHIC;
    metadata.GeographicTypeGeoKey = crs.epsg;
  } else {
    metadata.GTModelTypeGeoKey = MODEL_PROJECTED;
    metadata.ProjectedCSTypeGeoKey = crs.epsg;
  }
  return metadata;
}

/** Bytes per value of the TIFF field types geotiff.js writes (TIFF 6.0 §2, "Types"). */
const TYPE_BYTES: Record<number, number> = { 1: 1, 2: 1, 3: 2, 4: 4, 5: 8, 6: 1, 7: 1, 8: 2, 9: 4, 10: 8, 11: 4, 12: 8 };

/**
 * Every value of the first IFD lies inside the fixed header: geotiff.js drops bytes written past it
 * without a word, so long texts (a tile's description, a local grid's citation, the band text)
 * must be caught here rather than written as a broken file.
 */
function ifdFitsHeader(bytes: Uint8Array): boolean {
  const view = new DataView(bytes.buffer, bytes.byteOffset, HEADER_BYTES);
  const ifd = view.getUint32(4, false);
  const entries = view.getUint16(ifd, false);
  if (ifd + 2 + 12 * entries + 4 > HEADER_BYTES) return false;
  for (let k = 0; k < entries; k++) {
    const at = ifd + 2 + 12 * k;
    const size = (TYPE_BYTES[view.getUint16(at + 2, false)] ?? 8) * view.getUint32(at + 4, false);
    if (size > 4 && view.getUint32(at + 8, false) + size > HEADER_BYTES) return false;
  }
  return true;
}

/** Where geotiff.js v3 puts the strip: after a fixed 1000-byte header (its `numBytesInIfd`). */
const HEADER_BYTES = 1000;

/**
 * The cells as big-endian Float32 (masked cells as the nodata value), checked on the way: a value
 * beyond the Float32 range, or one that rounds to the nodata value, is refused.
 */
function writeStrip(grid: GridValues, nodata: number, view: DataView): void {
  const { spec, values } = grid;
  const nodata32 = Math.fround(nodata);
  for (let i = 0; i < values.length; i++) {
    const v = values[i];
    if (Number.isNaN(v)) {
      view.setFloat32(4 * i, nodata32, false);
      continue;
    }
    // Float32 would turn these into ±Infinity (or keep them infinite): never write them.
    if (!(Math.abs(v) <= FLOAT32_MAX)) {
      throw new RbfieldError(
        `the surface reaches ${fmt(v)} at cell ${i % spec.cols + 1}, ${Math.floor(i / spec.cols) + 1} (column, row), ` +
          "beyond what a Float32 GeoTIFF holds (±3.4e38); rescale the values (e.g. other units) or use more smoothing",
        ExitCode.numerical,
      );
    }
    const f = Math.fround(v);
    // A real value equal to nodata would read back as masked.
    if (f === nodata32) {
      throw new RbfieldError(
        `grid value ${fmt(v, 8)} equals the nodata value ${nodata} when stored as a 32-bit float; pick another nodata value`,
        ExitCode.usage,
      );
    }
    view.setFloat32(4 * i, f, false);
  }
}

/**
 * What a GeoTIFF written by encodeGeoTiff says besides its cells: the CRS record that gives the same
 * keys again (the inverse of geoTiffMetadata's CRS keys: model type, EPSG code, a local grid's
 * citation and unit), the nodata value and the description. For putting tiles back together byte
 * for byte; other GeoTIFFs are read by read/geotiff.ts.
 */
export async function geoTiffTags(bytes: Uint8Array): Promise<{ crs: Crs; nodata: number | undefined; description: string | undefined; band: BandText | undefined }> {
  const tiff = await fromArrayBuffer(bytes.slice().buffer as ArrayBuffer);
  const image = await tiff.getImage(0);
  const keys = (image.getGeoKeys() ?? {}) as Record<string, unknown>;
  const dir = image.getFileDirectory();
  const text = async (name: string) => {
    const v = await dir.loadValue(name as Parameters<typeof dir.loadValue>[0]);
    return typeof v === "string" ? v.replace(/\0+$/, "") : undefined;
  };
  const num = (v: unknown) => (typeof v === "number" ? v : Array.isArray(v) && typeof v[0] === "number" ? v[0] : undefined);
  const nodataText = await text("GDAL_NODATA");
  const nodata = nodataText === undefined ? undefined : nodataText.trim().toLowerCase() === "nan" ? NaN : Number(nodataText);
  const description = await text("ImageDescription");
  const xml = await text("GDAL_METADATA");
  const band = xml === undefined ? undefined : bandFromXml(xml);
  const projected = num(keys.ProjectedCSTypeGeoKey), geographic = num(keys.GeographicTypeGeoKey);
  let crs: Crs;
  if (projected !== undefined && projected !== USER_DEFINED) crs = { epsg: projected, label: `EPSG:${projected}`, kind: "projected" };
  else if (projected === undefined && geographic !== undefined) crs = { epsg: geographic, label: `EPSG:${geographic}`, kind: "geographic" };
  else {
    const citation = typeof keys.GTCitationGeoKey === "string" ? keys.GTCitationGeoKey : "local site grid";
    const unitCode = num(keys.ProjLinearUnitsGeoKey);
    crs = { label: citation, kind: "local", unit: unitCode === undefined ? null : unitOfEpsgCode(unitCode) ?? null };
  }
  return { crs, nodata, description, band };
}

/** Plain printable ASCII, short enough to fit the writer's fixed 1000-byte header. */
function asciiCitation(text: string, limit = 200): string {
  const ascii = text.replace(/[^\x20-\x7e]/g, "?");
  return ascii.length > limit ? ascii.slice(0, limit) : ascii;
}
