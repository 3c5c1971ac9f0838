// GeoTIFF input: band 1 of the first image as a grid. Georeferencing comes from the tie point and
// pixel scale (or an axis-aligned ModelTransformation), the CRS from the GeoTIFF keys
// (OGC GeoTIFF 1.1). Only north-up grids with square cells are accepted.
import { fromArrayBuffer } from "geotiff";
import type { GeoTIFFImage } from "geotiff";
import { inputError } from "../errors.ts";
import type { Crs, GridSpec, GridValues } from "../types.ts";

const USER_DEFINED = 32767;
const RASTER_PIXEL_IS_POINT = 2;
/** Relative tolerance when comparing the x and y cell sizes. */
const SQUARE_TOLERANCE = 1e-9;

/** Reads band 1 of a GeoTIFF; nodata cells become NaN. `file` names the input in messages. */
export async function decodeGeoTiff(bytes: Uint8Array, file: string): Promise<GridValues> {
  if (!looksLikeTiff(bytes)) {
    throw inputError("not a TIFF file (no TIFF byte-order header)", { file });
  }
  // geotiff.js reads from an ArrayBuffer; copy out exactly this view's bytes.
  const buffer = bytes.slice().buffer as ArrayBuffer;
  let image: GeoTIFFImage;
  try {
    const tiff = await fromArrayBuffer(buffer);
    image = await tiff.getImage(0);
  } catch (error) {
    throw inputError(`cannot read the TIFF structure: ${messageOf(error)}`, { file });
  }

  let keys: Record<string, unknown>;
  try {
    keys = image.getGeoKeys() ?? {};
  } catch (error) {
    throw inputError(`cannot read the GeoTIFF keys: ${messageOf(error)}`, { file });
  }
  const spec = await readGridSpec(image, keys, file);
  const crs = readCrs(keys);

  let band: ArrayLike<number>;
  try {
    const rasters = await image.readRasters({ samples: [0], interleave: true });
    band = rasters as unknown as ArrayLike<number>;
  } catch (error) {
    throw inputError(`cannot read the raster values: ${messageOf(error)}`, { file });
  }
  const n = spec.cols * spec.rows;
  if (band.length !== n) {
    throw inputError(`raster holds ${band.length} values for ${spec.cols} × ${spec.rows} cells`, { file });
  }

  const nodata = await readNodata(image);
  // Compare in the band's own precision, so e.g. a Float32 band matches a nodata of 1e30.
  const isFloat32 = band instanceof Float32Array;
  const noValue = nodata === undefined ? undefined : isFloat32 ? Math.fround(nodata) : nodata;
  const values = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    const v = band[i];
    values[i] = v === noValue ? NaN : v;
  }
  return { spec, values, crs };
}

/** TIFF files start with "II*\0" or "MM\0*" (classic) or the BigTIFF forms with 43. */
function looksLikeTiff(bytes: Uint8Array): boolean {
  if (bytes.length < 8) return false;
  const le = bytes[0] === 0x49 && bytes[1] === 0x49 && (bytes[2] === 42 || bytes[2] === 43) && bytes[3] === 0;
  const be = bytes[0] === 0x4d && bytes[1] === 0x4d && bytes[2] === 0 && (bytes[3] === 42 || bytes[3] === 43);
  return le || be;
}

async function readGridSpec(image: GeoTIFFImage, keys: Record<string, unknown>, file: string): Promise<GridSpec> {
  const dir = image.getFileDirectory();
  const cols = image.getWidth();
  const rows = image.getHeight();
  if (!(cols >= 1 && rows >= 1)) {
    throw inputError(`image has no cells (${cols} × ${rows})`, { file });
  }
  const tiepoints = optionalArray(await dir.loadValue("ModelTiepoint"));
  const scale = optionalArray(await dir.loadValue("ModelPixelScale"));
  const transform = optionalArray(await dir.loadValue("ModelTransformation"));

  // Raster→model mapping x = a·i + b·j + c, y = d·i + e·j + f, with (i, j) the raster position.
  let a: number, b: number, c: number, d: number, e: number, f: number;
  if (transform && transform.length >= 16) {
    [a, b, c, d, e, f] = [transform[0], transform[1], transform[3], transform[4], transform[5], transform[7]];
  } else if (scale && tiepoints && tiepoints.length >= 6) {
    if (tiepoints.length > 6) {
      throw inputError("georeferenced by several tie points (ground control points); a single tie point and pixel scale are needed", { file });
    }
    const [i0, j0, , x0, y0] = tiepoints;
    a = scale[0];
    b = 0;
    d = 0;
    e = -scale[1];
    c = x0 - i0 * a;
    f = y0 - j0 * e;
  } else {
    throw inputError("has no georeferencing (no ModelPixelScale with ModelTiepoint, nor ModelTransformation)", { file });
  }
  if (b !== 0 || d !== 0) {
    throw inputError("the grid is rotated or sheared; only north-up grids are supported", { file });
  }
  if (!(a > 0) || !(e < 0)) {
    throw inputError(`the grid is not north-up (pixel size ${a}, ${e}); rows must run north to south and columns west to east`, { file });
  }
  const cell = a;
  if (Math.abs(a + e) > SQUARE_TOLERANCE * a) {
    throw inputError(`cells are not square (pixel size ${a} by ${-e}); resample to square cells first`, { file });
  }
  if (!Number.isFinite(c) || !Number.isFinite(f)) {
    throw inputError("grid origin is not a finite number", { file });
  }
  // Pixel-is-point: raster position (0, 0) is the first cell's centre, so the corner is half a cell out.
  if (firstNumber(keys.GTRasterTypeGeoKey) === RASTER_PIXEL_IS_POINT) {
    c -= 0.5 * cell;
    f += 0.5 * cell;
  }
  return { xmin: c, ymax: f, xmax: c + cols * cell, ymin: f - rows * cell, cell, cols, rows };
}

function readCrs(keys: Record<string, unknown>): Crs {
  const projected = firstNumber(keys.ProjectedCSTypeGeoKey);
  if (projected !== undefined && projected !== USER_DEFINED && projected > 0) {
    return { epsg: projected, label: `EPSG:${projected}` };
  }
  const geographic = firstNumber(keys.GeographicTypeGeoKey);
  // A user-defined projected CRS on a known datum is still not that datum's geographic CRS.
  if (projected === undefined && geographic !== undefined && geographic !== USER_DEFINED && geographic > 0) {
    return { epsg: geographic, label: `EPSG:${geographic}` };
  }
  return { label: "local site grid" };
}

async function readNodata(image: GeoTIFFImage): Promise<number | undefined> {
  const raw = await image.getFileDirectory().loadValue("GDAL_NODATA");
  if (typeof raw !== "string") return undefined;
  const text = raw.replace(/\0/g, "").trim().toLowerCase();
  // "nan" needs nothing: NaN cells already mark masked cells.
  if (text === "" || text === "nan") return undefined;
  if (text === "inf" || text === "+inf") return Infinity;
  if (text === "-inf") return -Infinity;
  const value = Number(text);
  return Number.isNaN(value) ? undefined : value;
}

function optionalArray(value: unknown): number[] | undefined {
  if (value === undefined || value === null) return undefined;
  if (Array.isArray(value) || ArrayBuffer.isView(value)) return Array.from(value as ArrayLike<number>);
  return undefined;
}

function firstNumber(value: unknown): number | undefined {
  if (typeof value === "number") return value;
  if (Array.isArray(value) && typeof value[0] === "number") return value[0];
  return undefined;
}

function messageOf(error: unknown): string {
  return error instanceof Error ? error.message : String(error);
}
