/**
 * Operating characteristic of eu-76-211: the simulated lot decision against the engine's own
 * `evaluateLot`, the simulated joint acceptance against an independent simulation in R (its own
 * generator, the rules written from Directive 76/211/EEC Annex I 1.1–1.3 and Annex II 2.2–2.3 in
 * tests/planning/r.ts), and against the exact parts.
 */
import { describe, expect, it } from 'vitest';
import { evaluateLot } from '../../shared/engine';
import type { LotInput } from '../../shared/engine';
import {
  judgeLot,
  limitsOf,
  operatingCharacteristicCurve,
  operatingCharacteristicPoint,
  resolvePlan,
  SeededNormal,
  simulateAcceptance,
  type OcCase,
} from '../../shared/planning/operating-characteristic';
import { runRScript, rValues, rNum, R_SIM_EU } from '../planning/r';

const base = { rulebook: 'eu-76-211' as const, nominalQuantity: 500, unit: 'g' as const };

describe('simulated lot decision = evaluateLot', () => {
  const settings: { lotSize: number; testing: 'destructive' | 'non-destructive'; mean: number; sd: number; nonDestructivePlan?: 'single' }[] = [
    { lotSize: 1000, testing: 'non-destructive', mean: 498.5, sd: 9 },
    { lotSize: 400, testing: 'non-destructive', mean: 498.5, sd: 9 },
    { lotSize: 5000, testing: 'non-destructive', mean: 498, sd: 9 },
    { lotSize: 1000, testing: 'destructive', mean: 499, sd: 6 },
    { lotSize: 60, testing: 'non-destructive', mean: 500.5, sd: 4 },
    { lotSize: 1000, testing: 'non-destructive', mean: 498.5, sd: 9, nonDestructivePlan: 'single' },
  ];
  it('agrees on every lot, first and second stage, for each plan', () => {
    const seen = new Set<string>();
    const rng = new SeededNormal(7);
    for (const s of settings) {
      const c: OcCase = { ...base, ...s };
      const plan = resolvePlan(c);
      const limits = limitsOf(c);
      const n1 = plan.kind === 'double' ? plan.n1 : plan.n;
      const product: LotInput['product'] = { nominalQuantity: 500, unit: 'g', tareMode: 'none', rulebook: { id: 'eu-76-211', ...(s.nonDestructivePlan ? { params: { nonDestructivePlan: s.nonDestructivePlan } } : {}) } };
      for (let k = 0; k < 150; k++) {
        const first = Float64Array.from({ length: n1 }, () => s.mean + s.sd * rng.normal());
        let second: Float64Array | null = null;
        const outcome = judgeLot(plan, limits, 500, first, () => {
          second = Float64Array.from({ length: plan.kind === 'double' ? plan.n2 : 0 }, () => s.mean + s.sd * rng.normal());
          return second;
        });
        seen.add(`${plan.kind}:${outcome}`);
        const lot = { lotSize: s.lotSize, testing: s.testing, measurementUnit: 'g' as const, measurementBasis: 'net' as const };
        const r1 = evaluateLot({ product, lot: { ...lot, measurements: Array.from(first) } });
        if (!r1.ok) throw new Error(r1.error.message);
        if (outcome === 'accepted-first') expect(r1.verdict.decision).toBe('conforming');
        else if (outcome === 'rejected-first') expect(r1.verdict.decision).toBe('nonconforming');
        else {
          expect(r1.verdict.decision).toBe('second-sample-required');
          const r2 = evaluateLot({ product, lot: { ...lot, previousSample: Array.from(first), measurements: Array.from(second!) } });
          if (!r2.ok) throw new Error(r2.error.message);
          expect(r2.verdict.decision).toBe(outcome === 'accepted-second' ? 'conforming' : 'nonconforming');
        }
      }
    }
    // The comparison covered every kind of outcome (else it proved less than it claims).
    for (const k of ['double:accepted-first', 'double:rejected-first', 'double:accepted-second', 'double:rejected-second', 'single:accepted-first', 'single:rejected-first', 'full:accepted-first', 'full:rejected-first']) {
      expect(seen.has(k), k).toBe(true);
    }
  });
});

