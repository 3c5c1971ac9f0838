// Patches cut by breaklines: the sides of a patch disc (the connected parts of the disc minus the
// lines), which point lies on which side, and the points that 3-D lines add to the fits.
//
// A side map of one disc is a label raster over the disc's bounding square: cells touched by a line
// segment are blocked (a 4-connected chain, so no 4-connected path of free cells crosses a line), the
// free cells inside the disc and inside the data's bounding box are labelled by a 4-connected flood
// fill (so a line that runs out of the data's box separates there). The side of a place x:
//   the label of its cell when the cell is free (no line touches the cell, so the whole cell lies on
//   one side); else the label of the nearest free cell within SEARCH cells whose centre x sees (the
//   segment from x to the centre crosses no line segment; a segment through x itself is ignored, so
//   a place on a line sees both sides of it); else the nearest free cell's label; else −1.
// A 3-D line's points join every side they see within SEARCH cells: the surface on both sides
// passes through the line. A line that ends inside a disc does not split it there (the free cells
// round its end connect both sides): the barrier acts only where it separates.
// Fit and evaluation build side maps with this same code from the same numbers (the lines mapped
// by mapLines, the disc, cellTarget), so both find the same sides.

import Flatbush from "flatbush";

/** Lines in the global scaled frame: segment k from (ax, ay) to (bx, by), of line `line[k]`. */
export interface Segments {
  ax: Float64Array;
  ay: Float64Array;
  bx: Float64Array;
  by: Float64Array;
  line: Int32Array;
}

/** A breakline in map coordinates: z on every vertex (3-D) or null (a 2-D barrier). */
export interface LineRecord {
  name: string;
  x: number[];
  y: number[];
  z: number[] | null;
}

/** Search radius in cells around a blocked cell. */
export const SEARCH = 4;
/** Raster side bounds (cells). */
const MIN_CELLS = 16, MAX_CELLS = 256;

/** Map every line vertex with `map` (the fit's coordinate mapping) and list the segments. */
export function mapLines(lines: LineRecord[], map: (x: number, y: number, out: Float64Array) => void): Segments {
  const total = lines.reduce((s, l) => s + Math.max(0, l.x.length - 1), 0);
  const seg: Segments = { ax: new Float64Array(total), ay: new Float64Array(total), bx: new Float64Array(total), by: new Float64Array(total), line: new Int32Array(total) };
  const p = new Float64Array(2), q = new Float64Array(2);
  let k = 0;
  lines.forEach((l, li) => {
    for (let t = 0; t + 1 < l.x.length; t++) {
      map(l.x[t], l.y[t], p);
      map(l.x[t + 1], l.y[t + 1], q);
      seg.ax[k] = p[0];
      seg.ay[k] = p[1];
      seg.bx[k] = q[0];
      seg.by[k] = q[1];
      seg.line[k++] = li;
    }
  });
  return seg;
}

/** Squared distance from (px, py) to segment a–b. */
function segmentDistance2(px: number, py: number, ax: number, ay: number, bx: number, by: number): number {
  const dx = bx - ax, dy = by - ay;
  const l2 = dx * dx + dy * dy;
  let t = l2 > 0 ? ((px - ax) * dx + (py - ay) * dy) / l2 : 0;
  t = Math.max(0, Math.min(1, t));
  const ex = ax + t * dx - px, ey = ay + t * dy - py;
  return ex * ex + ey * ey;
}

/** Orientation of (a, b, c): the sign of the cross product (b − a) × (c − a). */
function orient(ax: number, ay: number, bx: number, by: number, cx: number, cy: number): number {
  return (bx - ax) * (cy - ay) - (by - ay) * (cx - ax);
}

/** Do the closed segments p–q and a–b meet? (Cormen et al. 2009 §33.1, orientation tests.) */
function segmentsMeet(px: number, py: number, qx: number, qy: number, ax: number, ay: number, bx: number, by: number): boolean {
  const d1 = orient(ax, ay, bx, by, px, py), d2 = orient(ax, ay, bx, by, qx, qy);
  const d3 = orient(px, py, qx, qy, ax, ay), d4 = orient(px, py, qx, qy, bx, by);
  if (((d1 > 0 && d2 < 0) || (d1 < 0 && d2 > 0)) && ((d3 > 0 && d4 < 0) || (d3 < 0 && d4 > 0))) return true;
  const on = (x: number, y: number, sx: number, sy: number, tx: number, ty: number) =>
    Math.min(sx, tx) <= x && x <= Math.max(sx, tx) && Math.min(sy, ty) <= y && y <= Math.max(sy, ty);
  return (d1 === 0 && on(px, py, ax, ay, bx, by)) || (d2 === 0 && on(qx, qy, ax, ay, bx, by)) ||
    (d3 === 0 && on(ax, ay, px, py, qx, qy)) || (d4 === 0 && on(bx, by, px, py, qx, qy));
}

