// Units the markets declare in, with their exact factors and sources (net-quantity-rules.md §4,
// markets.md §3 "Exact units"), and the dual declaration judged against its larger quantity.
import { describe, expect, it } from 'vitest';
import { baseFactor, conversionFactor, dimensionOf, largerDeclaration, unitSource, UNIT_NAMES } from '../../shared/engine/units';

describe('units and their exact factors', () => {
  it.each([
    // NIST SP 811; international yard and pound agreement of 1959
    ['oz', 28.349523125],
    ['lb', 453.59237],
    ['fl oz', 29.5735295625], // the US fluid ounce
    ['US gal', 3785.411784],
    // UK Weights and Measures Act 1985 Sch. 1; Canada Weights and Measures Act Sch. II
    ['imp fl oz', 28.4130625],
    ['imp gal', 4546.09],
  ] as const)('1 %s = %d g or mL (exact by definition)', (unit, factor) => {
    expect(baseFactor(unit)).toBe(factor);
    expect(unitSource(unit)).toMatch(/exact/);
  });

  it('keeps the definitional relations: 16 oz = 1 lb, 128 US fl oz = 1 US gal, 160 imp fl oz = 1 imp gal (same sources)', () => {
    expect(conversionFactor('lb', 'oz')).toBeCloseTo(16, 13);
    expect(conversionFactor('US gal', 'fl oz')).toBeCloseTo(128, 12);
    expect(conversionFactor('imp gal', 'imp fl oz')).toBeCloseTo(160, 12);
  });

  it('never converts a count to a mass or a volume, density or not', () => {
    expect(dimensionOf('count')).toBe('count');
    expect(conversionFactor('count', 'g', 1)).toBeNull();
    expect(conversionFactor('mL', 'count', 1)).toBeNull();
    expect(conversionFactor('count', 'count')).toBe(1);
    expect(UNIT_NAMES).toEqual(expect.arrayContaining(['US gal', 'imp fl oz', 'imp gal', 'count']));
  });

  it('judges a dual declaration against the larger quantity (NIST HB 133 Chapter 2)', () => {
    // 1 lb = 453.59237 g < 454 g: the 454 g declaration is the larger
    expect(largerDeclaration({ quantity: 1, unit: 'lb' }, { quantity: 454, unit: 'g' }, 'g')).toBe(454);
    // 16 US fl oz = 473.176473 mL > 473 mL: the fluid ounces are the larger
    expect(largerDeclaration({ quantity: 16, unit: 'fl oz' }, { quantity: 473, unit: 'mL' }, 'mL')).toBeCloseTo(473.176473, 9);
    expect(largerDeclaration({ quantity: 1, unit: 'lb' }, { quantity: 454, unit: 'mL' }, 'g')).toBeNull();
  });
});
