// The market rulebooks of issue 17: every table value pinned with its clause, and the boundary lots
// decided as the texts say. Source of every number: ../shared/reference/markets.md (section named
// beside each check), which cites the published text and clause.
import { describe, expect, it } from 'vitest';
import { evaluateLot, evaluateLotForMarkets, listRulebooks, tolerableNegativeError, type LotInput, type RulebookChoice, type Unit, type Verdict } from '../../shared/engine';
import { lotInput, ramp, shuffled, verdictOf, withPacksAt } from './helpers';
import { UK_SINGLE_PLANS, EU_DOUBLE_PLANS } from '../../shared/engine/rulebooks/eu76211';
import { R87_PLAN } from '../../shared/engine/rulebooks/r87Plan';
import { NZ_PLAN } from '../../shared/engine/rulebooks/nzWmRegs1999';
import { caFactor, caFailCount, caSampleSize, CA_FAIL_COUNTS, CA_T, CA_T_OVER_ROOT_N } from '../../shared/engine/rulebooks/caWmRegs';
import { usPlanFromMemory } from '../../shared/engine/rulebooks/usNistHb133';
import { meanCheckFactor } from '../../shared/engine/rulebooks/criteria';

const tne = (qn: number, unit: Unit, id: string, params?: RulebookChoice['params']) => {
  const r = tolerableNegativeError(qn, unit, id, params);
  if (!r.ok) throw new Error(r.reason);
  return r;
};
const on = (id: RulebookChoice['id'], params?: RulebookChoice['params']): RulebookChoice => (params ? { id, params } : { id });
const criterion = (v: Verdict, id: string) => v.criteria.find((c) => c.id === id)!;
const refusal = (input: LotInput) => {
  const r = evaluateLot(input);
  if (r.ok) throw new Error('expected a refusal');
  return r.error;
};
/** n values around `centre` with the sample standard deviation of a ramp of half-width 1 scaled by `h`. */
const sdOf = (xs: number[]) => {
  const m = xs.reduce((a, x) => a + x, 0) / xs.length;
  return Math.sqrt(xs.reduce((a, x) => a + (x - m) ** 2, 0) / (xs.length - 1));
};

describe('every criterion of every rulebook names its clause', () => {
  it.each(listRulebooks().map((r) => r.id))('%s', (id) => {
    const unit: Unit = 'g';
    const v = verdictOf(lotInput({ rulebook: { id } }, { lotSize: 2000, measurementUnit: unit, measurements: shuffled(ramp(125, 502, 2)) }));
    expect(v.criteria.length).toBeGreaterThan(1);
    for (const c of v.criteria) expect(c.clause.length, `${id} ${c.id}`).toBeGreaterThan(5);
    expect(v.rulebook.edition.length).toBeGreaterThan(5);
    const info = listRulebooks().find((r) => r.id === id)!;
    expect(info.scope.units.length).toBeGreaterThan(0);
    expect(Array.isArray(info.verified) && Array.isArray(info.fromMemory)).toBe(true);
  });
});

