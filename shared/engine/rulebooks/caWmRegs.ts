/**
 * Rulebook `ca-wm-regs`: Canada's Weights and Measures Regulations, C.R.C., c. 1605, s. 45–52 with
 * Schedules II and III (markets.md §3).
 *
 * A lot fails (s. 52) when
 *   (a) Xa = x̄ + s·(t/√n) is less than the stated quantity (t/√n from Sch. III Part III; zero when
 *       every unit of the lot is sampled);
 *   (b) the units short by more than the limit of error reach the number of Sch. III Part IV; or
 *   (c) two or more units are short by more than twice the limit of error (one is allowed).
 * Sample (Part I): lot 2–10 all; 11–128 a quarter of the lot rounded up, at least 10; 129–4 000
 * 32; 4 001–8 000 64; 8 001–12 000 96; over 12 000 125. For a sample size between 32 and 125 that
 * Part III does not list, t is interpolated as Part III says; above 125 (more packs than any plan
 * takes) t(0.995; n − 1) is computed, and the verdict says so.
 * Limits of error (Sch. II): Part V metric, Part VI Canadian mass (oz, lb), Part VII Canadian
 * volume (imperial fl oz, gal), Part XIV count. Liquids stated by volume at 20 °C (s. 51).
 */
import type { Criterion, EngineError, LotInput, RulebookInfo, TneResult, Unit } from '../types';
import type { Judgement, JudgeContext, Rulebook } from './types';
import { engineError } from '../errors';
import { formatNumber, formatQuantity } from '../format';
import { dimensionOf } from '../units';
import { caCountTne, CA_MASS_TNE, CA_METRIC_TNE, CA_VOLUME_TNE, tneByTable, type TneTable } from './tne';
import { countBelowT1T2, meanCheckFactor, sampleSizeCriterion, t1Criterion, t2Criterion, tareSpreadWarnings, INMETRO_TARE_SPREAD_ADVICE } from './criteria';
import { checkDeclaration } from './averageSystem';

const R = 'C.R.C. c. 1605';

export const CA_WM_REGS_INFO: RulebookInfo = {
  id: 'ca-wm-regs',
  version: '1605.1',
  title: 'Canada Weights and Measures Regulations (C.R.C., c. 1605, s. 52)',
  edition: 'Weights and Measures Regulations, C.R.C., c. 1605 (s. 45–52, Schedules II and III)',
  market: 'Canada',
  scope: {
    description: 'any quantity by mass or volume in metric or Canadian units (oz, lb, imperial fl oz, imperial gal), or by count',
    units: ['mg', 'g', 'kg', 'mL', 'cL', 'L', 'oz', 'lb', 'imp fl oz', 'imp gal', 'count'],
  },
  source: 'Weights and Measures Regulations, C.R.C., c. 1605: s. 51, 52; Schedule II Parts V, VI, VII, XIV; Schedule III Parts I, III, IV',
  provenance:
    'Sample sizes (Sch. III Part I), t/√n and t with its interpolation (Part III), the counts that fail a lot (Part IV), the limits of error (Sch. II Parts V–VII, XIV) and the three failure conditions of s. 52 read in the Regulations.',
  verified: [
    'sample: lot 2–10 all; 11–128 a quarter rounded up, at least 10; 129–4 000 → 32; 4 001–8 000 → 64; 8 001–12 000 → 96; over 12 000 → 125 (Sch. III Part I)',
    't/√n for n 2–32, 64, 96, 125 and t for 32, 64, 96, 125; interpolation of t between listed sizes (Sch. III Part III)',
    'units short by more than the limit of error that fail a lot, by sample size (Sch. III Part IV)',
    'limits of error: Part V metric, Part VI Canadian mass, Part VII Canadian volume, Part XIV count (Sch. II)',
    'a lot fails with two or more units short by more than twice the limit of error (s. 52(4)(c))',
  ],
  fromMemory: [],
  parameters: [
    { name: 'articleMass', type: 'number', description: 'mass of one article in grams, for a count declaration of more than 100 articles (Sch. II Part XIV)', default: null },
  ],
};

const CA_UNITS: readonly Unit[] = CA_WM_REGS_INFO.scope.units;

/** Sch. III Part I: the sample size for a lot. */
export function caSampleSize(lotSize: number): number {
  if (lotSize <= 10) return lotSize;
  if (lotSize <= 128) return Math.max(10, Math.ceil(lotSize / 4));
  if (lotSize <= 4000) return 32;
  if (lotSize <= 8000) return 64;
  if (lotSize <= 12000) return 96;
  return 125;
}

