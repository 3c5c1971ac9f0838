// Breaklines on the invented Heron Lane survey (samples/heron_lane.ts, INVENTED data): the fit with
// coded strings against the fit without, both compared with the known surface. Prints RMSE over the
// site, within 1 m of a feature line, the kerb faces kept (level difference 5 cm either side of the
// kerb line; true 150 mm) and the ditch invert. Run:
//   npx -y deno@2 run -A bench/breaklines.ts
import { contourLines, fitPointsFile, gridModel, makeEvaluator } from "../src/mod.ts";
import type { GridValues } from "../src/types.ts";
import { ditchCentre, FEATURES, heronLevel, KERB, STRING_CODES } from "../samples/heron_lane.ts";

export interface HeronFigures {
  overall: number;
  nearFeatures: number;
  kerbFace: { min: number; median: number; max: number };
  ditchInvert: number;
  /** Small closed 0.25 m contour loops (under 10 m round) on a 0.5 m grid, and in the true surface on the same grid. */
  loops: number;
  trueLoops: number;
  seconds: number;
}

/** Closed contour rings under 10 m round at 0.25 m levels: bullseyes. */
export function smallLoops(grid: GridValues): number {
  const levels = Array.from({ length: 14 }, (_, k) => 49.75 + 0.25 * k);
  let count = 0;
  for (const feat of contourLines(grid, levels).features) {
    const parts = feat.geometry.type === "LineString" ? [feat.geometry.coordinates] : feat.geometry.coordinates;
    for (const ring of parts) {
      const closed = ring.length > 3 && ring[0][0] === ring[ring.length - 1][0] && ring[0][1] === ring[ring.length - 1][1];
      let len = 0;
      for (let k = 1; k < ring.length; k++) len += Math.hypot(ring[k][0] - ring[k - 1][0], ring[k][1] - ring[k - 1][1]);
      if (closed && len < 10) count++;
    }
  }
  return count;
}

const rms = (a: number[]) => Math.sqrt(a.reduce((s, e) => s + e * e, 0) / a.length);

/** Fit the sample with or without strings and measure against the true surface. */
export async function heronFigures(withStrings: boolean, file = new URL("../samples/heron-lane-strings.csv", import.meta.url).pathname): Promise<HeronFigures> {
  const t0 = performance.now();
  // Without strings the kerb top and channel shots at one place must be averaged (--merge-conflicts).
  const fitted = await fitPointsFile(
    { file, x: "easting", y: "northing", z: "level", crs: "local:m", mergeConflicts: !withStrings, ...(withStrings ? { strings: { column: "code", codes: STRING_CODES } } : {}) },
    {},
  );
  const seconds = (performance.now() - t0) / 1000;
  const ev = makeEvaluator(fitted.model);
  const all: number[] = [], near: number[] = [];
  for (let y = 1.25; y < 79; y += 0.5) {
    for (let x = 1.25; x < 119; x += 0.5) {
      const e = ev.at(x, y) - heronLevel(x, y);
      all.push(e);
      if (FEATURES.some((f) => Math.abs(y - f.y(x)) < 1)) near.push(e);
    }
  }
  const faces: number[] = [];
  for (let x = 2; x <= 118; x += 1) {
    faces.push(ev.at(x, 29.95) - ev.at(x, 30.05), ev.at(x, 37.05) - ev.at(x, 36.95));
  }
  faces.sort((a, b) => a - b);
  const invert: number[] = [];
  for (let x = 2; x <= 118; x += 0.5) invert.push(ev.at(x, ditchCentre(x)) - heronLevel(x, ditchCentre(x)));
  const grid = gridModel(fitted.model, { cell: 0.5, mask: "none" });
  const s = grid.spec;
  const truth: GridValues = { ...grid, values: grid.values.map((_, k) => heronLevel(s.xmin + ((k % s.cols) + 0.5) * s.cell, s.ymax - (Math.floor(k / s.cols) + 0.5) * s.cell)) };
  return {
    loops: smallLoops(grid),
    trueLoops: smallLoops(truth),
    overall: rms(all),
    nearFeatures: rms(near),
    kerbFace: { min: faces[0], median: faces[faces.length >> 1], max: faces[faces.length - 1] },
    ditchInvert: rms(invert),
    seconds,
  };
}

if (import.meta.main) {
  const f = (v: number) => v.toFixed(4);
  console.log(`Heron Lane (INVENTED survey, 756 shots): RMSE against the true surface, metres; kerb face true ${KERB}`);
  for (const withStrings of [false, true]) {
    const r = await heronFigures(withStrings);
    console.log(
      `${withStrings ? "--strings     " : "no breaklines "} overall ${f(r.overall)}  within 1 m of features ${f(r.nearFeatures)}  ` +
        `kerb face min/median/max ${f(r.kerbFace.min)}/${f(r.kerbFace.median)}/${f(r.kerbFace.max)}  ditch invert ${f(r.ditchInvert)}  ` +
        `small contour loops ${r.loops} (true surface ${r.trueLoops})  (${r.seconds.toFixed(1)} s)`,
    );
  }
}
