/**
 * Rulebook `eu-76-211`: the average system of EU Council Directive 76/211/EEC of 20 January 1976,
 * as amended by Commission Directive 78/891/EEC.
 *
 * - TNE table and its round-up rule: Annex I, 2.4 (see ./tne.ts); 5 g / 5 mL to 10 kg / 10 L.
 * - Defective units (below T1) against the sampling plans of Annex II, 2.2: non-destructive double
 *   plan 2.2.1 by lot size; destructive single plan 2.2.2 (20 packs, accept ≤ 1, reject ≥ 2).
 * - No pack below T2: Annex I, 1.3.
 * - Mean check x̄ ≥ Qn − λ·s: Annex II, 2.3, with λ as printed in 2.3.3 for its sample sizes
 *   (0.503 for 30, 0.379 for 50, 0.640 for 20) and t(0.995; n − 1)/√n computed for any other n.
 * - Lots under 100 packs: non-destructive checking is 100 % and the Directive asks only that the
 *   mean be at least Qn (Annex II, 2.1; markets.md §1.5): no T1 allowance is set, so none is
 *   applied (packs below T1 are listed in a warning). The 5 % rule is UK law: `uk-2006-659`.
 * - A lot of 100 or more measured in full: no text gives a T1 allowance; 2.5 % of the lot is used,
 *   labelled common practice (markets.md §1.6).
 * - Parameter `nonDestructivePlan: 'single'`: the single plan of the UK reference test (SI 2006/659
 *   Schedule 2, para 3.3–3.5, as made), kept here for products that chose it before `uk-2006-659`.
 * - The tare-spread warning is Brazil's rule, given as advice under its own conditions (markets.md §1.8).
 */
import type { LotInput, RulebookInfo } from '../types';
import { engineError } from '../errors';
import { UNIT_NAMES } from '../units';
import { EU_TNE } from './tne';
import { INMETRO_TARE_SPREAD_ADVICE } from './criteria';
import { averageSystemRulebook, rowFor, type AveragePlan, type StagePlan } from './averageSystem';