/** Sch. III Part III: t/√n by sample size, as printed. */
export const CA_T_OVER_ROOT_N: Readonly<Record<number, number>> = {
  2: 45.01, 3: 5.73, 4: 2.92, 5: 2.06, 6: 1.65, 7: 1.4, 8: 1.24, 9: 1.12, 10: 1.03, 11: 0.955, 12: 0.897, 13: 0.847, 14: 0.805,
  15: 0.769, 16: 0.737, 17: 0.708, 18: 0.683, 19: 0.66, 20: 0.64, 21: 0.621, 22: 0.604, 23: 0.588, 24: 0.573, 25: 0.559, 26: 0.547,
  27: 0.535, 28: 0.524, 29: 0.513, 30: 0.503, 31: 0.494, 32: 0.485, 64: 0.332, 96: 0.269, 125: 0.234,
};

/** Sch. III Part III: t itself at the listed sizes the interpolation runs between. */
export const CA_T: Readonly<Record<number, number>> = { 32: 2.746, 64: 2.657, 96: 2.634, 125: 2.615 };

/** Sch. III Part IV: the count of units short by more than the limit of error that fails a lot, by sample size. */
export const CA_FAIL_COUNTS: readonly { minN: number; maxN: number; fails: number }[] = [
  { minN: 2, maxN: 8, fails: 1 },
  { minN: 9, maxN: 20, fails: 2 },
  { minN: 21, maxN: 32, fails: 3 },
  { minN: 33, maxN: 50, fails: 4 },
  { minN: 51, maxN: 65, fails: 5 },
  { minN: 66, maxN: 80, fails: 6 },
  { minN: 81, maxN: 102, fails: 7 },
  { minN: 103, maxN: 125, fails: 8 },
];

/** The Part IV count for n units sampled (the 125 row for more; a single unit as the 2–8 row). */
export function caFailCount(n: number): number {
  return (CA_FAIL_COUNTS.find((r) => n >= r.minN && n <= r.maxN) ?? (n < 2 ? CA_FAIL_COUNTS[0] : CA_FAIL_COUNTS[CA_FAIL_COUNTS.length - 1]))!.fails;
}

/**
 * The factor t/√n of Xa for n units sampled from a lot of `lotSize`: zero when every unit is
 * sampled; printed (Part III) for a listed size; for a size between 32 and 125 that is not listed,
 * t = a − [(c − e)/(c − d)]·(a − b) with a, b the t values at the listed sizes below and above and
 * c, d, e = 120 divided by the size below, the size above and the selected size (Part III).
 */
export function caFactor(n: number, lotSize: number): { value: number; how: string } {
  if (n >= lotSize) return { value: 0, how: `zero: every unit of the lot is sampled (${R} s. 52)` };
  const printed = CA_T_OVER_ROOT_N[n];
  if (printed !== undefined) return { value: printed, how: `t/√n as printed in ${R} Sch. III Part III` };
  if (n > 32 && n < 125) {
    const listed = [32, 64, 96, 125];
    const below = listed.filter((k) => k < n).pop()!;
    const above = listed.find((k) => k > n)!;
    const a = CA_T[below]!;
    const b = CA_T[above]!;
    const c = 120 / below;
    const d = 120 / above;
    const e = 120 / n;
    const t = a - ((c - e) / (c - d)) * (a - b);
    return { value: t / Math.sqrt(n), how: `t = ${formatNumber(t, 5)} interpolated between n ${below} and ${above} as ${R} Sch. III Part III says` };
  }
  return { value: meanCheckFactor(n), how: `t(0.995; ${n - 1})/√${n} computed: ${R} Sch. III Part III lists no size above 125` };
}

/** The Sch. II table for a declaration in `unit` (count needs the article mass above 100 articles). */
function tableFor(unit: Unit, qn: number, params: { articleMass?: number } | undefined): TneTable | EngineError {
  if (unit === 'count') {
    if (qn <= 100) return caCountTne(false);
    const m = params?.articleMass;
    if (m === undefined) {
      return engineError('parameter-required', `${R} Sch. II Part XIV: a count over 100 needs the mass of one article (articleMass, grams)`, '/product/rulebook/params/articleMass');
    }
    return caCountTne(m > 14);
  }
  if (unit === 'oz' || unit === 'lb') return CA_MASS_TNE;
  if (unit === 'imp fl oz' || unit === 'imp gal') return CA_VOLUME_TNE;
  return CA_METRIC_TNE;
}

