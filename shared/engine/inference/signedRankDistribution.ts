/**
 * Exact null distribution of the Wilcoxon signed-rank statistic V (sum of the ranks of the
 * positive differences) for n untied, non-zero differences: every one of the 2ⁿ sign patterns is
 * equally likely, and the number of patterns with V = k is the number of subsets of {1, …, n}
 * summing to k, counted by the recurrence c_j(k) = c_{j−1}(k) + c_{j−1}(k − j) (Wilcoxon 1945,
 * Biometrics Bulletin 1(6):80–83). Counts stay exact in float64 for n < 50 (2⁵⁰ < 2⁵³).
 *
 * Written here because no maintained npm package provides it in a form we can check against R's
 * `psignrank`.
 */

const countsCache = new Map<number, Float64Array>();

/** Number of sign patterns with V = k, k = 0 … n(n+1)/2. */
export function signedRankCounts(n: number): Float64Array {
  const cached = countsCache.get(n);
  if (cached) return cached;
  const max = (n * (n + 1)) / 2;
  const c = new Float64Array(max + 1);
  c[0] = 1;
  let top = 0;
  for (let j = 1; j <= n; j++) {
    top += j;
    for (let k = top; k >= j; k--) c[k] = c[k]! + c[k - j]!;
  }
  countsCache.set(n, c);
  return c;
}

/** P(V ≤ v) for n untied non-zero differences (v may be any real; it is floored). */
export function signedRankCdf(v: number, n: number): number {
  const c = signedRankCounts(n);
  const max = c.length - 1;
  const k = Math.floor(v + 1e-7);
  if (k < 0) return 0;
  if (k >= max) return 1;
  let s = 0;
  // Sum the shorter tail for accuracy.
  if (k <= max / 2) {
    for (let i = 0; i <= k; i++) s += c[i]!;
    return s / 2 ** n;
  }
  for (let i = k + 1; i <= max; i++) s += c[i]!;
  return 1 - s / 2 ** n;
}

/** P(V ≥ v) for n untied non-zero differences, summed directly so small upper tails keep their precision. */
export function signedRankUpperTail(v: number, n: number): number {
  const c = signedRankCounts(n);
  const max = c.length - 1;
  const k = Math.ceil(v - 1e-7);
  if (k <= 0) return 1;
  if (k > max) return 0;
  let s = 0;
  for (let i = k; i <= max; i++) s += c[i]!;
  return s / 2 ** n;
}
