// Seeded cases for the default-accuracy sweep: designs × surfaces × noise × N × coordinates, plus
// log-normal readings. Every number comes from mulberry32 seeded by the case's id (FNV-1a hash),
// so the cases are the same on every run. The data are made here, never by the code under test.
import { convexHullRing } from "../../src/fit/surface.ts";
import { gaussian, mulberry32 } from "../../src/random.ts";
import { franke } from "../../test/helpers.ts";

export type Design = "uniform" | "clustered" | "transect" | "gridded";
export type SurfaceName = "plane" | "bump" | "franke" | "ridge";
/** Non-log: Gaussian noise sd 0 / 1 % / 10 % of the surface's range. Log: s = 0.1 (small) or 0.3 (large). */
export type Noise = "none" | "small" | "large";
export type Coords = "local" | "projected";

export interface SweepCase {
  id: string;
  design: Design;
  surface: SurfaceName;
  noise: Noise;
  n: number;
  coords: Coords;
  /** z = exp(g + ε), ε ~ N(0, s²); fit with transform "log". */
  log: boolean;
  train: { x: Float64Array; y: Float64Array; z: Float64Array };
  /** truth: the noise-free surface; for log cases the mean exp(g + s²/2). */
  test: { x: Float64Array; y: Float64Array; truth: Float64Array };
}

export const DESIGNS: Design[] = ["uniform", "clustered", "transect", "gridded"];
export const SURFACES: SurfaceName[] = ["plane", "bump", "franke", "ridge"];
export const NOISES: Noise[] = ["none", "small", "large"];
export const COORDS: Coords[] = ["local", "projected"];
const N_TEST = [8, 12, 20, 40, 100, 200];
const N_FULL = [...N_TEST, 400];
const LOG_SD = { small: 0.1, large: 0.3 } as const;

/** Test surfaces on the unit square. */
const SHAPES: Record<SurfaceName, (u: number, v: number) => number> = {
  plane: (u, v) => 0.625 * u + 0.375 * v,
  bump: (u, v) => Math.exp(-((u - 0.45) ** 2 + (v - 0.55) ** 2) / (2 * 0.18 ** 2)),
  franke,
  // A smooth step across an oblique line: ½(1 + tanh(d/w)), width w = 0.08.
  ridge: (u, v) => 0.5 * (1 + Math.tanh((0.8 * u + 0.6 * v - 0.7) / 0.08)),
};

/** Min and max of a surface on a 101 × 101 lattice of the unit square. */
function shapeRange(f: (u: number, v: number) => number): [number, number] {
  let lo = Infinity, hi = -Infinity;
  for (let i = 0; i <= 100; i++) {
    for (let j = 0; j <= 100; j++) {
      const z = f(i / 100, j / 100);
      lo = Math.min(lo, z);
      hi = Math.max(hi, z);
    }
  }
  return [lo, hi];
}

/** FNV-1a 32-bit hash of the id: the seed of the case. */
function seedOf(id: string): number {
  let h = 0x811c9dc5;
  for (let i = 0; i < id.length; i++) h = Math.imul(h ^ id.charCodeAt(i), 0x01000193) >>> 0;
  return h;
}