describe('uk-2006-659 — SI 2006/659 Schedule 2 as made (markets.md §2)', () => {
  it('pins the single plan of para 3.3–3.5 and the double plan as the Directive', () => {
    expect(UK_SINGLE_PLANS.map((r) => [r.minLot, r.plan.n, r.plan.accept, r.plan.reject])).toEqual([
      [100, 50, 3, 4],
      [501, 80, 5, 6],
      [3201, 125, 7, 8],
    ]);
    expect(EU_DOUBLE_PLANS.map((r) => [r.first.n, r.first.accept, r.first.reject, r.second.accept, r.second.reject])).toEqual([
      [30, 1, 3, 4, 5],
      [50, 2, 5, 6, 7],
      [80, 3, 7, 8, 9],
    ]);
  });

  it.each([
    [3, 'conforming'],
    [4, 'nonconforming'],
  ])('a lot of 60 checked in full with %d defectives is %s (para 3.6: ≤ 5 % of the lot = 3)', (defectives, decision) => {
    // Qn 500 g: TNE 15 g, T1 485 g; 484 g is below T1 only (Directive Annex I 2.4, as the UK table).
    const v = verdictOf(lotInput({ rulebook: on('uk-2006-659') }, { lotSize: 60, measurements: withPacksAt(60, 506, defectives, 484, 11) }));
    expect(v.decision).toBe(decision);
    expect(criterion(v, 't1')).toMatchObject({ observed: defectives, limit: 3, clause: expect.stringContaining('SI 2006/659 Sch. 2 para 3.6') });
    expect(criterion(v, 'mean').clause).toContain('para 4.7');
  });

  it('takes a 20 kg pack (scope to 25 kg; TNE 1 % = 200 g, gov.uk guidance, markets.md §1.9), which the Directive does not', () => {
    expect(tne(20000, 'g', 'uk-2006-659').baseValue).toBe(200);
    expect(tne(20, 'kg', 'uk-2006-659').value).toBeCloseTo(0.2, 12);
    expect(tne(12, 'L', 'uk-2006-659').baseValue).toBe(150);
    expect(tne(25000, 'g', 'uk-2006-659').baseValue).toBe(250);
    expect(tolerableNegativeError(25001, 'g', 'uk-2006-659').ok).toBe(false);
    expect(tolerableNegativeError(4.9, 'g', 'uk-2006-659').ok).toBe(false);
    const v = verdictOf(lotInput({ nominalQuantity: 20, unit: 'kg', rulebook: on('uk-2006-659') }, { lotSize: 300, measurementUnit: 'kg', measurements: shuffled(ramp(30, 20.05, 0.02)) }));
    expect(v.decision).toBe('conforming');
    expect(refusal(lotInput({ nominalQuantity: 20, unit: 'kg' }, { lotSize: 300, measurementUnit: 'kg', measurements: ramp(30, 20.05, 0.02) }))).toMatchObject({
      code: 'outside-rulebook-scope',
      pointer: '/product/nominalQuantity',
    });
  });

  it('uses λ 0.503 for n 30 and 0.379 for n 50 as printed (para 4.5–4.6) and says so', () => {
    const v30 = verdictOf(lotInput({ rulebook: on('uk-2006-659') }, { lotSize: 400, measurements: shuffled(ramp(30, 501, 3)) }));
    expect(criterion(v30, 'mean').limit).toBe(500 - 0.503 * v30.statistics.descriptive.standardDeviation!);
    expect(criterion(v30, 'mean').sentence).toMatch(/as printed in SI 2006\/659 Sch\. 2 para 4\.5–4\.6/);
    const v50 = verdictOf(lotInput({ rulebook: on('uk-2006-659', { nonDestructivePlan: 'single' }) }, { lotSize: 400, measurements: shuffled(ramp(50, 501, 3)) }));
    expect(criterion(v50, 'mean').limit).toBe(500 - 0.379 * v50.statistics.descriptive.standardDeviation!);
    expect(criterion(v50, 't1')).toMatchObject({ limit: 3 }); // single plan, lot 100–500: accept ≤ 3
  });

  it('refuses metric-less declarations (the UK market declares in metric units)', () => {
    expect(refusal(lotInput({ nominalQuantity: 16, unit: 'oz', rulebook: on('uk-2006-659') }, { measurements: ramp(30, 16, 0.1), measurementUnit: 'oz' }))).toMatchObject({
      code: 'unit-not-allowed',
      pointer: '/product/unit',
    });
  });
});

