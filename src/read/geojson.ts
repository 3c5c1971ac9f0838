// Reader: GeoJSON (RFC 7946) FeatureCollections of Point features. The coordinates become columns
// x, y (and z when a Point has a third), the properties the other columns. Recognised by a first
// character, after white space, of "{".
import { inputError } from "../errors.ts";
import { messageText } from "../text.ts";
import type { Crs, TextTable } from "../types.ts";
import { firstCells, typeCells } from "./cells.ts";
import { chooseColumns } from "./columns.ts";
import { fromParseMessage, locateJsonError } from "../json_syntax.ts";
import type { ReadOptions, TextReader } from "./reader.ts";
import { LineIndex, normalizeText, startsWithBrace, textReader } from "./textfile.ts";

function sniffText(text: string): number {
  return startsWithBrace(normalizeText(text)) ? 0.9 : 0;
}

function parse(text: string, file: string, options: ReadOptions): TextTable {
  const body = normalizeText(text);
  return parseGeoJson(body, file, new LineIndex(body), options);
}

export const geojsonReader: TextReader = textReader("geojson", sniffText, parse);

function parseGeoJson(body: string, file: string, lines: LineIndex, options: ReadOptions): TextTable {
  let doc: unknown;
  try {
    doc = JSON.parse(body);
  } catch (e) {
    const found = locateJsonError(body) ?? fromParseMessage(e, body.length);
    throw inputError(`invalid JSON: ${messageText(found.message, 120)}; fix the JSON syntax (the file may be truncated)`, {
      file,
      line: lines.lineOf(found.offset),
      column: lines.columnOf(found.offset),
    });
  }
  const top = doc as Record<string, unknown>;
  if (top === null || typeof top !== "object" || Array.isArray(top) || top.type !== "FeatureCollection") {
    throw inputError("GeoJSON must be a FeatureCollection of Point features (RFC 7946 §3.3)", { file, line: 1 });
  }
  const offsets = featureOffsets(body);
  const keyAt = body.search(/"features"\s*:/);
  const keyLine = keyAt >= 0 ? lines.lineOf(keyAt) : 1;
  const features = top.features;
  if (!Array.isArray(features)) {
    throw inputError("GeoJSON FeatureCollection has no \"features\" array (RFC 7946 §3.3)", { file, line: keyLine });
  }
  if (features.length === 0) {
    throw inputError("GeoJSON FeatureCollection has no features; add one Point feature per measured point", {
      file,
      line: keyLine,
    });
  }
  const lineOfFeature = (i: number) =>
    offsets.length === features.length ? lines.lineOf(offsets[i]) : keyLine;

  // First pass: geometry checks, property names, third coordinate.
  const propNames: string[] = [];
  const propSeen = new Set<string>();
  let hasZ = false;
  for (let i = 0; i < features.length; i++) {
    const f = features[i] as Record<string, unknown> | null;
    const place = { file, line: lineOfFeature(i) };
    if (f === null || typeof f !== "object" || f.type !== "Feature") {
      throw inputError(
        `features[${i}] is not a GeoJSON Feature (RFC 7946 §3.2); each element must be {"type": "Feature", "geometry": …, "properties": …}`,
        place,
      );
    }
    const g = f.geometry as Record<string, unknown> | null;
    const gtype = g && typeof g === "object" ? String(g.type) : "null";
    if (gtype !== "Point") {
      throw inputError(
        `features[${i}] has a ${messageText(gtype, 40)} geometry; only Point features are read (RFC 7946 §3.1.2): ` +
          "remove it or convert it to points",
        place,
      );
    }
    const coords = g!.coordinates;
    if (!Array.isArray(coords) || coords.length < 2) {
      throw inputError(`features[${i}] Point needs at least two coordinates, [x, y] (RFC 7946 §3.1.2)`, place);
    }
    if (coords.length >= 3) hasZ = true;
    const props = f.properties;
    if (props !== null && props !== undefined && typeof props === "object" && !Array.isArray(props)) {
      for (const k of Object.keys(props)) {
        if (!propSeen.has(k)) {
          propSeen.add(k);
          propNames.push(k);
        }
      }
    }
  }

  const columns = ["x", "y", ...(hasZ ? ["z"] : []), ...propNames];
  const firstProp = hasZ ? 3 : 2;
  const rows: string[][] = [];
  const rowLines: number[] = [];
  for (let i = 0; i < features.length; i++) {
    const f = features[i] as { geometry: { coordinates: unknown[] }; properties?: Record<string, unknown> | null };
    const c = f.geometry.coordinates;
    const row = [cellText(c[0]), cellText(c[1])];
    if (hasZ) row.push(cellText(c[2]));
    const props = f.properties && typeof f.properties === "object" ? f.properties : {};
    for (const k of propNames) row.push(cellText(props[k]));
    rows.push(row);
    rowLines.push(lineOfFeature(i));
  }

  const propIdx = propNames.map((_, k) => firstProp + k);
  const choice = chooseColumns(columns, columns.map((_, j) => firstCells(rows, j)), options, {
    file,
    headerLine: keyLine,
    decimalComma: false,
    zCandidates: propIdx,
    zDefault: hasZ ? 2 : -1,
    numericFallback: false,
    hasHeader: true,
  });
  const crs = readCrs(top.crs);
  return typeCells({
    file,
    columns,
    rows,
    lines: rowLines,
    ...choice,
    delimiter: "geojson",
    decimalComma: false,
    ...(crs ? { crs } : {}),
    format: "geojson",
    hasHeader: true,
  });
}

