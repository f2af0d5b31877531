import { describe, expect, it } from 'vitest';
import { evaluateLot, listRulebooks } from '../../shared/engine';
import { meanCheckFactor } from '../../shared/engine/rulebooks/criteria';
import { EU_DESTRUCTIVE_PLAN, EU_DOUBLE_PLANS, euPlan, UK_SINGLE_PLANS } from '../../shared/engine/rulebooks/eu76211';
import { lotInput, ramp, shuffled, verdictOf, withPacksAt } from './helpers';

describe('mean-check factor λ = t(0.995; n − 1)/√n (Directive 76/211/EEC Annex II 2.3.3)', () => {
  it.each([
    [30, 0.503], // non-destructive, lot 100–500
    [50, 0.379], // non-destructive, lot over 500
    [20, 0.64], // destructive
  ])('n = %d prints %d', (n, printed) => {
    expect(Number(meanCheckFactor(n).toFixed(3))).toBe(printed);
  });
});

describe('sampling plans (Directive 76/211/EEC Annex II 2.2.1 double, 2.2.2 single)', () => {
  it('has the double plan rows for lots 100–500, 501–3200 and over 3200 (Annex II 2.2.1)', () => {
    expect(EU_DOUBLE_PLANS.map((r) => [r.minLot, r.first.n, r.first.accept, r.first.reject, r.second.n, r.second.accept, r.second.reject])).toEqual([
      [100, 30, 1, 3, 30, 4, 5],
      [501, 50, 2, 5, 50, 6, 7],
      [3201, 80, 3, 7, 80, 8, 9],
    ]);
  });
  it('uses 20 packs, accept ≤ 1, reject ≥ 2 for destructive testing (Annex II 2.2.2)', () => {
    expect(EU_DESTRUCTIVE_PLAN).toEqual({ n: 20, accept: 1, reject: 2 });
    expect(euPlan(5000, 'destructive')).toMatchObject({ kind: 'single', first: { n: 20 } });
  });
  it('picks the plan by lot size at the band edges (Annex II 2.2.1)', () => {
    expect(euPlan(500, 'non-destructive')).toMatchObject({ first: { n: 30 }, meanN: 30 });
    expect(euPlan(501, 'non-destructive')).toMatchObject({ first: { n: 50 }, meanN: 50 });
    expect(euPlan(3200, 'non-destructive')).toMatchObject({ first: { n: 50 } });
    expect(euPlan(3201, 'non-destructive')).toMatchObject({ first: { n: 80 }, meanN: 50 });
    expect(euPlan(99, 'non-destructive')).toEqual({ kind: 'full' }); // Annex II 2.1: lots under 100, 100 % checking
    expect(euPlan(99, 'destructive')).toBeNull();
  });
});

/** A first sample of 30 (lot 400) with `short` packs below T1 = 485 g and the rest around 502 g. */
function firstSample(short: number): number[] {
  const xs = shuffled(ramp(30, 502, 3));
  for (let i = 0; i < short; i++) xs[3 + 7 * i] = 484;
  return xs;
}

