/**
 * Rulebook `oiml-r87-2016`: OIML R 87 (2016), "Quantity of product in prepackages".
 *
 * R 87's own text could not be read here. Its TNE table (0 g to 50 kg, a percentage TNE rounded up
 * to 0.1 g/mL up to 1 000 and to a whole g/mL above) and its sampling plan (lots 1–10 every pack
 * with no average check; then 10, 13, 50, 80, 125 packs with the printed λ) are taken from the
 * national texts that reproduce it: Australia's NTMR 2009 reg 4.36(4) and China's JJF 1070
 * 附表3–4 (markets.md §1.1–1.4). No pack below T2. The tare-spread warning is Brazil's rule,
 * given as advice under its own conditions.
 */
import type { RulebookInfo } from '../types';
import { UNIT_NAMES } from '../units';
import { R87_TNE } from './tne';
import { INMETRO_TARE_SPREAD_ADVICE } from './criteria';
import { averageSystemRulebook } from './averageSystem';
import { R87_PRINTED_FACTORS, r87Plan } from './r87Plan';

const REPRO = 'OIML R 87 (2016) as reproduced in JJF 1070 附表4';

export const OIML_R87_INFO: RulebookInfo = {
  id: 'oiml-r87-2016',
  version: '2016.3',
  title: 'OIML R 87 (2016) quantity of product in prepackages',
  edition: 'OIML R 87, edition 2016 (as reproduced in national texts)',
  market: 'any market that adopts OIML R 87',
  scope: { description: '0 g to 50 kg, 0 mL to 50 L', units: UNIT_NAMES.filter((u) => u !== 'count') },
  source:
    'OIML R 87 Quantity of product in prepackages, edition 2016: TNE table and sampling plan as reproduced in Australia NTMR 2009 reg 4.36(4) and China JJF 1070 附表3–4 (R 87’s own text not read)',
  provenance:
    'TNE table, its rounding and the sampling plan with its printed λ read in the R 87-derived national texts (Australia NTMR 2009 reg 4.36(4) note a; China JJF 1070 附表3, 附表4, secondary reproductions); R 87’s own text could not be read.',
  verified: [
    'TNE 0 g–50 kg; percentage TNE rounded up to 0.1 g/mL up to 1 000 and to a whole g/mL above (NTMR reg 4.36(4) note a; 附表3 note)',
    'plan 1–10 all (no average check, 0 T1); 11–50 → 10 (λ 1.028, 0); 51–99 → 13 (0.848, 1); 100–500 → 50 (0.379, 3); 501–3 200 → 80 (0.295, 5); over 3 200 → 125 (0.234, 7) (附表4)',
  ],
  fromMemory: [],
  parameters: [],
};

export const oimlR87 = averageSystemRulebook({
  info: OIML_R87_INFO,
  units: OIML_R87_INFO.scope.units,
  tneTable: () => R87_TNE,
  plan: (input) => r87Plan(input, REPRO, `${REPRO} note 2`),
  printedFactors: R87_PRINTED_FACTORS,
  printedIn: REPRO,
  everyPackOfSampledLot: (_n, plan) => ({ allowed: plan.first.accept, basis: `the plan's ${plan.first.accept} for this lot size`, clause: REPRO }),
  clauses: { mean: `${REPRO} (average requirement)`, t1: `${REPRO} (T1 allowed)`, t2: `${REPRO} (no pack below T2)`, sampleSize: REPRO },
  t2Allowed: 0,
  tareSpread: INMETRO_TARE_SPREAD_ADVICE,
  planFromMemory: false,
});
