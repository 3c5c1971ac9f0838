// The LAS/LAZ point-cloud reader (ASPRS LAS 1.0–1.4; src/read/las.ts does the parsing): recognised
// by the file signature "LASF", it returns columns x, y, z and classification, one row per point kept
// (ASPRS class filter: `classes`), with the file's CRS where the file records one.
import type { TypedTable } from "../types.ts";
import { chooseColumns } from "./columns.ts";
import { readLas } from "./las.ts";
import type { PointReader, ReadOptions } from "./reader.ts";

const SIGNATURE = [0x4c, 0x41, 0x53, 0x46]; // "LASF"

export const lasReader: PointReader = {
  name: "las",
  sniff: (bytes) => (bytes.length >= 4 && SIGNATURE.every((b, i) => bytes[i] === b) ? 1 : 0),
  async read(bytes: Uint8Array, file: string, options: ReadOptions): Promise<TypedTable> {
    const las = await readLas(bytes, file, { classes: options.classes });
    const columns = ["x", "y", "z", "classification"];
    const choice = chooseColumns(columns, [], options, {
      file,
      headerLine: 1,
      decimalComma: false,
      zCandidates: [2],
      zDefault: 2,
      numericFallback: false,
      hasHeader: true,
    });
    return {
      file,
      format: "las",
      columns,
      data: [
        { name: "x", kind: "number", values: las.x },
        { name: "y", kind: "number", values: las.y },
        { name: "z", kind: "number", values: las.z },
        { name: "classification", kind: "number", values: Float64Array.from(las.classification) },
      ],
      hasHeader: true,
      // Point records, numbered from 1 among the points kept, stand in for lines.
      lines: Array.from({ length: las.count }, (_, i) => i + 1),
      unusable: [],
      ...choice,
      crs: las.crs?.epsg !== undefined ? { epsg: las.crs.epsg, label: `EPSG:${las.crs.epsg}` } : undefined,
    };
  },
};
