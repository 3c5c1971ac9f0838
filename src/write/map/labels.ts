// Label placement (hand-written cartography; no library offers contour labelling):
// - contour labels sit on their line, along its direction, turned to read upright, only where the line
//   is nearly straight for the label's length; the line is cut under the label; no other line, survey
//   point, outline or label may touch the label's box;
// - value labels beside survey points, in the first of four positions that collides with nothing.
// Collision tests use oriented boxes (separating-axis theorem) and a flatbush index of line segments.
import Flatbush from "flatbush";

export type Xy = [number, number];

/** A rotated rectangle: centre, half width and height, angle in radians (paper, y down). */
export interface Box {
  cx: number;
  cy: number;
  hw: number;
  hh: number;
  angle: number;
}

function corners(b: Box): Xy[] {
  const c = Math.cos(b.angle), s = Math.sin(b.angle);
  return [[-1, -1], [1, -1], [1, 1], [-1, 1]].map(([i, j]): Xy => [
    b.cx + i * b.hw * c - j * b.hh * s,
    b.cy + i * b.hw * s + j * b.hh * c,
  ]);
}

/** Axis-aligned bounds of a box. */
export function boxBounds(b: Box): [number, number, number, number] {
  const p = corners(b);
  return [Math.min(...p.map((q) => q[0])), Math.min(...p.map((q) => q[1])), Math.max(...p.map((q) => q[0])), Math.max(...p.map((q) => q[1]))];
}

/** Do two boxes overlap (touching counts)? Separating-axis test on the four edge normals. */
export function boxesOverlap(a: Box, b: Box): boolean {
  const pa = corners(a), pb = corners(b);
  for (const angle of [a.angle, a.angle + Math.PI / 2, b.angle, b.angle + Math.PI / 2]) {
    const ax = Math.cos(angle), ay = Math.sin(angle);
    const project = (p: Xy[]) => p.map((q) => q[0] * ax + q[1] * ay);
    const x = project(pa), y = project(pb);
    if (Math.max(...x) < Math.min(...y) || Math.max(...y) < Math.min(...x)) return false;
  }
  return true;
}

/** Point in the box's own frame (x along the box, y across). */
function local(b: Box, x: number, y: number): Xy {
  const c = Math.cos(b.angle), s = Math.sin(b.angle);
  const dx = x - b.cx, dy = y - b.cy;
  return [dx * c + dy * s, -dx * s + dy * c];
}

/** Does the segment p–q touch the box? (Liang–Barsky clipping in the box's frame.) */
export function segmentHitsBox(b: Box, p: Xy, q: Xy): boolean {
  const [x0, y0] = local(b, p[0], p[1]);
  const [x1, y1] = local(b, q[0], q[1]);
  let t0 = 0, t1 = 1;
  const dx = x1 - x0, dy = y1 - y0;
  for (const [pp, qq] of [[-dx, x0 + b.hw], [dx, b.hw - x0], [-dy, y0 + b.hh], [dy, b.hh - y0]]) {
    if (pp === 0) {
      if (qq < 0) return false;
    } else {
      const r = qq / pp;
      if (pp < 0) t0 = Math.max(t0, r);
      else t1 = Math.min(t1, r);
      if (t0 > t1) return false;
    }
  }
  return true;
}

/** Does a circle touch the box? */
function circleHitsBox(b: Box, x: number, y: number, r: number): boolean {
  const [lx, ly] = local(b, x, y);
  const ex = Math.max(Math.abs(lx) - b.hw, 0), ey = Math.max(Math.abs(ly) - b.hh, 0);
  return ex * ex + ey * ey <= r * r;
}

/** Cumulative arc length at each vertex. */
function arcLengths(line: Xy[]): Float64Array {
  const a = new Float64Array(line.length);
  for (let i = 1; i < line.length; i++) a[i] = a[i - 1] + Math.hypot(line[i][0] - line[i - 1][0], line[i][1] - line[i - 1][1]);
  return a;
}

/** Point at arc length s, and the index of the segment it lies on. */
function pointAt(line: Xy[], arc: Float64Array, s: number): { p: Xy; k: number } {
  let lo = 0, hi = line.length - 1;
  while (hi - lo > 1) {
    const mid = (lo + hi) >> 1;
    if (arc[mid] <= s) lo = mid;
    else hi = mid;
  }
  const len = arc[hi] - arc[lo];
  const t = len > 0 ? Math.min(1, Math.max(0, (s - arc[lo]) / len)) : 0;
  return { p: [line[lo][0] + t * (line[hi][0] - line[lo][0]), line[lo][1] + t * (line[hi][1] - line[lo][1])], k: lo };
}

/** The parts of a polyline outside the arc intervals `gaps` (sorted, not overlapping). */
export function cutLine(line: Xy[], gaps: [number, number][]): Xy[][] {
  if (gaps.length === 0) return [line];
  const arc = arcLengths(line);
  const total = arc[arc.length - 1];
  const keep: [number, number][] = [];
  let from = 0;
  for (const [a, b] of gaps) {
    if (a > from) keep.push([from, a]);
    from = Math.max(from, b);
  }
  if (from < total) keep.push([from, total]);
  const out: Xy[][] = [];
  for (const [a, b] of keep) {
    const start = pointAt(line, arc, a), end = pointAt(line, arc, b);
    const part: Xy[] = [start.p];
    for (let i = start.k + 1; i <= end.k; i++) part.push(line[i]);
    part.push(end.p);
    if (b - a > 1e-6) out.push(part);
  }
  return out;
}

