/**
 * Arithmetic mean, x̄ = Σxᵢ / n, with a second correction pass (x̄ += Σ(xᵢ − x̄) / n), which
 * recovers the rounding error of the first sum (the "corrected two-pass" idea of Chan, Golub &
 * LeVeque 1983, The American Statistician 37(3)). Exact on NIST StRD NumAcc1–4.
 * Returns null for an empty sample.
 */
export function mean(x: ArrayLike<number>): number | null {
  const n = x.length;
  if (n === 0) return null;
  let sum = 0;
  for (let i = 0; i < n; i++) sum += x[i]!;
  let m = sum / n;
  let correction = 0;
  for (let i = 0; i < n; i++) correction += x[i]! - m;
  m += correction / n;
  return m;
}
