// Automatic selection: which candidates are tried, which may be chosen, and the rule that chooses.
//
// Every candidate's λ is chosen by GCV; between candidates rbfield compares exact leave-one-out
// errors (Rippa 1999), which GCV only approximates: GCV replaces each point's leverage Aᵢᵢ by the
// mean, and near-interpolants with very uneven leverage (flat shapes, edf ≈ N) can score well on GCV
// while predicting left-out points badly.
//   1. Guard for the rule "gcv": a candidate whose leave-one-out RMSE is more than GROSS_LOO_RATIO
//      times the best candidate's may not win on its GCV score.
//   2. Rule "one-se" (default): the simplest candidate whose leave-one-out mean squared error is
//      within one standard error of the smallest (the one-standard-error rule, Breiman, Friedman,
//      Olshen & Stone 1984, §3.4.3; Hastie, Tibshirani & Friedman 2009, §7.10). Differences smaller
//      than the noise of the error estimate do not buy a more complex model.
//      "Simplest": fewest parameters chosen from the data (the thin-plate spline has λ only; the other
//      kernels λ and a shape ε, unless the shape is given), then fewest trend terms; ties go to the
//      smaller leave-one-out error.
//   3. Rules "loocv" and "gcv": the raw minimum of that score (for "gcv", among the candidates the
//      guard allows).
//   4. Whatever the rule: below MIN_SELECTION_POINTS points the simplest candidate is taken, and a
//      candidate whose λ is held at the numerical floor is not chosen while another is available.
import type { TrendName, KernelName } from "../types.ts";
import type { CandidateScore, KernelGroup } from "./candidate.ts";
import { trendProblem } from "./core.ts";
import { trendTerms, hasShape, KERNELS } from "./kernels.ts";
import type { TrendChoice, KernelChoice, SelectRule } from "./options.ts";

/** With "gcv", a candidate whose leave-one-out RMSE exceeds this multiple of the best one's is not chosen. */
export const GROSS_LOO_RATIO = 1.5;
/**
 * Fewest points for choosing between candidates: below this the simplest candidate is taken. With a
 * handful of points the leave-one-out errors of eight candidates differ mostly by chance, and taking
 * the best of them over-fits the selection itself (Cawley & Talbot 2010, J. Mach. Learn. Res. 11).
 * The number is measured: in bench/sweep, selecting at N = 8 and 12 gave surfaces up to 9.7 times
 * worse than mgcv's, while from N = 20 on it helped on average (DEVELOPERS.md, "Choosing the model").
 */
export const MIN_SELECTION_POINTS = 20;

/** Candidates of an automatic selection: each kernel with the trends it supports (constant–quadratic). */
export function candidateList(kernel: KernelChoice, trend: TrendChoice): { kernel: KernelName; trend: TrendName }[] {
  const kernels = kernel === "auto" ? KERNELS : [kernel];
  const out: { kernel: KernelName; trend: TrendName }[] = [];
  for (const k of kernels) {
    const trends: TrendName[] = trend !== "auto" ? [trend] : k === "thin-plate" ? ["linear", "quadratic"] : ["linear", "constant"];
    for (const d of trends) if (!trendProblem(k, d)) out.push({ kernel: k, trend: d });
  }
  return out;
}

export function kernelGroups(candidates: { kernel: KernelName; trend: TrendName }[]): KernelGroup[] {
  const groups: KernelGroup[] = [];
  for (const c of candidates) {
    const g = groups.find((x) => x.kernel === c.kernel);
    if (g) g.trends.push(c.trend);
    else groups.push({ kernel: c.kernel, trends: [c.trend] });
  }
  return groups;
}

/** Complexity of a candidate for the parsimony rule: [parameters chosen from the data, trend terms]. */
export function complexity(kernel: KernelName, trend: TrendName, shapeGiven: boolean): [number, number] {
  return [1 + (hasShape(kernel) && !shapeGiven ? 1 : 0), trendTerms(trend)];
}

/** How the choice was made. */
export type Decision = "minimum" | "parsimony" | "few-points";

export interface SelectionOutcome {
  /** Candidates, best score first under the rule's score (GCV for "gcv", else leave-one-out RMSE), ineligible ones last; the chosen one marked. */
  ranking: CandidateScore[];
  /** "minimum": the best score; "parsimony": the one-standard-error rule chose a simpler candidate than the best; "few-points": too few points to select. */
  decision: Decision;
  /** The candidate with the best score among the eligible ones. */
  best: CandidateScore;
}

/** Apply the guards and the rule to the scored candidates of `n` points (at least one candidate with finite scores). */
export function chooseCandidate(rows: CandidateScore[], rule: SelectRule, shapeGiven: boolean, n: number): SelectionOutcome {
  const finite = rows.filter((r) => Number.isFinite(r.loocvRmse) && Number.isFinite(r.gcv));
  for (const r of rows) if (!finite.includes(r)) r.excluded = "scores not finite";
  // A candidate held at the numerical floor never attains its own GCV optimum: its fit sits at the
  // edge of what double precision resolves (the near-flat, near-interpolating regime). Not chosen
  // while any other candidate is available.
  if (finite.some((r) => !r.heldAtFloor)) {
    for (const r of finite) if (r.heldAtFloor) r.excluded = "λ held at the numerical floor";
  }
  if (rule === "gcv") {
    const bestLoo = Math.min(...finite.filter((r) => r.excluded === null).map((r) => r.loocvRmse));
    for (const r of finite.filter((r) => r.excluded === null)) {
      if (r.loocvRmse > GROSS_LOO_RATIO * bestLoo) r.excluded = `leave-one-out RMSE ${(r.loocvRmse / bestLoo).toFixed(1)}× the best`;
    }
  }
  const allowed = finite.filter((r) => r.excluded === null);
  const score = (r: CandidateScore) => (rule === "gcv" ? r.gcv : r.loocvRmse);
  // Every row sorted by the rule's score, ineligible rows last (stable sort: ties keep candidate order).
  const ranking = rows.slice().sort((a, b) => (a.excluded === null ? 0 : 1) - (b.excluded === null ? 0 : 1) || score(a) - score(b));
  const best = ranking[0];
  const key = (r: CandidateScore) => complexity(r.kernel, r.trend, shapeGiven);
  const simplestFirst = (list: CandidateScore[]) =>
    list.slice().sort((a, b) => key(a)[0] - key(b)[0] || key(a)[1] - key(b)[1] || a.loocvRmse - b.loocvRmse);
  let chosen = best;
  let decision: Decision = "minimum";
  if (n < MIN_SELECTION_POINTS) {
    chosen = simplestFirst(allowed)[0];
    decision = "few-points";
  } else if (rule === "one-se") {
    // One standard error of the best's mean squared error: SE(MSE) = 2·RMSE·SE(RMSE).
    const limit = best.loocvRmse ** 2 + 2 * best.loocvRmse * best.loocvSe;
    chosen = simplestFirst(allowed.filter((r) => r.loocvRmse ** 2 <= limit))[0];
    if (chosen !== best) decision = "parsimony";
  }
  chosen.chosen = true;
  return { ranking, decision, best };
}