export interface ContourInput {
  level: number;
  text: string;
  /** Lines of this level in paper coordinates. */
  pieces: Xy[][];
  /** Label this level. */
  labelled: boolean;
}

export interface PlacedLabel {
  text: string;
  level: number;
  box: Box;
  /** Rotation in degrees, upright (−90° < angle ≤ 90°). */
  degrees: number;
}

export interface Obstacles {
  /** Other lines no label may touch (e.g. the data outline). */
  lines: Xy[][];
  /** Survey point markers: centre and radius. */
  points: { x: number; y: number; r: number }[];
  /** Area labels must stay inside: [xmin, ymin, xmax, ymax]. */
  frame: [number, number, number, number];
}

export interface ContourLabelOptions {
  /** Text height (font size) and label width function. */
  size: number;
  width: (text: string) => number;
  /** Target spacing of labels along one line. */
  spacing: number;
  /** Clear space between a label's ends and its line. */
  gap: number;
}

/** Segment store for collision queries. */
class Segments {
  readonly a: Xy[] = [];
  readonly b: Xy[] = [];
  /** Owner piece id and arc interval of each segment (piece −1 for obstacles). */
  readonly piece: number[] = [];
  readonly from: number[] = [];
  readonly to: number[] = [];
  index?: Flatbush;
  add(line: Xy[], piece: number, arc?: Float64Array) {
    for (let i = 0; i + 1 < line.length; i++) {
      this.a.push(line[i]);
      this.b.push(line[i + 1]);
      this.piece.push(piece);
      this.from.push(arc ? arc[i] : 0);
      this.to.push(arc ? arc[i + 1] : 0);
    }
  }
  build() {
    const index = new Flatbush(Math.max(1, this.a.length));
    for (let i = 0; i < this.a.length; i++) {
      const p = this.a[i], q = this.b[i];
      index.add(Math.min(p[0], q[0]), Math.min(p[1], q[1]), Math.max(p[0], q[0]), Math.max(p[1], q[1]));
    }
    if (this.a.length === 0) index.add(0, 0, 0, 0);
    index.finish();
    this.index = index;
  }
  /** Any segment touching the box, other than those of `piece` within the arc interval [s0, s1]. */
  hits(box: Box, piece: number, s0: number, s1: number): boolean {
    const [x0, y0, x1, y1] = boxBounds(box);
    for (const i of this.index!.search(x0, y0, x1, y1)) {
      if (i >= this.a.length) continue;
      if (this.piece[i] === piece && this.to[i] >= s0 && this.from[i] <= s1) continue;
      if (segmentHitsBox(box, this.a[i], this.b[i])) return true;
    }
    return false;
  }
}

function insideFrame(box: Box, frame: [number, number, number, number]): boolean {
  const [x0, y0, x1, y1] = boxBounds(box);
  return x0 >= frame[0] && y0 >= frame[1] && x1 <= frame[2] && y1 <= frame[3];
}

/** Index of survey point markers for box tests. */
function pointIndex(points: Obstacles["points"]): (box: Box) => boolean {
  const index = new Flatbush(Math.max(1, points.length));
  for (const p of points) index.add(p.x - p.r, p.y - p.r, p.x + p.r, p.y + p.r);
  if (points.length === 0) index.add(0, 0, 0, 0);
  index.finish();
  return (box) => {
    const [x0, y0, x1, y1] = boxBounds(box);
    return index.search(x0, y0, x1, y1).some((i) => i < points.length && circleHitsBox(box, points[i].x, points[i].y, points[i].r));
  };
}

/**
 * Place contour labels and cut the lines under them. Returns the labels and, per level, the lines
 * with gaps. Deterministic: pieces are taken longest first, candidates nearest the middle of each
 * stretch first.
 */
