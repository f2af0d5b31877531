/**
 * The sentences a quality manager reads first: what to do with the lot, and why, from a verdict's
 * criteria and figures. One sentence per market (a verdict judged under several rulebooks gives
 * several); the statistics come after them, explained in plain words by `explainMeanTest`.
 * Pure: a verdict and the page's formats in, text out.
 */
import type { Criterion, MeanTestResult, Verdict } from '../../../shared/engine/types';
import { P_FLOOR, verdictQuantities, type Formats, type QuantityContext } from './format';

export type ReleaseAction = 'release' | 'hold' | 'sample-more' | 'no-decision';

export interface ReleaseDecision {
  /** The rulebook (market) the sentence is about. */
  market: string;
  rulebookId: string;
  action: ReleaseAction;
  sentence: string;
}

type Quantities = QuantityContext & { unit: string };

function packs(fmt: Formats, k: number): string {
  return k === 1 ? '1 pack is' : `${fmt.count(k)} packs are`;
}

/** "lot L-0412", or "this lot" where the lot code is not known yet (a preview). */
function lotName(lot: { lotCode?: string }): string {
  return lot.lotCode ? `lot ${lot.lotCode}` : 'this lot';
}

function allowed(fmt: Formats, k: number): string {
  return k === 0 ? 'none allowed' : `${fmt.count(k)} allowed`;
}

/** True for the custom rules' mean criterion, which is the mean test's own conclusion (p against α). */
function isMeanTestCriterion(c: Criterion, t: MeanTestResult): boolean {
  return c.id === 'mean' && c.observed === t.pValue && c.limit === t.alpha;
}

const DIRECTION = { less: 'below', greater: 'above', 'two-sided': 'different from' } as const;

/** Why a criterion fails, as a clause: "the mean is 2.9 g below the limit of 497.3 g". */
function failureClause(c: Criterion, v: Verdict, fmt: Formats, q: Quantities): string {
  const t = v.statistics.meanTest;
  switch (c.id) {
    case 'mean': {
      if (isMeanTestCriterion(c, t)) {
        return `the mean ${fmt.quantity(t.mean, q.unit, q)} is ${DIRECTION[t.alternative]} ${fmt.quantity(t.hypothesisedMean, q.unit, { ...q, declared: [...(q.declared ?? []), t.hypothesisedMean] })} by more than chance explains (${fmt.pEquals(t.pValue)}, α = ${fmt.plain(t.alpha)})`;
      }
      const what = c.limit === v.net.nominalQuantity ? 'the nominal quantity' : 'the limit';
      const gap = c.limit - c.observed;
      // A gap that rounds to nothing at the verdict's step still fails: say so rather than "0.0 g below".
      if (Number(gap.toFixed(q.decimals)) === 0) return `the mean is just below ${what} of ${fmt.quantity(c.limit, q.unit, q)}`;
      return `the mean is ${fmt.quantity(gap, q.unit, q)} below ${what} of ${fmt.quantity(c.limit, q.unit, q)}`;
    }
    case 't1':
      return `${packs(fmt, c.observed)} short by more than the tolerable negative error (${allowed(fmt, c.limit)})`;
    case 't2':
      return `${packs(fmt, c.observed)} short by more than twice the tolerable negative error (none allowed)`;
    case 'lower-limit':
      return `${packs(fmt, c.observed)} below the lower limit of the custom rules (${allowed(fmt, c.limit)})`;
    case 'upper-limit':
      return `${packs(fmt, c.observed)} above the upper limit of the custom rules (${allowed(fmt, c.limit)})`;
    case 'sample-size':
      return `only ${fmt.count(c.observed)} packs were measured where the plan needs ${fmt.count(c.limit)}`;
  }
}

/** The decision of one market's verdict, in one sentence. */
export function releaseDecision(v: Verdict, lot: { lotCode?: string }, fmt: Formats, resolution?: number | null): ReleaseDecision {
  const q = verdictQuantities(v.net, resolution);
  const head = { market: v.rulebook.title, rulebookId: v.rulebook.id };
  switch (v.decision) {
    case 'conforming':
      return { ...head, action: 'release', sentence: `Release: the lot meets every criterion of ${v.rulebook.title}.` };
    case 'nonconforming': {
      const reasons = v.criteria.filter((c) => c.passed === false).map((c) => failureClause(c, v, fmt, q));
      const why = reasons.length ? reasons.join('; ') : `the lot does not meet ${v.rulebook.title}`;
      return { ...head, action: 'hold', sentence: `Hold: ${why}.` };
    }
    case 'second-sample-required': {
      const more = v.secondSample ? `${fmt.count(v.secondSample.additionalPacks)} more packs` : 'a second sample';
      const open = v.criteria.find((c) => c.passed === null && c.id === 't1');
      const why = open ? `; ${packs(fmt, open.observed)} short by more than the tolerable negative error` : '';
      return { ...head, action: 'sample-more', sentence: `Take ${more} from ${lotName(lot)}: the first sample alone cannot decide${why}.` };
    }
    case 'insufficient-data': {
      const size = v.criteria.find((c) => c.id === 'sample-size' && c.passed === false);
      if (!size) return { ...head, action: 'no-decision', sentence: `No decision: the measurements of ${lotName(lot)} are not enough for ${v.rulebook.title}.` };
      return {
        ...head,
        action: 'no-decision',
        sentence: `No decision: ${fmt.count(size.observed)} packs were measured where the plan needs ${fmt.count(size.limit)}; measure at least ${fmt.count(size.limit)} packs of ${lotName(lot)} and submit the lot again.`,
      };
    }
  }
}

/** One sentence per market the lot was judged for, in the order given. */
export function releaseDecisions(verdicts: readonly Verdict[], lot: { lotCode?: string }, fmt: Formats, resolution?: number | null): ReleaseDecision[] {
  return verdicts.map((v) => releaseDecision(v, lot, fmt, resolution));
}

/** The mean test, in words a reader without statistics can follow. */
export function explainMeanTest(t: MeanTestResult, fmt: Formats, q: Quantities): string {
  const target = fmt.quantity(t.hypothesisedMean, q.unit, { ...q, declared: [...(q.declared ?? []), t.hypothesisedMean] });
  const mean = fmt.quantity(t.mean, q.unit, q);
  const side = DIRECTION[t.alternative];
  const shown = t.conclusion === 'reject H0';
  const verdict = shown
    ? `the sample shows that the lot’s mean is ${side} ${target}`
    : `the sample gives no evidence that the lot’s mean is ${side} ${target}`;
  if (t.statistic === null) {
    return `Every pack of the sample has the same net quantity, so there is no spread to test: the mean ${mean} was compared with ${target} directly, and ${verdict}.`;
  }
  const chance = t.pValue < P_FLOOR ? `below ${fmt.fixed(P_FLOOR, 4)}` : `of ${fmt.pValue(t.pValue)}`;
  const observed =
    t.alternative === 'less' ? `of ${mean} or lower` : t.alternative === 'greater' ? `of ${mean} or higher` : `at least as far from ${target} as ${mean}`;
  const stat = `${t.method === 'one-sample t' ? 't' : 'z'} = ${fmt.statistic(t.statistic)}${t.degreesOfFreedom === null ? '' : `, ${fmt.count(t.degreesOfFreedom)} degrees of freedom`}`;
  const against = shown ? 'at or below' : 'above';
  return (
    `If the lot’s true mean were exactly ${target}, a sample mean ${observed} would come up by chance with a probability ${chance} (${stat}). ` +
    `That is ${against} the ${fmt.plain(t.alpha)} the rules accept as chance, so ${verdict}.`
  );
}