describe('oiml-r87-2016 — OIML R 87 as NTMR 2009 and JJF 1070 reproduce it (markets.md §1.1–1.4, §6)', () => {
  it('pins the plan of 附表4: lots, n, printed λ, T1 allowed', () => {
    expect(R87_PLAN.map((r) => [r.minLot, r.maxLot, r.n, r.factor, r.allowed])).toEqual([
      [1, 10, null, null, 0],
      [11, 50, 10, 1.028, 0],
      [51, 99, 13, 0.848, 1],
      [100, 500, 50, 0.379, 3],
      [501, 3200, 80, 0.295, 5],
      [3201, Number.POSITIVE_INFINITY, 125, 0.234, 7],
    ]);
  });

  it('judges 1 500 g with TNE 23 g (22.5 rounded up to a whole gram above 1 000; markets.md §1.1)', () => {
    const v = verdictOf(lotInput({ nominalQuantity: 1500, rulebook: on('oiml-r87-2016') }, { lotSize: 300, measurements: shuffled(ramp(50, 1502, 6)) }));
    expect(v.net).toMatchObject({ tolerableNegativeError: 23, t1Limit: 1477, t2Limit: 1454 });
  });

  it('checks lots of 1–10 in full with no average check and no T1 allowed (附表4 note 2)', () => {
    const v = verdictOf(lotInput({ rulebook: on('oiml-r87-2016') }, { lotSize: 8, measurements: ramp(8, 499, 0.5) }));
    expect(v.criteria.map((c) => c.id)).toEqual(['sample-size', 't1', 't2']);
    expect(v.decision).toBe('conforming'); // mean 499 g < Qn, but no average check is made
    expect(v.warnings.join(' ')).toMatch(/no average check for a lot of 8 packs/);
    const one = verdictOf(lotInput({ rulebook: on('oiml-r87-2016') }, { lotSize: 8, measurements: [...ramp(7, 501, 0.5), 484] }));
    expect(one.decision).toBe('nonconforming');
  });

  it('uses the printed λ 0.848 for n 13 where t(0.995; 12)/√13 computes to 0.8472 (markets.md §1.4)', () => {
    expect(meanCheckFactor(13)).toBeCloseTo(0.847177, 5);
    const v = verdictOf(lotInput({ rulebook: on('oiml-r87-2016') }, { lotSize: 60, measurements: shuffled(ramp(13, 501, 2)) }));
    expect(criterion(v, 'mean').limit).toBe(500 - 0.848 * v.statistics.descriptive.standardDeviation!);
    expect(criterion(v, 'mean').sentence).toMatch(/factor as printed in OIML R 87 \(2016\) as reproduced in JJF 1070 附表4/);
  });

  it('computes t only where nothing is printed, and says so (n 14 in a lot of 60)', () => {
    const v = verdictOf(lotInput({ rulebook: on('oiml-r87-2016') }, { lotSize: 60, measurements: shuffled(ramp(14, 501, 2)) }));
    expect(criterion(v, 'mean').limit).toBeCloseTo(500 - meanCheckFactor(14) * v.statistics.descriptive.standardDeviation!, 12);
    expect(criterion(v, 'mean').sentence).toMatch(/computed: the text prints no factor for n = 14/);
  });
});

describe('cn-jjf-1070 — China 附表3 and 附表4 (markets.md §6)', () => {
  it('shares the R 87 T table with its rounding (附表3 note): 3 g → 0.3; 1 250 → 19; 2 500 → 38; 8 000 → 120', () => {
    expect([3, 1250, 2500, 8000, 50000].map((q) => tne(q, 'g', 'cn-jjf-1070').baseValue)).toEqual([0.3, 19, 38, 120, 500]);
    expect(tolerableNegativeError(50001, 'g', 'cn-jjf-1070').ok).toBe(false);
  });
  it('samples 50 of a lot of 400 with λ 0.379 and 3 allowed', () => {
    const v = verdictOf(lotInput({ rulebook: on('cn-jjf-1070') }, { lotSize: 400, measurements: withPacksAt(50, 502, 3, 484, 7) }));
    expect(v.decision).toBe('conforming');
    expect(criterion(v, 't1')).toMatchObject({ observed: 3, limit: 3 });
    const four = verdictOf(lotInput({ rulebook: on('cn-jjf-1070') }, { lotSize: 400, measurements: withPacksAt(50, 502, 4, 484, 7) }));
    expect(four.decision).toBe('nonconforming');
  });
});

describe('au-ntmr-2009 — NTMR 2009 reg 4.36(4), R 87 plan (markets.md §4)', () => {
  it('pins the tolerable deficiency with whole-gram rounding above 1 000 (note a)', () => {
    expect([30, 125, 330, 1250, 1500, 12000, 20000].map((q) => tne(q, 'g', 'au-ntmr-2009').baseValue)).toEqual([2.7, 5.7, 9.9, 19, 23, 150, 200]);
  });
  it('counts: 50 or fewer none; over 50 1 % rounded up (reg 4.36(4))', () => {
    expect([50, 51, 100, 250].map((q) => tne(q, 'count', 'au-ntmr-2009').baseValue)).toEqual([0, 1, 1, 3]);
  });
  it.each([
    [130, 50],
    [500, 50],
    [3500, 125],
    [5000, 125],
  ])('a lot of %d needs %d packs (NMI worked examples)', (lotSize, n) => {
    const v = verdictOf(lotInput({ rulebook: on('au-ntmr-2009') }, { lotSize, measurements: shuffled(ramp(n - 1, 502, 2)) }));
    expect(v.decision).toBe('insufficient-data');
    expect(criterion(v, 'sample-size').limit).toBe(n);
  });
});

