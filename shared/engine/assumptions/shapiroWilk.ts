/**
 * Shapiro–Wilk W test of normality, n = 3 … 5000.
 *
 * Shapiro & Wilk (1965), "An analysis of variance test for normality (complete samples)",
 * Biometrika 52:591–611; coefficients and p-value by Royston's approximation: Royston (1992),
 * "Approximating the Shapiro–Wilk W-test for non-normality", Statistics and Computing 2:117–119,
 * and Royston (1995), "Remark AS R94: A remark on Algorithm AS 181: the W-test for normality",
 * Applied Statistics 44(4):547–551.
 *
 * Written here from the published algorithm because no maintained npm package implements AS R94
 * well (complete samples only; no censoring).
 */
import type { Maybe } from '../result';
import { none, some } from '../result';
import { standardNormalQuantile, standardNormalUpperTail } from '../distributions/normal';

/** Polynomial c₀ + c₁x + c₂x² + … (AS R94 `poly`). */
function poly(c: readonly number[], x: number): number {
  let r = 0;
  for (let i = c.length - 1; i >= 0; i--) r = r * x + c[i]!;
  return r;
}

// Royston (1992, 1995) coefficients.
const C1 = [0, 0.221157, -0.147981, -2.07119, 4.434685, -2.706056];
const C2 = [0, 0.042981, -0.293762, -1.752461, 5.682633, -3.582633];
const C3 = [0.544, -0.39978, 0.025054, -6.714e-4];
const C4 = [1.3822, -0.77857, 0.062767, -0.0020322];
const C5 = [-1.5861, -0.31082, -0.083751, 0.0038915];
const C6 = [-0.4803, -0.082676, 0.0030302];
const G = [-2.273, 0.459];

const coefficientCache = new Map<number, Float64Array>();

/**
 * The antisymmetric half of Royston's approximate coefficients a₁ … a_{⌊n/2⌋} (positive, for the
 * largest-minus-smallest pairs). Cached per n: the tests and the benchmark reuse sizes.
 */
export function shapiroWilkCoefficients(n: number): Float64Array {
  const cached = coefficientCache.get(n);
  if (cached) return cached;
  const half = Math.floor(n / 2);
  const a = new Float64Array(half);
  if (n === 3) {
    a[0] = Math.SQRT1_2;
  } else {
    const m = new Float64Array(half);
    const an25 = n + 0.25;
    let summ2 = 0;
    for (let i = 0; i < half; i++) {
      const mi = standardNormalQuantile((i + 1 - 0.375) / an25);
      m[i] = mi;
      summ2 += mi * mi;
    }
    summ2 *= 2;
    const ssumm2 = Math.sqrt(summ2);
    const rsn = 1 / Math.sqrt(n);
    const m0 = m[0]!;
    const a1 = poly(C1, rsn) - m0 / ssumm2;
    let first: number;
    let fac: number;
    if (n > 5) {
      const m1 = m[1]!;
      const a2 = -m1 / ssumm2 + poly(C2, rsn);
      fac = Math.sqrt((summ2 - 2 * m0 * m0 - 2 * m1 * m1) / (1 - 2 * a1 * a1 - 2 * a2 * a2));
      a[1] = a2;
      first = 2;
    } else {
      fac = Math.sqrt((summ2 - 2 * m0 * m0) / (1 - 2 * a1 * a1));
      first = 1;
    }
    a[0] = a1;
    for (let i = first; i < half; i++) a[i] = -m[i]! / fac;
  }
  if (coefficientCache.size > 64) coefficientCache.clear();
  coefficientCache.set(n, a);
  return a;
}

export interface ShapiroWilkResult {
  n: number;
  statistic: number;
  pValue: number;
}

/** W and its p-value for already sorted data (ascending). */
export function shapiroWilkSorted(x: ArrayLike<number>): Maybe<ShapiroWilkResult> {
  const n = x.length;
  if (n < 3) return none('Shapiro–Wilk needs at least 3 measurements');
  if (n > 5000) return none('Royston’s approximation of the Shapiro–Wilk p-value is valid only up to n = 5000');
  const range = x[n - 1]! - x[0]!;
  if (!(range > 0)) return none('all measurements are equal, so normality cannot be assessed');
  const a = shapiroWilkCoefficients(n);
  // W = squared correlation of the ordered data with the coefficients, computed as 1 − w1 for accuracy near 1.
  let sx = 0;
  for (let i = 0; i < n; i++) sx += x[i]! / range;
  sx /= n;
  let ssa = 0;
  let ssx = 0;
  let sax = 0;
  for (let i = 0, j = n - 1; i < n; i++, j--) {
    const asa = i < j ? -a[i]! : i > j ? a[j]! : 0;
    const xsx = x[i]! / range - sx;
    ssa += asa * asa;
    ssx += xsx * xsx;
    sax += asa * xsx;
  }
  const ssassx = Math.sqrt(ssa * ssx);
  const w1 = ((ssassx - sax) * (ssassx + sax)) / (ssa * ssx);
  const w = 1 - w1;
  let p: number;
  if (n === 3) {
    // Exact for n = 3: p = (6/π)(asin √W − π/3).
    p = Math.max(0, (6 / Math.PI) * (Math.asin(Math.sqrt(w)) - Math.PI / 3));
  } else {
    let y = Math.log(w1);
    let mu: number;
    let sigma: number;
    if (n <= 11) {
      const gamma = poly(G, n);
      if (y >= gamma) return some({ n, statistic: w, pValue: 1e-99 });
      y = -Math.log(gamma - y);
      mu = poly(C3, n);
      sigma = Math.exp(poly(C4, n));
    } else {
      const ln = Math.log(n);
      mu = poly(C5, ln);
      sigma = Math.exp(poly(C6, ln));
    }
    p = standardNormalUpperTail((y - mu) / sigma);
  }
  return some({ n, statistic: w, pValue: p });
}

/** Shapiro–Wilk W and p-value for data in any order (the data are not modified). */
export function shapiroWilk(x: ArrayLike<number>): Maybe<ShapiroWilkResult> {
  if (x.length < 3 || x.length > 5000) return shapiroWilkSorted(x);
  const sorted = Float64Array.from(x).sort();
  return shapiroWilkSorted(sorted);
}
