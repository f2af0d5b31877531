/**
 * Rulebook `eu-76-211`: the average system of EU Council Directive 76/211/EEC of 20 January 1976,
 * as amended by Commission Directive 78/891/EEC (carried into UK law by the Weights and Measures
 * (Packaged Goods) Regulations 2006, Schedule 2).
 *
 * - TNE table and its round-up rule: Annex I, 2.4 (see ./tne.ts).
 * - Defective units (below T1) against the sampling plans of Annex II, 2.2: non-destructive double
 *   plan 2.2.1 by lot size; destructive single plan 2.2.2 (20 packs, accept ≤ 1, reject ≥ 2).
 * - No pack below T2: Annex I, 1.3.
 * - A warning when the tare sample's spread exceeds 0.25 × TNE (see `tareSpreadWarnings`).
 * - Mean check x̄ ≥ Qn − t(0.995; n − 1)·s/√n: Annex II, 2.3; sample sizes 30 (non-destructive,
 *   lot 100 to 500), 50 (non-destructive, over 500), 20 (destructive).
 * - Lots under 100 packs: non-destructive checking is 100 %, destructive testing is not used
 *   (Annex II, 2.1).
 * - Parameter `nonDestructivePlan: 'single'`: the single sampling plan the UK reference test offers
 *   beside the double one (SI 2006/659 Schedule 2, para 3.3–3.5, as made): lots 100–500 → 50 packs,
 *   accept ≤ 3, reject ≥ 4; 501–3 200 → 80, 5 / 6; 3 201 and over → 125, 7 / 8. No second sample.
 *
 * Choices the Directive leaves open, made here and stated in the verdict:
 * - every measured pack is used: λ is computed for the actual n (equal to the printed factor when
 *   n is the Annex's sample size), and a sample larger than the plan's is judged with the plan's
 *   acceptance number (stricter than the plan, never laxer);
 * - when every pack of the lot is measured, the lot mean is known, so the mean check is x̄ ≥ Qn
 *   (as the UK reference test says for lots under 100: SI 2006/659 Schedule 2, para 4.7). The
 *   Directive gives no T1 allowance for a check of every pack. For a lot under 100 packs the UK
 *   reference test accepts the lot when the defectives do not exceed 5 % of it (SI 2006/659
 *   Schedule 2, para 3.6, as made), and that is used here; for a lot of 100 or more measured in
 *   full no text gives a number, and 2.5 % of the lot is used — common practice, the proportion the
 *   Annex II plans are built around (from memory; verify);
 * - after a second sample the mean check and the T2 check use both samples together.
 */
import type { LotInput, RulebookInfo } from '../types';
import type { Judgement, JudgeContext, Rulebook } from './types';
import { engineError } from '../../../errors';
import { tolerableNegativeError } from './tne';
import {
  countBelow,
  countBelowT1T2,
  meanCheckFactor,
  meanCriterion,
  sampleSizeCriterion,
  t1Criterion,
  t2Criterion,
  tareSpreadWarnings,
} from './criteria';

export const EU_76_211_INFO: RulebookInfo = {
  id: 'eu-76-211',
  version: '1976-78.2',
  title: 'EU average system for prepackages (Directive 76/211/EEC)',
  source:
    'Council Directive 76/211/EEC of 20 January 1976, as amended by Commission Directive 78/891/EEC: Annex I 1.1–1.3, 2.2, 2.4; Annex II 2.1–2.3; for lots under 100 checked in full and the optional single plan, UK SI 2006/659 Schedule 2 para 3.3–3.6 (as made)',
  provenance:
    'TNE table, sampling plans and mean-check factors as printed in the Directive (Annex I 2.4, Annex II 2.2, 2.3). A lot under 100 packs checked in full may have defectives up to 5 % of the lot, as in the UK reference test (SI 2006/659 Schedule 2, para 3.6, as made); the 2.5 % T1 allowance for a lot of 100 or more checked in full is common practice (from memory; verify).',
  parameters: [
    {
      name: 'nonDestructivePlan',
      type: 'string',
      description: "non-destructive sampling plan: 'double' (Directive Annex II 2.2.1) or 'single' (UK SI 2006/659 Schedule 2, para 3.3–3.5)",
      default: 'double',
      allowed: ['double', 'single'],
    },
  ],
};

export interface StagePlan {
  n: number;
  accept: number;
  reject: number;
}

export type EuPlan =
  | { kind: 'full' }
  | { kind: 'single'; first: StagePlan; meanN: number; source: string }
  | { kind: 'double'; first: StagePlan; second: StagePlan; meanN: number };

