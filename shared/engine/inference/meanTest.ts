/**
 * One-sample tests of a mean: Student's t test (Student 1908, Biometrika 6:1–25) when the process
 * standard deviation is estimated from the sample, and the z test when it is known.
 *
 *   t = (x̄ − μ₀) / (s/√n), df = n − 1;   z = (x̄ − μ₀) / (σ/√n)
 *
 * p-values by alternative: less P(T ≤ t), greater P(T ≥ t), two-sided 2·P(T ≥ |t|); the
 * confidence bound or interval at 1 − α is the set of μ₀ the test would not reject (the same
 * construction as R's `t.test`). Zero spread (s = 0) has no t statistic: the decision is then the
 * plain comparison of x̄ with μ₀ (p = 0 when x̄ lies strictly on the side of the alternative, else 1).
 */
import type { Alternative, MeanTestResult } from '../types';
import type { Maybe } from '../result';
import { none, some } from '../result';
import { studentTLowerTail, studentTQuantile } from '../distributions/studentT';
import { standardNormalCdf, standardNormalQuantile } from '../distributions/normal';
import { mean } from '../stats/mean';
import { sampleStandardDeviation } from '../stats/variance';
import { formatNumber, formatPValue, formatQuantity } from '../format';

export interface MeanTestOptions {
  hypothesisedMean: number;
  alternative: Alternative;
  /** Significance level in (0, 1). */
  alpha: number;
  /** Unit used in the sentence. */
  unit?: string;
}

export interface SampleSummary {
  n: number;
  mean: number;
  standardDeviation: number;
}

function pValueOf(stat: number, alternative: Alternative, cdf: (x: number) => number): number {
  if (alternative === 'less') return cdf(stat);
  if (alternative === 'greater') return cdf(-stat);
  return Math.min(1, 2 * cdf(-Math.abs(stat)));
}

function degeneratePValue(diff: number, alternative: Alternative): number {
  if (alternative === 'less') return diff < 0 ? 0 : 1;
  if (alternative === 'greater') return diff > 0 ? 0 : 1;
  return diff !== 0 ? 0 : 1;
}

function hypothesisText(alternative: Alternative, mu0: string): string {
  if (alternative === 'less') return `H1: μ < ${mu0}`;
  if (alternative === 'greater') return `H1: μ > ${mu0}`;
  return `H1: μ ≠ ${mu0}`;
}

function validateOptions(n: number, opts: MeanTestOptions): string | null {
  if (!Number.isInteger(n) || n < 2) return 'a one-sample test needs at least 2 measurements';
  if (!Number.isFinite(opts.hypothesisedMean)) return 'the hypothesised mean must be a finite number';
  if (!(opts.alpha > 0 && opts.alpha < 1)) return 'alpha must lie strictly between 0 and 1';
  return null;
}

function build(
  method: MeanTestResult['method'],
  summary: SampleSummary,
  sd: number,
  df: number | null,
  opts: MeanTestOptions,
  cdf: (x: number) => number,
  quantile: (p: number) => number,
): MeanTestResult {
  const { n } = summary;
  const mu0 = opts.hypothesisedMean;
  const { alternative, alpha } = opts;
  const se = sd / Math.sqrt(n);
  const diff = summary.mean - mu0;
  const degenerate = !(se > 0);
  const statistic = degenerate ? null : diff / se;
  const pValue = statistic === null ? degeneratePValue(diff, alternative) : pValueOf(statistic, alternative, cdf);
  let confidenceLower: number | null = null;
  let confidenceUpper: number | null = null;
  if (alternative === 'less') {
    confidenceUpper = summary.mean + (degenerate ? 0 : quantile(1 - alpha) * se);
  } else if (alternative === 'greater') {
    confidenceLower = summary.mean - (degenerate ? 0 : quantile(1 - alpha) * se);
  } else {
    const half = degenerate ? 0 : quantile(1 - alpha / 2) * se;
    confidenceLower = summary.mean - half;
    confidenceUpper = summary.mean + half;
  }
  const conclusion = pValue <= alpha ? 'reject H0' : 'fail to reject H0';
  const unit = opts.unit ?? '';
  const q = (v: number) => (unit ? formatQuantity(v, unit) : formatNumber(v));
  const statText =
    statistic === null
      ? 'zero spread, so no test statistic; decided by comparing the mean directly'
      : `${method === 'one-sample t' ? 't' : 'z'} = ${formatNumber(statistic, 4)}${df === null ? '' : ` with ${df} degrees of freedom`}`;
  const sentence =
    `${method} test of H0: μ = ${q(mu0)} against ${hypothesisText(alternative, q(mu0))}: mean ${q(summary.mean)}, ` +
    `${statText}, p = ${formatPValue(pValue)}; at α = ${formatNumber(alpha)} ${conclusion}.`;
  return {
    method,
    n,
    mean: summary.mean,
    standardDeviation: sd,
    standardError: se,
    hypothesisedMean: mu0,
    alternative,
    alpha,
    statistic,
    degreesOfFreedom: df,
    pValue,
    confidenceLevel: 1 - alpha,
    confidenceLower,
    confidenceUpper,
    meanDifference: diff,
    shortfall: diff < 0 ? -diff : 0,
    effectSize: sd > 0 ? diff / sd : null,
    conclusion,
    sentence,
  };
}

/** Student's one-sample t test from summary statistics (n, x̄, s). */
export function tTestFromSummary(summary: SampleSummary, opts: MeanTestOptions): Maybe<MeanTestResult> {
  const bad = validateOptions(summary.n, opts);
  if (bad) return none(bad);
  if (!Number.isFinite(summary.mean)) return none('the mean must be a finite number');
  if (!(summary.standardDeviation >= 0) || !Number.isFinite(summary.standardDeviation)) {
    return none('the standard deviation must be a finite number ≥ 0');
  }
  const df = summary.n - 1;
  return some(
    build(
      'one-sample t',
      summary,
      summary.standardDeviation,
      df,
      opts,
      (t) => studentTLowerTail(t, df),
      (p) => studentTQuantile(p, df),
    ),
  );
}

/** Student's one-sample t test from raw measurements. */
export function tTest(x: ArrayLike<number>, opts: MeanTestOptions): Maybe<MeanTestResult> {
  if (x.length < 2) return none('a one-sample t test needs at least 2 measurements');
  const m = mean(x) as number;
  const s = sampleStandardDeviation(x, m) as number;
  return tTestFromSummary({ n: x.length, mean: m, standardDeviation: s }, opts);
}

/** One-sample z test with a known process standard deviation σ. */
export function zTestFromSummary(
  summary: { n: number; mean: number },
  knownStandardDeviation: number,
  opts: MeanTestOptions,
): Maybe<MeanTestResult> {
  const bad = validateOptions(summary.n, opts);
  if (bad) return none(bad);
  if (!(knownStandardDeviation > 0) || !Number.isFinite(knownStandardDeviation)) {
    return none('the known standard deviation must be a finite number > 0');
  }
  return some(
    build(
      'one-sample z',
      { ...summary, standardDeviation: knownStandardDeviation },
      knownStandardDeviation,
      null,
      opts,
      standardNormalCdf,
      standardNormalQuantile,
    ),
  );
}
