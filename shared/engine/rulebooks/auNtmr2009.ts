/**
 * Rulebook `au-ntmr-2009`: Australia's average quantity system, National Trade Measurement
 * Regulations 2009 (markets.md §4).
 *
 * - Tolerable deficiency T (reg 4.36(4)): the R 87 rows from 0 g to 50 kg, rounded up to 0.1 below
 *   1 000 and to a whole g or mL above (note a); count: 50 or fewer none, over 50 1 % rounded up.
 * - Sample sizes and allowed counts: those of R 87 (NMI's worked examples: lots 130–500 → 50;
 *   3 500 and 5 000 → 125). The regulation's own table (reg 4.34) was not readable here: the plan
 *   and its λ are cited as R 87's, as China prints them.
 * - No pack below twice T.
 */
import type { RulebookInfo } from '../types';
import { METRIC_UNITS } from '../units';
import { AU_COUNT_TNE, AU_TNE } from './tne';
import { INMETRO_TARE_SPREAD_ADVICE } from './criteria';
import { averageSystemRulebook } from './averageSystem';
import { R87_PRINTED_FACTORS, r87Plan } from './r87Plan';

const PLAN = 'OIML R 87 plan (as JJF 1070 附表4 prints it; NMI worked examples agree; NTMR reg 4.34 not read)';

export const AU_NTMR_2009_INFO: RulebookInfo = {
  id: 'au-ntmr-2009',
  version: '2009.1',
  title: 'Australia average quantity system (National Trade Measurement Regulations 2009)',
  edition: 'National Trade Measurement Regulations 2009 (Cth)',
  market: 'Australia',
  scope: { description: '0 g to 50 kg, 0 mL to 50 L; count', units: [...METRIC_UNITS, 'count'] },
  source: 'National Trade Measurement Regulations 2009 reg 4.36(4) and note a (tolerable deficiency); sampling plan of OIML R 87 (reg 4.34 not read)',
  provenance:
    'Tolerable deficiency table, its rounding and the count rule read in reg 4.36(4). The regulation’s own sampling table (reg 4.34) could not be read: the plan and its factors are R 87’s as China prints them, which NMI’s worked examples agree with.',
  verified: [
    'T 0 g–50 kg with rounding to 0.1 up to 1 000 and whole g/mL above (reg 4.36(4) note a)',
    'count: 50 or fewer none, over 50 1 % rounded up (reg 4.36(4))',
    'plan as R 87 (NMI examples: lots 130–500 → 50; 3 500 and 5 000 → 125)',
  ],
  fromMemory: [],
  parameters: [],
};

export const auNtmr2009 = averageSystemRulebook({
  info: AU_NTMR_2009_INFO,
  units: AU_NTMR_2009_INFO.scope.units,
  tneTable: (unit) => (unit === 'count' ? AU_COUNT_TNE : AU_TNE),
  plan: (input) => r87Plan(input, PLAN, `${PLAN}: lots of 1 to 10, no average check`),
  printedFactors: R87_PRINTED_FACTORS,
  printedIn: PLAN,
  everyPackOfSampledLot: (_n, plan) => ({ allowed: plan.first.accept, basis: `the plan's ${plan.first.accept} for this lot size`, clause: PLAN }),
  clauses: { mean: `NTMR 2009 average quantity system; ${PLAN}`, t1: `NTMR 2009 reg 4.36(4); ${PLAN}`, t2: 'NTMR 2009 (no pack short by more than twice T)', sampleSize: PLAN },
  t2Allowed: 0,
  tareSpread: INMETRO_TARE_SPREAD_ADVICE,
  planFromMemory: false,
});