describe('eu-76-211 decisions (Directive 76/211/EEC Annex I 1.1–1.3, Annex II 2.2–2.3)', () => {
  it('accepts a lot whose mean, T1 count and T2 count all pass', () => {
    const v = verdictOf(lotInput({}, { measurements: firstSample(1) }));
    expect(v.decision).toBe('conforming');
    expect(v.criteria.map((c) => [c.id, c.passed])).toEqual([
      ['sample-size', true],
      ['mean', true],
      ['t1', true],
      ['t2', true],
    ]);
    expect(v.net).toMatchObject({ tolerableNegativeError: 15, t1Limit: 485, t2Limit: 470 });
  });

  it('asks for a second sample of 30 when the first has 2 packs below T1 (between accept 1 and reject 3)', () => {
    const v = verdictOf(lotInput({}, { measurements: firstSample(2) }));
    expect(v.decision).toBe('second-sample-required');
    expect(v.secondSample).toEqual({ additionalPacks: 30 });
    expect(v.criteria.find((c) => c.id === 't1')!.passed).toBeNull();
  });

  it('rejects at the first sample with 3 packs below T1 (rejection number 3)', () => {
    expect(verdictOf(lotInput({}, { measurements: firstSample(3) })).decision).toBe('nonconforming');
  });

  it('decides on both samples together: 4 cumulative defectives accepted, 5 rejected (Annex II 2.2.1)', () => {
    const previous = firstSample(2);
    const ok = verdictOf(lotInput({}, { previousSample: previous, measurements: firstSample(2) }));
    expect(ok.decision).toBe('conforming');
    expect(ok.net.count).toBe(60);
    const bad = verdictOf(lotInput({}, { previousSample: previous, measurements: firstSample(3) }));
    expect(bad.decision).toBe('nonconforming');
  });

  it('refuses a second sample when the first one already decided the lot', () => {
    const r = evaluateLot(lotInput({}, { previousSample: firstSample(0), measurements: firstSample(0) }));
    expect(r.ok).toBe(false);
    if (!r.ok) expect(r.error).toMatchObject({ code: 'second-sample-not-required', pointer: '/lot/previousSample' });
  });

  it('fails the mean check when x̄ < Qn − λ·s, with the limit in the sentence', () => {
    const xs = shuffled(ramp(30, 497, 3));
    const v = verdictOf(lotInput({}, { measurements: xs }));
    const mean = v.criteria.find((c) => c.id === 'mean')!;
    expect(v.decision).toBe('nonconforming');
    expect(mean.passed).toBe(false);
    // λ = 0.503 as printed for n 30 (Annex II 2.3.3; markets.md §1.4), not the computed 0.503245…
    expect(mean.limit).toBe(500 - 0.503 * v.statistics.descriptive.standardDeviation!);
    expect(mean.sentence).toMatch(/^mean 497 g is below the lower limit 499\.\d+ g = 500 g − 0\.503 × 1\.\d+ g \(n = 30; factor as printed in Directive 76\/211\/EEC Annex II 2\.3\.3\)$/);
    expect(mean.clause).toBe('Directive 76/211/EEC Annex I 1.1, Annex II 2.3');
    expect(v.statistics.meanTest.conclusion).toBe('reject H0');
  });

  it('fails any lot with a pack below T2 = Qn − 2·TNE (Annex I 1.3)', () => {
    const xs = firstSample(0);
    xs[5] = 469;
    const v = verdictOf(lotInput({}, { measurements: xs }));
    expect(v.criteria.find((c) => c.id === 't2')!.passed).toBe(false);
    expect(v.decision).toBe('nonconforming');
  });

  it('says insufficient-data when the sample is smaller than the plan needs', () => {
    const v = verdictOf(lotInput({ nominalQuantity: 500 }, { lotSize: 4000, measurements: ramp(50, 502, 2) }));
    expect(v.decision).toBe('insufficient-data');
    expect(v.criteria[0]).toMatchObject({ id: 'sample-size', observed: 50, limit: 80, passed: false });
  });

  // Mean of a lot under 100 checked in full ≥ Qn: UK SI 2006/659 Sch. 2 para 4.7 (as made), and the
  // French transposition, Arrêté du 20 octobre 1978 art. 10.2 (Légifrance).
  it('checks every pack of a lot under 100 and then compares the mean with Qn itself (Annex II 2.1, Annex I 1.1)', () => {
    expect(verdictOf(lotInput({}, { lotSize: 40, measurements: ramp(39, 503, 2) })).decision).toBe('insufficient-data');
    const v = verdictOf(lotInput({}, { lotSize: 40, measurements: ramp(40, 500.5, 2) }));
    expect(v.decision).toBe('conforming');
    expect(v.criteria.find((c) => c.id === 'mean')).toMatchObject({ limit: 500, passed: true });
  });

  // UK SI 2006/659 Schedule 2 para 3.6 (as made; legislation.gov.uk): "For a batch of fewer than 100
  // packages the batch shall be considered acceptable for the purposes of the check if the number of
  // defective packages does not exceed 5%." The Directive itself gives no number for such a lot.
  it.each([
    [20, 1], // 5 % of 20 = 1
    [60, 3], // 5 % of 60 = 3
    [99, 4], // 5 % of 99 = 4.95: 4 may be defective, 5 may not
  ])('a lot of %d checked in full: the 5 %% rule (%d) is UK law, so eu-76-211 judges only mean ≥ Qn and T2 (markets.md §1.5)', (lotSize, allowed) => {
    // TNE for Qn 500 g is 15 g (Annex I 2.4): T1 = 485 g, T2 = 470 g; 484 g is below T1 only.
    const lot = (rulebook: 'eu-76-211' | 'uk-2006-659', defectives: number) =>
      verdictOf(lotInput({ rulebook: { id: rulebook } }, { lotSize, measurements: withPacksAt(lotSize, 506, defectives, 484, 3) }));
    const eu = lot('eu-76-211', allowed + 1);
    expect(eu.criteria.map((c) => c.id)).toEqual(['sample-size', 'mean', 't2']); // Directive Annex II 2.1: mean ≥ Qn only
    expect(eu.decision).toBe('conforming');
    expect(eu.warnings.join(' ')).toMatch(new RegExp(`${allowed + 1} packs? below T1 = 485 g: the text sets no T1 allowance`));
    // SI 2006/659 Sch. 2 para 3.6: defectives ≤ 5 % of the lot
    const ok = lot('uk-2006-659', allowed);
    expect(ok.criteria.find((c) => c.id === 't1')).toMatchObject({ observed: allowed, passed: true, clause: expect.stringContaining('SI 2006/659 Sch. 2 para 3.6') });
    expect(lot('uk-2006-659', allowed + 1).decision).toBe('nonconforming');
  });

  it('allows 2.5 % defectives in a lot of 100 or more measured in full, labelled common practice (markets.md §1.6)', () => {
    const xs = withPacksAt(200, 506, 5, 484, 7);
    const five = verdictOf(lotInput({}, { lotSize: 200, measurements: xs }));
    expect(five.criteria.find((c) => c.id === 't1')).toMatchObject({ observed: 5, passed: true, clause: expect.stringMatching(/^no legal text: common practice/) });
    expect(five.criteria.find((c) => c.id === 't1')!.sentence).toMatch(/2\.5 % of the lot; common practice/);
    xs[199] = 484;
    expect(verdictOf(lotInput({}, { lotSize: 200, measurements: xs })).criteria.find((c) => c.id === 't1')!.passed).toBe(false);
  });

  it('refuses destructive testing of a lot under 100 (Annex II 2.1)', () => {
    const r = evaluateLot(lotInput({}, { lotSize: 50, testing: 'destructive', measurements: ramp(20, 502, 2) }));
    expect(r.ok).toBe(false);
    if (!r.ok) expect(r.error.pointer).toBe('/lot/testing');
  });

  it('decides zero spread by the plain meaning of the rule: equal packs at Qn conform, below Qn do not', () => {
    const at = verdictOf(lotInput({}, { measurements: Array(30).fill(500) }));
    expect(at.decision).toBe('conforming');
    expect(at.statistics.meanTest.statistic).toBeNull();
    expect(at.statistics.meanTest.pValue).toBe(1);
    const below = verdictOf(lotInput({}, { measurements: Array(30).fill(499.9) }));
    expect(below.decision).toBe('nonconforming');
    expect(below.statistics.meanTest.pValue).toBe(0);
    expect(JSON.stringify(below)).not.toMatch(/NaN|Infinity|null,null/);
  });
});

