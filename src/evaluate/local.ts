// The local method's evaluator: f(x) = Σⱼ ψⱼ(x) fⱼ(x) / Σⱼ ψⱼ(x) over the patches whose disc holds x
// (partition of unity with Shepard normalisation, Wendland's C² ψ; see fit/local/patches.ts). The
// model is packed into typed arrays (what worker threads receive); the evaluator builds a flatbush
// index of the patch discs from the packed form, so the main thread and the workers run the same
// code on the same numbers. The covering patches are summed in ascending patch order, so every
// value is the same whichever thread computes it.
//
// Beyond the data's bounding box the discs thin out and their union has corners, where a plain
// partition of unity jumps between patches. Every place of the bounding box lies within the fraction
// c = 1/overlap of some patch's radius (`coverage`); where the smallest relative distance τ(x) =
// minⱼ ‖x − cⱼ‖/ρⱼ exceeds c, all discs are enlarged by the same factor τ(x)/c, so the nearest
// patch reaches x at relative distance c. The weights are continuous in x (τ is), equal the plain
// ones wherever τ ≤ c (every data point and the whole bounding box), and never all vanish.
import Flatbush from "flatbush";
import { discIndex, wendlandOfSquared } from "../fit/local/patches.ts";
import { mapLines, type Segments, SideMap } from "../fit/local/sides.ts";
import { trendRow, trendTerms } from "../fit/kernels.ts";
import type { LocalModel } from "../model/model.ts";
import type { KernelName } from "../types.ts";
import { coordinateMapper, type Evaluator, evaluatorOfRaw, mappedPoints } from "./global.ts";

/** The local model as typed arrays and a few numbers: all its evaluator needs. */
export interface PackedLocal {
  method: "local";
  kernel: KernelName;
  /** Trend terms per patch. */
  m: number;
  scaling: { cx: number; cy: number; s: number };
  stretch: LocalModel["stretch"];
  /** exp(σ²/2) for log fits (lognormal bias correction), else 0 (no back-transform). */
  logBias: number;
  /** Relative distance within which every place of the bounding box is covered (1/overlap). */
  coverage: number;
  /** Per patch: disc centre and radius (global scaled frame), value centring and scale, ε². */
  cu: Float64Array;
  cv: Float64Array;
  radius: Float64Array;
  zc: Float64Array;
  zs: Float64Array;
  e2: Float64Array;
  /** Compressed rows: patch j's members are start[j] … start[j+1]). */
  start: Int32Array;
  /** Per member: position in its patch's own frame ((u − cⱼ)/ρⱼ) and RBF weight. */
  pu: Float64Array;
  pv: Float64Array;
  w: Float64Array;
  /** m trend coefficients per patch. */
  c: Float64Array;
  /** Breaklines: patch j is side side[j] of disc parent[j]; the side maps are rebuilt from seg and cellTarget. */
  sides?: PackedSides;
}

export interface PackedSides {
  parent: Int32Array;
  side: Int32Array;
  seg: Segments;
  cellTarget: number;
  domain: Float64Array;
  /** Per patch: the standard error of a side fitted as a constant level (NaN: not such a side, or unknown). */
  constantSe: Float64Array;
  /** Per patch: 1 for a side fitted as a constant level. */
  constant: Uint8Array;
  /** The 3-D lines' segments (indices into seg) and their levels at both ends (after the transform). */
  seg3: Int32Array;
  za: Float64Array;
  zb: Float64Array;
}

/**
 * The taper of the on-line correction: β(r) = (1 − r)²(1 + 2r) for r < 1, else 0 (the cubic Hermite
 * step: β(0) = 1, β(1) = 0, β'(0) = β'(1) = 0, so the corrected surface keeps continuous slopes
 * wherever the nearest line point moves smoothly).
 */
export function taper(r: number): number {
  return r < 1 ? (1 - r) * (1 - r) * (1 + 2 * r) : 0;
}

