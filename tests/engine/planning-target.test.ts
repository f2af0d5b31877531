/**
 * Target quantity for a 500 g product (the demo oats product's declaration) under eu-76-211 at
 * σ = 4 g, lot of 2000 packs checked non-destructively: checked against the operating
 * characteristic — an independent simulation in R at the target and 0.1 g below it, and the exact
 * noncentral-t probability of the mean check (an upper bound on the joint probability).
 */
import { describe, expect, it } from 'vitest';
import { targetQuantity, overfillCost } from '../../shared/planning/target';
import { meanCheckProbability } from '../../shared/planning/operating-characteristic';
import { runRScript, rValues, rNum, R_SIM_EU } from '../planning/r';

const product = { rulebook: 'eu-76-211' as const, nominalQuantity: 500, unit: 'g' as const, lotSize: 2000, testing: 'non-destructive' as const, sd: 4 };

describe('target quantity, 500 g under eu-76-211 at σ = 4 g', () => {
  const lots = 50_000;
  const target = targetQuantity({ ...product, probability: 0.99 }, { lots });
  const rLots = 200_000;
  // Directive 76/211/EEC Annex II 2.2.1 (lot 501–3200: 50/50, 2/5, 6/7), λ 0.379 printed in 2.3.3; λ for 100 packs computed.
  const plan = '50, 2, 5, 50, 6, 0.379, qt(0.995, 99) / 10';
  const r = runRScript(
    R_SIM_EU +
      `out("at", sim_eu(${rNum(target.mean)}, 4, 500, 15, ${plan}, ${rLots}, 21))\n` +
      `out("below", sim_eu(${rNum(target.mean - 0.1)}, 4, 500, 15, ${plan}, ${rLots}, 22))`,
  );

  it('P(accept) at the target is the chosen 0.99 within the simulations’ error', () => {
    expect(target.simulated.probability).toBeGreaterThanOrEqual(0.99);
    const [p, se] = rValues(r, 'at') as [number, number];
    expect(Math.abs(p - 0.99)).toBeLessThanOrEqual(4 * Math.sqrt(se ** 2 + target.simulated.standardError ** 2));
  });

  it('0.1 g lower the probability is below 0.99 (R simulation, and the exact mean-check bound)', () => {
    const [p, se] = rValues(r, 'below') as [number, number];
    expect(p + 4 * se).toBeLessThan(0.99);
    expect(meanCheckProbability(50, 0.379, target.mean - 0.1, 4, 500)).toBeLessThan(0.99);
  });

  it('a lower chosen probability gives a lower target; the overfill is μ − Qn; a target below Qn carries the note', () => {
    const lower = targetQuantity({ ...product, probability: 0.95 }, { lots });
    expect(lower.mean).toBeLessThan(target.mean);
    expect(target.overfillPerPack).toBeCloseTo(target.mean - 500, 12);
    if (target.mean < 500) expect(target.note).toMatch(/below the nominal quantity/);
    const tight = targetQuantity({ ...product, sd: 2, probability: 0.99 }, { lots });
    expect(tight.mean).toBeGreaterThan(target.mean); // tighter spread: λ·s shrinks, so the mean check bites nearer Qn
  });

  it('bad probability or σ names the field', () => {
    for (const probability of [0, 1, -0.1, 1.5, Number.NaN]) {
      expect(() => targetQuantity({ ...product, probability })).toThrow(expect.objectContaining({ field: 'probability' }));
    }
    expect(() => targetQuantity({ ...product, sd: 0 })).toThrow(expect.objectContaining({ field: 'sd' }));
  });
});

describe('overfill cost', () => {
  it('grams × packs / 1000 × cost per kg; millilitres per litre; refuses a count declaration', () => {
    // 3.1 g a pack × 10 000 000 packs = 31 000 kg; at 2.00 a kg, 62 000 a year (arithmetic of the definition).
    const g = overfillCost({ mean: 503.1, nominalQuantity: 500, unit: 'g', packsPerYear: 10_000_000, costPerKg: 2 });
    expect(g.overfillPerPack).toBeCloseTo(3.1, 12);
    expect(g.quantityPerYear).toBeCloseTo(31_000, 6);
    expect(g.costPerYear).toBeCloseTo(62_000, 5);
    const ml = overfillCost({ mean: 1.004, nominalQuantity: 1, unit: 'L', packsPerYear: 1_000_000, costPerKg: 0.5 });
    expect(ml.quantityPerYear).toBeCloseTo(4000, 6);
    expect(ml.costPerYear).toBeCloseTo(2000, 6);
    expect(() => overfillCost({ mean: 10, nominalQuantity: 10, unit: 'count', packsPerYear: 1, costPerKg: 1 })).toThrow(expect.objectContaining({ field: 'unit' }));
    expect(() => overfillCost({ mean: 501, nominalQuantity: 500, unit: 'g', packsPerYear: -1, costPerKg: 1 })).toThrow(expect.objectContaining({ field: 'packsPerYear' }));
  });
});
