// The command line's help texts: one per verb, built from shared option paragraphs, so an option
// reads the same wherever it appears. The options themselves are parsed in cli_options.ts.
import { CAUTION } from "./caution.ts";
import { KERNELS, TRENDS } from "./fit/kernels.ts";
import { MODEL_VERSION } from "./model/model.ts";
import { DEFAULT_TILE_SIZE } from "./evaluate/tiles.ts";
import { outputNamesText } from "./write/outputs.ts";

const POINTS_HELP = `  --x COL --y COL --z COL   columns to use, by name or 1-based position (default: detected from
                            header names such as x/easting/e, y/northing/n, z/elevation/level/value)
  --header auto|none        auto (default): a first row of numbers only is data, not a header;
                            none: the first row is data (columns are then named 1, 2, …)
  --crs CRS                 coordinate reference system of the points: EPSG:NNNN, or local,
                            local:m, local:ft, local:usft for a site grid (default: the file's own;
                            WGS 84 for lat/lon columns or plain GeoJSON; else a local site grid)
  --to-crs EPSG:NNNN        projected CRS to fit in when the points are latitude/longitude (default:
                            the UTM zone of their centre)
  --class C[,C…]            point clouds (LAS/LAZ): keep only these ASPRS classes (2 = ground)
  --id COL --code COL       point id and description code columns, named in residuals.csv and the
                            blunder flags (default: the first column named id/point/pt/name/station…;
                            a column named code/desc/description)
  --where COL=V[,V…]        keep only rows whose column holds one of the values (ignoring case), e.g.
                            --where code=GS for ground shots; repeat for several columns
  --non-detects RULE        how values below the detection limit ("<0.5", "ND", "n.n.", "0.5 U") enter
                            the fit: half (default) the limit, limit, zero, or omit (see README)
  --detection-limit DL      the limit of non-detects written without one ("ND", "<DL")
  --detection-limit-column COL  column of detection limits (default: a column named DL, LOD, MDL …)
  --duplicates RULE         coincident points become one by their mean (default), max, min or first
  --max-spread DZ           refuse coincident points whose values differ by more than DZ
  --merge-conflicts         merge such points anyway and report them
  --keep-isolated           keep samples far from all others (more than 10 median spacings) inside
                            the default grid extent and the hull mask (they are fitted either way)
  --weight COL              observation weights (e.g. 1/variance from instrument precision)`;
const MODEL_HELP = `  --kernel K                auto|${KERNELS.join("|")}
                            (default auto: tries every kernel with the trends it supports; see --select)
  --shape auto|NUMBER       shape ε in 1/map units for gaussian and the multiquadrics (default auto:
                            chosen by GCV)
  --trend T                 polynomial trend: auto|${TRENDS.join("|")} (default auto with
                            --kernel auto, else linear; thin-plate needs linear or more, multiquadric
                            constant or more)
  --smoothing gcv|NUMBER    λ added to the kernel matrix diagonal (0 interpolates; default gcv)
  --select one-se|loocv|gcv how --kernel auto chooses: one-se (default) the simplest candidate whose
                            leave-one-out error is within one standard error of the best; loocv the
                            smallest leave-one-out RMSE; gcv the smallest GCV score
  --transform none|log      log: fit ln z for positive, skewed readings; estimates back-transformed
                            with the lognormal bias correction exp(f + σ²/2)
  --stretch AZIMUTH:FACTOR  the surface varies FACTOR (≥ 1) times more slowly along AZIMUTH
                            (degrees clockwise from grid north) than across it, e.g. 45:3 along
                            a valley or a buried channel
  --flag-level ALPHA        false-alarm rate of the blunder test for the whole survey (default 0.05;
                            Pope's tau test on studentised leave-one-out residuals, iterated)
  --robust                  refit with blunders down-weighted (Tukey's biweight, iterated; λ by GCV)
  --method auto|global|local  fitting method (default auto: the local method above 2,000 points,
                            else the global one); global takes at most 5,000 points
  --patch-points N          local method: points per patch (default 150; more is more accurate
                            and slower)
  --breaklines FILE         GeoJSON LineString/MultiLineString: with z on every vertex the surface
                            passes through the line and may change slope across it; without z the
                            line is a barrier (a fault) the surface may jump across (local method)
  --strings COL=CODE[,CODE…]  join shots with these codes in column COL, in file order, into 3-D
                            breaklines (a string ends where another code comes between or at a gap);
                            COL by name or position, or "code" for the --code column
  --string-gap DIST         largest distance between consecutive shots of a string (default: 5 ×
                            the median spacing along the code's strings)`;
