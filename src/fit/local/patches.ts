// The patches of the local (partition-of-unity) method and their blending weights.
//
// Partition of unity (Wendland 2002, "Fast evaluation of radial basis functions: methods based on
// partition of unity"; Cavoretto & De Rossi 2015, 2019): the plane is covered by overlapping discs
// Ωⱼ (centre cⱼ, radius ρⱼ); on each a small RBF fit fⱼ is made from the points inside it, and
//   f(x) = Σⱼ wⱼ(x) fⱼ(x),   wⱼ(x) = ψ(‖x − cⱼ‖/ρⱼ) / Σₖ ψ(‖x − cₖ‖/ρₖ)   (Shepard normalisation),
// with ψ Wendland's compactly supported C² function ψ(r) = (1 − r)⁴₊(4r + 1) (Wendland 1995, φ₃,₁).
// Σⱼ wⱼ = 1 wherever some ψⱼ > 0, and the wⱼ are C², so value and slope of f are continuous.
//
// Patches adapt to point density: a 2-d tree over the data (cells halved at their midpoints, so the
// layout does not depend on the order of the points) is refined while a cell holds more than
// `leafPoints` points, from a root square sized so that evenly spread data stop at cells of about
// `evenPoints` points whatever their number (treeLeaves). Every leaf cell that meets the data's bounding box gets one patch: a disc on the cell's
// centre with radius `overlap` × the cell's half-diagonal (overlap > 1, so every place of the cell,
// its corners included, lies strictly inside the disc: the bounding box is covered), grown where the
// disc holds fewer than `minPoints` points (sparse corners, empty cells between clusters) until it
// holds that many. A patch's points are exactly those with ψ > 0, so point i belongs to patch j if
// and only if wⱼ(xᵢ) > 0 (the leave-one-out identity in local.ts rests on this).
import Flatbush from "flatbush";
import { boundingBox, pointIndex } from "../../geometry.ts";

/**
 * Wendland's C² function ψ(r) = (1 − r)⁴₊(4r + 1) (Wendland 1995, Adv. Comput. Math. 4, φ₃,₁),
 * written in t = r² so that membership and weight come from one computation.
 */
export function wendlandOfSquared(t: number): number {
  if (!(t < 1)) return 0;
  const r = Math.sqrt(t);
  const a = 1 - r;
  const a2 = a * a;
  return a2 * a2 * (4 * r + 1);
}

/** ψ of patch (cu, cv, radius) at (u, v): the unnormalised blending weight. */
export function patchWeight(u: number, v: number, cu: number, cv: number, radius: number): number {
  const du = u - cu, dv = v - cv;
  return wendlandOfSquared((du * du + dv * dv) / (radius * radius));
}

/** The patches: discs in the global scaled frame and their points (compressed rows, ascending). */
export interface PatchLayout {
  count: number;
  cu: Float64Array;
  cv: Float64Array;
  radius: Float64Array;
  /** Patch j's points are index[start[j] … start[j+1]). */
  start: Int32Array;
  index: Int32Array;
  /** 1 where the patch's tree cell held points (0: an empty cell, the disc grown to reach data). */
  occupied: Uint8Array;
}

export interface LayoutOptions {
  /** A tree cell is split while it holds more than this many points. */
  leafPoints: number;
  /**
   * Points a leaf should hold where the data are evenly spread: the tree's root square is sized so
   * that its cells at some even depth hold about this many (see treeLeaves). 0: the root is the
   * square around the data.
   */
  evenPoints: number;
  /** Every patch is grown to hold at least this many points (all points when there are fewer). */
  minPoints: number;
  /** Disc radius as a multiple of the cell's half-diagonal (> 1). */
  overlap: number;
}

/** Deepest tree level: cells 2⁻³⁰ of the data's extent (near-coincident clusters stop there). */
const MAX_DEPTH = 60;
/** A grown disc reaches this factor beyond its minPoints-th nearest point, so that point has ψ > 0. */
const GROWTH_MARGIN = 1 + 1e-3;

interface Leaf {
  cu: number;
  cv: number;
  /** Half-width and half-height of the cell. */
  hu: number;
  hv: number;
  count: number;
}