function cellText(v: unknown): string {
  if (v === null || v === undefined) return "";
  if (typeof v === "string") return v;
  if (typeof v === "number" || typeof v === "boolean") return String(v);
  return JSON.stringify(v);
}

/** EPSG code from a GeoJSON 2008 "crs" member (RFC 7946 dropped it, but files still carry it). */
export function readCrs(crs: unknown): Crs | undefined {
  let name: unknown = crs;
  if (crs && typeof crs === "object") {
    const props = (crs as { properties?: Record<string, unknown> }).properties;
    name = props?.name ?? (props?.code !== undefined ? `EPSG:${props.code}` : undefined);
  }
  if (typeof name !== "string") return undefined;
  if (/CRS84$/i.test(name)) return { epsg: 4326, label: "EPSG:4326" };
  const m = /EPSG:(?:[0-9.]*:)?(\d+)\s*$/i.exec(name) ?? /EPSG\/[^/]*\/(\d+)\s*$/i.exec(name);
  if (!m) return undefined;
  const epsg = Number(m[1]);
  return { epsg, label: `EPSG:${epsg}` };
}

/** Start offsets of the elements of the top-level "features" array (text known to be valid JSON). */
export function featureOffsets(s: string): number[] {
  let offsets: number[] = [];
  let depth = 0;
  let lastKey = "";
  let inFeatures = false;
  let expectElem = false;
  for (let i = 0; i < s.length; i++) {
    const c = s[i];
    if (c === " " || c === "\n" || c === "\t" || c === "\r") continue;
    if (inFeatures && depth === 2 && expectElem && c !== "]") {
      offsets.push(i);
      expectElem = false;
    }
    if (c === '"') {
      const start = i;
      i++;
      while (s[i] !== '"') i += s[i] === "\\" ? 2 : 1;
      if (depth === 1) lastKey = s.slice(start + 1, i);
    } else if (c === "{" || c === "[") {
      depth++;
      if (c === "[" && depth === 2 && lastKey === "features") {
        inFeatures = true;
        expectElem = true;
        offsets = [];
      }
    } else if (c === "}" || c === "]") {
      if (inFeatures && depth === 2) inFeatures = false;
      depth--;
    } else if (c === "," && inFeatures && depth === 2) {
      expectElem = true;
    }
  }
  return offsets;
}