const GRID_HELP = `  --cell SIZE               cell size in map units (default: half the median point spacing,
                            at least 200 cells along the longer side, rounded to 1, 2, 2.5 or 5·10ᵏ)
  --extent XMIN,YMIN,XMAX,YMAX  outer edges of the grid (default: the data's bounding box, or the
                            mask polygons' with --mask FILE)
  --mask hull|none|FILE     hull: the data's convex hull (default); FILE: GeoJSON polygons to keep
                            (in their declared CRS, WGS 84 longitude/latitude, or the points' CRS)
  --force                   allow grids above 100 million cells`;
const STDERR_HELP = `  --stderr FILE.tif         also write the standard error of the estimate as a second GeoTIFF
                            (model-based, not a survey tolerance; see README)`;
const TILE_HELP = `  --tile COL,ROW            write only this tile of the grid: N × N cells (--tile-size), counted
                            from 0 at the north-west corner, the last ones cut at the grid's edge;
                            computed from the part of the model that reaches it (with --stderr, its
                            standard errors too). Give every tile the same --cell, --extent and
                            --mask; 'rbfield tiles' puts them together, byte for byte the whole grid
  --tile-size N             tile side in cells (default ${DEFAULT_TILE_SIZE})`;
const TITLE_HELP = `  --title TEXT              title of the map (and of the report)
  --date YYYY-MM-DD         date in the title block (default today, UTC; give it for byte-identical
                            outputs on another day)`;
const LEVELS_HELP = `  --interval DZ             contour interval (default: a round number giving about ten levels;
                            after --transform log, log-spaced levels 1, 2, 5 × 10ᵏ)
  --base Z0                 a level that is a contour (default 0); every fifth level from it is an
                            index contour
  --levels L1,L2,…          contour exactly these levels instead (e.g. thresholds 1,10,100,1000;
                            each is an index contour)`;
const COMMON_HELP = `  --max-memory SIZE         refuse work whose estimated peak memory is larger (default: half of the
                            machine's memory); e.g. 8GiB, 512MiB, 2G: K, M, G, T and KiB, MiB, GiB,
                            TiB are powers of 1024; kB, MB, GB, TB powers of 1000
  --json                    print a machine-readable JSON summary on stdout
  --quiet                   no progress on stderr (otherwise a bar when stderr is a terminal,
                            else one line per step)
  --debug                   show a stack trace on internal errors
  --help                    this help`;

