import type { DescriptiveStatistics, Unit } from '../types';
import { quantiles } from './quantiles';

/** Descriptive statistics plus the first index of the smallest and of the largest value. */
export interface DescribedSeries {
  descriptive: DescriptiveStatistics;
  minIndex: number;
  maxIndex: number;
}

/**
 * Descriptive summary of a non-empty series in production order (see each function for its method).
 *
 * The passes of `mean`, `extent`, `sampleStandardDeviation` and `lag1Autocorrelation` fused into
 * three passes over the values, with every sum accumulated in the same order as those functions
 * do, so the results are bit-identical: (1) Σxᵢ with the min and max, (2) the mean's correction
 * Σ(xᵢ − x̄), (3) Σdᵢ, Σdᵢ² (which is also the lag-1 denominator) and Σdᵢdᵢ₊₁.
 */
export function describeSeries(x: ArrayLike<number>, unit: Unit): DescribedSeries {
  const n = x.length;
  let sum = 0;
  let min = x[0]!;
  let max = min;
  let minIndex = 0;
  let maxIndex = 0;
  for (let i = 0; i < n; i++) {
    const v = x[i]!;
    sum += v;
    if (v < min) {
      min = v;
      minIndex = i;
    } else if (v > max) {
      max = v;
      maxIndex = i;
    }
  }
  let m = sum / n;
  let correction = 0;
  for (let i = 0; i < n; i++) correction += x[i]! - m;
  m += correction / n;

  let ss = 0;
  let s = 0;
  let num = 0;
  let prev = x[0]! - m;
  for (let i = 0; i < n; i++) {
    const d = x[i]! - m;
    ss += d * d;
    s += d;
    if (i > 0) num += prev * d;
    prev = d;
  }
  let sd: number | null = null;
  if (n >= 2) {
    const v = (ss - (s * s) / n) / (n - 1);
    sd = Math.sqrt(v > 0 ? v : 0);
  }
  // lag-1: null when n < 2 or all values are equal (see lag1Autocorrelation)
  const r1 = n < 2 || !(ss > 0) ? null : num / ss;
  const [q1, med, q3] = quantiles(x, [0.25, 0.5, 0.75], { min, max }) as [number, number, number];
  return {
    descriptive: {
      n,
      mean: m,
      standardDeviation: sd,
      min,
      max,
      median: med,
      q1,
      q3,
      lag1Autocorrelation: r1,
      unit,
    },
    minIndex,
    maxIndex,
  };
}
