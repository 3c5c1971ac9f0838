// GeoTIFF output: one Float32 band, pixel-is-area, georeferenced by tie point and pixel scale
// (OGC GeoTIFF 1.1). Masked cells (NaN) are written as the nodata value and tagged GDAL_NODATA.
import { projLinearUnitsGeoKey } from "../crs/crs.ts";
import { writeArrayBuffer } from "geotiff";
import type { GeotiffWriterMetadata } from "geotiff";
import { ExitCode, opt, RbfieldError } from "../errors.ts";
import { fmt } from "../text.ts";
import type { GridValues } from "../types.ts";

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
export function encodeGeoTiff(grid: GridValues, options: { nodata?: number } = {}): Uint8Array {
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
  const data = new Float32Array(n);
  const nodata32 = Math.fround(nodata);
  for (let i = 0; i < n; i++) {
    const v = values[i];
    if (Number.isNaN(v)) {
      data[i] = nodata32;
    } else {
      // Float32 would turn these into ±Infinity (or keep them infinite): never write them.
      if (!(Math.abs(v) <= FLOAT32_MAX)) {
        throw new RbfieldError(
          `the surface reaches ${fmt(v)} at cell ${i % spec.cols + 1}, ${Math.floor(i / spec.cols) + 1} (column, row), ` +
            "beyond what a Float32 GeoTIFF holds (±3.4e38); rescale the values (e.g. other units) or use more smoothing",
          ExitCode.numerical,
        );
      }
      data[i] = v;
      // A real value equal to nodata would read back as masked.
      if (data[i] === nodata32) {
        throw new RbfieldError(
          `grid value ${fmt(v, 8)} equals the nodata value ${nodata} when stored as a 32-bit float; pick another nodata value`,
          ExitCode.usage,
        );
      }
    }
  }

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
  // geotiff.js copies values one at a time (about 0.7 s per million cells).
  return new Uint8Array(writeArrayBuffer(data, metadata));
}

/** Plain printable ASCII, short enough to fit the writer's fixed 1000-byte header. */
function asciiCitation(text: string): string {
  const ascii = text.replace(/[^\x20-\x7e]/g, "?");
  return ascii.length > 200 ? ascii.slice(0, 200) : ascii;
}