/** Directive 76/211/EEC Annex II 2.2.1: non-destructive double sampling plan by lot size. */
export const EU_DOUBLE_PLANS: readonly { minLot: number; maxLot: number; first: StagePlan; second: StagePlan }[] = [
  { minLot: 100, maxLot: 500, first: { n: 30, accept: 1, reject: 3 }, second: { n: 30, accept: 4, reject: 5 } },
  { minLot: 501, maxLot: 3200, first: { n: 50, accept: 2, reject: 5 }, second: { n: 50, accept: 6, reject: 7 } },
  { minLot: 3201, maxLot: Number.POSITIVE_INFINITY, first: { n: 80, accept: 3, reject: 7 }, second: { n: 80, accept: 8, reject: 9 } },
];

/** UK SI 2006/659 Schedule 2 para 3.3–3.5 (as made): the non-destructive single sampling plan by lot size. */
export const UK_SINGLE_PLANS: readonly { minLot: number; maxLot: number; plan: StagePlan }[] = [
  { minLot: 100, maxLot: 500, plan: { n: 50, accept: 3, reject: 4 } },
  { minLot: 501, maxLot: 3200, plan: { n: 80, accept: 5, reject: 6 } },
  { minLot: 3201, maxLot: Number.POSITIVE_INFINITY, plan: { n: 125, accept: 7, reject: 8 } },
];

/** Directive 76/211/EEC Annex II 2.2.2: destructive single sampling plan, any lot of 100 or more. */
export const EU_DESTRUCTIVE_PLAN: StagePlan = { n: 20, accept: 1, reject: 2 };

/** Mean-check sample sizes of Annex II 2.3: 30 (lot 100–500) or 50 (over 500) non-destructive, 20 destructive. */
export function euMeanSampleSize(lotSize: number, testing: 'destructive' | 'non-destructive'): number {
  if (testing === 'destructive') return 20;
  return lotSize <= 500 ? 30 : 50;
}

/** The sampling plan for a lot, or null when the Directive allows no such testing (destructive, lot < 100). */
export function euPlan(lotSize: number, testing: 'destructive' | 'non-destructive', nonDestructivePlan: 'double' | 'single' = 'double'): EuPlan | null {
  if (lotSize < 100) return testing === 'destructive' ? null : { kind: 'full' };
  if (testing === 'destructive') return { kind: 'single', first: EU_DESTRUCTIVE_PLAN, meanN: 20, source: 'Annex II 2.2.2' };
  const meanN = euMeanSampleSize(lotSize, testing);
  if (nonDestructivePlan === 'single') {
    const single = UK_SINGLE_PLANS.find((r) => lotSize >= r.minLot && lotSize <= r.maxLot)!;
    return { kind: 'single', first: single.plan, meanN, source: 'UK SI 2006/659 Sch. 2 para 3.3–3.5' };
  }
  const row = EU_DOUBLE_PLANS.find((r) => lotSize >= r.minLot && lotSize <= r.maxLot)!;
  return { kind: 'double', first: row.first, second: row.second, meanN };
}

/** The non-destructive plan a product's rulebook parameters choose (default double); null when the name is unknown. */
function planChoice(input: LotInput): 'double' | 'single' | null {
  const given: unknown = input.product.rulebook.params?.nonDestructivePlan;
  const choice = given === undefined ? 'double' : given;
  return choice === 'double' || choice === 'single' ? choice : null;
}

/** T1 allowance when every pack of a lot of n packs is checked, with the words that say where it comes from. */
export function fullCheckT1Allowance(n: number): { allowed: number; basis: string } {
  // Under 100 packs: "does not exceed 5 %" (UK SI 2006/659 Schedule 2, para 3.6, as made).
  if (n < 100) return { allowed: Math.floor((n * 5) / 100), basis: '5 % of the lot; UK SI 2006/659 Sch. 2 para 3.6' };
  // 100 or more: no text gives a number; 2.5 % is common practice (from memory; verify).
  return { allowed: Math.floor((n * 25) / 1000), basis: '2.5 % of the lot; common practice' };
}

function validate(input: LotInput): ReturnType<Rulebook['validate']> {
  const tne = tolerableNegativeError(input.product.nominalQuantity, input.product.unit, 'eu-76-211');
  if (!tne.ok) return engineError('outside-rulebook-scope', `eu-76-211: ${tne.reason}`, '/product/nominalQuantity');
  if (planChoice(input) === null) {
    return engineError('invalid-parameter', "nonDestructivePlan must be 'double' or 'single'", '/product/rulebook/params/nonDestructivePlan');
  }
  const { lotSize, testing } = input.lot;
  if (euPlan(lotSize, testing) === null) {
    return engineError(
      'testing-not-allowed',
      `destructive testing is not used for lots under 100 packs (lot size ${lotSize}); check every pack non-destructively (Directive 76/211/EEC Annex II 2.1)`,
      '/lot/testing',
    );
  }
  return null;
}