// UK SI 2006/659 Schedule 2 para 3.3–3.5 (as made; legislation.gov.uk), the single sampling plan for
// non-destructive testing: "100 to 500 | 50 | 3 | 4; 501 to 3,200 | 80 | 5 | 6; 3,201 and above | 125 | 7 | 8".
describe('eu-76-211 with the UK single plan (nonDestructivePlan: single)', () => {
  const single = { rulebook: { id: 'eu-76-211' as const, params: { nonDestructivePlan: 'single' as const } } };

  it('has the rows of the UK single plan (SI 2006/659 Sch. 2 para 3.3–3.5)', () => {
    expect(UK_SINGLE_PLANS.map((r) => [r.minLot, r.maxLot, r.plan.n, r.plan.accept, r.plan.reject])).toEqual([
      [100, 500, 50, 3, 4],
      [501, 3200, 80, 5, 6],
      [3201, Number.POSITIVE_INFINITY, 125, 7, 8],
    ]);
    expect(euPlan(500, 'non-destructive', 'single')).toMatchObject({ kind: 'single', first: { n: 50 }, meanN: 30 });
    expect(euPlan(501, 'non-destructive', 'single')).toMatchObject({ kind: 'single', first: { n: 80 }, meanN: 50 });
    expect(euPlan(3201, 'non-destructive', 'single')).toMatchObject({ kind: 'single', first: { n: 125 } });
    // Destructive testing and lots under 100 are the same under either plan choice (Annex II 2.1, 2.2.2).
    expect(euPlan(5000, 'destructive', 'single')).toMatchObject({ first: EU_DESTRUCTIVE_PLAN });
    expect(euPlan(60, 'non-destructive', 'single')).toEqual({ kind: 'full' });
  });

  it('decides a lot of 400 on 50 packs with no second sample: 3 defectives pass, 4 fail', () => {
    // TNE for Qn 500 g is 15 g (Annex I 2.4): 484 g is below T1 = 485 g and above T2 = 470 g.
    const lot = (defectives: number) => verdictOf(lotInput(single, { lotSize: 400, measurements: withPacksAt(50, 506, defectives, 484, 5) }));
    expect(verdictOf(lotInput(single, { lotSize: 400, measurements: ramp(30, 506, 1.5) })).criteria[0]).toMatchObject({ id: 'sample-size', limit: 50, passed: false });
    const three = lot(3);
    expect(three.criteria.find((c) => c.id === 't1')).toMatchObject({ observed: 3, passed: true });
    expect(three.criteria.find((c) => c.id === 't1')!.sentence).toMatch(/UK SI 2006\/659 Sch\. 2 para 3\.3–3\.5/);
    expect(three.decision).toBe('conforming');
    const four = lot(4);
    expect(four.criteria.find((c) => c.id === 't1')).toMatchObject({ observed: 4, passed: false });
    expect(four.decision).toBe('nonconforming');
    // The Directive's double plan on the same 50 packs (first sample 30, accept ≤ 1, reject ≥ 3; Annex II 2.2.1) rejects at 3.
    expect(verdictOf(lotInput({}, { lotSize: 400, measurements: withPacksAt(50, 506, 3, 484, 5) })).decision).toBe('nonconforming');
  });

  it('refuses a plan name it does not know, naming the parameter', () => {
    const r = evaluateLot(lotInput({ rulebook: { id: 'eu-76-211', params: { nonDestructivePlan: 'triple' as never } } }, { measurements: ramp(30, 503, 2) }));
    expect(r.ok).toBe(false);
    if (!r.ok) expect(r.error.pointer).toBe('/product/rulebook/params/nonDestructivePlan');
    expect(evaluateLot(lotInput({ rulebook: { id: 'eu-76-211', params: { nonDestructivePlan: null as never } } }, { measurements: ramp(30, 503, 2) })).ok).toBe(false);
  });
});

