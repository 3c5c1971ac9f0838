// The per-point residual table of a fit (RFC 4180 CSV, CRLF record ends).
import type { SurfaceModel } from "../model/model.ts";
import { formatResidualCell } from "../text.ts";
import type { PointText } from "../types.ts";
import { csvField } from "./csv.ts";
import type { TextPieces } from "./atomic.ts";

const FIXED = ["line", "x", "y", "value", "fitted", "residual", "loo_residual", "loo_studentised", "loo_standardised", "flag", "robust_weight"];
/** Column names of the texts that describe the value (the rest stand after the line). */
const VALUE_TEXTS: Record<string, string> = { qualifier: "qualifier", "detection limit": "detection_limit" };

/**
 * Per-point residual table (CSV): input line, the point's text columns (point id, code and other
 * text columns of the input, under their input names), position, value, the qualifier and detection
 * limit of a laboratory value (when any value had one), fitted value, residual, leave-one-out
 * residual, its studentised value (Pope's tau), the blunder flag and, for a robust fit, the
 * robustness weight. For log fits, residuals are in log units.
 */
export function residualsCsv(model: SurfaceModel): string {
  return [...residualRecords(model)].join("");
}

/** residualsCsv as pieces written while they are made (a big survey's table). */
export function residualsCsvPieces(model: SurfaceModel): TextPieces {
  return { pieces: residualRecords(model) };
}

/** The header and one record per point, each with its CRLF. */
function* residualRecords(model: SurfaceModel): Generator<string> {
  const log = model.transform === "log";
  const rw = model.points.robustWeight;
  const tau = model.diagnostics.flags.test === "tau";
  const texts: PointText[] = model.points.text ?? [];
  const before = texts.filter((t) => !(t.role in VALUE_TEXTS));
  const after = texts.filter((t) => t.role in VALUE_TEXTS);
  // Input names that would repeat one of the fixed columns are prefixed.
  const nameOf = (t: PointText) => VALUE_TEXTS[t.role] ?? (FIXED.includes(t.name.toLowerCase()) ? `input_${t.name}` : t.name);
  const header = [
    "line", ...before.map(nameOf), "x", "y", "value", ...after.map(nameOf), `fitted${log ? "_log" : ""}`, `residual${log ? "_log" : ""}`,
    `loo_residual${log ? "_log" : ""}`, tau ? "loo_studentised" : "loo_standardised", "flag", ...(rw ? ["robust_weight"] : []),
  ];
  yield header.map(csvField).join(",") + "\r\n";
  const p = model.points;
  const flagged = new Set(model.diagnostics.flags.lines);
  for (let i = 0; i < p.x.length; i++) {
    const v = log ? Math.log(p.z[i]) : p.z[i];
    const zst = model.looStandardised[i];
    yield (
      [
        p.line[i],
        ...before.map((t) => csvField(t.values[i])),
        p.x[i],
        p.y[i],
        p.z[i],
        ...after.map((t) => csvField(t.values[i])),
        formatResidualCell(model.fitted[i], 10),
        formatResidualCell(v - model.fitted[i], 6),
        model.loo[i] === null ? "" : formatResidualCell(model.loo[i], 6),
        model.loo[i] === null || zst === null ? "" : formatResidualCell(zst, 4),
        flagged.has(p.line[i]) ? "possible blunder" : "",
        ...(rw ? [formatResidualCell(rw[i], 4)] : []),
      ].join(",") + "\r\n"
    );
  }
}