/** Cell offsets within SEARCH, nearest first (ties in a fixed order). */
const OFFSETS: [number, number][] = (() => {
  const o: [number, number][] = [];
  for (let a = -SEARCH; a <= SEARCH; a++) for (let b = -SEARCH; b <= SEARCH; b++) o.push([a, b]);
  return o.sort((p, q) => p[0] * p[0] + p[1] * p[1] - (q[0] * q[0] + q[1] * q[1]) || p[0] - q[0] || p[1] - q[1]);
})();

/** The sides of one disc. */
export class SideMap {
  readonly cells: number;
  readonly size: number;
  readonly x0: number;
  readonly y0: number;
  /** Per cell: −2 blocked, −1 outside the disc, else the side label (0, 1, …). */
  readonly label: Int32Array;
  readonly sides: number;
  /** The segments that reach the disc's square (indices into the Segments). */
  readonly near: Int32Array;

  /**
   * `domain` [umin, vmin, umax, vmax]: the data's bounding box in the scaled frame; only cells whose
   * centre lies within it (and within the disc) are sides, so a line that runs out of the data's box
   * separates even where the disc reaches beyond the line's end.
   */
  constructor(readonly cu: number, readonly cv: number, readonly radius: number, readonly seg: Segments, cellTarget: number, domain: ArrayLike<number>) {
    const cells = Math.max(MIN_CELLS, Math.min(MAX_CELLS, Math.ceil((2 * radius) / cellTarget)));
    this.cells = cells;
    this.size = (2 * radius) / cells;
    this.x0 = cu - radius;
    this.y0 = cv - radius;
    const near: number[] = [];
    for (let k = 0; k < seg.ax.length; k++) {
      if (segmentDistance2(cu, cv, seg.ax[k], seg.ay[k], seg.bx[k], seg.by[k]) <= 2 * radius * radius) near.push(k);
    }
    this.near = Int32Array.from(near);
    const label = new Int32Array(cells * cells).fill(-1);
    // Cells whose centre lies within the disc (plus one cell, so the disc's rim is covered).
    const reach2 = (radius + this.size) ** 2;
    for (let j = 0; j < cells; j++) {
      for (let i = 0; i < cells; i++) {
        const x = this.x0 + (i + 0.5) * this.size - cu, y = this.y0 + (j + 0.5) * this.size - cv;
        const inBox = x + cu >= domain[0] && x + cu <= domain[2] && y + cv >= domain[1] && y + cv <= domain[3];
        if (x * x + y * y <= reach2 && inBox) label[j * cells + i] = 0;
      }
    }
    for (const k of near) this.block(label, seg.ax[k], seg.ay[k], seg.bx[k], seg.by[k]);
    // Flood fill (4-connected) of the free cells.
    let sides = 0;
    const stack = new Int32Array(cells * cells);
    for (let c = 0; c < cells * cells; c++) {
      if (label[c] !== 0) continue;
      // Unlabelled free cells hold 0; labels are stored as 1 + side while filling.
      let top = 0;
      stack[top++] = c;
      label[c] = sides + 1;
      while (top > 0) {
        const d = stack[--top];
        const i = d % cells, j = (d - i) / cells;
        const visit = (e: number) => {
          if (label[e] === 0) {
            label[e] = sides + 1;
            stack[top++] = e;
          }
        };
        if (i > 0) visit(d - 1);
        if (i + 1 < cells) visit(d + 1);
        if (j > 0) visit(d - cells);
        if (j + 1 < cells) visit(d + cells);
      }
      sides++;
    }
    for (let c = 0; c < label.length; c++) if (label[c] > 0) label[c] -= 1;
    this.label = label;
    this.sides = sides;
  }