/** Scaled coordinates (global frame) of the model's data points: the same arithmetic as the fit. */
export function localCentres(model: LocalModel): { u: Float64Array; v: Float64Array } {
  const b = model.local.breaklines;
  const map = localMapper(model.local.scaling, model.stretch);
  if (!b || b.points.x.length === 0) return mappedPoints(model.points, map);
  // The 3-D lines' points follow the data points (patch point numbers n, n + 1, …).
  return mappedPoints({ x: [...model.points.x, ...b.points.x], y: [...model.points.y, ...b.points.y] }, map);
}

function localMapper(scaling: { cx: number; cy: number; s: number }, stretch: LocalModel["stretch"]) {
  return coordinateMapper({ scaling, stretch });
}

export function packLocal(model: LocalModel): PackedLocal {
  const l = model.local;
  const { u, v } = localCentres(model);
  const p = l.radius.length;
  const total = l.start[p];
  const pu = new Float64Array(total), pv = new Float64Array(total);
  for (let j = 0; j < p; j++) {
    for (let k = l.start[j]; k < l.start[j + 1]; k++) {
      const i = l.index[k];
      pu[k] = (u[i] - l.cu[j]) / l.radius[j];
      pv[k] = (v[i] - l.cv[j]) / l.radius[j];
    }
  }
  return {
    method: "local",
    kernel: model.kernel,
    m: trendTerms(model.trend),
    scaling: { ...l.scaling },
    stretch: model.stretch ? { ...model.stretch } : null,
    logBias: model.transform === "log" ? Math.exp(0.5 * model.diagnostics.sigma ** 2) : 0,
    coverage: l.coverage,
    cu: Float64Array.from(l.cu),
    cv: Float64Array.from(l.cv),
    radius: Float64Array.from(l.radius),
    zc: Float64Array.from(l.zc),
    zs: Float64Array.from(l.zs),
    e2: Float64Array.from(l.epsilonScaled, (e) => e * e),
    start: Int32Array.from(l.start),
    pu,
    pv,
    w: Float64Array.from(l.weights),
    c: Float64Array.from(l.trendCoefficients),
    ...(l.breaklines
      ? {
        sides: {
          parent: Int32Array.from(l.breaklines.parent),
          side: Int32Array.from(l.breaklines.side),
          seg: mapLines(l.breaklines.lines, localMapper(l.scaling, model.stretch)),
          cellTarget: l.breaklines.cellTarget,
          domain: Float64Array.from(l.breaklines.domain),
          constant: Uint8Array.from(l.breaklines.parent, (_, j) => (l.breaklines!.constant.some((c) => c.patch === j) ? 1 : 0)),
          constantSe: Float64Array.from(l.breaklines.parent, (_, j) => l.breaklines!.constant.find((c) => c.patch === j)?.se ?? NaN),
          ...lineLevels(l.breaklines.lines, model.transform),
        },
      }
      : {}),
  };
}

/** The 3-D segments (in mapLines' order) and their end levels, after the value transform. */
function lineLevels(lines: { x: number[]; z: number[] | null }[], transform: "none" | "log"): { seg3: Int32Array; za: Float64Array; zb: Float64Array } {
  const seg3: number[] = [], za: number[] = [], zb: number[] = [];
  const t = (z: number) => (transform === "log" ? Math.log(z) : z);
  let k = 0;
  for (const l of lines) {
    for (let v = 0; v + 1 < l.x.length; v++, k++) {
      if (!l.z) continue;
      seg3.push(k);
      za.push(t(l.z[v]));
      zb.push(t(l.z[v + 1]));
    }
  }
  return { seg3: Int32Array.from(seg3), za: Float64Array.from(za), zb: Float64Array.from(zb) };
}

