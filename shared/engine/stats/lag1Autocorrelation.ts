import { mean } from './mean';

/**
 * Lag-1 autocorrelation of a series in production order,
 * r₁ = Σᵢ₌₁ⁿ⁻¹ (xᵢ − x̄)(xᵢ₊₁ − x̄) / Σᵢ₌₁ⁿ (xᵢ − x̄)²
 * (NIST/SEMATECH e-Handbook of Statistical Methods, 1.3.5.12 "Autocorrelation"; certified on NIST
 * StRD univariate datasets). Returns null with a reason when n < 2 or all values are equal.
 */
export function lag1Autocorrelation(
  x: ArrayLike<number>,
  knownMean?: number,
): { value: number; reason: null } | { value: null; reason: string } {
  const n = x.length;
  if (n < 2) return { value: null, reason: 'needs at least 2 measurements' };
  const m = knownMean ?? (mean(x) as number);
  let num = 0;
  let den = 0;
  let prev = x[0]! - m;
  den += prev * prev;
  for (let i = 1; i < n; i++) {
    const d = x[i]! - m;
    num += prev * d;
    den += d * d;
    prev = d;
  }
  if (!(den > 0)) return { value: null, reason: 'all measurements are equal (zero spread)' };
  return { value: num / den, reason: null };
}
