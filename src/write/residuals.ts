// The per-point residual table of a fit (RFC 4180 CSV, CRLF record ends).
import type { SurfaceModel } from "../model/model.ts";
import { formatResidualCell } from "../text.ts";

/**
 * Per-point residual table (CSV): input line, position, value, fitted value, residual, leave-one-out
 * residual, its studentised value (Pope's tau), the blunder flag and, for a robust fit, the
 * robustness weight. For log fits, residuals are in log units.
 */
export function residualsCsv(model: SurfaceModel): string {
  const log = model.transform === "log";
  const rw = model.points.robustWeight;
  const tau = model.diagnostics.flags.test === "tau";
  const header = [
    "line", "x", "y", "value", `fitted${log ? "_log" : ""}`, `residual${log ? "_log" : ""}`, `loo_residual${log ? "_log" : ""}`,
    tau ? "loo_studentised" : "loo_standardised", "flag", ...(rw ? ["robust_weight"] : []),
  ];
  const lines = [header.join(",")];
  const p = model.points;
  const flagged = new Set(model.diagnostics.flags.lines);
  for (let i = 0; i < p.x.length; i++) {
    const v = log ? Math.log(p.z[i]) : p.z[i];
    const zst = model.looStandardised[i];
    lines.push(
      [
        p.line[i],
        p.x[i],
        p.y[i],
        p.z[i],
        formatResidualCell(model.fitted[i], 10),
        formatResidualCell(v - model.fitted[i], 6),
        model.loo[i] === null ? "" : formatResidualCell(model.loo[i], 6),
        model.loo[i] === null || zst === null ? "" : formatResidualCell(zst, 4),
        flagged.has(p.line[i]) ? "possible blunder" : "",
        ...(rw ? [formatResidualCell(rw[i], 4)] : []),
      ].join(","),
    );
  }
  return lines.join("\r\n") + "\r\n";
}
