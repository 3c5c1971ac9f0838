// INVENTED SITE for the breakline demo and tests: "Heron Lane" does not exist; its terrain, its
// features and every shot are made up by this module (fixed seed). Local site grid in metres,
// 120 m × 80 m: a platform and its bank in the south, a road with a crown, two kerbs with 150 mm
// vertical faces and footways, natural ground, and a V-shaped ditch in the north.
// samples/make-strings-sample.ts writes the survey as CSV; test/breaklines.test.ts compares fits
// with the true surface `heronLevel`.
import { gaussian, mulberry32 } from "../src/random.ts";

/** Natural ground before the works. */
const ground = (x: number, y: number) => 50 + 0.015 * x + 0.01 * y + 0.3 * Math.sin(x / 25) * Math.cos(y / 30);
/** Channel level of the road (both kerbs); the crown is 3.5 m × 2.5% higher. */
const channel = (x: number) => 50.55 + 0.012 * x;
const platform = (x: number, y: number) => 51.8 + 0.005 * x - 0.01 * (12 - y);
/** Kerb face height (common practice for a road kerb upstand). */
export const KERB = 0.15;
const footSouth = (x: number, y: number) => channel(x) + KERB + 0.02 * (30 - y);
const footNorth = (x: number, y: number) => channel(x) + KERB + 0.02 * (y - 37);
/** Ditch centre line, half width at the top and depth. */
export const ditchCentre = (x: number) => 62 + 3 * Math.sin(x / 20);
const DITCH_HALF = 2, DITCH_DEPTH = 0.8;

const southGround = (x: number, y: number) => {
  // Natural ground from the bank toe (y = 15) to the back of the footway (y = 28), bent to meet it.
  const s = ((y - 15) / 13) ** 2;
  return ground(x, y) + (footSouth(x, 28) - ground(x, 28)) * s;
};
const northGround = (x: number, y: number) => {
  const s = Math.max(0, 1 - (y - 39) / 12) ** 2;
  return ground(x, y) + (footNorth(x, 39) - ground(x, 39)) * s;
};

/** The true level at (x, y); at the kerb lines (y = 30, 37) the road side's (channel) level. */
export function heronLevel(x: number, y: number): number {
  if (y < 12) return platform(x, y);
  if (y < 15) return platform(x, 12) + (southGround(x, 15) - platform(x, 12)) * (y - 12) / 3;
  if (y < 28) return southGround(x, y);
  if (y < 30) return footSouth(x, y);
  if (y <= 37) return channel(x) + 0.025 * (3.5 - Math.abs(y - 33.5));
  if (y <= 39) return footNorth(x, y);
  const base = northGround(x, y);
  const d = Math.abs(y - ditchCentre(x));
  return d < DITCH_HALF ? base - DITCH_DEPTH * (1 - d / DITCH_HALF) : base;
}

/** The features as the surveyor strings them: code, and y along x (levels from heronLevel unless given). */
export const FEATURES: { code: string; y: (x: number) => number; level?: (x: number) => number }[] = [
  { code: "BT", y: () => 12 },
  { code: "BB", y: () => 15 },
  { code: "FB", y: () => 28 },
  { code: "KT", y: () => 30, level: (x) => channel(x) + KERB },
  { code: "CH", y: () => 30 },
  { code: "CL", y: () => 33.5 },
  { code: "CH", y: () => 37 },
  { code: "KT", y: () => 37, level: (x) => channel(x) + KERB },
  { code: "FB", y: () => 39 },
  { code: "DT", y: (x) => ditchCentre(x) - DITCH_HALF },
  { code: "DI", y: ditchCentre },
  { code: "DT", y: (x) => ditchCentre(x) + DITCH_HALF },
];
export const STRING_CODES = ["BT", "BB", "FB", "KT", "CH", "CL", "DT", "DI"];

export interface Shot {
  id: string;
  x: number;
  y: number;
  z: number;
  code: string;
}

/**
 * The invented survey: rover spot levels on a 5 m pattern (jittered ±1 m, noise 10 mm, code GS),
 * then each feature strung every 4 m (noise 5 mm), walked east then the next one west, as a crew
 * would. Kerb top and channel shots share their positions (vertical faces).
 */
export function heronSurvey(seed = 20261202): Shot[] {
  const rand = mulberry32(seed);
  const gauss = gaussian(rand);
  const shots: Shot[] = [];
  let id = 1;
  for (let gy = 2.5; gy < 80; gy += 5) {
    for (let gx = 2.5; gx < 120; gx += 5) {
      const x = gx + 2 * (rand() - 0.5), y = gy + 2 * (rand() - 0.5);
      shots.push({ id: `P${id++}`, x, y, z: heronLevel(x, y) + 0.01 * gauss(), code: "GS" });
    }
  }
  FEATURES.forEach((f, k) => {
    const xs = Array.from({ length: 31 }, (_, t) => 4 * t);
    if (k % 2) xs.reverse();
    for (const x of xs) {
      const y = f.y(x);
      shots.push({ id: `P${id++}`, x, y, z: (f.level ? f.level(x) : heronLevel(x, y)) + 0.005 * gauss(), code: f.code });
    }
  });
  return shots;
}