export const HELP: Record<string, string> = {
  main: `rbfield — surfaces from scattered survey points by radial-basis-function regression

Usage: deno task rbfield <verb> [options]

Verbs:
  fit POINTS --out MODEL          fit a surface to points and save the model
  grid MODEL --out FILE.tif       evaluate the surface on a georeferenced grid (GeoTIFF)
  contour MODEL|FILE.tif --out FILE.geojson                contour lines or filled bands
  predict MODEL LOCATIONS.csv --out FILE.csv                estimates at listed places
  tiles TILE.tif… --out FILE.tif  put tiles written by 'grid --tile' together into the whole grid
  map MODEL|FILE.tif --out FILE.pdf|.svg|.png              a contour map to print
  report MODEL --out FILE.html    a self-contained report: maps, GCV curve, residuals, flags, model
  run POINTS --out DIR            the whole job: model, grid, contours, estimates, map, report, summary

'deno task rbfield <verb> --help' shows each verb's options.
Exit codes: 0 success, 1 internal error, 2 bad command line, 3 bad input data,
4 file cannot be read or written, 5 the data cannot support the model asked for.

${CAUTION}
`,
  fit: `Usage: deno task rbfield fit POINTS --out MODEL [options]

Reads POINTS (CSV, TSV, semicolon or whitespace text with a header row, or GeoJSON points), fits
an RBF surface with polynomial trend, chooses the smoothing by generalized cross-validation and
writes the model file (JSON, format rbfield-model version ${MODEL_VERSION}).

${POINTS_HELP}
${MODEL_HELP}
${COMMON_HELP}
`,
  grid: `Usage: deno task rbfield grid MODEL --out FILE.tif [options]

Evaluates a saved model on a regular grid and writes a single-band Float32 GeoTIFF (cells are
areas; nodata -9999 for masked cells; CRS keys from the model's EPSG code).

${GRID_HELP}
${STDERR_HELP}
${TILE_HELP}
${COMMON_HELP}
`,
  tiles: `Usage: deno task rbfield tiles TILE.tif [TILE.tif …] --out FILE.tif [options]

Puts the tiles written by 'grid MODEL --tile COL,ROW' together into the whole grid: the same bytes
as 'grid MODEL' without --tile. Every tile of the grid must be given once, in any order; each tile
says where it belongs. Value tiles and standard-error tiles (--stderr) are put together separately.
Tiles of another model, extent, cell, mask or tile size are refused. For example:

  for t in 0,0 1,0 0,1 1,1; do
    deno task rbfield grid site.rbfield.json --cell 0.5 --tile $t --tile-size 2048 --out tile-$t.tif
  done
  deno task rbfield tiles tile-*.tif --out surface.tif

${COMMON_HELP}
`,
  contour: `Usage: deno task rbfield contour MODEL|FILE.tif --out FILE.geojson [options]

Contour lines as GeoJSON MultiLineString features, one per level, with the properties "level" and
"index" (true for index contours); with --bands, filled polygons between consecutive levels with
"lower" and "upper". Coordinates stay in the grid's CRS. From a MODEL, a grid is made first (grid
options apply).

${LEVELS_HELP}
  --bands                   filled bands instead of lines
  --3d                      lines with the level as a third coordinate [x, y, level]
${GRID_HELP}
${COMMON_HELP}
`,
  predict: `Usage: deno task rbfield predict MODEL LOCATIONS.csv --out FILE.csv [options]

Keeps every column of LOCATIONS and adds the columns "estimate" and "std_error" (the model-based
standard error of the estimate; RFC 4180 CSV). Rows without usable coordinates get empty cells
and are reported.

  --x COL --y COL           coordinate columns, by name or 1-based position (default: detected
                            from the header; lat/lon columns are taken as WGS 84 and projected)
  --crs CRS                 CRS of the locations when not the model's (e.g. EPSG:4326)
  --header auto|none        auto (default): a first row of numbers only is data; none: no header
${COMMON_HELP}
`,
  run: `Usage: deno task rbfield run POINTS --out DIR [options]

The whole job: fit, grid, contours and bands, estimates and a summary, written into DIR as
${outputNamesText()}.

${POINTS_HELP}
${MODEL_HELP}
${GRID_HELP}
${LEVELS_HELP}
  --3d                      contours.geojson with the level as a third coordinate [x, y, level]
  --locations FILE.csv      places to estimate at (default: the input points)
${TITLE_HELP}
${COMMON_HELP}
`,
  map: `Usage: deno task rbfield map MODEL|FILE.tif --out FILE.svg|FILE.pdf|FILE.png [options]

A contour map to print: index contours (every fifth) heavier and labelled, survey points and
possible blunders, the data outline, scale bar, north arrow, coordinate ticks, a legend and a title
block with the method and the caution. PDF and SVG stay vector. From a MODEL, a grid is made first
(grid options apply; without --cell, no finer than about 1000 cells along the longer side, which is
as fine as a sheet shows).

${LEVELS_HELP}
  --paper P                 A4|A3|A1|letter|tabloid, any case (default A4)
  --orientation O           landscape|portrait (default landscape)
  --scale N                 print at 1:N (default: the largest round scale that fits the sheet)
  --relief                  colour relief with hillshade under the contours (default: lines only)
  --label-points            print each survey point's value beside it
${TITLE_HELP}
${GRID_HELP}
${COMMON_HELP}
`,
  report: `Usage: deno task rbfield report MODEL --out FILE.html [options]

The report of a saved model as one self-contained HTML file that opens in any browser with no
network: the contour map with relief, the standard-error map, the GCV curve over λ with the choice
marked, the candidate ranking, leave-one-out residuals (histogram, reading against estimate), the
points flagged, the model table with the rows skipped or merged when fitting, warnings and the
caution: the same page as run's report.html. The grid options make the maps' grid, as for 'grid'
(without --cell, no finer than about 1000 cells along the longer side).

${LEVELS_HELP}
${TITLE_HELP}
${GRID_HELP}
${COMMON_HELP}
`,
};

