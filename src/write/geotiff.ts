// GeoTIFF output: one Float32 band, pixel-is-area, georeferenced by tie point and pixel scale
// (OGC GeoTIFF 1.1). Masked cells (NaN) are written as the nodata value and tagged GDAL_NODATA.
import { projLinearUnitsGeoKey, unitOfEpsgCode } from "../crs/crs.ts";
import { fromArrayBuffer, writeArrayBuffer } from "geotiff";
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

/** Is the CRS geographic? From its kind when known (models since the CRS module), else the EPSG range 4000–4999. */
export function isGeographic(crs: { epsg?: number; kind?: string }): boolean {
  if (crs.kind !== undefined) return crs.kind === "geographic";
  return crs.epsg !== undefined && crs.epsg >= 4000 && crs.epsg <= 4999;
}

/**
 * Encodes a grid as an uncompressed, big-endian, single-band Float32 GeoTIFF.
 * The bytes depend only on the grid and options (no timestamps).
 */
export function encodeGeoTiff(grid: GridValues, options: { nodata?: number; description?: string } = {}): Uint8Array {
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
  // geotiff.js writes the header (the first HEADER_BYTES: byte-order mark, one IFD and its values)
  // and then copies the values one at a time through a new DataView each (about 0.3–0.7 s per
  // million cells). It is asked for the header alone — one value, with the strip's true byte count
  // and one sample per pixel given, so every tag holds what it holds for the whole grid — and the
  // strip is written here: big-endian Float32, row by row, straight into the file's bytes.
  const header = new Uint8Array(
    writeArrayBuffer(new Float32Array(1), { ...metadata, StripByteCounts: [4 * n], SamplesPerPixel: [1] } as GeotiffWriterMetadata),
  );
  if (header.length !== HEADER_BYTES + 4) {
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
export async function geoTiffTags(bytes: Uint8Array): Promise<{ crs: Crs; nodata: number | undefined; description: string | undefined }> {
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
  const projected = num(keys.ProjectedCSTypeGeoKey), geographic = num(keys.GeographicTypeGeoKey);
  let crs: Crs;
  if (projected !== undefined && projected !== USER_DEFINED) crs = { epsg: projected, label: `EPSG:${projected}`, kind: "projected" };
  else if (projected === undefined && geographic !== undefined) crs = { epsg: geographic, label: `EPSG:${geographic}`, kind: "geographic" };
  else {
    const citation = typeof keys.GTCitationGeoKey === "string" ? keys.GTCitationGeoKey : "local site grid";
    const unitCode = num(keys.ProjLinearUnitsGeoKey);
    crs = { label: citation, kind: "local", unit: unitCode === undefined ? null : unitOfEpsgCode(unitCode) ?? null };
  }
  return { crs, nodata, description };
}

/** Plain printable ASCII, short enough to fit the writer's fixed 1000-byte header. */
function asciiCitation(text: string): string {
  const ascii = text.replace(/[^\x20-\x7e]/g, "?");
  return ascii.length > 200 ? ascii.slice(0, 200) : ascii;
}
