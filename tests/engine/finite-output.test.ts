/**
 * Property test (fast-check): whatever lot the engine accepts, within its input bounds (values from
 * 0 to MAX_VALUE), every number it returns is finite or null — never NaN or ±Infinity, which JSON
 * cannot carry and RFC 8785 cannot seal. Lots are drawn to stress the arithmetic: near-constant
 * samples, subnormal values, the full range at once, two distinct values, tiny and huge scales.
 * IEEE 754 binary64 is the reference for what "finite" means (Number.isFinite).
 */
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { evaluateLot, type LotInput } from '../../shared/engine';
import { MAX_VALUE } from '../../shared/engine/net';

const SEED = 20261203;

/** Where in `value` a number is not finite, or null. */
function nonFinite(value: unknown, path = ''): string | null {
  if (typeof value === 'number') return Number.isFinite(value) ? null : `${path} = ${value}`;
  if (Array.isArray(value)) {
    for (let i = 0; i < value.length; i++) {
      const bad = nonFinite(value[i], `${path}/${i}`);
      if (bad) return bad;
    }
  } else if (value && typeof value === 'object') {
    for (const [k, v] of Object.entries(value)) {
      const bad = nonFinite(v, `${path}/${k}`);
      if (bad) return bad;
    }
  }
  return null;
}

const value = fc.double({ min: 0, max: MAX_VALUE, noNaN: true, noDefaultInfinity: true });
const near = (c: number) => fc.double({ min: c, max: c * (1 + 1e-12) + 5e-324, noNaN: true, noDefaultInfinity: true });
const sample = fc.oneof(
  fc.array(value, { minLength: 2, maxLength: 80 }),
  fc.array(fc.double({ min: 480, max: 520, noNaN: true }), { minLength: 2, maxLength: 80 }),
  fc.double({ min: 1, max: 1e6, noNaN: true }).chain((c) => fc.array(near(c), { minLength: 2, maxLength: 80 })),
  fc.array(fc.constantFrom(0, 5e-324, 1e-300, MAX_VALUE), { minLength: 2, maxLength: 80 }),
  fc.tuple(fc.double({ min: 0, max: 1e4, noNaN: true }), fc.double({ min: 0, max: 1e4, noNaN: true }), fc.integer({ min: 2, max: 80 }))
    .map(([a, b, n]) => Array.from({ length: n }, (_, i) => (i % 3 === 0 ? a : b))),
);

const rulebook = fc.oneof(
  fc.constant({ id: 'eu-76-211' as const }),
  fc.constant({ id: 'eu-76-211' as const, params: { nonDestructivePlan: 'single' as const } }),
  fc.constant({ id: 'oiml-r87-2016' as const }),
  fc.record({
    id: fc.constant('custom' as const),
    params: fc.record(
      {
        alpha: fc.double({ min: 1e-12, max: 0.999999, noNaN: true }),
        alternative: fc.constantFrom('less' as const, 'greater' as const, 'two-sided' as const),
        knownStandardDeviation: fc.double({ min: 1e-9, max: 1e6, noNaN: true }),
        lowerLimit: fc.record({ value: fc.double({ min: 0, max: 1e6, noNaN: true }), allowed: fc.integer({ min: 0, max: 10 }) }),
      },
      { requiredKeys: [] },
    ),
  }),
);

const lot = fc.record({
  measurements: sample,
  nominal: fc.constantFrom(5, 100, 500, 1000, 10_000, 25_000),
  rulebook,
  testing: fc.constantFrom('destructive' as const, 'non-destructive' as const),
  extraLot: fc.integer({ min: 0, max: 100_000 }),
});

describe('the engine never answers with a number JSON cannot carry', () => {
  it('every number of an accepted lot is finite; a refused lot names code and pointer', () => {
    let judged = 0;
    fc.assert(
      fc.property(lot, ({ measurements, nominal, rulebook, testing, extraLot }) => {
        const input: LotInput = {
          product: { nominalQuantity: nominal, unit: 'g', tareMode: 'none', rulebook },
          lot: { lotSize: measurements.length + extraLot, testing, measurementUnit: 'g', measurements },
        };
        const r = evaluateLot(input);
        if (!r.ok) {
          expect(r.error.code).toMatch(/^[a-z0-9-]+$/);
          expect(r.error.pointer).toMatch(/^\//);
          return;
        }
        judged++;
        expect(nonFinite(r.verdict), JSON.stringify(input).slice(0, 400)).toBeNull();
      }),
      { seed: SEED, numRuns: 1500 },
    );
    expect(judged).toBeGreaterThan(300);
  });
});
