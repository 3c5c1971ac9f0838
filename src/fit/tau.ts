// Pope's tau distribution, for testing one studentised residual among many (Pope 1976, "The
// statistics of residuals and the detection of outliers", NOAA Technical Report NOS 65 NGS 1).
//
// A residual divided by its own standard deviation, with the variance factor estimated from the same
// data (ν degrees of freedom), is tau-distributed: τ²/ν ~ Beta(1/2, (ν − 1)/2). Hence
//   P(|τ| > c) = I_{1 − c²/ν}((ν − 1)/2, 1/2),   0 ≤ c ≤ √ν,
// with I the regularised incomplete beta function. Pope tests every residual at the level
// α₀ = 1 − (1 − α)^{1/n}, so that n tests together raise a false alarm with probability at most α.

/**
 * ln Γ(x) for x > 0: Stirling's series with terms to x⁻⁹ (Abramowitz & Stegun 1964, 6.1.40; the
 * coefficients are B₂ₖ/(2k(2k − 1))) after shifting x up to at least 15 with Γ(x + 1) = xΓ(x).
 */
export function lnGamma(x: number): number {
  let shift = 0;
  while (x < 15) {
    shift += Math.log(x);
    x += 1;
  }
  const x2 = x * x;
  const series = 1 / (12 * x) - 1 / (360 * x * x2) + 1 / (1260 * x * x2 * x2) - 1 / (1680 * x * x2 * x2 * x2) +
    1 / (1188 * x * x2 * x2 * x2 * x2);
  return (x - 0.5) * Math.log(x) - x + 0.5 * Math.log(2 * Math.PI) + series - shift;
}

/** Continued fraction of the incomplete beta function, by the modified Lentz method (Press et al. 2007, §6.4). */
function betaContinuedFraction(a: number, b: number, x: number): number {
  const tiny = 1e-300;
  const qab = a + b, qap = a + 1, qam = a - 1;
  let c = 1;
  let d = 1 - (qab * x) / qap;
  if (Math.abs(d) < tiny) d = tiny;
  d = 1 / d;
  let h = d;
  for (let m = 1; m <= 100000; m++) {
    const m2 = 2 * m;
    let aa = (m * (b - m) * x) / ((qam + m2) * (a + m2));
    d = 1 + aa * d;
    if (Math.abs(d) < tiny) d = tiny;
    c = 1 + aa / c;
    if (Math.abs(c) < tiny) c = tiny;
    d = 1 / d;
    h *= d * c;
    aa = (-(a + m) * (qab + m) * x) / ((a + m2) * (qap + m2));
    d = 1 + aa * d;
    if (Math.abs(d) < tiny) d = tiny;
    c = 1 + aa / c;
    if (Math.abs(c) < tiny) c = tiny;
    d = 1 / d;
    const step = d * c;
    h *= step;
    if (Math.abs(step - 1) < 1e-15) break;
  }
  return h;
}

/** Regularised incomplete beta function I_x(a, b) (Press et al. 2007, §6.4). */
export function incompleteBeta(x: number, a: number, b: number): number {
  if (x <= 0) return 0;
  if (x >= 1) return 1;
  const front = Math.exp(lnGamma(a + b) - lnGamma(a) - lnGamma(b) + a * Math.log(x) + b * Math.log1p(-x));
  return x < (a + 1) / (a + b + 2) ? (front * betaContinuedFraction(a, b, x)) / a : 1 - (front * betaContinuedFraction(b, a, 1 - x)) / b;
}

/** P(|τ| > c) for ν degrees of freedom (ν ≥ 2). */
export function tauExceedance(c: number, nu: number): number {
  if (c <= 0) return 1;
  if (c * c >= nu) return 0;
  return incompleteBeta(1 - (c * c) / nu, (nu - 1) / 2, 0.5);
}

/** The critical value c with P(|τ| > c) = α₀ (bisection; Infinity when ν < 2, where no test is possible). */
export function tauCritical(nu: number, alpha0: number): number {
  if (!(nu >= 2)) return Infinity;
  let lo = 0, hi = Math.sqrt(nu);
  for (let i = 0; i < 200 && hi - lo > 1e-13 * hi; i++) {
    const mid = 0.5 * (lo + hi);
    if (tauExceedance(mid, nu) > alpha0) lo = mid;
    else hi = mid;
  }
  return 0.5 * (lo + hi);
}

/** Per-test level for n tests at a family-wise level α (Šidák): α₀ = 1 − (1 − α)^{1/n}. */
export function perTestLevel(alpha: number, n: number): number {
  return -Math.expm1(Math.log1p(-alpha) / n);
}