/** The typed arrays of a packed local model, for postMessage transfer lists. */
export function localBuffers(p: PackedLocal): ArrayBuffer[] {
  return [p.cu, p.cv, p.radius, p.zc, p.zs, p.e2, p.start, p.pu, p.pv, p.w, p.c].map((a) => a.buffer as ArrayBuffer);
}

/** Which patches blend at a place, with their normalised weights (ascending patch order). */
export interface Blender {
  /** Map coordinates → global scaled frame. */
  map(x: number, y: number, out: Float64Array): void;
  /** Fill ids and weights (Σ = 1) of the patches blended at scaled (u, v); returns their number. */
  cover(u: number, v: number): number;
  ids: Int32Array;
  weights: Float64Array;
}

export function makeBlender(p: Pick<PackedLocal, "cu" | "cv" | "radius" | "scaling" | "stretch" | "coverage" | "sides">): Blender {
  const { cu, cv, radius, coverage } = p;
  const count = cu.length;
  let largest = 0;
  for (const r of radius) largest = Math.max(largest, r);
  const c2 = coverage * coverage;
  const index: Flatbush = discIndex(cu, cv, radius);
  let ids = new Int32Array(16);
  let weights = new Float64Array(16);
  let found = 0;
  const blender: Blender = {
    map: localMapper(p.scaling, p.stretch),
    ids,
    weights,
    cover(u, v) {
      found = 0;
      index.search(u, v, u, v, collect);
      sortFound();
      let total = 0;
      let inside = 0;
      let nearest = Infinity;
      for (let a = 0; a < found; a++) {
        const j = ids[a];
        const du = u - cu[j], dv = v - cv[j];
        const t = (du * du + dv * dv) / (radius[j] * radius[j]);
        const psi = wendlandOfSquared(t);
        nearest = Math.min(nearest, t);
        if (psi > 0) {
          ids[inside] = j;
          weights[inside++] = psi;
          total += psi;
        }
      }
      found = inside;
      if (found === 0 || nearest > c2) return bySide(u, v, enlarged(u, v));
      for (let a = 0; a < found; a++) weights[a] /= total;
      return bySide(u, v, found);
    },
  };
  // Breaklines: of each disc only the side that holds (u, v) blends (fit/local/sides.ts).
  const sides = p.sides;
  const maps = new Map<number, SideMap | null>();
  const sideMap = (d: number): SideMap | null => {
    let m = maps.get(d);
    if (m === undefined) {
      const x = new SideMap(cu[entryOf(d)], cv[entryOf(d)], radius[entryOf(d)], sides!.seg, sides!.cellTarget, sides!.domain);
      m = x.near.length === 0 || x.sides <= 1 ? null : x;
      maps.set(d, m);
    }
    return m;
  };
  // The first patch of each disc (patches of one disc are consecutive).
  const firstOf = new Map<number, number>();
  if (sides) for (let j = sides.parent.length - 1; j >= 0; j--) firstOf.set(sides.parent[j], j);
  const entryOf = (d: number) => firstOf.get(d)!;
  function bySide(u: number, v: number, count: number): number {
    if (!sides || count === 0) return count;
    let kept = 0, total = 0, lastDisc = -1, label = -1;
    for (let a = 0; a < count; a++) {
      const j = ids[a];
      const d = sides.parent[j];
      if (d !== lastDisc) {
        const m = sideMap(d);
        label = m ? m.sideAt(u, v) : -1;
        lastDisc = d;
      }
      if (label >= 0 && sides.side[j] !== label) continue;
      ids[kept] = j;
      weights[kept++] = weights[a];
      total += weights[a];
    }
    for (let a = 0; a < kept; a++) weights[a] /= total;
    found = kept;
    return kept;
  }
  function collect(j: number): boolean {
    if (found === ids.length) {
      const more = new Int32Array(2 * ids.length);
      more.set(ids);
      ids = blender.ids = more;
      const mw = new Float64Array(2 * weights.length);
      mw.set(weights);
      weights = blender.weights = mw;
    }
    ids[found++] = j;
    return false;
  }
  function sortFound(): void {
    for (let a = 1; a < found; a++) {
      const x = ids[a];
      let b = a - 1;
      while (b >= 0 && ids[b] > x) {
        ids[b + 1] = ids[b];
        b--;
      }
      ids[b + 1] = x;
    }
  }
  const ratioOf = (u: number, v: number, j: number) => Math.hypot(u - cu[j], v - cv[j]) / radius[j];
  /** Weights with every disc enlarged by τ/c (see the top of this file). */
  function enlarged(u: number, v: number): number {
    if (count === 0) return 0;
    // τ ≤ the ratio of the nearest disc by bounding box; a disc with ratio below τ/c has its box
    // within (τ/c − 1)·ρmax of (u, v).
    const bound = ratioOf(u, v, index.neighbors(u, v, 1)[0]);
    const near = index.neighbors(u, v, Infinity, Math.max(0, (bound / coverage - 1) * largest) * (1 + 1e-12));
    let tau = Infinity;
    for (const j of near) tau = Math.min(tau, ratioOf(u, v, j));
    const k = tau / coverage;
    found = 0;
    for (const j of near) if (ratioOf(u, v, j) < k) collect(j);
    sortFound();
    let total = 0;
    for (let a = 0; a < found; a++) {
      const x = wendlandOfSquared((ratioOf(u, v, ids[a]) / k) ** 2);
      weights[a] = x;
      total += x;
    }
    for (let a = 0; a < found; a++) weights[a] /= total;
    return found;
  }
  return blender;
}

