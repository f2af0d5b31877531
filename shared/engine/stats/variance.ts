import { mean } from './mean';

/**
 * Sample variance s² = Σ(xᵢ − x̄)² / (n − 1) by the corrected two-pass algorithm
 * (Chan, Golub & LeVeque 1983, "Algorithms for computing the sample variance", The American
 * Statistician 37(3):242–247, eq. 1.7): s² = [Σdᵢ² − (Σdᵢ)²/n] / (n − 1), dᵢ = xᵢ − x̄.
 * Never the one-pass sum-of-squares form, which fails NIST StRD NumAcc3 and NumAcc4.
 * Pass `knownMean` to skip recomputing the mean. Returns null when n < 2.
 */
export function sampleVariance(x: ArrayLike<number>, knownMean?: number): number | null {
  const n = x.length;
  if (n < 2) return null;
  const m = knownMean ?? (mean(x) as number);
  let ss = 0;
  let s = 0;
  for (let i = 0; i < n; i++) {
    const d = x[i]! - m;
    ss += d * d;
    s += d;
  }
  const v = (ss - (s * s) / n) / (n - 1);
  return v > 0 ? v : 0;
}

/** Sample standard deviation s = √s² (n − 1 denominator); null when n < 2. */
export function sampleStandardDeviation(x: ArrayLike<number>, knownMean?: number): number | null {
  const v = sampleVariance(x, knownMean);
  return v === null ? null : Math.sqrt(v);
}