  /**
   * Mark the cells whose closed square segment a–b meets as blocked (−2), by Liang–Barsky clipping
   * (Liang & Barsky 1984) of the segment to each cell of its bounding box. A curve meets a 4-connected
   * chain of closed cells (through a corner it meets all four), so no 4-connected path of free cells
   * crosses it.
   */
  private block(label: Int32Array, ax: number, ay: number, bx: number, by: number): void {
    const n = this.cells, h = this.size;
    const i0 = Math.max(0, Math.floor((Math.min(ax, bx) - this.x0) / h) - 1), i1 = Math.min(n - 1, Math.floor((Math.max(ax, bx) - this.x0) / h) + 1);
    const j0 = Math.max(0, Math.floor((Math.min(ay, by) - this.y0) / h) - 1), j1 = Math.min(n - 1, Math.floor((Math.max(ay, by) - this.y0) / h) + 1);
    const dx = bx - ax, dy = by - ay;
    for (let j = j0; j <= j1; j++) {
      const ylo = this.y0 + j * h, yhi = ylo + h;
      for (let i = i0; i <= i1; i++) {
        const xlo = this.x0 + i * h, xhi = xlo + h;
        let t0 = 0, t1 = 1;
        const clip = (p: number, q: number): boolean => {
          if (p === 0) return q >= 0;
          const r = q / p;
          if (p < 0) {
            if (r > t1) return false;
            if (r > t0) t0 = r;
          } else {
            if (r < t0) return false;
            if (r < t1) t1 = r;
          }
          return true;
        };
        if (clip(-dx, ax - xlo) && clip(dx, xhi - ax) && clip(-dy, ay - ylo) && clip(dy, yhi - ay) && t0 <= t1) label[j * n + i] = -2;
      }
    }
  }

  /** Does the segment from (u, v) to (qx, qy) cross a line (segments through (u, v) itself ignored)? */
  private blocked(u: number, v: number, qx: number, qy: number): boolean {
    const s = this.seg;
    const tiny = (1e-9 * this.size) ** 2;
    for (const k of this.near) {
      if (segmentDistance2(u, v, s.ax[k], s.ay[k], s.bx[k], s.by[k]) <= tiny) continue;
      if (segmentsMeet(u, v, qx, qy, s.ax[k], s.ay[k], s.bx[k], s.by[k])) return true;
    }
    return false;
  }

  private cellOf(u: number, v: number): [number, number] {
    const n = this.cells;
    const i = Math.min(n - 1, Math.max(0, Math.floor((u - this.x0) / this.size)));
    const j = Math.min(n - 1, Math.max(0, Math.floor((v - this.y0) / this.size)));
    return [i, j];
  }

  /** The side of (u, v) (see the top of this file); −1 when the disc has no free cell. */
  sideAt(u: number, v: number): number {
    const n = this.cells;
    const [i, j] = this.cellOf(u, v);
    const own = this.label[j * n + i];
    if (own >= 0) return own;
    let fallback = -1;
    for (const [a, b] of OFFSETS) {
      const ci = i + a, cj = j + b;
      if (ci < 0 || cj < 0 || ci >= n || cj >= n) continue;
      const l = this.label[cj * n + ci];
      if (l < 0) continue;
      if (fallback < 0) fallback = l;
      if (!this.blocked(u, v, this.x0 + (ci + 0.5) * this.size, this.y0 + (cj + 0.5) * this.size)) return l;
    }
    if (fallback >= 0) return fallback;
    // No free cell near: the nearest anywhere.
    let best = Infinity;
    for (let c = 0; c < this.label.length; c++) {
      if (this.label[c] < 0) continue;
      const ci = c % n, cj = (c - ci) / n;
      const d = (ci - i) ** 2 + (cj - j) ** 2;
      if (d < best) {
        best = d;
        fallback = this.label[c];
      }
    }
    return fallback;
  }

  /** Every side seen from (u, v) within SEARCH cells (a 3-D line's point joins them all). */
  sidesSeen(u: number, v: number): number[] {
    const n = this.cells;
    const [i, j] = this.cellOf(u, v);
    const out: number[] = [];
    for (const [a, b] of OFFSETS) {
      const ci = i + a, cj = j + b;
      if (ci < 0 || cj < 0 || ci >= n || cj >= n) continue;
      const l = this.label[cj * n + ci];
      if (l < 0 || out.includes(l)) continue;
      if (!this.blocked(u, v, this.x0 + (ci + 0.5) * this.size, this.y0 + (cj + 0.5) * this.size)) out.push(l);
    }
    if (out.length === 0) {
      const s = this.sideAt(u, v);
      if (s >= 0) out.push(s);
    }
    return out.sort((a, b) => a - b);
  }
}

