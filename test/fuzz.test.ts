// Property-based checks with fast-check on random and malformed inputs. Each property states the
// contract in the issue "Field data is messy": a user's input either gives a result or an
// RbfieldError (one line, an exit code); never another exception, never NaN or Infinity in results.
// Seeds are fixed so runs are repeatable in CI; numRuns per property is recorded next to it.
//
//   (a) reader + cleaner on random texts ........ RUNS.texts + RUNS.tables + RUNS.geojson runs
//   (b) read + clean + fit + evaluate ........... RUNS.fits runs
//   (c) model-file parsing of damaged files ..... RUNS.models runs
import { beforeAll, describe, expect, it } from "vitest";
import fc from "fast-check";
import { cleanPoints } from "../src/clean/clean.ts";
import { ExitCode, RbfieldError } from "../src/errors.ts";
import { mulberry32 } from "../src/random.ts";
import { makeEvaluator } from "../src/evaluate/evaluate.ts";
import { gridModel } from "../src/evaluate/grid.ts";
import { fitSurface } from "../src/fit/surface.ts";
import { TRENDS, KERNELS, minimumTrend } from "../src/fit/kernels.ts";
import { modelFromJson, modelToJson, type SurfaceModel } from "../src/model/model.ts";
import { parseNumber, parsePointTable } from "../src/read/points.ts";
import type { TrendName, KernelName, PointTable } from "../src/types.ts";

/** Runs per property (recorded here so the report and CI logs agree). */
export const RUNS = { texts: 20000, tables: 15000, geojson: 10000, fits: 12000, models: 15000 } as const;
/** Per-test time limit (the runs above take a few seconds each on a 2-core machine). */
const LIMIT_MS = 120_000;

/** Generous bound on one parse of a few kilobytes: quadratic regular expressions take seconds. */
const PARSE_MS = 1000;

/** Calls fn; an RbfieldError is an accepted outcome (returns undefined), any other exception fails. */
function resultOrRbfieldError<T>(fn: () => T): T | undefined {
  try {
    return fn();
  } catch (e) {
    if (e instanceof RbfieldError) {
      // The CLI prints the first line of the message: it must say something.
      expect(e.message.split("\n")[0].trim().length).toBeGreaterThan(0);
      expect([1, 2, 3, 4, 5]).toContain(e.exitCode);
      return undefined;
    }
    throw e;
  }
}

/** Structural invariants of a PointTable (src/types.ts). */
function checkTable(t: PointTable): void {
  expect(t.rows.length).toBe(t.lines.length);
  for (const row of t.rows) expect(row.length).toBe(t.columns.length);
  for (let i = 0; i < t.lines.length; i++) {
    expect(t.lines[i]).toBeGreaterThanOrEqual(1);
    if (i > 0) expect(t.lines[i]).toBeGreaterThanOrEqual(t.lines[i - 1]);
  }
  for (const j of [t.xColumn, t.yColumn]) expect(j >= 0 && j < t.columns.length).toBe(true);
  expect(t.zColumn >= -1 && t.zColumn < t.columns.length).toBe(true);
  expect(new Set([t.xColumn, t.yColumn]).size).toBe(2);
}

/** Cleaning a table: a result with finite numbers and distinct positions, or an RbfieldError. */
function cleanChecked(t: PointTable, mergeConflicts: boolean) {
  const c = resultOrRbfieldError(() => cleanPoints(t, { mergeConflicts }));
  if (!c) return undefined;
  const seen = new Set<string>();
  for (let i = 0; i < c.x.length; i++) {
    expect(Number.isFinite(c.x[i]) && Number.isFinite(c.y[i]) && Number.isFinite(c.z[i])).toBe(true);
    const key = `${c.x[i] + 0},${c.y[i] + 0}`;
    expect(seen.has(key), `duplicate position ${key}`).toBe(false);
    seen.add(key);
  }
  expect(c.x.length + c.skipped.length + c.merged.reduce((s, g) => s + g.lines.length - 1, 0)).toBe(c.rowsRead);
  return c;
}

// ---------------------------------------------------------------------------------------------
// Generators

