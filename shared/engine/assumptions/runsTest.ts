/**
 * Runs test about the median (Wald & Wolfowitz 1940, "On a test whether two samples are from the
 * same population", Annals of Mathematical Statistics 11:147–162), applied to measurements in
 * production order: each value is coded above or below the sample median (values equal to the
 * median are dropped), and the number of runs R is compared with its distribution under random
 * order. Too few runs suggest drift or clustering, too many suggest alternation.
 *
 * With n₁ values above and n₂ below (N = n₁ + n₂): E[R] = 1 + 2n₁n₂/N,
 * Var[R] = 2n₁n₂(2n₁n₂ − N) / (N²(N − 1)). The p-value (two-sided) is exact from the
 * combinatorial distribution of R when N ≤ 60, else from the normal approximation.
 */
import type { Maybe } from '../result';
import { none, some } from '../result';
import { standardNormalCdf } from '../distributions/normal';

export interface RunsTestResult {
  runs: number;
  above: number;
  below: number;
  expectedRuns: number;
  /** Standardised statistic (R − E[R]) / √Var[R]. */
  statistic: number;
  pValue: number;
  method: 'exact' | 'normal approximation';
}

/** Binomial coefficient C(n, k) in floating point (exact while below 2⁵³). */
function choose(n: number, k: number): number {
  if (k < 0 || k > n) return 0;
  const kk = Math.min(k, n - k);
  let c = 1;
  for (let i = 1; i <= kk; i++) c = (c * (n - kk + i)) / i;
  return c;
}

/** P(R = r) for n1 and n2 symbols in random order (Wald & Wolfowitz 1940). */
function runsProbability(r: number, n1: number, n2: number): number {
  const total = choose(n1 + n2, n1);
  if (r % 2 === 0) {
    const k = r / 2;
    return (2 * choose(n1 - 1, k - 1) * choose(n2 - 1, k - 1)) / total;
  }
  const k = (r - 1) / 2;
  return (choose(n1 - 1, k - 1) * choose(n2 - 1, k) + choose(n1 - 1, k) * choose(n2 - 1, k - 1)) / total;
}

/** Runs test about `center` (normally the sample median) of a series in production order. */
export function runsTestAbout(x: ArrayLike<number>, center: number): Maybe<RunsTestResult> {
  let above = 0;
  let below = 0;
  let runs = 0;
  let last = 0;
  // Without data-dependent branches (random order is the common case, where they mispredict):
  // side is +1 above, −1 below and 0 on the center, which neither counts nor starts a run.
  for (let i = 0; i < x.length; i++) {
    const v = x[i]!;
    const up = +(v > center);
    const down = +(v < center);
    const side = up - down;
    const off = up | down;
    above += up;
    below += down;
    runs += off & +(side !== last);
    last += off * (side - last);
  }
  if (above === 0 || below === 0) return none('no values on one side of the median, so runs cannot be counted');
  const N = above + below;
  const prod = 2 * above * below;
  const expectedRuns = 1 + prod / N;
  const variance = (prod * (prod - N)) / (N * N * (N - 1));
  const statistic = variance > 0 ? (runs - expectedRuns) / Math.sqrt(variance) : 0;
  let pValue: number;
  let method: RunsTestResult['method'];
  if (N <= 60) {
    let lower = 0;
    let upper = 0;
    const maxRuns = 2 * Math.min(above, below) + (above === below ? 0 : 1);
    for (let r = 2; r <= maxRuns; r++) {
      const pr = runsProbability(r, above, below);
      if (r <= runs) lower += pr;
      if (r >= runs) upper += pr;
    }
    pValue = Math.min(1, 2 * Math.min(lower, upper));
    method = 'exact';
  } else {
    pValue = Math.min(1, 2 * standardNormalCdf(-Math.abs(statistic)));
    method = 'normal approximation';
  }
  return some({ runs, above, below, expectedRuns, statistic, pValue, method });
}