/**
 * Points along the 3-D lines, about `step` apart in the scaled frame (every vertex, and evenly
 * spaced points between), z interpolated linearly: the data that make the surface pass through
 * the line. Map coordinates (the evaluator maps them like the data points); `line` their line.
 */
export function linePoints(lines: LineRecord[], map: (x: number, y: number, out: Float64Array) => void, step: number): { x: number[]; y: number[]; z: number[]; line: number[] } {
  const out = { x: [] as number[], y: [] as number[], z: [] as number[], line: [] as number[] };
  const p = new Float64Array(2), q = new Float64Array(2);
  lines.forEach((l, li) => {
    if (!l.z) return;
    for (let t = 0; t + 1 < l.x.length; t++) {
      map(l.x[t], l.y[t], p);
      map(l.x[t + 1], l.y[t + 1], q);
      const pieces = Math.max(1, Math.ceil(Math.hypot(q[0] - p[0], q[1] - p[1]) / step));
      for (let s = 0; s < pieces; s++) {
        const f = s / pieces;
        out.x.push(l.x[t] + f * (l.x[t + 1] - l.x[t]));
        out.y.push(l.y[t] + f * (l.y[t + 1] - l.y[t]));
        out.z.push(l.z[t] + f * (l.z[t + 1] - l.z[t]));
        out.line.push(li);
      }
    }
    const last = l.x.length - 1;
    out.x.push(l.x[last]);
    out.y.push(l.y[last]);
    out.z.push(l.z[last]);
    out.line.push(li);
  });
  return out;
}

/** A patch layout cut into sides: entry e is side side[e] of disc parent[e]. */
export interface CutLayout {
  /** Per entry. */
  parent: Int32Array;
  side: Int32Array;
  /** Entry members (compressed rows): point numbers, the line points numbered after the n data points. */
  start: Int32Array;
  index: Int32Array;
  /** Per member: 1 where the entry is the side the point's own place lies on (its diagnostics come from there). */
  report: Uint8Array;
}

/**
 * Cut every disc into its sides. `u, v`: data points then line points (the first `n` are data);
 * `members(j)`: disc j's data points. Line points join the discs they lie in (ψ > 0) and every side
 * they see; data points the one side their place lies on.
 */
export function cutLayout(
  disc: { count: number; cu: Float64Array; cv: Float64Array; radius: Float64Array },
  members: (j: number) => Int32Array,
  u: Float64Array,
  v: Float64Array,
  n: number,
  seg: Segments,
  cellTarget: number,
  domain: ArrayLike<number>,
): CutLayout & { maps: (SideMap | null)[] } {
  const parent: number[] = [], side: number[] = [];
  const lists: number[][] = [], reports: number[][] = [];
  const maps: (SideMap | null)[] = [];
  // The line points, indexed once (a disc takes those strictly inside it, as data points: ψ > 0).
  const q = u.length - n;
  const lineIndex = new Flatbush(Math.max(q, 1));
  for (let i = n; i < u.length; i++) lineIndex.add(u[i], v[i], u[i], v[i]);
  if (q === 0) lineIndex.add(0, 0, 0, 0);
  lineIndex.finish();
  for (let j = 0; j < disc.count; j++) {
    const cu = disc.cu[j], cv = disc.cv[j], r = disc.radius[j];
    const map = new SideMap(cu, cv, r, seg, cellTarget, domain);
    const extra = q === 0 ? [] : lineIndex.search(cu - r, cv - r, cu + r, cv + r, (k) => {
      const du = u[n + k] - cu, dv = v[n + k] - cv;
      return du * du + dv * dv < r * r;
    }).map((k) => n + k).sort((a, b) => a - b);
    const own = members(j);
    if (map.near.length === 0 || map.sides <= 1) {
      maps.push(null);
      parent.push(j);
      side.push(0);
      const all = [...own, ...extra];
      lists.push(all);
      reports.push(all.map((i) => (i < n ? 1 : 0)));
      continue;
    }
    maps.push(map);
    const bySide: number[][] = Array.from({ length: map.sides }, () => []);
    const repBySide: number[][] = Array.from({ length: map.sides }, () => []);
    for (const i of own) {
      const s = map.sideAt(u[i], v[i]);
      if (s < 0) continue;
      bySide[s].push(i);
      repBySide[s].push(1);
    }
    for (const i of extra) {
      for (const s of map.sidesSeen(u[i], v[i])) {
        bySide[s].push(i);
        repBySide[s].push(0);
      }
    }
    for (let s = 0; s < map.sides; s++) {
      if (bySide[s].length === 0) continue;
      parent.push(j);
      side.push(s);
      lists.push(bySide[s]);
      reports.push(repBySide[s]);
    }
  }
  const start = new Int32Array(lists.length + 1);
  lists.forEach((l, e) => (start[e + 1] = start[e] + l.length));
  const index = new Int32Array(start[lists.length]);
  const report = new Uint8Array(start[lists.length]);
  lists.forEach((l, e) => {
    index.set(l, start[e]);
    report.set(reports[e], start[e]);
  });
  return { parent: Int32Array.from(parent), side: Int32Array.from(side), start, index, report, maps };
}