/** Numbers as people and programs write them, including the ones a reader must refuse. */
const numberText = fc.oneof(
  fc.integer({ min: -100000, max: 100000 }).map(String),
  fc.double({ noNaN: true, noDefaultInfinity: true, min: -1e7, max: 1e7 }).map(String),
  fc.double().map(String), // includes NaN, Infinity, -0, 5e-324, 1.7976931348623157e308
  fc.integer({ min: -320, max: 320 }).map((k) => `1e${k}`),
  fc.constantFrom(
    "1e300", "-1e300", "1e-300", "1e999", "-1e999", "NaN", "nan", "Infinity", "-inf", "+7", ".5", "5.", "-0",
    "0x10", "1_000", "1 000", "1.234,5", "12,5", "-,25", "1,5e2", "١٢", "１２", "1e", "e5", "--1", "", " ", "3.4028235e38",
  ),
);

const word: fc.Arbitrary<string> = fc.constantFrom<string>(
  "x", "y", "z", "X", "Easting", "northing", "level", "value", "RL", "id", "name", "Höhe", "E (m)", "N [m]", "e", "n",
  "depth", "code", "point", "", "# comment", "\"quoted, with comma\"", "\"a \"\"b\"\"\"", "'", "\u001b[31m", "\u202e",
);

/** Random texts made of the pieces that make CSV and GeoJSON files messy. */
const messyText = fc
  .array(
    fc.oneof(
      { weight: 4, arbitrary: numberText },
      { weight: 3, arbitrary: word },
      { weight: 4, arbitrary: fc.constantFrom(",", ";", "\t", " ", "  ", "\"", "\"\"") },
      { weight: 3, arbitrary: fc.constantFrom("\n", "\r\n", "\r", "\n\n", "\n#", "\n\r") },
      { weight: 1, arbitrary: fc.constantFrom("\uFEFF", "\u0000", "\uFFFD", "\u2028", "{", "}", "[", "]", ":", "\"type\"", "\"features\"") },
      { weight: 1, arbitrary: fc.string({ unit: "grapheme", maxLength: 8 }) },
      { weight: 1, arbitrary: fc.string({ unit: "binary", maxLength: 8 }) },
    ),
    { maxLength: 120 },
  )
  .map((parts) => parts.join(""));

/** A header that usually names x, y and a value (in some spelling and order), plus other columns. */
const header: fc.Arbitrary<string[]> = fc.oneof(
  { weight: 3, arbitrary: fc.tuple(
    fc.constantFrom("x", "Easting", "E (m)", "east"),
    fc.constantFrom("y", "northing", "N [m]", "North"),
    fc.constantFrom("z", "level", "RL", "value", "Höhe", "depth"),
    fc.array(word, { maxLength: 2 }),
    fc.nat(5),
  ).map(([x, y, z, more, rot]) => {
    const cols = [x, y, z, ...more];
    return [...cols.slice(rot % cols.length), ...cols.slice(0, rot % cols.length)];
  }) },
  { weight: 1, arbitrary: fc.array(word, { minLength: 1, maxLength: 6 }) },
);

/** Cells: mostly numbers, sometimes words; rows mostly as long as the header, sometimes ragged. */
const cellText = fc.oneof({ weight: 5, arbitrary: numberText }, { weight: 1, arbitrary: word });

/** Delimited tables with a header, random delimiters, quoting, line ends and cells. */
const messyTable = fc
  .record({
    delimiter: fc.constantFrom(",", ",", ";", "\t", " ", "  ", " \t"),
    newline: fc.constantFrom("\n", "\r\n", "\r"),
    bom: fc.boolean(),
    header,
    rows: fc.array(fc.tuple(fc.array(cellText, { minLength: 7, maxLength: 7 }), fc.integer({ min: -30, max: 1 })), { maxLength: 12 }),
    emptyOrComment: fc.array(fc.nat(14), { maxLength: 3 }),
    quoteAll: fc.boolean(),
    finalNewline: fc.boolean(),
  })
  .map((r) => {
    const cell = (s: string) => (r.quoteAll ? `"${s.replace(/"/g, '""')}"` : s);
    // Row length: the header's (most often), one less, or one more.
    const width = (d: number) => Math.max(0, r.header.length + (d < -2 ? 0 : d));
    const rows = r.rows.map(([cells, d]) => cells.slice(0, width(d)));
    const lines = [r.header.map(cell).join(r.delimiter), ...rows.map((row) => row.map(cell).join(r.delimiter))];
    for (const at of r.emptyOrComment) lines.splice(Math.min(at, lines.length), 0, at % 2 ? "" : "# note");
    return (r.bom ? "\uFEFF" : "") + lines.join(r.newline) + (r.finalNewline ? r.newline : "");
  });