export function placeContourLabels(
  contours: ContourInput[],
  obstacles: Obstacles,
  o: ContourLabelOptions,
): { labels: PlacedLabel[]; lines: Xy[][][] } {
  const segments = new Segments();
  const pieces: { level: number; text: string; line: Xy[]; arc: Float64Array; id: number; contour: number; labelled: boolean }[] = [];
  contours.forEach((c, ci) => {
    for (const line of c.pieces) {
      const arc = arcLengths(line);
      const id = pieces.length;
      pieces.push({ level: c.level, text: c.text, line, arc, id, contour: ci, labelled: c.labelled });
      segments.add(line, id, arc);
    }
  });
  for (const line of obstacles.lines) segments.add(line, -1);
  segments.build();
  const hitsPoint = pointIndex(obstacles.points);
  const frame: [number, number, number, number] = [obstacles.frame[0] + 1, obstacles.frame[1] + 1, obstacles.frame[2] - 1, obstacles.frame[3] - 1];

  const labels: PlacedLabel[] = [];
  const gaps: [number, number][][] = pieces.map(() => []);
  const order = pieces.filter((p) => p.labelled).sort((a, b) => b.arc[b.arc.length - 1] - a.arc[a.arc.length - 1] || a.id - b.id);
  for (const piece of order) {
    const total = piece.arc[piece.arc.length - 1];
    const width = o.width(piece.text) + 2 * 0.15 * o.size;
    const half = width / 2;
    if (total < width + 2 * o.gap + 2 * o.size) continue;
    const count = Math.max(1, Math.floor(total / o.spacing));
    for (let k = 0; k < count; k++) {
      const lo = Math.max(half + o.gap, (total * k) / count), hi = Math.min(total - half - o.gap, (total * (k + 1)) / count);
      if (hi < lo) continue;
      const middle = (lo + hi) / 2;
      const step = Math.max(0.5, o.size / 2);
      const candidates: number[] = [];
      for (let d = 0; middle - d >= lo || middle + d <= hi; d += step) {
        if (middle + d <= hi) candidates.push(middle + d);
        if (d > 0 && middle - d >= lo) candidates.push(middle - d);
      }
      for (const s of candidates) {
        const box = labelBox(piece.line, piece.arc, s, half, o.size);
        if (!box) continue;
        if (!insideFrame(box.box, frame)) continue;
        if (labels.some((l) => boxesOverlap(inflate(l.box, 0.3 * o.size), box.box))) continue;
        if (segments.hits(box.box, piece.id, s - half - o.gap, s + half + o.gap)) continue;
        if (hitsPoint(box.box)) continue;
        labels.push({ text: piece.text, level: piece.level, box: box.box, degrees: box.degrees });
        gaps[piece.id].push([s - half - o.gap, s + half + o.gap]);
        break;
      }
    }
  }
  const lines: Xy[][][] = contours.map(() => []);
  for (const piece of pieces) {
    lines[piece.contour].push(...cutLine(piece.line, gaps[piece.id].sort((a, b) => a[0] - b[0])));
  }
  return { labels, lines };
}

function inflate(b: Box, by: number): Box {
  return { ...b, hw: b.hw + by, hh: b.hh + by };
}

/**
 * The box of a label centred at arc length s, if the line is straight enough there: the line must
 * stay within a quarter of the text height of the chord over the label's length.
 */
function labelBox(line: Xy[], arc: Float64Array, s: number, half: number, size: number): { box: Box; degrees: number } | null {
  const a = pointAt(line, arc, s - half), b = pointAt(line, arc, s + half);
  const dx = b.p[0] - a.p[0], dy = b.p[1] - a.p[1];
  const chord = Math.hypot(dx, dy);
  if (chord < 1.9 * half) return null;
  for (let i = a.k + 1; i <= b.k; i++) {
    const off = Math.abs((line[i][0] - a.p[0]) * dy - (line[i][1] - a.p[1]) * dx) / chord;
    if (off > 0.25 * size) return null;
  }
  let angle = Math.atan2(dy, dx);
  // Upright: turn text that would read downwards or upside down by half a turn.
  if (angle > Math.PI / 2) angle -= Math.PI;
  else if (angle <= -Math.PI / 2) angle += Math.PI;
  const box: Box = { cx: (a.p[0] + b.p[0]) / 2, cy: (a.p[1] + b.p[1]) / 2, hw: half, hh: 0.6 * size, angle };
  return { box, degrees: (angle * 180) / Math.PI };
}

export interface PointLabelInput {
  x: number;
  y: number;
  r: number;
  text: string;
}

/**
 * Value labels beside survey points: right, left, above, below, the first that touches no placed
 * label, no other point marker and stays inside the frame; points with no room stay unlabelled.
 */
export function placePointLabels(
  points: PointLabelInput[],
  placed: Box[],
  frame: [number, number, number, number],
  size: number,
  width: (text: string) => number,
): { index: number; box: Box; anchor: "start" | "end" | "middle" }[] {
  const hitsPoint = pointIndex(points);
  const taken: Box[] = [...placed];
  const out: { index: number; box: Box; anchor: "start" | "end" | "middle" }[] = [];
  points.forEach((p, index) => {
    const hw = width(p.text) / 2, hh = 0.55 * size, off = p.r + 0.4 * size;
    const options: [number, number, "start" | "end" | "middle"][] = [
      [p.x + off + hw, p.y, "start"],
      [p.x - off - hw, p.y, "end"],
      [p.x, p.y - off - hh, "middle"],
      [p.x, p.y + off + hh, "middle"],
    ];
    for (const [cx, cy, anchor] of options) {
      const box: Box = { cx, cy, hw, hh, angle: 0 };
      if (!insideFrame(box, frame)) continue;
      // A little space between neighbouring values, so two numbers never read as one.
      if (taken.some((t) => boxesOverlap(t, inflate(box, 0.2 * size)))) continue;
      if (hitsPoint(box)) continue;
      taken.push(box);
      out.push({ index, box, anchor });
      return;
    }
  });
  return out;
}