describe('nz-wm-regs-1999 — Schedule 7A (markets.md §5)', () => {
  it('pins Table 1: lot bands, sample, printed c, non-standard packages permitted', () => {
    expect(NZ_PLAN.map((r) => [r.minLot, r.n, r.c, r.allowed])).toEqual([
      [1, null, 0, 0],
      [13, 12, 0.746, 0],
      [40, 12, 0.826, 1],
      [80, 12, 0.86, 2],
      [150, 32, 0.465, 3],
      [400, 32, 0.483, 4],
      [4001, 80, 0.295, 6],
    ]);
  });
  it('uses the printed c = 0.465 for a lot of 200 (n 32), not t(0.995; 31)/√32 = 0.485, and labels the mean criterion from memory', () => {
    const v = verdictOf(lotInput({ rulebook: on('nz-wm-regs-1999') }, { lotSize: 200, measurements: shuffled(ramp(32, 501, 3)) }));
    const mean = criterion(v, 'mean');
    expect(mean.limit).toBe(500 - 0.465 * v.statistics.descriptive.standardDeviation!);
    expect(meanCheckFactor(32).toFixed(3)).toBe('0.485'); // as C.R.C. c. 1605 Sch. III Part III prints it for n 32
    expect(mean.fromMemory).toBe(true);
    expect(mean.clause).toMatch(/from memory; verify/);
    expect(mean.sentence).toMatch(/as printed in NZ Weights and Measures Regulations 1999 Sch\. 7A Table 1/);
  });
  it('allows no inadequate package (below twice the error) in the sample', () => {
    const xs = shuffled(ramp(32, 503, 2));
    xs[4] = 469; // Qn 500 g: error 15 g, twice it 30 g
    expect(verdictOf(lotInput({ rulebook: on('nz-wm-regs-1999') }, { lotSize: 200, measurements: xs })).decision).toBe('nonconforming');
  });
});

