/**
 * Grubbs' test for one outlier (Grubbs 1969, "Procedures for detecting outlying observations in
 * samples", Technometrics 11(1):1–21), two-sided: G = max |xᵢ − x̄| / s. Under normality,
 * t = √(n(n − 2)G² / ((n − 1)² − nG²)) follows t(n − 2) for a given point, and the p-value is
 * the Bonferroni bound min(1, 2n·P(T > t)) (exact whenever it is below about 0.5 in practice).
 * The engine only flags the pack; it never removes it from the data.
 */
import type { Maybe } from '../result';
import { none, some } from '../result';
import { studentTUpperTail } from '../distributions/studentT';

export interface GrubbsResult {
  statistic: number;
  pValue: number;
  /** 0-based index of the most extreme measurement. */
  index: number;
  value: number;
}

/** The most extreme pack is the minimum or the maximum; pass the extent to find it without a full scan of deviations. */
export function grubbs(
  x: ArrayLike<number>,
  mean: number,
  standardDeviation: number,
  extent?: { min: number; max: number; minIndex?: number; maxIndex?: number },
): Maybe<GrubbsResult> {
  const n = x.length;
  if (n < 3) return none('Grubbs’ test needs at least 3 measurements');
  if (!(standardDeviation > 0)) return none('all measurements are equal, so there is no outlier to test');
  let lo = extent?.min;
  let hi = extent?.max;
  if (lo === undefined || hi === undefined) {
    lo = Infinity;
    hi = -Infinity;
    for (let i = 0; i < n; i++) {
      if (x[i]! < lo) lo = x[i]!;
      if (x[i]! > hi) hi = x[i]!;
    }
  }
  const dLo = mean - lo;
  const dHi = hi - mean;
  const maxDev = Math.max(dLo, dHi);
  // first pack whose deviation is the largest (either end when they tie)
  let index = 0;
  const known = extent?.minIndex !== undefined && extent.maxIndex !== undefined;
  if (known) {
    // the caller knows the first index of the min and of the max: the same pack the scan finds
    const a = dLo === maxDev ? extent!.minIndex! : n;
    const b = dHi === maxDev ? extent!.maxIndex! : n;
    index = Math.min(a, b);
  }
  for (let i = 0; !known && i < n; i++) {
    const v = x[i]!;
    if ((v === lo && dLo === maxDev) || (v === hi && dHi === maxDev)) {
      index = i;
      break;
    }
  }
  const g = maxDev / standardDeviation;
  const denom = (n - 1) * (n - 1) - n * g * g;
  // denom ≤ 0 only at G's attainable maximum (n − 1)/√n, where the t statistic is unbounded.
  const pValue = denom > 0 ? Math.min(1, 2 * n * studentTUpperTail(Math.sqrt((n * (n - 2) * g * g) / denom), n - 2)) : 0;
  return some({ statistic: g, pValue, index, value: x[index]! });
}
