/**
 * Rulebook `nz-wm-regs-1999`: New Zealand Weights and Measures Regulations 1999, Schedule 7A
 * (markets.md §5).
 *
 * - Table 1 (lot: sample, correction factor c, non-standard packages permitted): 2–12 → all, 0, 0;
 *   13–39 → 12, 0.746, 0; 40–79 → 12, 0.826, 1; 80–149 → 12, 0.860, 2; 150–399 → 32, 0.465, 3;
 *   400–4 000 → 32, 0.483, 4; over 4 000 → 80, 0.295, 6. The printed c is used: it is not
 *   t(0.995)/√n for n 12 and 32.
 * - Table 2 errors: the R 87 TNE rows (over 15 000 → 1 %).
 * - No inadequate package (short by more than twice the error) in the sample.
 * - The mean criterion x̄ ≥ Qn − c·s is from memory: the weighted-average formula of regs 84B–84E
 *   was not read. Every mean criterion says so.
 */
import type { RulebookInfo } from '../types';
import { METRIC_UNITS } from '../units';
import { NZ_TNE } from './tne';
import { INMETRO_TARE_SPREAD_ADVICE } from './criteria';
import { averageSystemRulebook, rowFor } from './averageSystem';

const T1 = 'NZ Weights and Measures Regulations 1999 Sch. 7A Table 1';

export const NZ_WM_REGS_1999_INFO: RulebookInfo = {
  id: 'nz-wm-regs-1999',
  version: '1999.1',
  title: 'New Zealand average quantity system (Weights and Measures Regulations 1999, Schedule 7A)',
  edition: 'Weights and Measures Regulations 1999 (NZ), Schedule 7A',
  market: 'New Zealand',
  scope: { description: 'above 0 g / 0 mL (Sch. 7A Table 2)', units: [...METRIC_UNITS] },
  source: 'Weights and Measures Regulations 1999 (NZ) Schedule 7A Tables 1 and 2; mean criterion from memory (regs 84B–84E not read)',
  provenance:
    'Table 1 (sample sizes, printed correction factors c, non-standard packages permitted) and Table 2 (errors as the R 87 rows) read in Schedule 7A. The weighted-average formula of regs 84B–84E was not read: the mean criterion x̄ ≥ Qn − c·s is from memory; verify.',
  verified: ['Table 1: lots 2–12 all; 13–39, 40–79, 80–149 → 12 (c 0.746, 0.826, 0.860; 0, 1, 2 allowed); 150–399, 400–4 000 → 32 (0.465, 0.483; 3, 4); over 4 000 → 80 (0.295; 6)', 'Table 2 errors as the R 87 rows, over 15 000 → 1 %', 'no inadequate package in the sample'],
  fromMemory: ['the mean criterion x̄ ≥ Qn − c·s (regs 84B–84E not read)', 'the rounding of a percentage error (R 87’s is used)'],
  parameters: [],
};

export const NZ_PLAN: readonly { minLot: number; maxLot: number; n: number | null; c: number; allowed: number }[] = [
  { minLot: 1, maxLot: 12, n: null, c: 0, allowed: 0 },
  { minLot: 13, maxLot: 39, n: 12, c: 0.746, allowed: 0 },
  { minLot: 40, maxLot: 79, n: 12, c: 0.826, allowed: 1 },
  { minLot: 80, maxLot: 149, n: 12, c: 0.86, allowed: 2 },
  { minLot: 150, maxLot: 399, n: 32, c: 0.465, allowed: 3 },
  { minLot: 400, maxLot: 4000, n: 32, c: 0.483, allowed: 4 },
  { minLot: 4001, maxLot: Number.POSITIVE_INFINITY, n: 80, c: 0.295, allowed: 6 },
];

export const nzWmRegs1999 = averageSystemRulebook({
  info: NZ_WM_REGS_1999_INFO,
  units: NZ_WM_REGS_1999_INFO.scope.units,
  tneTable: () => NZ_TNE,
  plan(input) {
    const row = rowFor(NZ_PLAN, input.lot.lotSize)!;
    if (row.n === null) {
      return { kind: 'full', t1: { allowed: 0, basis: `${T1}: none permitted`, clause: T1 }, mean: 'known', meanClause: `${T1} (c = 0; mean criterion from memory; verify)`, why: `lots of 2 to 12, ${T1}` };
    }
    return { kind: 'single', first: { n: row.n, accept: row.allowed, reject: row.allowed + 1 }, meanN: row.n, source: T1, factor: row.c };
  },
  // c is printed per lot band, not per sample size: the plan row's c applies to its own n only.
  printedFactors: {},
  printedIn: T1,
  everyPackOfSampledLot: (_n, plan) => ({ allowed: plan.first.accept, basis: `the ${plan.first.accept} non-standard packages Table 1 permits for this lot size`, clause: T1 }),
  clauses: { mean: `${T1} (c); regs 84B–84E not read: x̄ ≥ Qn − c·s from memory; verify`, t1: `${T1}; Table 2`, t2: 'NZ Weights and Measures Regulations 1999 Sch. 7A (no inadequate package)', sampleSize: T1 },
  t2Allowed: 0,
  tareSpread: INMETRO_TARE_SPREAD_ADVICE,
  planFromMemory: false,
  meanFromMemory: true,
});
