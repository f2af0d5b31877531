/**
 * The OIML R 87 (2016) sampling plan, as China's R 87-derived table prints it (JJF 1070 附表4;
 * a secondary reproduction of the official table; markets.md §1.3–1.4, §6), and Australia's
 * worked examples agree (NMI: lots 130–500 → 50; 3 500 and 5 000 → 125; markets.md §4).
 * Lots of 1 to 10: every pack, no T1 allowed, no average check (附表4 note 2).
 */
import type { LotInput } from '../types';
import type { AveragePlan } from './averageSystem';
import { rowFor } from './averageSystem';

export interface R87PlanRow {
  minLot: number;
  maxLot: number;
  /** Sample size; null: every pack. */
  n: number | null;
  /** λ as printed for n; null where no average check is made. */
  factor: number | null;
  allowed: number;
}

export const R87_PLAN: readonly R87PlanRow[] = [
  { minLot: 1, maxLot: 10, n: null, factor: null, allowed: 0 },
  { minLot: 11, maxLot: 50, n: 10, factor: 1.028, allowed: 0 },
  { minLot: 51, maxLot: 99, n: 13, factor: 0.848, allowed: 1 },
  { minLot: 100, maxLot: 500, n: 50, factor: 0.379, allowed: 3 },
  { minLot: 501, maxLot: 3200, n: 80, factor: 0.295, allowed: 5 },
  { minLot: 3201, maxLot: Number.POSITIVE_INFINITY, n: 125, factor: 0.234, allowed: 7 },
];

/** λ of the R 87 plan as printed by China (附表4), by sample size. */
export const R87_PRINTED_FACTORS: Readonly<Record<number, number>> = Object.fromEntries(
  R87_PLAN.filter((r) => r.n !== null).map((r) => [r.n, r.factor]),
) as Record<number, number>;

/** The R 87 plan for a lot, with the words that cite it. */
export function r87Plan(input: LotInput, cite: string, noAverageClause: string): AveragePlan {
  const row = rowFor(R87_PLAN, input.lot.lotSize)!;
  if (row.n === null) {
    return { kind: 'full', t1: { allowed: 0, basis: `none allowed; ${noAverageClause}`, clause: noAverageClause }, mean: 'none', meanClause: noAverageClause, why: `lots of 1 to 10, ${noAverageClause}` };
  }
  const first = { n: row.n, accept: row.allowed, reject: row.allowed + 1 };
  return { kind: 'single', first, meanN: row.n, source: cite, factor: row.factor! };
}
