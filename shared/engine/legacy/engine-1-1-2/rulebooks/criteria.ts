/** Criterion builders shared by the rulebooks, with the sentences a quality engineer reads. */
import type { Criterion, MeanTestResult, Unit } from '../types';
import { formatNumber, formatPValue, formatQuantity } from '../../../format';
import { studentTQuantile } from '../../../distributions/studentT';

/**
 * λ = t(0.995; n − 1)/√n, the factor of the mean check x̄ ≥ Qn − λ·s (Directive 76/211/EEC
 * Annex II, 2.3; the one-sided t test of H0: μ = Qn against H1: μ < Qn at α = 0.005).
 * Annex II 2.3.3 prints 0.503 (n = 30), 0.379 (n = 50) and 0.640 (n = 20).
 */
export function meanCheckFactor(n: number): number {
  return studentTQuantile(0.995, n - 1) / Math.sqrt(n);
}

/** Counts net values strictly below a limit, keeping the first `keep` indices. */
export function countBelow(x: Float64Array, limit: number, keep = 100): { count: number; indices: number[] } {
  let count = 0;
  const indices: number[] = [];
  for (let i = 0; i < x.length; i++) {
    if (x[i]! < limit) {
      count++;
      if (indices.length < keep) indices.push(i);
    }
  }
  return { count, indices };
}

/** countBelow for the T1 and the T2 limit in one pass over the values (the same counts and indices). */
export function countBelowT1T2(
  x: Float64Array,
  t1Limit: number,
  t2Limit: number,
  keep = 100,
): [{ count: number; indices: number[] }, { count: number; indices: number[] }] {
  let c1 = 0;
  let c2 = 0;
  const i1: number[] = [];
  const i2: number[] = [];
  for (let i = 0; i < x.length; i++) {
    const v = x[i]!;
    if (v < t1Limit) {
      c1++;
      if (i1.length < keep) i1.push(i);
    }
    if (v < t2Limit) {
      c2++;
      if (i2.length < keep) i2.push(i);
    }
  }
  return [
    { count: c1, indices: i1 },
    { count: c2, indices: i2 },
  ];
}

/** Counts net values strictly above a limit. */
export function countAbove(x: Float64Array, limit: number): number {
  let count = 0;
  for (let i = 0; i < x.length; i++) if (x[i]! > limit) count++;
  return count;
}

/**
 * The mean check. With `factor` null (every pack of the lot measured) the lot mean is known and
 * the check is the plain x̄ ≥ Qn (Directive 76/211/EEC Annex I, 1.1).
 */
export function meanCriterion(mean: number, sd: number, n: number, qn: number, factor: number | null, unit: Unit): Criterion {
  const q = (v: number) => formatQuantity(v, unit);
  if (factor === null) {
    const passed = mean >= qn;
    return {
      id: 'mean',
      observed: mean,
      limit: qn,
      passed,
      sentence: `mean ${q(mean)} of all ${n} packs in the lot is ${passed ? 'at or above' : 'below'} the nominal quantity ${q(qn)}`,
    };
  }
  const limit = qn - factor * sd;
  const passed = mean >= limit;
  return {
    id: 'mean',
    observed: mean,
    limit,
    passed,
    sentence:
      `mean ${q(mean)} is ${passed ? 'at or above' : 'below'} the lower limit ${q(limit)} = ` +
      `${q(qn)} \u2212 ${formatNumber(factor, 3)} × ${q(sd)} (n = ${n})`,
  };
}

/**
 * The mean criterion of a rulebook whose mean check is the mean test itself (the custom rulebook):
 * the lot fails it when the test rejects H0, i.e. when p ≤ α. A rulebook asks for it with
 * `meanTestCriterionAt` in its judgement, and the evaluator builds it once the test has run.
 */
export function meanTestCriterion(t: MeanTestResult): Criterion {
  const passed = t.conclusion === 'fail to reject H0';
  return {
    id: 'mean',
    observed: t.pValue,
    limit: t.alpha,
    passed,
    sentence: `${t.method} test p = ${formatPValue(t.pValue)} ${passed ? '>' : '≤'} α = ${formatNumber(t.alpha)}: ${t.conclusion} (${t.alternative} alternative, μ₀ = ${formatNumber(t.hypothesisedMean)})`,
  };
}

/**
 * The warning on a tare sample whose spread is large against the TNE, or none; `tareSd` is the tare
 * sample's standard deviation and `tne` the TNE, both in the declared unit (`tareSd` null without a
 * tare sample of two or more). Given by every rulebook with a TNE (the custom rulebook has none).
 */
export function tareSpreadWarnings(tareSd: number | null, tne: number, unit: Unit): string[] {
  // Tare-sample spread against TNE: above 0.25 × TNE an average tare is not used but every pack's tare
  // is weighed — the limit of Brazil's INMETRO Portaria nº 248 of 17 July 2008 (for packaging over 5 %
  // of Qn; read as quoted by a secondary page, not from the Portaria's own text); other authorities
  // may set their own.
  if (tareSd === null || !(tareSd > 0.25 * tne)) return [];
  return [
    `the tare sample's standard deviation ${formatNumber(tareSd)} ${unit} exceeds 0.25 × TNE (${formatNumber(0.25 * tne)} ${unit}); weigh the tare of every pack instead (the limit of INMETRO Portaria nº 248/2008 for an average tare)`,
  ];
}

function packs(k: number): string {
  return k === 1 ? '1 pack' : `${k} packs`;
}

/** T1 count against an acceptance number (and a rejection number for a double plan's first sample). */
export function t1Criterion(
  count: number,
  t1Limit: number,
  tne: number,
  unit: Unit,
  accept: number,
  reject: number,
  planText: string,
): Criterion {
  const q = (v: number) => formatQuantity(v, unit);
  const passed: boolean | null = count <= accept ? true : count >= reject ? false : null;
  const head = `${packs(count)} below T1 = ${q(t1Limit)} (Qn \u2212 TNE ${q(tne)})`;
  let tail: string;
  if (passed === true) tail = `within the ${accept} allowed ${planText}`;
  else if (passed === false) tail = `more than the ${accept} allowed ${planText}`;
  else tail = `between the acceptance number ${accept} and the rejection number ${reject} ${planText}: a second sample decides`;
  return { id: 't1', observed: count, limit: accept, passed, sentence: `${head}: ${tail}` };
}

/** No pack may fall below T2 = Qn − 2·TNE (Directive 76/211/EEC Annex I, 1.3). */
export function t2Criterion(count: number, t2Limit: number, unit: Unit): Criterion {
  const q = (v: number) => formatQuantity(v, unit);
  const passed = count === 0;
  return {
    id: 't2',
    observed: count,
    limit: 0,
    passed,
    sentence: passed
      ? `no pack below T2 = ${q(t2Limit)} (Qn \u2212 2 × TNE)`
      : `${packs(count)} below T2 = ${q(t2Limit)} (Qn \u2212 2 × TNE); none is allowed`,
  };
}

export function sampleSizeCriterion(n: number, required: number, context: string): Criterion {
  const passed = n >= required;
  return {
    id: 'sample-size',
    observed: n,
    limit: required,
    passed,
    sentence: passed
      ? `${packs(n)} measured; the plan needs ${required} ${context}`
      : `only ${packs(n)} measured; the plan needs ${required} ${context}, so no decision is made`,
  };
}
