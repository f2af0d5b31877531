/**
 * Rulebook `cn-jjf-1070`: China's rules for the net content of prepackaged goods (定量包装商品),
 * JJF 1070 plan and tables (附表3, 附表4), as secondary reproductions of the official tables give
 * them (markets.md §6).
 *
 * - T (附表3): the R 87 rows, 0 g to 50 kg, rounded up to 0.1 up to 1 000 and to a whole g/mL above.
 * - Plan (附表4): lot 1–10 all, no average, 0 T1 (note 2); 11–50 → 10, λ 1.028, 0; 51–99 → 13,
 *   0.848, 1; 100–500 → 50, 0.379, 3; 501–3 200 → 80, 0.295, 5; over 3 200 → 125, 0.234, 7.
 * - No pack below T2.
 */
import type { RulebookInfo } from '../types';
import { METRIC_UNITS } from '../units';
import { CN_TNE } from './tne';
import { INMETRO_TARE_SPREAD_ADVICE } from './criteria';
import { averageSystemRulebook } from './averageSystem';
import { R87_PRINTED_FACTORS, r87Plan } from './r87Plan';

const T4 = 'JJF 1070 附表4';

export const CN_JJF_1070_INFO: RulebookInfo = {
  id: 'cn-jjf-1070',
  version: '1070.1',
  title: 'China net content of prepackaged goods (JJF 1070)',
  edition: 'JJF 1070 定量包装商品净含量计量检验规则 (tables as secondary reproductions give them)',
  market: 'China',
  scope: { description: '0 g to 50 kg, 0 mL to 50 L (附表3)', units: [...METRIC_UNITS] },
  source: 'JJF 1070 附表3 (allowed shortfall T) and 附表4 (sampling plan, λ), read in secondary reproductions of the official tables',
  provenance: 'Plan, printed λ and the T table read in secondary reproductions of 附表3 and 附表4; the official text itself was not read.',
  verified: ['T 0 g–50 kg, rounded up to 0.1 up to 1 000 and whole g/mL above (附表3 note)', 'plan and λ (附表4), lots 1–10 with no average check (附表4 note 2)'],
  fromMemory: [],
  parameters: [],
};

export const cnJjf1070 = averageSystemRulebook({
  info: CN_JJF_1070_INFO,
  units: CN_JJF_1070_INFO.scope.units,
  tneTable: () => CN_TNE,
  plan: (input) => r87Plan(input, T4, `${T4} note 2`),
  printedFactors: R87_PRINTED_FACTORS,
  printedIn: T4,
  everyPackOfSampledLot: (_n, plan) => ({ allowed: plan.first.accept, basis: `the plan's ${plan.first.accept} for this lot size`, clause: T4 }),
  clauses: { mean: `${T4} (average, λ)`, t1: `${T4}; 附表3`, t2: `${T4} (no pack below T2)`, sampleSize: T4 },
  t2Allowed: 0,
  tareSpread: INMETRO_TARE_SPREAD_ADVICE,
  planFromMemory: false,
});