function tneOf(qn: number, unit: Unit, params: { articleMass?: number } | undefined): TneResult {
  const table = tableFor(unit, qn, params);
  if ('code' in table) return { ok: false, reason: table.message };
  return tneByTable(qn, unit, table);
}

function validate(input: LotInput): EngineError | null {
  const params = input.product.rulebook.params;
  const m = params?.articleMass;
  if (m !== undefined && !(typeof m === 'number' && Number.isFinite(m) && m > 0)) {
    return engineError('invalid-parameter', 'articleMass must be a finite number of grams > 0', '/product/rulebook/params/articleMass');
  }
  if (input.product.unit === 'count') {
    const t = tableFor('count', input.product.nominalQuantity, params);
    if ('code' in t) return t;
  }
  const decl = checkDeclaration(input, 'ca-wm-regs', CA_UNITS, (u) => tneOf(input.product.nominalQuantity, u, params));
  if (decl) return decl;
  if (input.lot.previousSample !== undefined) {
    return engineError('second-sample-not-applicable', `${R} s. 52 judges one sample`, '/lot/previousSample');
  }
  return null;
}

function judge(ctx: JudgeContext): Judgement | { error: EngineError } {
  const { input, net, unit, qn, mean, standardDeviation: sd } = ctx;
  const { lotSize } = input.lot;
  const tneRes = tneOf(qn, unit, input.product.rulebook.params);
  if (!tneRes.ok) return { error: engineError('outside-rulebook-scope', tneRes.reason, '/product/nominalQuantity') };
  const loe = tneRes.value;
  const t1Limit = qn - loe;
  const t2Limit = qn - 2 * loe;
  const n = net.length;
  const required = caSampleSize(lotSize);
  const loeRule = `limit of error ${formatNumber(tneRes.baseValue)} ${tneRes.baseUnit}: ${tneRes.rule}`;
  const volumeNote = dimensionOf(unit) === 'volume' ? ['a liquid stated by volume is measured at 20 °C (C.R.C. c. 1605 s. 51)'] : [];
  const base = {
    meanTest: { hypothesisedMean: qn, alternative: 'less' as const, alpha: 0.005, unit },
    tne: { value: loe, baseValue: tneRes.baseValue, baseUnit: tneRes.baseUnit },
    warnings: [
      ...tareSpreadWarnings(INMETRO_TARE_SPREAD_ADVICE, { standardDeviation: ctx.tareSampleStandardDeviation, mean: ctx.tareMean, count: ctx.tareSampleCount }, loe, qn, unit),
      ...volumeNote,
    ],
  };
  const size = sampleSizeCriterion(n, required, `for a lot of ${lotSize} units`, `${R} Sch. III Part I`);
  if (n < required) return { ...base, criteria: [size], insufficient: true, additionalPacks: null };

  const factor = caFactor(n, lotSize);
  const xa = mean + sd * factor.value;
  const q = (v: number) => formatQuantity(v, unit);
  const xaPassed = !(xa < qn);
  const xaCriterion: Criterion = {
    id: 'mean',
    observed: xa,
    limit: qn,
    passed: xaPassed,
    sentence: `Xa = x̄ + s·t/√n = ${q(mean)} + ${q(sd)} × ${formatNumber(factor.value, 4)} = ${q(xa)} is ${xaPassed ? 'not less than' : 'less than'} the stated quantity ${q(qn)} (${factor.how})`,
    clause: `${R} s. 52(4)(a); Sch. III Part III`,
  };
  const [t1, t2] = countBelowT1T2(net, t1Limit, t2Limit);
  const fails = caFailCount(n);
  const names = { limit: 'the limit of error line', tne: 'limit of error' };
  const t1c = t1Criterion(t1.count, t1Limit, loe, unit, fails - 1, fails, `in a sample of ${n} (a lot fails at ${fails}; Sch. III Part IV)`, `${R} s. 52(4)(b); Sch. III Part IV; ${loeRule}`, false, names);
  const t2c = t2Criterion(t2.count, t2Limit, unit, 1, `${R} s. 52(4)(c): a lot fails with two or more; ${loeRule}`, 'limit of error');
  return {
    ...base,
    criteria: [size, xaCriterion, t1c, t2c],
    insufficient: false,
    additionalPacks: null,
    belowT1Indices: t1.indices,
    belowT2Indices: t2.indices,
  };
}

export const caWmRegs: Rulebook = { info: CA_WM_REGS_INFO, validate, judge, tne: (qn, unit, params) => tneOf(qn, unit, params) };