export function localEvaluator(p: PackedLocal): Evaluator {
  const { start, pu, pv, w, c, zc, zs, e2, cu, cv, radius } = p;
  const m = p.m;
  const row = new Float64Array(Math.max(m, 1));
  const blender = makeBlender(p);
  const uv = new Float64Array(2);
  // Kernel loops written out per kernel (as in global.ts) so the JIT sees one monomorphic loop each.
  const patchValue = (j: number, u: number, v: number): number => {
    const x = (u - cu[j]) / radius[j], y = (v - cv[j]) / radius[j];
    const a = start[j], b = start[j + 1];
    const eps2 = e2[j];
    let sum = 0;
    switch (p.kernel) {
      case "thin-plate":
        for (let k = a; k < b; k++) {
          const du = x - pu[k], dv = y - pv[k];
          const rho = du * du + dv * dv;
          if (rho > 0) sum += w[k] * 0.5 * rho * Math.log(rho);
        }
        break;
      case "gaussian":
        for (let k = a; k < b; k++) {
          const du = x - pu[k], dv = y - pv[k];
          sum += w[k] * Math.exp(-eps2 * (du * du + dv * dv));
        }
        break;
      case "multiquadric":
        for (let k = a; k < b; k++) {
          const du = x - pu[k], dv = y - pv[k];
          sum -= w[k] * Math.sqrt(1 + eps2 * (du * du + dv * dv));
        }
        break;
      case "inverse-multiquadric":
        for (let k = a; k < b; k++) {
          const du = x - pu[k], dv = y - pv[k];
          sum += w[k] / Math.sqrt(1 + eps2 * (du * du + dv * dv));
        }
        break;
    }
    trendRow(x, y, m, row);
    for (let t = 0; t < m; t++) sum += c[j * m + t] * row[t];
    return zc[j] + zs[j] * sum;
  };
  const near = p.sides && p.sides.seg3.length ? nearestLine(p.sides) : null;
  const raw = (x: number, y: number): number => {
    blender.map(x, y, uv);
    const count = blender.cover(uv[0], uv[1]);
    let f = 0;
    const hit = near ? near(uv[0], uv[1]) : null;
    if (hit) {
      // Within δ of a 3-D line: each side's fit is corrected so that it equals the line's linear
      // interpolation L on the line: fⱼ(x) + β(d/δ)·(L(x*) − fⱼ(x*)), x* the nearest line point.
      const b = taper(hit.d / hit.delta);
      for (let a = 0; a < count; a++) {
        const j = blender.ids[a];
        f += blender.weights[a] * (patchValue(j, uv[0], uv[1]) + b * (hit.level - patchValue(j, hit.u, hit.v)));
      }
      return count > 0 ? f : NaN;
    }
    for (let a = 0; a < count; a++) f += blender.weights[a] * patchValue(blender.ids[a], uv[0], uv[1]);
    return count > 0 ? f : NaN;
  };
  return evaluatorOfRaw(raw, p.logBias);
}

