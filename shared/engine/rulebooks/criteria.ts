/** Criterion builders shared by the rulebooks, with the sentences a quality engineer reads. Each criterion carries its clause. */
import type { Criterion, MeanTestResult, Unit } from '../types';
import { formatNumber, formatPValue, formatQuantity } from '../format';
import { studentTQuantile } from '../distributions/studentT';

/**
 * λ = t(0.995; n − 1)/√n, the factor of the mean check x̄ ≥ Qn − λ·s (Directive 76/211/EEC
 * Annex II, 2.3; the one-sided t test of H0: μ = Qn against H1: μ < Qn at α = 0.005).
 * Annex II 2.3.3 prints 0.503 (n = 30), 0.379 (n = 50) and 0.640 (n = 20); where a rulebook's text
 * prints λ for n, the rulebook uses the printed value instead (see `meanFactor`).
 */
export function meanCheckFactor(n: number): number {
  return studentTQuantile(0.995, n - 1) / Math.sqrt(n);
}

/** A factor of a mean criterion with how it was found: printed in the text, or computed (or interpolated) where nothing is printed. */
export interface MeanFactor {
  value: number;
  how: 'printed' | 'computed' | 'interpolated';
  /** Where the printed value is printed, or how it was computed. */
  source: string;
}

/** The printed λ for n when `printed` lists it, else t(0.995; n − 1)/√n computed. */
export function meanFactor(n: number, printed: Readonly<Record<number, number>>, printedIn: string): MeanFactor {
  const p = printed[n];
  if (p !== undefined) return { value: p, how: 'printed', source: printedIn };
  return { value: meanCheckFactor(n), how: 'computed', source: `t(0.995; ${n - 1})/√${n} computed: the text prints no factor for n = ${n}` };
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

function memo(fromMemory: boolean | undefined): { fromMemory?: true } {
  return fromMemory ? { fromMemory: true } : {};
}

/**
 * The mean check x̄ ≥ Qn − λ·s. With `factor` null (every pack of the lot measured) the lot mean
 * is known and the check is the plain x̄ ≥ Qn (Directive 76/211/EEC Annex I, 1.1).
 */
export function meanCriterion(
  mean: number,
  sd: number,
  n: number,
  qn: number,
  factor: MeanFactor | null,
  unit: Unit,
  clause: string,
  fromMemory?: boolean,
): Criterion {
  const q = (v: number) => formatQuantity(v, unit);
  if (factor === null) {
    const passed = mean >= qn;
    return {
      id: 'mean',
      observed: mean,
      limit: qn,
      passed,
      sentence: `mean ${q(mean)} of all ${n} packs in the lot is ${passed ? 'at or above' : 'below'} the nominal quantity ${q(qn)}`,
      clause,
      ...memo(fromMemory),
    };
  }
  const limit = qn - factor.value * sd;
  const passed = mean >= limit;
  return {
    id: 'mean',
    observed: mean,
    limit,
    passed,
    sentence:
      `mean ${q(mean)} is ${passed ? 'at or above' : 'below'} the lower limit ${q(limit)} = ` +
      `${q(qn)} \u2212 ${formatNumber(factor.value, 4)} × ${q(sd)} (n = ${n}; factor ${factor.how === 'printed' ? `as printed in ${factor.source}` : factor.source})`,
    clause,
    ...memo(fromMemory),
  };
}

/**
 * The mean criterion of a rulebook whose mean check is the mean test itself (the custom rulebook):
 * the lot fails it when the test rejects H0, i.e. when p ≤ α. A rulebook asks for it with
 * `meanTestCriterionAt` in its judgement, and the evaluator builds it once the test has run.
 */
export function meanTestCriterion(t: MeanTestResult, clause: string): Criterion {
  const passed = t.conclusion === 'fail to reject H0';
  return {
    id: 'mean',
    observed: t.pValue,
    limit: t.alpha,
    passed,
    sentence: `${t.method} test p = ${formatPValue(t.pValue)} ${passed ? '>' : '≤'} α = ${formatNumber(t.alpha)}: ${t.conclusion} (${t.alternative} alternative, μ₀ = ${formatNumber(t.hypothesisedMean)})`,
    clause,
  };
}

/**
 * A rule on the spread of a tare sample when an average tare is used: a warning when the tare
 * sample's standard deviation exceeds `factor` × TNE, applied only under the rule's conditions.
 */
export interface TareSpreadRule {
  factor: number;
  /** The rule applies only when the mean tare exceeds this fraction of Qn. */
  minPackagingFraction: number;
  /** The rule applies only to a tare sample of at least this many packs. */
  minTareSample: number;
  /** Whose rule it is, and whether it binds in the rulebook's market. */
  source: string;
}

/**
 * Brazil's rule (INMETRO Portaria nº 248 of 17 July 2008, as quoted by a secondary page, not read in
 * the Portaria's own text): an average tare is not used when the spread of a 25-pack tare sample
 * exceeds 0.25 × TNE and the packaging exceeds 5 % of the nominal content. No rulebook shipped here
 * is Brazil's: those that carry it give it as advice (markets.md §1.8).
 */
export const INMETRO_TARE_SPREAD_ADVICE: TareSpreadRule = {
  factor: 0.25,
  minPackagingFraction: 0.05,
  minTareSample: 25,
  source: "advice only, not this market's rule: Brazil's INMETRO Portaria nº 248/2008 (packaging over 5 % of Qn, tare sample of 25)",
};

/** The rule's warning, or none (no rule, no tare sample, or its conditions not met). All quantities in the declared unit. */
export function tareSpreadWarnings(
  rule: TareSpreadRule | null,
  tare: { standardDeviation: number | null; mean: number | null; count: number },
  tne: number,
  qn: number,
  unit: Unit,
): string[] {
  if (rule === null || tare.standardDeviation === null || tare.mean === null) return [];
  if (tare.count < rule.minTareSample || !(tare.mean > rule.minPackagingFraction * qn)) return [];
  if (!(tare.standardDeviation > rule.factor * tne)) return [];
  return [
    `the tare sample's standard deviation ${formatNumber(tare.standardDeviation)} ${unit} exceeds ${formatNumber(rule.factor)} × TNE (${formatNumber(rule.factor * tne)} ${unit}); weigh the tare of every pack instead (${rule.source})`,
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
  clause: string,
  fromMemory?: boolean,
  names: { limit: string; tne: string } = { limit: 'T1', tne: 'TNE' },
): Criterion {
  const q = (v: number) => formatQuantity(v, unit);
  const passed: boolean | null = count <= accept ? true : count >= reject ? false : null;
  const head = `${packs(count)} below ${names.limit} = ${q(t1Limit)} (Qn \u2212 ${names.tne} ${q(tne)})`;
  let tail: string;
  if (passed === true) tail = `within the ${accept} allowed ${planText}`;
  else if (passed === false) tail = `more than the ${accept} allowed ${planText}`;
  else tail = `between the acceptance number ${accept} and the rejection number ${reject} ${planText}: a second sample decides`;
  return { id: 't1', observed: count, limit: accept, passed, sentence: `${head}: ${tail}`, clause, ...memo(fromMemory) };
}

/** Packs below T2 = Qn − 2·TNE against the number the rulebook allows (0 in the EU: Directive 76/211/EEC Annex I, 1.3). */
export function t2Criterion(count: number, t2Limit: number, unit: Unit, allowed: number, clause: string, tneName = 'TNE'): Criterion {
  const q = (v: number) => formatQuantity(v, unit);
  const passed = count <= allowed;
  const head = `${count === 0 ? 'no pack' : packs(count)} below T2 = ${q(t2Limit)} (Qn \u2212 2 × ${tneName})`;
  const tail = allowed === 0 ? (passed ? '' : '; none is allowed') : `; ${passed ? 'within' : 'more than'} the ${allowed} allowed`;
  return { id: 't2', observed: count, limit: allowed, passed, sentence: head + tail, clause };
}

export function sampleSizeCriterion(n: number, required: number, context: string, clause: string, fromMemory?: boolean): Criterion {
  const passed = n >= required;
  return {
    id: 'sample-size',
    observed: n,
    limit: required,
    passed,
    sentence: passed
      ? `${packs(n)} measured; the plan needs ${required} ${context}`
      : `only ${packs(n)} measured; the plan needs ${required} ${context}, so no decision is made`,
    clause,
    ...memo(fromMemory),
  };
}
