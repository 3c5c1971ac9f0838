// One-dimensional minimisation by golden-section search (Kiefer 1953; Press et al., Numerical
// Recipes, §10.2): shrinks a bracket [a, c] by the golden ratio each step, one evaluation per step.

/** Golden-section steps on f over [a, c]; returns the final bracket. `onStep` is told each step. */
export function goldenSection(f: (x: number) => number, a: number, c: number, steps: number, onStep?: (step: number) => void): { a: number; c: number } {
  const phi = (Math.sqrt(5) - 1) / 2;
  let x1 = c - phi * (c - a);
  let x2 = a + phi * (c - a);
  let f1 = f(x1);
  let f2 = f(x2);
  for (let it = 0; it < steps; it++) {
    onStep?.(it);
    if (f1 < f2) {
      c = x2;
      x2 = x1;
      f2 = f1;
      x1 = c - phi * (c - a);
      f1 = f(x1);
    } else {
      a = x1;
      x1 = x2;
      f1 = f2;
      x2 = a + phi * (c - a);
      f2 = f(x2);
    }
  }
  return { a, c };
}
