// What a benchmark case is: a name, the sizes it runs at, and a preparation (untimed) that returns
// the subject to time, optionally its reference and a check that both computed the same thing.
import { type MeasureOptions, measurePair, type Runner, type Stats } from "./harness.ts";
import type { Reference } from "./reference.ts";

export interface Options {
  /** Case names to run (groups already expanded). */
  only: string[];
  /** Points of the whole-job cases. */
  n: number[];
  /** Grid side of the whole-job cases (side × side cells). */
  side: number;
  /** Matrix sizes / centres of the O(n³) and evaluator stages. */
  sizes: number[];
  /** Grid sides of the contour stages. */
  cells: number[];
  /** Evaluation grid side of the evaluator stage. */
  evalSide: number;
  reps: number;
  warmup: number;
  blasThreads?: number;
  reference: boolean;
  json: string;
}

export interface Context {
  options: Options;
  ref?: Reference;
  /** A temporary directory for files handed to the reference. */
  tmp: string;
}

export interface Measured {
  subject: Stats;
  reference?: Stats;
  check?: string;
}

/** A prepared case at one size: measure() times it; done() frees what preparation made. */
export interface Prepared {
  referenceLabel?: string;
  measure(options: MeasureOptions): Promise<Measured>;
  done?(): Promise<void>;
}

export interface BenchCase {
  name: string;
  group: "job" | "stage";
  title: string;
  /** What the size counts ("n", "cells" …). */
  sizeName: string;
  /** The growth exponent theory expects, as text. */
  expected?: string;
  sizes(options: Options): number[];
  prepare(size: number, ctx: Context): Promise<Prepared>;
}

/** Bundle a subject, its reference and a check into a Prepared (keeps the types of A and B inside). */
export function prepared<A, B>(p: {
  subject: Runner<A>;
  reference?: (warm: A) => Promise<Runner<B> | undefined>;
  referenceLabel?: string;
  check?: (a: A, b: B | undefined) => Promise<string | undefined> | string | undefined;
  done?: () => Promise<void>;
}): Prepared {
  return {
    referenceLabel: p.reference ? p.referenceLabel : undefined,
    async measure(options) {
      const r = await measurePair(p.subject, p.reference, options);
      const check = p.check ? await p.check(r.subjectValue, r.referenceValue) : undefined;
      return { subject: r.subject, reference: r.reference, check };
    },
    done: p.done,
  };
}
