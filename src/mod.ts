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
export { fitSurface, fitSurfaceParallel, fitSurfaceWithPlaces, type FitOptions, type FittedModel } from "./fit/surface.ts";
export { KERNEL_TABLE, KERNELS, minimumTrend, TRENDS } from "./fit/kernels.ts";
export { MODEL_FORMAT, MODEL_VERSION, modelFromJson, modelToJson, type SurfaceModel } from "./model/model.ts";
// evaluate: one surface interface whatever the method
export { evaluateModel, evaluatorOf, makeEvaluator, packSurface, type Evaluator, type PackedSurface } from "./evaluate/evaluate.ts";
export { gridLayout, gridModel, type GridOptions, MAX_CELLS, polygonMask } from "./evaluate/grid.ts";
export { gridModelParallel } from "./evaluate/parallel.ts";
export { gridStandardError, makeErrorEstimator, type ErrorEstimator } from "./evaluate/stderr.ts";
export { makeExtrapolationCheck } from "./evaluate/extrapolation.ts";
// write
export { encodeGeoTiff } from "./write/geotiff.ts";
export { contourBands, contourGeoJson, contourLevels, contourLines } from "./write/contours.ts";
export { estimatesCsv, formatNumber } from "./write/csv.ts";
export { residualsCsv } from "./write/residuals.ts";
export { RUN_OUTPUTS } from "./write/outputs.ts";
export { writeFileAtomic } from "./write/atomic.ts";
export { modelSummaryLines, summaryText } from "./write/summary.ts";
export { medianSpacing, convexHullRing } from "./geometry.ts";
// the whole job and the verbs
export { fitPointsFile, loadPoints, readGrid, readModel, runJob, type RunOptions } from "./job.ts";
export { describeCrs, makeProjector, utmZoneFor } from "./crs/crs.ts";
export { crsRecord, projectTable, tableCrs } from "./read/project.ts";
export { contourVerb, fitVerb, gridVerb, predictVerb, runVerb, type VerbResult } from "./verbs.ts";
// field data as it arrives
export { readLabValues } from "./read/nondetects.ts";
export { filterRows } from "./read/filter.ts";
export { maskInCrs, readMaskFile } from "./read/mask.ts";
// breaklines and coded strings
export { type Breakline, breaklinesInCrs, parseBreaklines, readBreaklineFile } from "./read/breaklines.ts";
export { stringsFromCodes } from "./clean/strings.ts";
export { isolatedSamples } from "./clean/isolated.ts";
export { LOCAL_AUTO_POINTS } from "./fit/local/local.ts";