/** Training positions in the unit square, in the order a crew would take them. */
function design(kind: Design, n: number, rand: () => number): { u: number[]; v: number[] } {
  const normal = gaussian(rand);
  const u: number[] = [], v: number[] = [];
  if (kind === "uniform") {
    for (let i = 0; i < n; i++) u.push(rand()), v.push(rand());
  } else if (kind === "clustered") {
    // 3–5 Gaussian clusters, centres in [0.2, 0.8]², sd 0.06–0.12, kept inside the square.
    const k = 3 + Math.floor(3 * rand());
    const centres = Array.from({ length: k }, () => [0.2 + 0.6 * rand(), 0.2 + 0.6 * rand(), 0.06 + 0.06 * rand()]);
    for (let i = 0; i < n; i++) {
      const [cu, cv, sd] = centres[i % k];
      let a, b;
      do {
        a = cu + sd * normal();
        b = cv + sd * normal();
      } while (a < 0 || a > 1 || b < 0 || b > 1);
      u.push(a), v.push(b);
    }
  } else if (kind === "transect") {
    // 3–4 straight lines through a point in [0.3, 0.7]² at a random bearing, clipped to [0.02, 0.98]²;
    // points evenly spaced along each line with jitter sd 0.004.
    const lines = 3 + Math.floor(2 * rand());
    for (let j = 0; j < lines; j++) {
      const m = Math.floor(n / lines) + (j < n % lines ? 1 : 0);
      const th = Math.PI * rand(), cu = 0.3 + 0.4 * rand(), cv = 0.3 + 0.4 * rand();
      const du = Math.cos(th), dv = Math.sin(th);
      let t0 = -Infinity, t1 = Infinity;
      for (const [c, d] of [[cu, du], [cv, dv]]) {
        if (Math.abs(d) < 1e-12) continue;
        const a = (0.02 - c) / d, b = (0.98 - c) / d;
        t0 = Math.max(t0, Math.min(a, b));
        t1 = Math.min(t1, Math.max(a, b));
      }
      for (let i = 0; i < m; i++) {
        const t = t0 + ((i + 0.5) / m) * (t1 - t0);
        u.push(cu + t * du + 0.004 * normal());
        v.push(cv + t * dv + 0.004 * normal());
      }
    }
  } else {
    // Jittered lattice: nx × ny cells, jitter ±0.2 of a cell, surplus nodes dropped at random.
    const nx = Math.ceil(Math.sqrt(n)), ny = Math.ceil(n / nx);
    const nodes: number[] = [];
    for (let i = 0; i < nx * ny; i++) nodes.push(i);
    for (let i = nodes.length - 1; i > 0; i--) {
      const j = Math.floor(rand() * (i + 1));
      [nodes[i], nodes[j]] = [nodes[j], nodes[i]];
    }
    for (const node of nodes.slice(0, n).sort((a, b) => a - b)) {
      u.push((node % nx + 0.5 + 0.4 * (rand() - 0.5)) / nx);
      v.push((Math.floor(node / nx) + 0.5 + 0.4 * (rand() - 0.5)) / ny);
    }
  }
  return { u, v };
}

/** Is (x, y) strictly inside the closed convex ring (either orientation)? */
function insideConvex(ring: [number, number][], x: number, y: number): boolean {
  let sign = 0;
  for (let i = 0; i + 1 < ring.length; i++) {
    const [ax, ay] = ring[i], [bx, by] = ring[i + 1];
    const c = (bx - ax) * (y - ay) - (by - ay) * (x - ax);
    if (c === 0) return false;
    if (sign === 0) sign = Math.sign(c);
    else if (Math.sign(c) !== sign) return false;
  }
  return true;
}

/** 300–400 points of a jittered lattice (jitter ±0.3 spacing) inside the training points' convex hull. */
function testPoints(x: Float64Array, y: Float64Array, rand: () => number): { x: number[]; y: number[] } {
  const ring = convexHullRing(x, y);
  const x0 = Math.min(...x), x1 = Math.max(...x), y0 = Math.min(...y), y1 = Math.max(...y);
  let area2 = 0;
  for (let i = 0; i + 1 < ring.length; i++) area2 += (ring[i][0] - x0) * (ring[i + 1][1] - y0) - (ring[i + 1][0] - x0) * (ring[i][1] - y0);
  let h = Math.sqrt(Math.abs(area2) / 2 / 350);
  for (let attempt = 0;; attempt++) {
    const tx: number[] = [], ty: number[] = [];
    for (let py = y0 + h / 2; py < y1; py += h) {
      for (let px = x0 + h / 2; px < x1; px += h) {
        const a = px + 0.6 * h * (rand() - 0.5), b = py + 0.6 * h * (rand() - 0.5);
        if (insideConvex(ring, a, b)) tx.push(a), ty.push(b);
      }
    }
    if ((tx.length >= 300 && tx.length <= 400) || attempt === 30) return { x: tx, y: ty };
    h *= Math.sqrt(Math.max(tx.length, 1) / 350);
  }
}

