// The density drawn behind the verdict's t statistic.
import { describe, expect, it } from 'vitest';
import { inTail, tDensity } from '../../console/src/lib/tdist';

describe('tDensity', () => {
  it('matches R for Student t and the standard normal', () => {
    // R 4.2.2 (Debian r-base-core): dt(1.3, 7) = 0.162092955089521; dnorm(0.4) = 0.368270140303323
    expect(tDensity(1.3, 7)).toBeCloseTo(0.162092955089521, 8);
    expect(tDensity(0.4, null)).toBeCloseTo(0.368270140303323, 12);
  });

  it('shades the tail the alternative names', () => {
    expect(inTail(-3, -2, 'less')).toBe(true);
    expect(inTail(-1, -2, 'less')).toBe(false);
    expect(inTail(3, 2, 'greater')).toBe(true);
    expect(inTail(-2.5, 2, 'two-sided')).toBe(true);
    expect(inTail(1.5, 2, 'two-sided')).toBe(false);
  });
});
