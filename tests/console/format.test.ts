// The console's one way of writing numbers (console/src/lib/format.ts): the page's locale, the
// precision rules stated at the top of that module, p-values with a floor, and the engine's sealed
// sentences rewritten in the page's locale without touching clause numbers.
// Separators: CLDR (Unicode Common Locale Data Repository), common/main/de.xml numbers/symbols
// (decimal ",", group ".") and common/main/en.xml (decimal ".", group ",").
import { describe, expect, it } from 'vitest';
import { createFormats, localiseEngineText, ownDecimals, quantityDecimals } from '../../console/src/lib/format';

const de = createFormats('de-DE');
const en = createFormats('en-GB');

describe('counts', () => {
  it('are integers grouped by the locale (CLDR de: group "."; en: ",")', () => {
    expect(de.count(3000)).toBe('3.000');
    expect(en.count(3000)).toBe('3,000');
    expect(en.count(12)).toBe('12');
  });
  it('fall back to English for a tag the platform cannot read', () => {
    expect(createFormats('not a locale!').locale).toMatch(/^en/);
  });
});

describe('quantity precision', () => {
  // The rule of format.ts: the largest power of ten not above TNE/20, written as decimals.
  it('follows the TNE: 15 g / 20 = 0.75 → 0.1 g; 0.015 kg / 20 = 0.00075 → 0.0001 kg; 4.5 g / 20 = 0.225 → 0.1 g', () => {
    expect(quantityDecimals({ tne: 15, nominal: 500 })).toBe(1);
    expect(quantityDecimals({ tne: 0.015, nominal: 1 })).toBe(4);
    expect(quantityDecimals({ tne: 4.5, nominal: 150 })).toBe(1);
    expect(quantityDecimals({ tne: 45, nominal: 5000 })).toBe(0); // 45 / 20 = 2.25 → 1 g
  });
  it('follows the scale’s resolution when there is one, and a thousandth of Qn without a TNE', () => {
    expect(quantityDecimals({ resolution: 0.01, tne: 15, nominal: 500 })).toBe(2);
    expect(quantityDecimals({ resolution: 1, tne: 15, nominal: 500 })).toBe(0);
    expect(quantityDecimals({ tne: null, nominal: 500 })).toBe(1); // 0.5 → 0.1
    expect(quantityDecimals({ tne: null, nominal: 1 })).toBe(3); // 0.001
  });
  it('counts decimals without binary float noise (0.1 + 0.2 has one decimal, not 17)', () => {
    expect(ownDecimals(0.1 + 0.2)).toBe(1);
    expect(ownDecimals(15 / 1000)).toBe(3);
    expect(ownDecimals(500)).toBe(0);
  });
  it('writes derived quantities at the step and declared ones with their own digits, never six significant digits', () => {
    const q = { decimals: 1, declared: [500, 6.75, 493.25] };
    expect(en.quantity(2.143594, 'g', q)).toBe('2.1 g');
    expect(de.quantity(496.849, 'g', q)).toBe('496,8 g');
    expect(en.quantity(500, 'g', q)).toBe('500 g');
    expect(de.quantity(6.75, 'g', q)).toBe('6,75 g');
    expect(en.quantity(1234.5, 'mL', q)).toBe('1,234.5 mL');
    expect(de.quantity(1234.5, 'mL', q)).toBe('1.234,5 mL');
  });
});

describe('p-values', () => {
  it('are plain, at most 3 significant digits and 4 decimals, floored at 0.0001', () => {
    expect(en.pValue(6.27e-13)).toBe('< 0.0001');
    expect(de.pValue(6.27e-13)).toBe('< 0,0001');
    expect(en.pEquals(6.27e-13)).toBe('p < 0.0001');
    expect(en.pEquals(0.04567)).toBe('p = 0.0457');
    expect(de.pValue(0.04567)).toBe('0,0457');
    expect(en.pValue(0.3821)).toBe('0.382');
    expect(en.pValue(0.00123)).toBe('0.0012');
    expect(en.pValue(0)).toBe('< 0.0001');
  });
  it('write statistics with at most 3 decimals', () => {
    expect(en.statistic(-5.78512)).toBe('-5.785');
    expect(de.statistic(0.90419)).toBe('0,904');
  });
});

describe('engine sentences on the page', () => {
  const q = { unit: 'g', decimals: 1, declared: [500, 15, 485, 470] };
  it('rewrites quantities, statistics, p-values and counts in the page’s locale and precision', () => {
    const s = 'mean 494.412 g is below the lower limit 497.338 g = 500 g \u2212 0.503 × 5.29041 g (n = 30)';
    expect(localiseEngineText(s, de, q)).toBe('mean 494,4 g is below the lower limit 497,3 g = 500 g \u2212 0,503 × 5,3 g (n = 30)');
    expect(localiseEngineText('W = 0.70815, p = 2.05e\u22126: the net quantities do not look normal', de, q)).toBe('W = 0,708, p < 0,0001: the net quantities do not look normal');
    expect(localiseEngineText('r₁ = 0.5143, p = 0.004851: consecutive packs', en, q)).toBe('r₁ = 0.514, p = 0.0049: consecutive packs');
    expect(localiseEngineText('only 30 packs measured; the plan needs 80 for a lot of 4000 packs', de, q)).toBe('only 30 packs measured; the plan needs 80 for a lot of 4.000 packs');
  });
  it('leaves clause numbers and citations as written', () => {
    const s = '3 packs below T1 = 485 g (Qn \u2212 TNE 15 g): more than the 1 allowed in a first sample of 30 (Annex II 2.2.1)';
    expect(localiseEngineText(s, de, q)).toBe(s);
    const uk = 'in a non-destructive sample of 50 (UK SI 2006/659 Sch. 2 para 3.3–3.5)';
    expect(localiseEngineText(uk, de, q)).toBe(uk);
    expect(localiseEngineText('5 % of the lot; UK SI 2006/659 Sch. 2 para 3.6', de, q)).toBe('5 % of the lot; UK SI 2006/659 Sch. 2 para 3.6');
    expect(localiseEngineText('2.5 % of the lot; common practice', de, q)).toBe('2,5 % of the lot; common practice');
  });
});