export function makeCase(d: Design, s: SurfaceName, noise: Noise, n: number, coords: Coords, log: boolean): SweepCase {
  const id = `${d}-${s}-${log ? "log-" : ""}${noise}-n${n}-${coords}`;
  const seed = seedOf(id);
  const rand = mulberry32(seed);
  const noiseRand = gaussian(mulberry32(seed ^ 0x9e3779b9));
  const testRand = mulberry32(seed ^ 0x85ebca6b);
  const { u, v } = design(d, n, rand);
  // Site: local 0–100 m; projected: origin near (5·10⁵, 6·10⁶), sides 1–2 km.
  const [ox, oy, lx, ly] = coords === "local"
    ? [0, 0, 100, 100]
    : [5e5 + 5000 * rand(), 6e6 + 5000 * rand(), 1000 + 1000 * rand(), 1000 + 1000 * rand()];
  const shape = SHAPES[s];
  const [lo, hi] = shapeRange(shape);
  // Non-log: z = base + amp·f (local 100 + 10 f, projected 250 + 40 f), noise sd a share of amp·(hi − lo).
  // Log: g = ln 1000 · (f − lo)/(hi − lo) spans ln 1 … ln 1000; z = exp(g + ε), truth exp(g + s²/2).
  const [base, amp] = coords === "local" ? [100, 10] : [250, 40];
  const sd = log ? (noise === "none" ? 0 : LOG_SD[noise]) : { none: 0, small: 0.01, large: 0.1 }[noise] * amp * (hi - lo);
  const mean = (uu: number, vv: number) =>
    log ? Math.exp((Math.log(1000) * (shape(uu, vv) - lo)) / (hi - lo) + (sd * sd) / 2) : base + amp * shape(uu, vv);
  const x = Float64Array.from(u, (a) => ox + lx * a);
  const y = Float64Array.from(v, (b) => oy + ly * b);
  const z = Float64Array.from(u, (a, i) => {
    if (!log) return mean(a, v[i]) + sd * noiseRand();
    return Math.exp((Math.log(1000) * (shape(a, v[i]) - lo)) / (hi - lo) + sd * noiseRand());
  });
  const t = testPoints(x, y, testRand);
  const truth = Float64Array.from(t.x, (tx, i) => mean((tx - ox) / lx, (t.y[i] - oy) / ly));
  return {
    id,
    design: d,
    surface: s,
    noise,
    n,
    coords,
    log,
    train: { x, y, z },
    test: { x: Float64Array.from(t.x), y: Float64Array.from(t.y), truth },
  };
}

/**
 * "test": 96 non-log cases (every design × surface × noise × coordinates; N cycles so that every pair
 * of factor levels occurs at least 4 times) and 16 log cases (every design × surface), N ≤ 200.
 * "full": every design × surface × noise × N (8 … 400), coordinates alternating, and log cases
 * design × surface × s × N ∈ {20, 100, 400}: 432 cases.
 */
export function sweepCases(size: "test" | "full"): SweepCase[] {
  const out: SweepCase[] = [];
  DESIGNS.forEach((d, di) =>
    SURFACES.forEach((s, si) => {
      if (size === "test") {
        NOISES.forEach((noise, ki) =>
          COORDS.forEach((coords, ci) => out.push(makeCase(d, s, noise, N_TEST[(di + si + ki + 3 * ci) % 6], coords, false)))
        );
        const noise = (di + si) % 2 ? "large" : "small";
        out.push(makeCase(d, s, noise, N_TEST[1 + ((di + 3 * si) % 5)], COORDS[(di + (si >> 1)) % 2], true));
      } else {
        NOISES.forEach((noise, ki) =>
          N_FULL.forEach((n, ni) => out.push(makeCase(d, s, noise, n, COORDS[(di + si + ki + ni) % 2], false)))
        );
        (["small", "large"] as const).forEach((noise, ki) =>
          [20, 100, 400].forEach((n, ni) => out.push(makeCase(d, s, noise, n, COORDS[(di + si + ki + ni) % 2], true)))
        );
      }
    })
  );
  return out;
}