describe('ca-wm-regs — C.R.C. c. 1605 s. 52, Schedules II and III (markets.md §3)', () => {
  it('pins the sample sizes of Sch. III Part I (lot 11 → 10; 50 → 13; 2 000 → 32)', () => {
    expect([2, 10, 11, 40, 50, 128, 129, 2000, 4000, 4001, 8000, 8001, 12000, 12001].map(caSampleSize)).toEqual([2, 10, 10, 10, 13, 32, 32, 32, 32, 64, 64, 96, 96, 125]);
  });
  it('pins t/√n of Sch. III Part III and t at 32, 64, 96, 125', () => {
    expect(CA_T_OVER_ROOT_N).toEqual({
      2: 45.01, 3: 5.73, 4: 2.92, 5: 2.06, 6: 1.65, 7: 1.4, 8: 1.24, 9: 1.12, 10: 1.03, 11: 0.955, 12: 0.897, 13: 0.847, 14: 0.805, 15: 0.769,
      16: 0.737, 17: 0.708, 18: 0.683, 19: 0.66, 20: 0.64, 21: 0.621, 22: 0.604, 23: 0.588, 24: 0.573, 25: 0.559, 26: 0.547, 27: 0.535,
      28: 0.524, 29: 0.513, 30: 0.503, 31: 0.494, 32: 0.485, 64: 0.332, 96: 0.269, 125: 0.234,
    });
    expect(CA_T).toEqual({ 32: 2.746, 64: 2.657, 96: 2.634, 125: 2.615 });
  });
  it('interpolates t between listed sizes as Part III says, t = a − [(c − e)/(c − d)]·(a − b) with c, d, e = 120/size', () => {
    // n 48: a = 2.746 (32), b = 2.657 (64); c = 3.75, d = 1.875, e = 2.5 → t = 2.746 − (1.25/1.875)·0.089
    const t48 = 2.746 - ((120 / 32 - 120 / 48) / (120 / 32 - 120 / 64)) * (2.746 - 2.657);
    expect(caFactor(48, 2000).value).toBeCloseTo(t48 / Math.sqrt(48), 14);
    expect(caFactor(48, 2000).how).toMatch(/interpolated between n 32 and 64/);
    expect(caFactor(64, 5000).value).toBe(0.332); // listed: printed
    expect(caFactor(40, 40).value).toBe(0); // every unit sampled: zero (s. 52)
  });
  it('pins the Part IV counts that fail a lot', () => {
    expect(CA_FAIL_COUNTS.map((r) => [r.minN, r.maxN, r.fails])).toEqual([
      [2, 8, 1], [9, 20, 2], [21, 32, 3], [33, 50, 4], [51, 65, 5], [66, 80, 6], [81, 102, 7], [103, 125, 8],
    ]);
    expect(caFailCount(32)).toBe(3);
  });
  it('pins the limits of error of Sch. II Parts V, VI, VII and XIV (no rounding in V–VII)', () => {
    // Part V (worked: 500 g → 15 g; 1.5 kg → 22.5 g)
    expect([30, 75, 125, 250, 400, 500, 1500, 12000, 20000].map((q) => tne(q, 'g', 'ca-wm-regs').baseValue)).toEqual([2.7, 4.5, 5.625, 9, 12, 15, 22.5, 150, 200]);
    // Part VI, ounces: 1 oz 9 %; 2 oz 0.16; 4 oz 4.5 %; 8 oz 0.32; 16 oz 3 %; 2 lb 0.53 oz; 5 lb 1.5 %; 25 lb 5.28 oz; 40 lb 1 %
    const oz = [1, 2, 4, 8, 16, 32, 80, 400, 640].map((q) => tne(q, 'oz', 'ca-wm-regs').baseValue);
    expect(oz.map((v) => Number(v.toFixed(6)))).toEqual([0.09, 0.16, 0.18, 0.32, 0.48, 0.53, 1.2, 5.28, 6.4]);
    expect(tne(2, 'lb', 'ca-wm-regs')).toMatchObject({ baseValue: 0.53, baseUnit: 'oz' });
    // Part VII, imperial fl oz and gal
    expect(tne(1, 'imp gal', 'ca-wm-regs')).toMatchObject({ baseUnit: 'imp fl oz' });
    expect(Number(tne(1, 'imp gal', 'ca-wm-regs').baseValue.toFixed(6))).toBe(2.4); // 160 fl oz × 1.5 %
    expect(tne(3, 'imp gal', 'ca-wm-regs').baseValue).toBe(5.28);
    expect(tne(10, 'imp fl oz', 'ca-wm-regs').baseValue).toBe(0.32);
    // Part XIV, count
    expect([10, 49, 50, 100].map((q) => tne(q, 'count', 'ca-wm-regs').baseValue)).toEqual([0, 0, 1, 1]);
    expect(tne(200, 'count', 'ca-wm-regs', { articleMass: 10 }).baseValue).toBe(2); // 0.75 % = 1.5 → 2
    expect(tne(200, 'count', 'ca-wm-regs', { articleMass: 20 }).baseValue).toBe(1); // 0.5 % = 1
  });

  // Qn 500 g, limit of error 15 g (Part V): short by more than the limit below 485 g, by more than twice below 470 g.
  const ca = (xs: number[], lotSize = 2000) => verdictOf(lotInput({ rulebook: on('ca-wm-regs') }, { lotSize, measurements: xs }));
  it('one unit short by more than twice the limit: conforming; two: nonconforming (s. 52(4)(c))', () => {
    const one = shuffled(ramp(32, 503, 1.5));
    one[3] = 469;
    expect(ca(one).decision).toBe('conforming');
    expect(criterion(ca(one), 't2')).toMatchObject({ observed: 1, limit: 1, passed: true, clause: expect.stringContaining('s. 52(4)(c)') });
    const two = one.slice();
    two[17] = 469;
    expect(ca(two).decision).toBe('nonconforming');
    expect(criterion(ca(two), 't2').passed).toBe(false);
  });
  it('three units short by more than the limit in a sample of 32 fail the lot; two do not (Part IV: 21–32 → 3)', () => {
    expect(ca(withPacksAt(32, 503, 2, 484, 9)).decision).toBe('conforming');
    const three = ca(withPacksAt(32, 503, 3, 484, 9));
    expect(three.decision).toBe('nonconforming');
    expect(criterion(three, 't1')).toMatchObject({ observed: 3, passed: false, clause: expect.stringContaining('s. 52(4)(b)') });
  });
  it('decides Xa = x̄ + s·0.485 on both sides of the stated quantity (s. 52(4)(a); lot 2 000 → 32, 0.485)', () => {
    const spread = ramp(32, 0, 2);
    const s = sdOf(spread);
    const at = (delta: number) => ca(spread.map((x) => x + 500 - 0.485 * s + delta));
    const above = at(0.001);
    expect(criterion(above, 'mean')).toMatchObject({ passed: true, limit: 500 });
    expect(criterion(above, 'mean').observed).toBeCloseTo(500.001, 9);
    expect(at(-0.001).decision).toBe('nonconforming');
    expect(criterion(at(-0.001), 'mean').sentence).toMatch(/is less than the stated quantity 500 g/);
  });
  it('needs 13 units of a lot of 50 (25 % rounded up)', () => {
    expect(ca(shuffled(ramp(12, 503, 1)), 50).decision).toBe('insufficient-data');
    const v = ca(shuffled(ramp(13, 503, 1)), 50);
    expect(v.decision).toBe('conforming');
    expect(criterion(v, 'mean').sentence).toMatch(/0\.847/); // t/√n printed for n 13
  });
  it('refuses a US gallon (Canada declares in imperial measure) and a count over 100 without the article mass', () => {
    expect(refusal(lotInput({ nominalQuantity: 1, unit: 'US gal', rulebook: on('ca-wm-regs') }, { measurementUnit: 'US gal', measurements: ramp(32, 1, 0.01) }))).toMatchObject({
      code: 'unit-not-allowed',
      pointer: '/product/unit',
    });
    expect(refusal(lotInput({ nominalQuantity: 200, unit: 'count', rulebook: on('ca-wm-regs') }, { measurementUnit: 'count', measurements: ramp(32, 201, 1) }))).toMatchObject({
      pointer: '/product/rulebook/params/articleMass',
    });
  });
  it('judges a count declaration in articles', () => {
    const v = verdictOf(lotInput({ nominalQuantity: 60, unit: 'count', rulebook: on('ca-wm-regs') }, { measurementUnit: 'count', measurements: shuffled([...Array(31).fill(60), 61, 62].slice(0, 32)) }));
    expect(v.net).toMatchObject({ tolerableNegativeError: 1, baseUnit: 'count' });
    expect(v.decision).toBe('conforming');
  });
});