/**
 * Leaves of a 2-d tree with midpoint splits: the root is a square centred on the data's bounding
 * box; a cell with more than `leafPoints` points is halved across its longer side (across u when
 * square), so cells are squares or 2:1 rectangles. Halving rather than quartering keeps leaf counts
 * within a factor 2 of each other (a quadtree's vary by 4) for evenly spread data. Leaves are listed
 * in the tree's order (west/south child first), which is also a spatial order.
 *
 * The root's side is h·2ᵏ, the smallest such square covering the bounding box, with h the side of a
 * square that holds `evenPoints` points at the data's mean density (h² = A·evenPoints/N, A the
 * bounding box's area). Evenly spread data then stop splitting at squares of side h, whatever N;
 * with the root fitted to the bounding box, their leaves held N/2ᵈ points, anywhere between
 * leafPoints/2 and leafPoints as N changes, and the smaller ones needed grown discs (more patches,
 * each as large). Cells of the larger root that miss the bounding box get no patch.
 */
function treeLeaves(u: Float64Array, v: Float64Array, leafPoints: number, evenPoints: number): Leaf[] {
  const box = boundingBox(u, v);
  const mu = 0.5 * (box.xmin + box.xmax), mv = 0.5 * (box.ymin + box.ymax);
  const bu = 0.5 * (box.xmax - box.xmin), bv = 0.5 * (box.ymax - box.ymin);
  let half = Math.max(bu, bv) || 1;
  // Half the side h of the cells evenly spread data stop at (Infinity: no such size).
  let even = Infinity;
  if (evenPoints > 0 && u.length > evenPoints) {
    // A (nearly) collinear set counts as a strip one mean spacing wide, so h stays positive.
    const area = Math.max(4 * bu * bv, (4 * half * half) / u.length);
    const h = Math.sqrt((area * evenPoints) / u.length);
    const k = Math.max(0, Math.ceil(Math.log2((2 * half) / h)));
    half = 0.5 * h * 2 ** k;
    even = 0.5 * h;
  }
  // A cell reaching beyond the bounding box is split down to side h whatever its count, so that no
  // cell larger than the interior's lies across the data's edge (its disc would reach far inside).
  const straddles = (cu: number, cv: number, hu: number, hv: number) =>
    Math.max(hu, hv) > even && (cu - hu < box.xmin || cu + hu > box.xmax || cv - hv < box.ymin || cv + hv > box.ymax);
  const leaves: Leaf[] = [];
  const visit = (cu: number, cv: number, hu: number, hv: number, idx: Int32Array, depth: number) => {
    if ((idx.length <= leafPoints && !straddles(cu, cv, hu, hv)) || depth >= MAX_DEPTH) {
      // Leaves that do not meet the bounding box need no patch (only possible for empty ones).
      if (Math.abs(cu - mu) <= hu + bu && Math.abs(cv - mv) <= hv + bv) leaves.push({ cu, cv, hu, hv, count: idx.length });
      return;
    }
    const alongU = hu >= hv;
    const side = new Uint8Array(idx.length);
    let high = 0;
    for (let k = 0; k < idx.length; k++) {
      const i = idx[k];
      side[k] = (alongU ? u[i] >= cu : v[i] >= cv) ? 1 : 0;
      high += side[k];
    }
    const lo = new Int32Array(idx.length - high), hi = new Int32Array(high);
    let a = 0, b = 0;
    for (let k = 0; k < idx.length; k++) {
      if (side[k]) hi[b++] = idx[k];
      else lo[a++] = idx[k];
    }
    if (alongU) {
      visit(cu - 0.5 * hu, cv, 0.5 * hu, hv, lo, depth + 1);
      visit(cu + 0.5 * hu, cv, 0.5 * hu, hv, hi, depth + 1);
    } else {
      visit(cu, cv - 0.5 * hv, hu, 0.5 * hv, lo, depth + 1);
      visit(cu, cv + 0.5 * hv, hu, 0.5 * hv, hi, depth + 1);
    }
  };
  visit(mu, mv, half, half, Int32Array.from({ length: u.length }, (_, i) => i), 0);
  return leaves;
}