function judge(ctx: JudgeContext): Judgement | { error: ReturnType<typeof engineError> } {
  const { input, net, unit, qn, mean, standardDeviation: sd } = ctx;
  const { lotSize, testing } = input.lot;
  const tneRes = tolerableNegativeError(qn, unit, 'eu-76-211');
  if (!tneRes.ok) return { error: engineError('outside-rulebook-scope', tneRes.reason, '/product/nominalQuantity') };
  const tne = tneRes.value;
  const t1Limit = qn - tne;
  const t2Limit = qn - 2 * tne;
  const plan = euPlan(lotSize, testing, planChoice(input) ?? 'double')!;
  const n = net.length;
  const meanTest = { hypothesisedMean: qn, alternative: 'less' as const, alpha: 0.005, unit };
  const warnings = tareSpreadWarnings(ctx.tareSampleStandardDeviation, tne, unit);
  const base = { meanTest, tne: { value: tne, baseValue: tneRes.baseValue }, warnings };
  const lotText = `for a ${testing} check of a lot of ${lotSize} packs`;

  const everyPack = n === lotSize && ctx.previousCount === 0;
  if (plan.kind === 'full' || everyPack) {
    const size = sampleSizeCriterion(n, lotSize, `(every pack) ${lotText}`);
    if (n < lotSize) return { ...base, criteria: [size], insufficient: true, additionalPacks: null };
    const { allowed, basis } = fullCheckT1Allowance(n);
    const [t1, t2] = countBelowT1T2(net, t1Limit, t2Limit);
    return {
      ...base,
      criteria: [
        size,
        meanCriterion(mean, sd, n, qn, null, unit),
        t1Criterion(t1.count, t1Limit, tne, unit, allowed, allowed + 1, `for a check of every pack (${basis})`),
        t2Criterion(t2.count, t2Limit, unit),
      ],
      insufficient: false,
      additionalPacks: null,
      belowT1Indices: t1.indices,
      belowT2Indices: t2.indices,
    };
  }

  if (ctx.previousCount > 0) {
    if (plan.kind !== 'double') {
      return { error: engineError('second-sample-not-applicable', 'only the non-destructive double sampling plan takes a second sample', '/lot/previousSample') };
    }
    if (ctx.previousCount < plan.first.n) {
      return {
        error: engineError(
          'previous-sample-size',
          `the first sample of this plan has ${plan.first.n} packs; previousSample has only ${ctx.previousCount}`,
          '/lot/previousSample',
        ),
      };
    }
    const firstDefectives = countBelow(net.subarray(0, ctx.previousCount), t1Limit, 0).count;
    if (firstDefectives <= plan.first.accept || firstDefectives >= plan.first.reject) {
      return {
        error: engineError(
          'second-sample-not-required',
          `the first sample has ${firstDefectives} packs below T1, which decides the lot without a second sample`,
          '/lot/previousSample',
        ),
      };
    }
    const size = sampleSizeCriterion(ctx.currentCount, plan.second.n, `in the second sample ${lotText}`);
    if (ctx.currentCount < plan.second.n) return { ...base, criteria: [size], insufficient: true, additionalPacks: null };
    const [t1, t2] = countBelowT1T2(net, t1Limit, t2Limit);
    const cumulative = ctx.previousCount + ctx.currentCount;
    return {
      ...base,
      criteria: [
        size,
        meanCriterion(mean, sd, n, qn, meanCheckFactor(n), unit),
        t1Criterion(t1.count, t1Limit, tne, unit, plan.second.accept, plan.second.reject, `in both samples together (${cumulative} packs; Annex II 2.2.1)`),
        t2Criterion(t2.count, t2Limit, unit),
      ],
      insufficient: false,
      additionalPacks: null,
      belowT1Indices: t1.indices,
      belowT2Indices: t2.indices,
    };
  }

  const required = Math.max(plan.first.n, plan.meanN);
  const size = sampleSizeCriterion(n, required, lotText);
  if (n < required) return { ...base, criteria: [size], insufficient: true, additionalPacks: null };
  const [t1, t2] = countBelowT1T2(net, t1Limit, t2Limit);
  const larger = n > plan.first.n ? `; applied to all ${n} packs measured` : '';
  const planText =
    plan.kind === 'single'
      ? `in a ${testing} sample of ${plan.first.n} (${plan.source}${larger})`
      : `in a first sample of ${plan.first.n} (Annex II 2.2.1${larger})`;
  const t1c = t1Criterion(t1.count, t1Limit, tne, unit, plan.first.accept, plan.first.reject, planText);
  return {
    ...base,
    criteria: [size, meanCriterion(mean, sd, n, qn, meanCheckFactor(n), unit), t1c, t2Criterion(t2.count, t2Limit, unit)],
    insufficient: false,
    additionalPacks: t1c.passed === null && plan.kind === 'double' ? plan.second.n : null,
    belowT1Indices: t1.indices,
    belowT2Indices: t2.indices,
  };
}

export const eu76211: Rulebook = { info: EU_76_211_INFO, validate, judge };