export const EU_76_211_INFO: RulebookInfo = {
  id: 'eu-76-211',
  version: '1976-78.3',
  title: 'EU average system for prepackages (Directive 76/211/EEC)',
  edition: 'Council Directive 76/211/EEC of 20 January 1976, as amended by Commission Directive 78/891/EEC',
  market: 'European Union',
  scope: { description: '5 g to 10 kg, 5 mL to 10 L (Annex I 2.4)', units: UNIT_NAMES.filter((u) => u !== 'count') },
  source:
    'Council Directive 76/211/EEC of 20 January 1976, as amended by Commission Directive 78/891/EEC: Annex I 1.1–1.3, 2.2, 2.4; Annex II 2.1–2.3; optional single plan from UK SI 2006/659 Schedule 2 para 3.3–3.5 (as made)',
  provenance:
    'TNE table, sampling plans and printed mean-check factors as in the Directive (Annex I 2.4, Annex II 2.2, 2.3.3). Lots under 100 checked in full: mean ≥ Qn only, as the Directive prescribes. The 2.5 % T1 allowance for a lot of 100 or more checked in full is common practice (no legal text found).',
  verified: [
    'TNE table 5 g–10 kg, rounded up to 0.1 g/mL (Annex I 2.4)',
    'double plan 30/30, 50/50, 80/80 with 1/3–4/5, 2/5–6/7, 3/7–8/9; destructive 20, 1/2 (Annex II 2.2)',
    'λ printed 0.503 (n 30), 0.379 (n 50), 0.640 (n 20) (Annex II 2.3.3)',
    'lots under 100: every pack, mean ≥ Qn (Annex II 2.1)',
    'single plan 50 3/4, 80 5/6, 125 7/8 (SI 2006/659 Sch. 2 para 3.3–3.5)',
  ],
  fromMemory: [],
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

/** λ as printed in Directive 76/211/EEC Annex II 2.3.3 (and SI 2006/659 Sch. 2 para 4.5–4.6). */
export const EU_PRINTED_FACTORS: Readonly<Record<number, number>> = { 20: 0.64, 30: 0.503, 50: 0.379 };

/** Mean-check sample sizes of Annex II 2.3: 30 (lot 100–500) or 50 (over 500) non-destructive, 20 destructive. */
export function euMeanSampleSize(lotSize: number, testing: 'destructive' | 'non-destructive'): number {
  if (testing === 'destructive') return 20;
  return lotSize <= 500 ? 30 : 50;
}

/** The 2.5 % allowance for a lot of 100 or more checked in full: common practice, no legal text (markets.md §1.6). */
export function commonPracticeFullCheck(n: number): { allowed: number; basis: string; clause: string } {
  return { allowed: Math.floor((n * 25) / 1000), basis: '2.5 % of the lot; common practice', clause: 'no legal text: common practice ("no more than 1 in 40 below T1")' };
}

export type SampledPlan = Exclude<AveragePlan, { kind: 'full' }>;

/** The sampled plan of a lot of 100 or more; null when destructive testing meets a lot under 100. */
export function euPlan(lotSize: number, testing: 'destructive' | 'non-destructive', nonDestructivePlan: 'double' | 'single' = 'double'): SampledPlan | { kind: 'full' } | null {
  if (lotSize < 100) return testing === 'destructive' ? null : { kind: 'full' };
  if (testing === 'destructive') return { kind: 'single', first: EU_DESTRUCTIVE_PLAN, meanN: 20, source: 'Annex II 2.2.2' };
  const meanN = euMeanSampleSize(lotSize, testing);
  if (nonDestructivePlan === 'single') {
    return { kind: 'single', first: rowFor(UK_SINGLE_PLANS, lotSize)!.plan, meanN, source: 'UK SI 2006/659 Sch. 2 para 3.3–3.5' };
  }
  const row = rowFor(EU_DOUBLE_PLANS, lotSize)!;
  return { kind: 'double', first: row.first, second: row.second, meanN, source: 'Annex II 2.2.1' };
}

/** The non-destructive plan a product's rulebook parameters choose (default double); null when the name is unknown. */
export function planChoice(input: LotInput): 'double' | 'single' | null {
  const given: unknown = input.product.rulebook.params?.nonDestructivePlan;
  const choice = given === undefined ? 'double' : given;
  return choice === 'double' || choice === 'single' ? choice : null;
}

export const eu76211 = averageSystemRulebook({
  info: EU_76_211_INFO,
  units: EU_76_211_INFO.scope.units,
  tneTable: () => EU_TNE,
  plan(input) {
    const { lotSize, testing } = input.lot;
    const plan = euPlan(lotSize, testing, planChoice(input) ?? 'double');
    if (plan === null) {
      return engineError(
        'testing-not-allowed',
        `destructive testing is not used for lots under 100 packs (lot size ${lotSize}); check every pack non-destructively (Directive 76/211/EEC Annex II 2.1)`,
        '/lot/testing',
      );
    }
    if (plan.kind === 'full') {
      return { kind: 'full', t1: null, mean: 'known', meanClause: 'Directive 76/211/EEC Annex I 1.1, Annex II 2.1', why: 'lots under 100 are checked in full, Annex II 2.1' };
    }
    return plan;
  },
  printedFactors: EU_PRINTED_FACTORS,
  printedIn: 'Directive 76/211/EEC Annex II 2.3.3',
  everyPackOfSampledLot: (n) => commonPracticeFullCheck(n),
  clauses: {
    mean: 'Directive 76/211/EEC Annex I 1.1, Annex II 2.3',
    t1: 'Directive 76/211/EEC Annex I 1.2, Annex II 2.2',
    t2: 'Directive 76/211/EEC Annex I 1.3',
    sampleSize: 'Directive 76/211/EEC Annex II 2.1–2.3',
  },
  t2Allowed: 0,
  tareSpread: INMETRO_TARE_SPREAD_ADVICE,
  planFromMemory: false,
  validateParams(input) {
    return planChoice(input) === null
      ? engineError('invalid-parameter', "nonDestructivePlan must be 'double' or 'single'", '/product/rulebook/params/nonDestructivePlan')
      : null;
  },
});