describe('oiml-r87-2016 (plan from memory; verify — these pin our implementation, not the standard)', () => {
  it('uses 50 packs with 3 allowed below T1 for a lot of 400, and no T2', () => {
    const xs = shuffled(ramp(50, 502, 3));
    xs[4] = xs[9] = xs[14] = 484;
    const v = verdictOf(lotInput({ rulebook: { id: 'oiml-r87-2016' } }, { measurements: xs }));
    expect(v.decision).toBe('conforming');
    xs[19] = 484;
    expect(verdictOf(lotInput({ rulebook: { id: 'oiml-r87-2016' } }, { measurements: xs })).decision).toBe('nonconforming');
  });
});

describe('custom rulebook', () => {
  it('fails the mean criterion exactly when its t test rejects H0 at the chosen α', () => {
    const xs = shuffled(ramp(20, 499.3, 2));
    const loose = verdictOf(lotInput({ rulebook: { id: 'custom', params: { alpha: 0.001 } } }, { measurements: xs }));
    const strict = verdictOf(lotInput({ rulebook: { id: 'custom', params: { alpha: 0.2 } } }, { measurements: xs }));
    expect(loose.statistics.meanTest.pValue).toBeGreaterThan(0.001);
    expect(loose.decision).toBe('conforming');
    expect(strict.decision).toBe('nonconforming');
  });
  it('counts packs beyond a user-entered lower limit (e.g. Qn − MAV) against the allowed count', () => {
    const xs = shuffled(ramp(12, 503, 2));
    xs[2] = 490;
    const rb = (allowed: number) => ({ id: 'custom' as const, params: { lowerLimit: { value: 491, allowed } } });
    expect(verdictOf(lotInput({ rulebook: rb(1) }, { measurements: xs })).decision).toBe('conforming');
    expect(verdictOf(lotInput({ rulebook: rb(0) }, { measurements: xs })).decision).toBe('nonconforming');
  });
  it('lists its criteria as sample size, the mean test, then the lower and upper limits', () => {
    const params = { lowerLimit: { value: 491, allowed: 1 }, upperLimit: { value: 509, allowed: 1 } };
    const v = verdictOf(lotInput({ rulebook: { id: 'custom', params } }, { measurements: shuffled(ramp(12, 503, 2)) }));
    expect(v.criteria.map((c) => c.id)).toEqual(['sample-size', 'mean', 'lower-limit', 'upper-limit']);
    expect(v.criteria[1]).toMatchObject({ observed: v.statistics.meanTest.pValue, limit: v.statistics.meanTest.alpha });
  });
  it('uses a z test when the process standard deviation is known', () => {
    const v = verdictOf(lotInput({ rulebook: { id: 'custom', params: { knownStandardDeviation: 2 } } }, { measurements: ramp(10, 501, 1) }));
    expect(v.statistics.meanTest.method).toBe('one-sample z');
    expect(v.statistics.meanTest.degreesOfFreedom).toBeNull();
  });
});

describe('listRulebooks', () => {
  it('lists every rulebook with version and source citation', () => {
    const ids = listRulebooks().map((r) => [r.id, r.version.length > 0, r.source.length > 0]);
    expect(ids).toEqual([
      ['eu-76-211', true, true],
      ['oiml-r87-2016', true, true],
      ['uk-2006-659', true, true],
      ['ca-wm-regs', true, true],
      ['au-ntmr-2009', true, true],
      ['nz-wm-regs-1999', true, true],
      ['cn-jjf-1070', true, true],
      ['us-nist-hb133', true, true],
      ['custom', true, true],
    ]);
    // R 87's plan is now read in China's reproduction (markets.md §1.3–1.4, §6): nothing from memory.
    expect(listRulebooks().find((r) => r.id === 'oiml-r87-2016')!.fromMemory).toEqual([]);
    expect(listRulebooks().find((r) => r.id === 'us-nist-hb133')!.source).toMatch(/from memory; verify/);
  });
});