const jsonValue = fc.oneof(
  numberText.map((t) => (Number.isFinite(Number(t)) && t.trim() !== "" ? Number(t) : t)),
  word,
  fc.constantFrom(null, true, [], {}, [1, 2], { a: 1 }),
);

/** GeoJSON-like documents: mostly Point features, sometimes other geometries, missing parts, cut off. */
const messyGeoJson = fc
  .record({
    features: fc.array(
      fc.record({
        type: fc.oneof({ weight: 20, arbitrary: fc.constant("Feature") }, { weight: 1, arbitrary: fc.constantFrom("feature", "Point") }),
        gtype: fc.oneof(
          { weight: 20, arbitrary: fc.constant("Point") },
          { weight: 1, arbitrary: fc.constantFrom("LineString", "MultiPoint", "Polygon", null) },
        ),
        coords: fc.oneof(
          { weight: 8, arbitrary: fc.array(fc.double({ min: -1e7, max: 1e7, noNaN: true }), { minLength: 2, maxLength: 3 }) },
          { weight: 1, arbitrary: fc.array(jsonValue, { maxLength: 4 }) },
        ),
        props: fc.option(
          fc.tuple(fc.dictionary(word, jsonValue, { maxKeys: 3 }), fc.option(numberText, { nil: undefined }))
            .map(([d, level]) => (level === undefined ? d : { ...d, level: Number(level) || level })),
          { nil: undefined, freq: 8 },
        ),
      }),
      { maxLength: 10 },
    ),
    crs: fc.option(fc.constantFrom("EPSG:28355", "urn:ogc:def:crs:OGC:1.3:CRS84", "file:///etc/passwd", "EPSG:"), { nil: undefined }),
    cut: fc.oneof({ weight: 4, arbitrary: fc.constant(undefined) }, { weight: 1, arbitrary: fc.nat(2000) }),
    indent: fc.constantFrom(0, 1, 2),
  })
  .map((r) => {
    const doc: Record<string, unknown> = {
      type: "FeatureCollection",
      ...(r.crs ? { crs: { type: "name", properties: { name: r.crs } } } : {}),
      features: r.features.map((f) => ({
        type: f.type,
        geometry: f.gtype === null ? null : { type: f.gtype, coordinates: f.coords },
        ...(f.props === undefined ? {} : { properties: f.props }),
      })),
    };
    const text = JSON.stringify(doc, null, r.indent);
    return r.cut === undefined ? text : text.slice(0, r.cut);
  });

/** Mostly undefined (columns detected); sometimes a column name that may or may not exist. */
const maybeName = fc.oneof({ weight: 6, arbitrary: fc.constant(undefined) }, { weight: 1, arbitrary: word });
const readOptions = fc.record({
  x: maybeName,
  y: maybeName,
  z: maybeName,
  needValue: fc.option(fc.boolean(), { nil: undefined }),
});

function parseTimed(text: string, options: Record<string, unknown>): PointTable | undefined {
  const start = performance.now();
  const t = resultOrRbfieldError(() => parsePointTable(text, "fuzz.csv", options));
  expect(performance.now() - start, `parse time for ${text.length} characters`).toBeLessThan(PARSE_MS);
  if (t) checkTable(t);
  return t;
}

// ---------------------------------------------------------------------------------------------

