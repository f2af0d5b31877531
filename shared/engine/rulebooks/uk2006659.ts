/**
 * Rulebook `uk-2006-659`: the reference test of the Weights and Measures (Packaged Goods)
 * Regulations 2006 (SI 2006/659), Schedule 2, as made (markets.md §2).
 *
 * - Scope 5 g to 25 kg, 5 mL to 25 L; TNE as the Directive to 10 kg and the OIML R 87 rows above
 *   (gov.uk guidance on SI 2006/659; markets.md §1.9), rounded up to 0.1 g or mL.
 * - Non-destructive: the double plan as the Directive (default) or the single plan (para 3.3–3.5):
 *   100–500 → 50, accept ≤ 3 / reject ≥ 4; 501–3 200 → 80, 5 / 6; over 3 200 → 125, 7 / 8.
 *   Destructive: 20 packs, 1 / 2.
 * - Mean check with n 30 (lots 100–500) or 50 (over 500), λ 0.503 and 0.379 as printed (para 2.9,
 *   4.5–4.6); 0.640 for the destructive 20.
 * - Lots under 100: every pack; defectives at most 5 % of the lot; mean ≥ Qn (para 3.6, 4.7).
 * - A lot of 100 or more measured in full: 2.5 % of the lot, common practice (markets.md §1.6).
 * - No pack below T2.
 */
import type { RulebookInfo } from '../types';
import { engineError } from '../errors';
import { METRIC_UNITS } from '../units';
import { UK_TNE } from './tne';
import { INMETRO_TARE_SPREAD_ADVICE } from './criteria';
import { averageSystemRulebook } from './averageSystem';
import { commonPracticeFullCheck, EU_PRINTED_FACTORS, euPlan, planChoice } from './eu76211';

export const UK_2006_659_INFO: RulebookInfo = {
  id: 'uk-2006-659',
  version: '2006.1',
  title: 'UK reference test for packaged goods (SI 2006/659, Schedule 2)',
  edition: 'The Weights and Measures (Packaged Goods) Regulations 2006, SI 2006/659, as made',
  market: 'United Kingdom',
  scope: { description: '5 g to 25 kg, 5 mL to 25 L (gov.uk guidance on SI 2006/659)', units: [...METRIC_UNITS] },
  source:
    'SI 2006/659 Schedule 2 (as made): para 2.9, 3.3–3.6, 4.5–4.7; TNE as Directive 76/211/EEC Annex I 2.4 to 10 kg and the OIML R 87 rows above, to 25 kg (gov.uk guidance)',
  provenance:
    'Plans, printed factors and the 5 % rule for lots under 100 read in SI 2006/659 Schedule 2 as made; scope and the TNE rows above 10 kg from the gov.uk guidance on the Regulations. The 2.5 % T1 allowance for a lot of 100 or more checked in full is common practice (no legal text found).',
  verified: [
    'scope 5 g–25 kg, 5 mL–25 L; TNE above 10 kg as the R 87 rows (gov.uk guidance)',
    'double plan as the Directive; single plan 50 3/4, 80 5/6, 125 7/8 (Sch. 2 para 3.3–3.5); destructive 20, 1/2',
    'mean check n 30 / 50 with λ 0.503 / 0.379 (para 2.9, 4.5–4.6); 0.640 for n 20',
    'lots under 100: every pack, defectives ≤ 5 % of the lot, mean ≥ Qn (para 3.6, 4.7)',
  ],
  fromMemory: [],
  parameters: [
    {
      name: 'nonDestructivePlan',
      type: 'string',
      description: "non-destructive sampling plan: 'double' (default; as the Directive) or 'single' (SI 2006/659 Schedule 2, para 3.3–3.5)",
      default: 'double',
      allowed: ['double', 'single'],
    },
  ],
};

/** Lots under 100 checked in full: defectives may be up to 5 % of the lot (SI 2006/659 Sch. 2 para 3.6, as made). */
export function ukSmallLotAllowance(lotSize: number): number {
  return Math.floor((lotSize * 5) / 100);
}

const S = 'SI 2006/659 Sch. 2';

export const uk2006659 = averageSystemRulebook({
  info: UK_2006_659_INFO,
  units: UK_2006_659_INFO.scope.units,
  tneTable: () => UK_TNE,
  plan(input) {
    const { lotSize, testing } = input.lot;
    const plan = euPlan(lotSize, testing, planChoice(input) ?? 'double');
    if (plan === null) {
      return engineError('testing-not-allowed', `destructive testing is not used for lots under 100 packs (lot size ${lotSize}); check every pack (${S} para 3.6)`, '/lot/testing');
    }
    if (plan.kind === 'full') {
      return {
        kind: 'full',
        t1: { allowed: ukSmallLotAllowance(lotSize), basis: `5 % of the lot; ${S} para 3.6`, clause: `${S} para 3.6` },
        mean: 'known',
        meanClause: `${S} para 4.7`,
        why: `lots under 100 are checked in full, ${S} para 3.6`,
      };
    }
    return { ...plan, source: plan.kind === 'single' && testing === 'non-destructive' ? `${S} para 3.3–3.5` : plan.kind === 'double' ? `${S} (double plan as Directive 76/211/EEC Annex II 2.2.1)` : `${S} (destructive plan)` };
  },
  printedFactors: EU_PRINTED_FACTORS,
  printedIn: `${S} para 4.5–4.6`,
  everyPackOfSampledLot: (n) => commonPracticeFullCheck(n),
  clauses: { mean: `${S} para 2.9, 4.5–4.6`, t1: `${S} para 3.3–3.5`, t2: `${S} (no pack below twice the TNE)`, sampleSize: `${S} para 2.9, 3.3–3.6` },
  t2Allowed: 0,
  tareSpread: INMETRO_TARE_SPREAD_ADVICE,
  planFromMemory: false,
  validateParams(input) {
    return planChoice(input) === null
      ? engineError('invalid-parameter', "nonDestructivePlan must be 'double' or 'single'", '/product/rulebook/params/nonDestructivePlan')
      : null;
  },
});
