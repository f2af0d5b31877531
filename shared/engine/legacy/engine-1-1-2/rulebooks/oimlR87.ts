/**
 * Rulebook `oiml-r87-2016`: OIML R 87 (2016), "Quantity of product in prepackages".
 *
 * FROM MEMORY; VERIFY: the lot-size bands, sample sizes and allowed T1 counts below were written
 * from memory and have not been checked against the text of R 87 (its 2016 edition could not be
 * read here). The rows for lots of 100 and more agree with the UK single plan (SI 2006/659 Sch. 2
 * para 3.3–3.5); no published text was found for the bands under 100. The TNE rows above 10 kg
 * agree with the UK government's published TNE table (see tne.ts).
 * The λ factors are arithmetic on Student's t (t(0.995; n − 1)/√n) and are computed, not tabled.
 * The verdict's rulebook source says so.
 *
 * Same mean check form as the EU average system; no pack may fall below T2. Choices made here,
 * as for eu-76-211: λ for the actual n; a larger sample is judged with the plan's allowed count;
 * when every pack of the lot is measured the mean check is x̄ ≥ Qn. The tare-sample warning at
 * 0.25 × TNE is given as for eu-76-211 (see `tareSpreadWarnings`).
 */
import type { LotInput, RulebookInfo } from '../types';
import type { Judgement, JudgeContext, Rulebook } from './types';
import { engineError } from '../../../errors';
import { tolerableNegativeError } from './tne';
import { countBelowT1T2, meanCheckFactor, meanCriterion, sampleSizeCriterion, t1Criterion, t2Criterion, tareSpreadWarnings } from './criteria';

export const OIML_R87_INFO: RulebookInfo = {
  id: 'oiml-r87-2016',
  version: '2016.2',
  title: 'OIML R 87 (2016) quantity of product in prepackages',
  source:
    'OIML R 87 Quantity of product in prepackages, edition 2016 (sampling plan from memory; verify. TNE above 10 kg as in the UK government table: 10 000–15 000 g → 150 g, above 15 000 g → 1 %)',
  provenance:
    'Lot-size bands, sample sizes and allowed T1 counts are from memory and not verified against the text of R 87; those for lots of 100 and more agree with the UK single plan (SI 2006/659 Schedule 2 para 3.3–3.5), none was found for smaller lots. The TNE rows above 10 kg agree with the UK government’s published TNE table (gov.uk, “Weights and measures: the law — Packaged goods”); R 87’s own table was not available to check. The λ factors are computed from Student’s t.',
  parameters: [],
};

/** Sampling plan by lot size (from memory; verify). n null = every pack. */
export const OIML_PLANS: readonly { minLot: number; maxLot: number; n: number | null; allowed: number }[] = [
  { minLot: 1, maxLot: 10, n: null, allowed: 0 },
  { minLot: 11, maxLot: 50, n: 10, allowed: 0 },
  { minLot: 51, maxLot: 99, n: 13, allowed: 1 },
  { minLot: 100, maxLot: 500, n: 50, allowed: 3 },
  { minLot: 501, maxLot: 3200, n: 80, allowed: 5 },
  { minLot: 3201, maxLot: Number.POSITIVE_INFINITY, n: 125, allowed: 7 },
];

export function oimlPlan(lotSize: number): { n: number | null; allowed: number } {
  return OIML_PLANS.find((r) => lotSize >= r.minLot && lotSize <= r.maxLot)!;
}

function validate(input: LotInput): ReturnType<Rulebook['validate']> {
  const tne = tolerableNegativeError(input.product.nominalQuantity, input.product.unit, 'oiml-r87-2016');
  if (!tne.ok) return engineError('outside-rulebook-scope', `oiml-r87-2016: ${tne.reason}`, '/product/nominalQuantity');
  if (input.lot.previousSample !== undefined) {
    return engineError('second-sample-not-applicable', 'the OIML R 87 plan is a single sampling plan', '/lot/previousSample');
  }
  return null;
}

function judge(ctx: JudgeContext): Judgement | { error: ReturnType<typeof engineError> } {
  const { input, net, unit, qn, mean, standardDeviation: sd } = ctx;
  const { lotSize } = input.lot;
  const tneRes = tolerableNegativeError(qn, unit, 'oiml-r87-2016');
  if (!tneRes.ok) return { error: engineError('outside-rulebook-scope', tneRes.reason, '/product/nominalQuantity') };
  const tne = tneRes.value;
  const t1Limit = qn - tne;
  const t2Limit = qn - 2 * tne;
  const plan = oimlPlan(lotSize);
  const n = net.length;
  const base = {
    meanTest: { hypothesisedMean: qn, alternative: 'less' as const, alpha: 0.005, unit },
    tne: { value: tne, baseValue: tneRes.baseValue },
    warnings: tareSpreadWarnings(ctx.tareSampleStandardDeviation, tne, unit),
  };
  const required = plan.n ?? lotSize;
  const lotText = `for a lot of ${lotSize} packs (OIML R 87 plan, from memory; verify)`;
  const size = sampleSizeCriterion(n, required, lotText);
  if (n < required) return { ...base, criteria: [size], insufficient: true, additionalPacks: null };
  const everyPack = n === lotSize;
  const [t1, t2] = countBelowT1T2(net, t1Limit, t2Limit);
  const planText = `by the plan for this lot size${n > required ? `, applied to all ${n} packs measured` : ''}`;
  return {
    ...base,
    criteria: [
      size,
      meanCriterion(mean, sd, n, qn, everyPack ? null : meanCheckFactor(n), unit),
      t1Criterion(t1.count, t1Limit, tne, unit, plan.allowed, plan.allowed + 1, planText),
      t2Criterion(t2.count, t2Limit, unit),
    ],
    insufficient: false,
    additionalPacks: null,
    belowT1Indices: t1.indices,
    belowT2Indices: t2.indices,
  };
}

export const oimlR87: Rulebook = { info: OIML_R87_INFO, validate, judge };