describe('us-nist-hb133 — NIST Handbook 133 Chapter 2 (markets.md §7)', () => {
  const us = (product: Partial<LotInput['product']>, lot: Partial<LotInput['lot']>) => verdictOf(lotInput({ rulebook: on('us-nist-hb133'), ...product }, { lotSize: 100, ...lot }));
  it.each([
    [113, 7.2],
    [907, 31.7],
  ])('the MAV of %d g is %d g, as Chapter 2 states it', (qn, mav) => {
    const v = us({ nominalQuantity: qn }, { measurements: shuffled(ramp(12, qn + 1, 1)) });
    expect(v.net.tolerableNegativeError).toBe(mav);
    const indiv = criterion(v, 't1');
    expect(indiv.clause).toMatch(/as NIST Handbook 133 \(2026\) Chapter 2 states it/);
    expect(indiv.clause).toMatch(/allowed count NIST Handbook 133 \(2026\) Appendix A, from memory; verify/); // the plan is from memory
    expect(indiv.fromMemory).toBe(true);
  });
  it('labels a MAV from the remembered table as from memory in the criterion and the warnings', () => {
    const v = us({ nominalQuantity: 250 }, { measurements: shuffled(ramp(12, 252, 1)) });
    expect(criterion(v, 't1')).toMatchObject({ fromMemory: true, clause: expect.stringMatching(/from memory; verify/) });
    expect(v.warnings.join(' ')).toMatch(/Appendix A values used here \(plan, MAV\) are from memory; verify/);
  });
  it('cites the plant’s entries when the product gives its MAV and plan', () => {
    const v = us({ nominalQuantity: 250, rulebook: on('us-nist-hb133', { mav: 12, plan: { sampleSize: 12, sampleCorrectionFactor: 0.635, allowed: 0 } }) }, { measurements: shuffled(ramp(12, 252, 1)) });
    expect(v.net.tolerableNegativeError).toBe(12);
    for (const c of v.criteria) expect(c.fromMemory, c.id).toBeUndefined();
    expect(criterion(v, 't1').clause).toMatch(/entered by the plant/);
    expect(v.warnings.join(' ')).not.toMatch(/from memory/);
  });
  it('Category A: fails when the average error is negative and larger than SEL = s × SCF; Category B fails on any negative average', () => {
    const plan = { sampleSize: 12, sampleCorrectionFactor: 0.635, allowed: 0 };
    const spread = ramp(12, 0, 1);
    const sel = sdOf(spread) * 0.635;
    const lot = (category: 'A' | 'B', shift: number) =>
      us({ nominalQuantity: 500, rulebook: on('us-nist-hb133', { category, mav: 21.7, plan }) }, { measurements: spread.map((x) => x + 500 + shift) });
    expect(lot('A', -sel + 0.001).decision).toBe('conforming');
    expect(lot('A', -sel - 0.001).decision).toBe('nonconforming');
    expect(lot('B', -0.001).decision).toBe('nonconforming');
    expect(lot('B', 0).decision).toBe('conforming');
  });
  it('counts packages short by more than the MAV against the plan', () => {
    const plan = { sampleSize: 24, sampleCorrectionFactor: 0.422, allowed: 1 };
    const lot = (k: number) => us({ nominalQuantity: 500, rulebook: on('us-nist-hb133', { mav: 21.7, plan }) }, { lotSize: 1000, measurements: withPacksAt(24, 505, k, 478, 5) });
    expect(lot(1).decision).toBe('conforming');
    expect(lot(2).decision).toBe('nonconforming');
  });
  it('judges a dual declaration against the larger quantity (1 lb beside 454 g → 454 g)', () => {
    const v = us({ nominalQuantity: 1, unit: 'lb', rulebook: on('us-nist-hb133', { otherDeclaration: { quantity: 454, unit: 'g' }, mav: 0.07 }) }, { measurementUnit: 'lb', measurements: shuffled(ramp(12, 1.002, 0.001)) });
    expect(v.net.nominalQuantity).toBeCloseTo(454 / 453.59237, 12);
    expect(v.warnings.join(' ')).toMatch(/larger quantity of the dual declaration/);
  });
  it('adds the moisture allowance to the SEL and the MAV (Table 2-3)', () => {
    const v = us({ nominalQuantity: 907, rulebook: on('us-nist-hb133', { moistureAllowancePercent: 3 }) }, { measurements: shuffled(ramp(12, 907, 1)) });
    expect(criterion(v, 't1').sentence).toMatch(/MAV \+ moisture allowance 58\.91 g/); // 31.7 g + 3 % of 907 g (27.21 g)
  });
  it('refuses an imperial declaration and a volume without a MAV entered', () => {
    expect(refusal(lotInput({ nominalQuantity: 10, unit: 'imp fl oz', rulebook: on('us-nist-hb133') }, { measurementUnit: 'imp fl oz', measurements: ramp(12, 10, 0.1) }))).toMatchObject({ pointer: '/product/unit' });
    expect(refusal(lotInput({ nominalQuantity: 16, unit: 'fl oz', rulebook: on('us-nist-hb133') }, { measurementUnit: 'fl oz', measurements: ramp(12, 16, 0.1) }))).toMatchObject({
      pointer: '/product/rulebook/params/mav',
    });
  });
  it('labels the remembered Category A plan (lot 12–250 → 12; 251–3 200 → 24, 1 allowed)', () => {
    // from memory; verify — not check values, only the labels
    expect(usPlanFromMemory(100).fromMemory).toBe(true);
    expect(usPlanFromMemory(100).how).toMatch(/from memory; verify/);
  });
});

describe('one lot, several markets: a loop over evaluateLot', () => {
  it('one pack below twice the TNE: nonconforming for the EU, conforming for Canada (markets.md §1.7)', () => {
    // Qn 500 g; lot 2 000: EU n 50 (Annex II 2.2.1), Canada n 32 (Sch. III Part I); TNE = limit of error = 15 g.
    const xs = shuffled(ramp(50, 503, 1.5));
    xs[7] = 469;
    const results = evaluateLotForMarkets(lotInput({}, { lotSize: 2000, measurements: xs }), [on('eu-76-211'), on('ca-wm-regs')]);
    const decisions = results.map((r) => (r.result.ok ? r.result.verdict.decision : r.result.error.code));
    expect(decisions).toEqual(['nonconforming', 'conforming']);
    expect(results.map((r) => (r.result.ok ? r.result.verdict.rulebook.id : null))).toEqual(['eu-76-211', 'ca-wm-regs']);
  });
});