/** Points with ψ > 0 in the disc, ascending. */
function membersOf(index: Flatbush, u: Float64Array, v: Float64Array, cu: number, cv: number, radius: number): Int32Array {
  const found = index.search(cu - radius, cv - radius, cu + radius, cv + radius, (i) => patchWeight(u[i], v[i], cu, cv, radius) > 0);
  return Int32Array.from(found).sort();
}

/** The disc of (cu, cv) grown until it holds `count` points (their ψ > 0). */
export function grownRadius(index: Flatbush, u: Float64Array, v: Float64Array, cu: number, cv: number, radius: number, count: number): number {
  const near = index.neighbors(cu, cv, count);
  const far = near[near.length - 1];
  const d = Math.hypot(u[far] - cu, v[far] - cv);
  return Math.max(radius, d * GROWTH_MARGIN);
}

/** Build the patches over scaled coordinates (u, v). */
export function buildPatches(u: Float64Array, v: Float64Array, options: LayoutOptions): PatchLayout {
  const n = u.length;
  const minPoints = Math.min(options.minPoints, n);
  const leaves = treeLeaves(u, v, options.leafPoints, options.evenPoints);
  const index = pointIndex(u, v);
  const count = leaves.length;
  const cu = new Float64Array(count), cv = new Float64Array(count), radius = new Float64Array(count);
  const occupied = new Uint8Array(count);
  const lists: Int32Array[] = [];
  let total = 0;
  leaves.forEach((leaf, j) => {
    cu[j] = leaf.cu;
    cv[j] = leaf.cv;
    occupied[j] = leaf.count > 0 ? 1 : 0;
    let r = options.overlap * Math.hypot(leaf.hu, leaf.hv);
    let members = membersOf(index, u, v, leaf.cu, leaf.cv, r);
    if (members.length < minPoints) {
      r = grownRadius(index, u, v, leaf.cu, leaf.cv, r, minPoints);
      members = membersOf(index, u, v, leaf.cu, leaf.cv, r);
    }
    radius[j] = r;
    lists.push(members);
    total += members.length;
  });
  return { count, cu, cv, radius, occupied, ...compress(lists, total) };
}

/** Member lists as compressed rows. */
export function compress(lists: Int32Array[], total = lists.reduce((s, l) => s + l.length, 0)): { start: Int32Array; index: Int32Array } {
  const start = new Int32Array(lists.length + 1);
  const index = new Int32Array(total);
  lists.forEach((l, j) => {
    index.set(l, start[j]);
    start[j + 1] = start[j] + l.length;
  });
  return { start, index };
}

/** Grow patch j by `factor` (a patch whose points cannot carry the fit); returns its new members. */
export function growPatch(layout: PatchLayout, j: number, u: Float64Array, v: Float64Array, index: Flatbush, factor: number): Int32Array {
  layout.radius[j] *= factor;
  return membersOf(index, u, v, layout.cu[j], layout.cv[j], layout.radius[j]);
}

/**
 * Up to `count` patches for choosing the model: spread over the domain by taking evenly spaced
 * positions in the tree's order (which also follows density: dense regions have more
 * patches), among patches whose cell held points (a grown empty cell is not typical of the data).
 */
export function samplePatches(layout: PatchLayout, count: number): number[] {
  let pool = Array.from({ length: layout.count }, (_, j) => j).filter((j) => layout.occupied[j]);
  if (pool.length === 0) pool = Array.from({ length: layout.count }, (_, j) => j);
  const k = Math.min(count, pool.length);
  const out: number[] = [];
  for (let s = 0; s < k; s++) {
    const j = pool[Math.floor(((s + 0.5) * pool.length) / k)];
    if (!out.includes(j)) out.push(j);
  }
  return out;
}

/** A flatbush index of the patch discs' bounding squares (patch j is item j). */
export function discIndex(cu: Float64Array, cv: Float64Array, radius: Float64Array): Flatbush {
  const index = new Flatbush(Math.max(cu.length, 1));
  for (let j = 0; j < cu.length; j++) index.add(cu[j] - radius[j], cv[j] - radius[j], cu[j] + radius[j], cv[j] + radius[j]);
  if (cu.length === 0) index.add(0, 0, 0, 0);
  index.finish();
  return index;
}