describe("(a) reader and cleaner on random and malformed texts", () => {
  it(`random texts: a table or an RbfieldError, in bounded time (${RUNS.texts} runs)`, () => {
    fc.assert(
      fc.property(messyText, readOptions, fc.boolean(), (text, options, merge) => {
        const t = parseTimed(text, options);
        if (t && t.zColumn >= 0) cleanChecked(t, merge);
      }),
      { seed: 20251201, numRuns: RUNS.texts },
    );
  }, LIMIT_MS);

  it(`random delimited tables (BOM, CRLF, quotes, comments, ragged rows) (${RUNS.tables} runs)`, () => {
    fc.assert(
      fc.property(messyTable, readOptions, fc.boolean(), (text, options, merge) => {
        const t = parseTimed(text, options);
        if (t && t.zColumn >= 0) cleanChecked(t, merge);
      }),
      { seed: 4180, numRuns: RUNS.tables },
    );
  }, LIMIT_MS);

  it(`random GeoJSON documents, whole or cut off (${RUNS.geojson} runs)`, () => {
    fc.assert(
      fc.property(messyGeoJson, readOptions, fc.boolean(), (text, options, merge) => {
        const t = parseTimed(text, options);
        if (t && t.zColumn >= 0) cleanChecked(t, merge);
      }),
      { seed: 7946, numRuns: RUNS.geojson },
    );
  }, LIMIT_MS);

  it("numbers: parseNumber accepts exactly the finite plain decimals (compared with Number)", () => {
    fc.assert(
      fc.property(numberText, (s) => {
        const v = parseNumber(s, false);
        const plain = /^\s*[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?\s*$/.test(s);
        if (plain && Number.isFinite(Number(s))) expect(v).toBe(Number(s.trim()));
        else expect(v).toBeNaN();
      }),
      { seed: 754, numRuns: 2000 },
    );
  });

  it("pathological cells and headers parse in linear time (no regular-expression backtracking)", () => {
    const digits = "1".repeat(200_000);
    const brackets = "(".repeat(200_000);
    const start = performance.now();
    // A 200 000-digit cell followed by a letter, in a comma and a decimal-comma file.
    const t = parsePointTable(`x,y,z\n1,2,${digits}x\n3,4,5\n`, "long.csv");
    expect(cleanPoints(t).skipped).toHaveLength(1);
    const u = parsePointTable(`x;y;z\n1;2;${digits}x\n3;4;5,5\n`, "long.csv");
    expect(cleanPoints(u).skipped).toHaveLength(1);
    // A header name of 200 000 opening brackets (normalised for column detection).
    expect(() => parsePointTable(`${brackets},a,b\n1,2,3\n`, "brackets.csv")).toThrow(/cannot tell which are the x and y/);
    // Before the fix each of these took minutes (quadratic backtracking); now milliseconds.
    expect(performance.now() - start).toBeLessThan(5 * PARSE_MS);
  }, LIMIT_MS);
});

// ---------------------------------------------------------------------------------------------

type Layout = "random" | "lattice" | "collinear" | "duplicates" | "identical" | "cluster";

const pointSet = fc
  .record({
    n: fc.integer({ min: 0, max: 14 }),
    layout: fc.constantFrom<Layout>("random", "random", "random", "lattice", "collinear", "duplicates", "identical", "cluster"),
    // Coordinate magnitude and extent: metres and UTM-like offsets mostly; huge and tiny sometimes.
    offset: fc.oneof(
      { weight: 6, arbitrary: fc.constantFrom(0, 512400, 5.4e6, -3e7) },
      { weight: 1, arbitrary: fc.constantFrom(1e12, 1e14, 1e300, 1e-300) },
    ),
    scale: fc.oneof(
      { weight: 6, arbitrary: fc.constantFrom(1, 100, 1e5) },
      { weight: 1, arbitrary: fc.constantFrom(1e-6, 1e-10, 1e13, 1e-300, 1e300) },
    ),
    values: fc.constantFrom("smooth", "smooth", "constant", "noisy", "huge", "tiny", "mixed-sign-huge", "step"),
    seed: fc.integer({ min: 1, max: 2 ** 31 - 1 }),
  })
  .map((r) => {
    // The same seed gives the same points.
    const rand = mulberry32(r.seed);
    const pts: [number, number][] = [];
    const side = Math.max(1, Math.ceil(Math.sqrt(r.n)));
    for (let i = 0; i < r.n; i++) {
      let u: number, v: number;
      switch (r.layout) {
        case "lattice": u = i % side; v = Math.floor(i / side); break;
        case "collinear": u = i; v = 0.5 * i; break;
        case "duplicates": u = Math.floor(rand() * 3); v = Math.floor(rand() * 3); break;
        case "identical": u = 1; v = 1; break;
        case "cluster": u = 1 + rand() * 1e-9; v = 1 + rand() * 1e-9; break;
        default: u = rand(); v = rand();
      }
      pts.push([r.offset + r.scale * u, r.offset + r.scale * v]);
    }
    const value = (i: number) => {
      switch (r.values) {
        case "constant": return 42;
        case "noisy": return rand() * 10 - 5;
        case "huge": return 1e30 * (1 + rand());
        case "tiny": return 1e-300 * (1 + rand());
        case "mixed-sign-huge": return (i % 2 ? -1 : 1) * 1e37;
        case "step": return i % 2;
        default: return Math.sin(i) + 0.1 * i;
      }
    };
    const lines = ["x,y,z", ...pts.map(([x, y], i) => `${x},${y},${value(i)}`)];
    return lines.join("\n") + "\n";
  });

const fitChoice = fc
  .record({
    kernel: fc.constantFrom<KernelName>(...KERNELS),
    trendUp: fc.nat(3),
    shape: fc.oneof(fc.constant("auto" as const), fc.constantFrom(1e-6, 0.01, 1, 100, 1e6)),
    smoothing: fc.oneof(fc.constant("gcv" as const), fc.constantFrom(0, 1e-12, 1, 1e6)),
  })
  .map((o) => {
    const lowest = TRENDS.indexOf(minimumTrend(o.kernel));
    const trend = TRENDS[Math.min(TRENDS.length - 1, lowest + o.trendUp)] as TrendName;
    return { kernel: o.kernel, trend, shape: o.shape, smoothing: o.smoothing };
  });

/** Every number anywhere in a model record is finite (JSON would turn NaN/Infinity into null). */
function nonFiniteNumbers(value: unknown, at = "model", out: string[] = []): string[] {
  if (typeof value === "number") {
    if (!Number.isFinite(value)) out.push(`${at} = ${value}`);
  } else if (Array.isArray(value)) {
    value.forEach((v, i) => nonFiniteNumbers(v, `${at}[${i}]`, out));
  } else if (value && typeof value === "object") {
    for (const [k, v] of Object.entries(value)) nonFiniteNumbers(v, `${at}.${k}`, out);
  }
  return out;
}

describe("(b) read, clean, fit and evaluate random small point sets", () => {
  it(`a model with finite estimates, or an RbfieldError (${RUNS.fits} runs)`, () => {
    fc.assert(
      fc.property(pointSet, fitChoice, (text, fit) => {
        const table = resultOrRbfieldError(() => parsePointTable(text, "pts.csv"));
        if (!table) return;
        const points = cleanChecked(table, true);
        if (!points) return;
        const model = resultOrRbfieldError(() => fitSurface(points, fit));
        if (!model) return;
        // Every number in the model is finite; a leave-one-out residual that does not exist (the
        // other points cannot carry the trend) is stored as null, never as NaN or Infinity.
        expect(nonFiniteNumbers(model)).toEqual([]);
        const ev = makeEvaluator(model);
        const { xmin, ymin, xmax, ymax } = model.extent;
        const probes: [number, number][] = [
          [points.x[0], points.y[0]],
          [(xmin + xmax) / 2, (ymin + ymax) / 2],
          [xmin + 0.3 * (xmax - xmin), ymin + 0.7 * (ymax - ymin)],
        ];
        for (const [x, y] of probes) {
          const v = ev.at(x, y);
          expect(Number.isFinite(v), `estimate at ${x}, ${y} is ${v}`).toBe(true);
        }
        // The saved model reads back (the round trip the CLI's fit → grid makes).
        const again = modelFromJson(modelToJson(model), "m.json");
        expect(makeEvaluator(again).at(probes[1][0], probes[1][1])).toBe(ev.at(probes[1][0], probes[1][1]));
      }),
      { seed: 1979, numRuns: RUNS.fits },
    );
  }, LIMIT_MS);
});

// ---------------------------------------------------------------------------------------------

let modelText = "";

beforeAll(() => {
  // Six points fitted with the defaults: the valid model file the mutations start from.
  const table = parsePointTable("x,y,z\n0,0,10.0\n10,0,10.4\n0,10,10.9\n10,10,11.1\n5,4,10.6\n3,8,10.8\n", "six.csv");
  modelText = modelToJson(fitSurface(cleanPoints(table)));
});

/** A position in [0, 1) (fc.double would favour 0 and tiny numbers). */
const at = fc.integer({ min: 0, max: 999_999 }).map((i) => i / 1_000_000);

/** Values put in place of a part of a model file; "1e999" is written as a JSON number (Infinity when read). */
const INF = "\u0000inf";
const replacement = fc.constantFrom<unknown>(
  0, -0, -1, 1e308, -1e308, 5e-324, INF, "1", "", null, true, [], {}, [1, 2], { x: 1 },
  "../../etc/passwd", "\u001b[2J", "cubic", "log", "auto", 99,
);

type Mutation =
  | { kind: "replace"; at: number; value: unknown }
  | { kind: "delete"; at: number }
  | { kind: "truncate"; at: number }
  | { kind: "bytes"; at: number; text: string };

const structural = fc.oneof(
  { weight: 4, arbitrary: fc.record({ kind: fc.constant("replace" as const), at, value: replacement }) },
  { weight: 1, arbitrary: fc.record({ kind: fc.constant("delete" as const), at }) },
);
const textual = fc.oneof(
  fc.record({ kind: fc.constant("truncate" as const), at }),
  fc.record({ kind: fc.constant("bytes" as const), at, text: fc.string({ unit: "binary", minLength: 1, maxLength: 6 }) }),
);

/** Every [container, key] in a parsed JSON value, in document order. */
function slots(v: unknown, out: [Record<string, unknown> | unknown[], string | number][] = []) {
  if (Array.isArray(v)) v.forEach((c, i) => (out.push([v, i]), slots(c, out)));
  else if (v && typeof v === "object") for (const [k, c] of Object.entries(v)) out.push([v as Record<string, unknown>, k]), slots(c, out);
  return out;
}

/** Apply structural changes to the parsed model, write it back as the CLI does, then textual damage. */
function damaged(text: string, changes: Mutation[], damage: Mutation | null): string {
  const doc = JSON.parse(text);
  for (const m of changes) {
    const all = slots(doc);
    const [box, key] = all[Math.floor(m.at * all.length)];
    if (m.kind === "replace") (box as Record<string, unknown>)[key as string] = m.value;
    else if (Array.isArray(box)) box.splice(key as number, 1);
    else delete (box as Record<string, unknown>)[key as string];
  }
  let out = JSON.stringify(doc, null, 1).replaceAll(JSON.stringify(INF), "1e999");
  if (damage?.kind === "truncate") out = out.slice(0, Math.floor(damage.at * out.length));
  if (damage?.kind === "bytes") {
    const i = Math.floor(damage.at * out.length);
    out = out.slice(0, i) + damage.text + out.slice(i);
  }
  return out;
}

describe("(c) model files: truncated, mutated, not a model", () => {
  it(`parsing gives a model or an RbfieldError, never another exception (${RUNS.models} runs)`, () => {
    fc.assert(
      fc.property(
        fc.array(structural, { maxLength: 2 }),
        fc.oneof({ weight: 3, arbitrary: fc.constant(null) }, { weight: 1, arbitrary: textual }),
        (changes, damage) => {
          const text = damaged(modelText, changes, damage);
          const model = resultOrRbfieldError(() => modelFromJson(text, "m.rbfield.json"));
          if (!model) return;
          // An accepted model is gridded with finite values everywhere, or refused with an RbfieldError.
          const grid = resultOrRbfieldError(() => gridModel(model, { cell: 1, mask: "none" }));
          if (grid) expect(grid.values.every(Number.isFinite)).toBe(true);
          resultOrRbfieldError(() => gridModel(model, { cell: 2.5 }));
        },
      ),
      { seed: 1, numRuns: RUNS.models },
    );
  }, LIMIT_MS);

  it(`an accepted model never fails numerically when gridded: damage is caught when the file is read (${RUNS.models} runs)`, () => {
    fc.assert(
      fc.property(fc.array(structural, { maxLength: 2 }), (changes) => {
        const model = resultOrRbfieldError(() => modelFromJson(damaged(modelText, changes, null), "m.rbfield.json"));
        if (!model) return;
        try {
          gridModel(model, { cell: 2.5 });
        } catch (e) {
          expect(e).toBeInstanceOf(RbfieldError);
          // Too large a grid (a mutated extent) is a usage error; a numerical failure (exit 5) would mean
          // the reader let damage through.
          expect((e as RbfieldError).exitCode).not.toBe(ExitCode.numerical);
        }
      }),
      { seed: 2, numRuns: RUNS.models },
    );
  }, LIMIT_MS);
});