/** A vertical face is drawn this fraction of the median spacing wide (each line moved half of it). */
export const FACE_WIDTH = 0.01;

/**
 * Vertical faces: where vertices of two 3-D lines share one position (x, y) with different levels (a
 * kerb top and its channel shot at one place), the lines would give both sides both levels. The
 * higher line is moved FACE_WIDTH/2 × spacing toward the side whose readings (within 3 spacings,
 * not on a line) lie higher, the lower line as far the other way, so that each side passes through
 * its own level and the face between them is FACE_WIDTH × spacing wide. Returns new lines (the input
 * is not changed) and the number of faces. `index` a flatbush index of the readings.
 */
export function separateFaces(
  lines: LineRecord[],
  data: { x: ArrayLike<number>; y: ArrayLike<number>; z: ArrayLike<number> },
  onLine: Uint8Array,
  spacing: number,
  index: { search(minX: number, minY: number, maxX: number, maxY: number): number[] },
): { lines: LineRecord[]; faces: number } {
  const out = lines.map((l) => ({ ...l, x: l.x.slice(), y: l.y.slice(), z: l.z ? l.z.slice() : null }));
  const at = new Map<string, [number, number][]>();
  lines.forEach((l, li) => {
    if (!l.z) return;
    l.x.forEach((x, k) => {
      const key = `${x},${l.y[k]}`;
      const list = at.get(key) ?? [];
      if (!list.some(([m]) => m === li)) list.push([li, k]);
      at.set(key, list);
    });
  });
  const half = 0.5 * FACE_WIDTH * spacing;
  const reach = 3 * spacing;
  let faces = 0;
  for (const list of at.values()) {
    if (list.length < 2) continue;
    const sorted = list.slice().sort((a, b) => lines[a[0]].z![a[1]] - lines[b[0]].z![b[1]]);
    const [lo, hi] = [sorted[0], sorted[sorted.length - 1]];
    const zl = lines[lo[0]].z![lo[1]], zh = lines[hi[0]].z![hi[1]];
    if (zh === zl) continue;
    const l = lines[hi[0]], k = hi[1];
    const px = l.x[k], py = l.y[k];
    const a = Math.max(0, k - 1), b = Math.min(l.x.length - 1, k + 1);
    let dx = l.x[b] - l.x[a], dy = l.y[b] - l.y[a];
    const len = Math.hypot(dx, dy) || 1;
    dx /= len;
    dy /= len;
    const nx = -dy, ny = dx;
    const plus: number[] = [], minus: number[] = [];
    for (const i of index.search(px - reach, py - reach, px + reach, py + reach)) {
      if (onLine[i]) continue;
      const s = (data.x[i] - px) * nx + (data.y[i] - py) * ny;
      if (Math.hypot(data.x[i] - px, data.y[i] - py) > reach || s === 0) continue;
      (s > 0 ? plus : minus).push(data.z[i]);
    }
    const med = (v: number[]) => {
      const s = v.slice().sort((p, q) => p - q);
      return s.length ? (s.length % 2 ? s[s.length >> 1] : 0.5 * (s[(s.length >> 1) - 1] + s[s.length >> 1])) : NaN;
    };
    const mid = 0.5 * (zl + zh);
    const mp = med(plus), mm = med(minus);
    const highPlus = Number.isFinite(mp) && Number.isFinite(mm) ? mp >= mm : Number.isFinite(mp) ? mp >= mid : Number.isFinite(mm) ? mm < mid : true;
    const sign = highPlus ? 1 : -1;
    out[hi[0]].x[hi[1]] = px + sign * half * nx;
    out[hi[0]].y[hi[1]] = py + sign * half * ny;
    out[lo[0]].x[lo[1]] = px - sign * half * nx;
    out[lo[0]].y[lo[1]] = py - sign * half * ny;
    faces++;
  }
  return { lines: out, faces };
}
