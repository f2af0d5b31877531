// Student's t density for drawing the test's reference distribution (not for deciding anything:
// the engine computes every p-value). f(t) = Γ((ν+1)/2) / (√(νπ) Γ(ν/2)) · (1 + t²/ν)^(−(ν+1)/2),
// with ln Γ by the Lanczos approximation (g = 7, n = 9; Lanczos 1964, SIAM J. Numer. Anal. B 1:86–96).
const LANCZOS = [
  0.99999999999980993, 676.5203681218851, -1259.1392167224028, 771.32342877765313, -176.61503916999185, 12.507343278686905,
  -0.13857109526572012, 9.9843695780195716e-6, 1.5056327351493116e-7,
];

export function logGamma(x: number): number {
  if (x < 0.5) return Math.log(Math.PI / Math.abs(Math.sin(Math.PI * x))) - logGamma(1 - x);
  const z = x - 1;
  let a = LANCZOS[0]!;
  const t = z + 7.5;
  for (let i = 1; i < 9; i++) a += LANCZOS[i]! / (z + i);
  return 0.5 * Math.log(2 * Math.PI) + (z + 0.5) * Math.log(t) - t + Math.log(a);
}

/** Density of t(ν) at t; ν = null means the standard normal (the z test). */
export function tDensity(t: number, df: number | null): number {
  if (df === null || df > 1e7) return Math.exp(-0.5 * t * t) / Math.sqrt(2 * Math.PI);
  const c = logGamma((df + 1) / 2) - logGamma(df / 2) - 0.5 * Math.log(df * Math.PI);
  return Math.exp(c - ((df + 1) / 2) * Math.log1p((t * t) / df));
}

/** Which side(s) of the statistic the p-value area covers, for the alternative of the test. */
export function inTail(x: number, statistic: number, alternative: 'less' | 'greater' | 'two-sided'): boolean {
  if (alternative === 'less') return x <= statistic;
  if (alternative === 'greater') return x >= statistic;
  return Math.abs(x) >= Math.abs(statistic);
}