describe('joint acceptance vs an independent simulation in R', () => {
  const cases: (OcCase & { r: string })[] = [
    // r: n1, a1, r1, n2, a2, λ1, λ2 from Directive 76/211/EEC Annex II 2.2.1/2.2.2 and λ printed in 2.3.3 (else t(0.995; n − 1)/√n).
    { ...base, lotSize: 1000, testing: 'non-destructive', mean: 498.5, sd: 9, r: '50, 2, 5, 50, 6, 0.379, qt(0.995, 99) / 10' },
    { ...base, lotSize: 1000, testing: 'non-destructive', mean: 500, sd: 4, r: '50, 2, 5, 50, 6, 0.379, qt(0.995, 99) / 10' },
    { ...base, lotSize: 400, testing: 'non-destructive', mean: 497, sd: 7, r: '30, 1, 3, 30, 4, 0.503, qt(0.995, 59) / sqrt(60)' },
    { ...base, lotSize: 5000, testing: 'non-destructive', mean: 499, sd: 8, r: '80, 3, 7, 80, 8, qt(0.995, 79) / sqrt(80), qt(0.995, 159) / sqrt(160)' },
    { ...base, lotSize: 1000, testing: 'destructive', mean: 498, sd: 5, r: '20, 1, 2, 0, 0, 0.64, 0' },
  ];
  const lots = 40_000;
  const r = runRScript(R_SIM_EU + cases.map((c, i) => `out("s${i}", sim_eu(${rNum(c.mean)}, ${rNum(c.sd)}, 500, 15, ${c.r}, ${lots}, ${100 + i}))`).join('\n'));
  it('within 4 standard errors, and the simulated lots reached the second stage where the plan has one', () => {
    cases.forEach((c, i) => {
      const ours = simulateAcceptance(c, { lots, seed: 11 });
      const [p, se] = rValues(r, `s${i}`) as [number, number];
      const tol = 4 * Math.sqrt(ours.standardError ** 2 + se ** 2);
      expect(Math.abs(ours.probability - p), `${JSON.stringify(c)} ours ${ours.probability} R ${p}`).toBeLessThanOrEqual(Math.max(tol, 1e-12));
    });
    expect(simulateAcceptance(cases[0]!, { lots, seed: 11 }).secondSampleShare).toBeGreaterThan(0.05);
  });
});

describe('simulation against the exact parts', () => {
  it('when only the mean check matters (T1, T2 negligible), P(joint) is the noncentral-t probability within 4 SE', () => {
    for (const mean of [499, 499.5, 500]) {
      const pt = operatingCharacteristicPoint({ ...base, lotSize: 2000, testing: 'non-destructive', mean, sd: 4 }, { lots: 40_000 });
      expect(pt.exact.t1Accept).toBeGreaterThan(1 - 1e-9);
      expect(Math.abs(pt.simulated.probability - pt.exact.meanFirstSample)).toBeLessThanOrEqual(4 * Math.sqrt((pt.exact.meanFirstSample * (1 - pt.exact.meanFirstSample)) / 40_000));
    }
  });
  it('P(joint) is never above any exact part by more than 4 SE', () => {
    for (const [mean, sd] of [[497, 8], [499, 10], [502, 12], [495, 5]] as const) {
      const pt = operatingCharacteristicPoint({ ...base, lotSize: 1000, testing: 'non-destructive', mean, sd }, { lots: 20_000 });
      const se = Math.max(pt.simulated.standardError, 1 / 20_000);
      expect(pt.simulated.probability).toBeLessThanOrEqual(pt.exact.t1Accept + 4 * se);
      expect(pt.simulated.probability).toBeLessThanOrEqual(pt.exact.meanFirstSample + 4 * se);
    }
  });
  it('the curve over a grid uses common random numbers: non-decreasing in μ, and the same seed gives the same numbers', () => {
    const means = Array.from({ length: 41 }, (_, i) => 494 + i * 0.25);
    const c = { ...base, lotSize: 1000, testing: 'non-destructive' as const, sd: 6 };
    const curve = operatingCharacteristicCurve(c, means, { lots: 5000, seed: 3 });
    for (let i = 1; i < curve.length; i++) expect(curve[i]!.simulated.probability).toBeGreaterThanOrEqual(curve[i - 1]!.simulated.probability);
    expect(curve[0]!.simulated.probability).toBeLessThan(0.2);
    expect(curve.at(-1)!.simulated.probability).toBeGreaterThan(0.9);
    expect(operatingCharacteristicCurve(c, [means[7]!], { lots: 5000, seed: 3 })[0]!.simulated).toEqual(curve[7]!.simulated);
  });
  it('bad input names the field', () => {
    const c = { ...base, lotSize: 1000, testing: 'non-destructive' as const, mean: 500, sd: 4 };
    expect(() => simulateAcceptance({ ...c, sd: 0 })).toThrow(expect.objectContaining({ field: 'sd' }));
    expect(() => simulateAcceptance({ ...c, sd: -1 })).toThrow(expect.objectContaining({ field: 'sd' }));
    expect(() => simulateAcceptance({ ...c, lotSize: 50, testing: 'destructive' })).toThrow(expect.objectContaining({ field: 'testing' }));
    expect(() => simulateAcceptance({ ...c, nominalQuantity: 20_000 })).toThrow(expect.objectContaining({ field: 'nominalQuantity' }));
    expect(() => operatingCharacteristicCurve(c, new Array(10_001).fill(500))).toThrow(expect.objectContaining({ field: 'means' }));
    expect(() => simulateAcceptance(c, { lots: 10 })).toThrow(expect.objectContaining({ field: 'lots' }));
  });
});
