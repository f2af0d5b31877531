import { describe, expect, it } from 'vitest';
import { tolerableNegativeError } from '../../shared/engine';
import { roundUpToTenth } from '../../shared/engine/rulebooks/tne';

// Source: Council Directive 76/211/EEC, Annex I, 2.4 (TNE table; percentages rounded up to the next 0.1 g or mL).
describe('tolerable negative error, Directive 76/211/EEC Annex I 2.4', () => {
  const tne = (qn: number, unit: Parameters<typeof tolerableNegativeError>[1] = 'g', rb?: string) => {
    const r = tolerableNegativeError(qn, unit, rb);
    if (!r.ok) throw new Error(r.reason);
    return r;
  };

  it.each([
    // [Qn, TNE] — one interior point per row and both ends of each row (the table is continuous at boundaries)
    [5, 0.5], // 9 % of 5 = 0.45 → rounded up 0.5
    [30, 2.7], // 9 %
    [50, 4.5], // 9 % of 50 = 4.5 = row 2's fixed value
    [75, 4.5],
    [100, 4.5], // 4.5 % of 100 = 4.5
    [125, 5.7], // 4.5 % of 125 = 5.625 → 5.7
    [200, 9], // 4.5 % of 200 = 9
    [250, 9],
    [300, 9], // 3 % of 300 = 9
    [330, 9.9], // 3 % of 330 = 9.9 exactly: not pushed to 10.0
    [500, 15],
    [750, 15],
    [1000, 15], // 1.5 % of 1000 = 15
    [1500, 22.5],
    [10000, 150],
  ])('Qn %d g → TNE %d g', (qn, expected) => {
    expect(tne(qn).baseValue).toBe(expected);
    expect(tne(qn).value).toBe(expected);
  });

  it('treats a volume declaration by the same table in mL (Annex I 2.4)', () => {
    expect(tne(250, 'mL').baseValue).toBe(9);
    expect(tne(330, 'mL').baseUnit).toBe('mL');
    expect(tne(0.75, 'L').baseValue).toBe(15);
    expect(tne(0.75, 'L').value).toBeCloseTo(0.015, 15);
  });

  it('rounds a percentage TNE up to the next 0.1, never down (Annex I 2.4)', () => {
    expect(roundUpToTenth(101, 45)).toBe(4.6); // 4.545 → 4.6
    expect(roundUpToTenth(111, 45)).toBe(5); // 4.995 → 5.0
    expect(roundUpToTenth(1001, 15)).toBe(15.1); // 15.015 → 15.1
    expect(roundUpToTenth(20, 90)).toBe(1.8); // exact step stays
  });

  it('converts an avoirdupois declaration through the exact pound (NIST SP 811: 1 oz = 28.349523125 g)', () => {
    const r = tne(16, 'oz'); // 453.59237 g → 3 % = 13.6077711 → 13.7 g
    expect(r.baseValue).toBe(13.7);
    expect(r.value).toBeCloseTo(13.7 / 28.349523125, 14);
  });

  it('refuses quantities outside the scope 5 g to 10 kg', () => {
    expect(tolerableNegativeError(4.9, 'g').ok).toBe(false);
    expect(tolerableNegativeError(10001, 'g').ok).toBe(false);
    expect(tolerableNegativeError(Number.NaN, 'g').ok).toBe(false);
  });

  // OIML R 87 as NTMR 2009 reg 4.36(4) note a and JJF 1070 附表3 print it (markets.md §1.1–1.2): above
  // 1 000 a percentage TNE is rounded up to a whole g or mL; the table runs from 0 g to 50 kg.
  it.each([
    [1250, 19], // 18.75 → 19 (markets.md §1.1)
    [1500, 23], // 22.5 → 23
    [2500, 38], // 37.5 → 38
    [8000, 120],
    [1000, 15], // ≤ 1 000: 0.1 rounding, 15 exactly
    [3, 0.3], // 0–50 → 9 %: 0.27 → 0.3 (markets.md §1.2)
    [10000, 150],
    [12000, 150],
    [15000, 150],
    [15001, 151], // 150.01 → 151 (whole g above 1 000)
    [20000, 200],
    [50000, 500],
  ])('OIML R 87: Qn %d g → TNE %d g', (qn, expected) => {
    expect(tne(qn, 'g', 'oiml-r87-2016').baseValue).toBe(expected);
  });
  it('OIML R 87 stops at 50 kg (markets.md §1.2) and the EU table at 10 kg (Annex I 2.4)', () => {
    expect(tolerableNegativeError(50001, 'g', 'oiml-r87-2016').ok).toBe(false);
    expect(tolerableNegativeError(12000, 'mL', 'oiml-r87-2016').ok).toBe(true);
    expect(tolerableNegativeError(12000, 'g', 'eu-76-211').ok).toBe(false);
  });
});