/** A packed local model cut down to some of its patches (ascending): their arrays, unchanged. */
export function subsetPatches(p: PackedLocal, patches: Int32Array): PackedLocal {
  // With breaklines the sides are found per disc over all patches: the whole model is kept.
  if (p.sides) return p;
  const pick = (a: Float64Array) => Float64Array.from(patches, (j) => a[j]);
  const m = p.m;
  const start = new Int32Array(patches.length + 1);
  patches.forEach((j, a) => (start[a + 1] = start[a] + p.start[j + 1] - p.start[j]));
  const members = start[patches.length];
  const pu = new Float64Array(members), pv = new Float64Array(members), w = new Float64Array(members);
  const c = new Float64Array(patches.length * m);
  patches.forEach((j, a) => {
    const from = p.start[j], to = p.start[j + 1];
    pu.set(p.pu.subarray(from, to), start[a]);
    pv.set(p.pv.subarray(from, to), start[a]);
    w.set(p.w.subarray(from, to), start[a]);
    c.set(p.c.subarray(j * m, j * m + m), a * m);
  });
  return {
    ...p,
    scaling: { ...p.scaling },
    stretch: p.stretch ? { ...p.stretch } : null,
    cu: pick(p.cu),
    cv: pick(p.cv),
    radius: pick(p.radius),
    zc: pick(p.zc),
    zs: pick(p.zs),
    e2: pick(p.e2),
    start,
    pu,
    pv,
    w,
    c,
  };
}

/**
 * The nearest point of a 3-D line within δ (the side rasters' cell size, a quarter of the median
 * spacing) of a place in the scaled frame, with the line's level there; null when none is that near.
 */
export function nearestLine(sides: PackedSides): (u: number, v: number) => { u: number; v: number; d: number; level: number; delta: number } | null {
  const { seg, seg3, za, zb } = sides;
  const delta = sides.cellTarget;
  const index = new Flatbush(seg3.length);
  for (const k of seg3) {
    index.add(Math.min(seg.ax[k], seg.bx[k]) - delta, Math.min(seg.ay[k], seg.by[k]) - delta, Math.max(seg.ax[k], seg.bx[k]) + delta, Math.max(seg.ay[k], seg.by[k]) + delta);
  }
  index.finish();
  const out = { u: 0, v: 0, d: 0, level: 0, delta };
  return (u, v) => {
    let best = delta;
    let found = false;
    for (const a of index.search(u, v, u, v)) {
      const k = seg3[a];
      const dx = seg.bx[k] - seg.ax[k], dy = seg.by[k] - seg.ay[k];
      const l2 = dx * dx + dy * dy;
      const t = l2 > 0 ? Math.max(0, Math.min(1, ((u - seg.ax[k]) * dx + (v - seg.ay[k]) * dy) / l2)) : 0;
      const px = seg.ax[k] + t * dx, py = seg.ay[k] + t * dy;
      const d = Math.hypot(u - px, v - py);
      if (d < best || (!found && d <= best)) {
        best = d;
        found = true;
        out.u = px;
        out.v = py;
        out.d = d;
        out.level = za[a] + t * (zb[a] - za[a]);
      }
    }
    return found && out.d < delta ? out : null;
  };
}
