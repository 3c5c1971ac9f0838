// rbfield library: read → clean → fit and select → evaluate → write.
// Each stage is a module with a small typed interface; the CLI (src/cli.ts) is a thin layer over these.
export type * from "./types.ts";
export { ExitCode, RbfieldError } from "./errors.ts";
export { CAUTION } from "./caution.ts";
// read
export { parseNumber, parsePointTable, readPointTable, type ReadOptions } from "./read/points.ts";
export { decodeGeoTiff } from "./read/geotiff.ts";
// clean
export { cleanPoints, type CleanOptions, describeCleaning } from "./clean/clean.ts";
// fit and select
export { fitSurface, fitSurfaceParallel, type FitOptions, medianSpacing } from "./fit/surface.ts";
export { TRENDS, KERNELS, minimumTrend } from "./fit/kernels.ts";
export { MODEL_FORMAT, MODEL_VERSION, modelFromJson, modelToJson, type SurfaceModel } from "./model/model.ts";
// evaluate
export { evaluateModel, makeEvaluator, type Evaluator } from "./evaluate/evaluate.ts";
export { gridLayout, gridModel, type GridOptions, MAX_CELLS, polygonMask } from "./evaluate/grid.ts";
export { gridModelParallel } from "./evaluate/parallel.ts";
export { gridStandardError, makeErrorEstimator, type ErrorEstimator } from "./evaluate/stderr.ts";
// write
export { encodeGeoTiff } from "./write/geotiff.ts";
export { contourBands, contourLevels, contourLines } from "./write/contours.ts";
export { estimatesCsv, formatNumber } from "./write/csv.ts";
export { writeFileAtomic } from "./write/atomic.ts";
export { modelSummaryLines, summaryText } from "./write/summary.ts";
// the whole job
export { fitPointsFile, loadPoints, parseCrs, readGrid, readModel, runJob, type RunOptions } from "./job.ts";
