/**
 * Quantiles by definition 7 of Hyndman & Fan (1996, The American Statistician 50(4)), checked
 * against the definition applied to a fully sorted copy, on seeded generated data — including
 * many ties and a far outlier that crowds the values into few bins (the selection fallback).
 */
import { describe, expect, it } from 'vitest';
import { quantiles, selectInPlace } from '../../shared/engine/stats/quantiles';
import { SeededRandom, SHAPES, generate } from './reference/datasets';

function byFullSort(x: number[], ps: number[]): number[] {
  const a = Float64Array.from(x).sort();
  return ps.map((p) => {
    const h = (a.length - 1) * p;
    const lo = Math.floor(h);
    const hi = Math.min(lo + 1, a.length - 1);
    return a[lo]! + (h - lo) * (a[hi]! - a[lo]!);
  });
}

const PS = [0, 0.25, 0.5, 0.75, 1];

describe('quantiles without a full sort', () => {
  it('equal the sorted-copy definition exactly for every shape and n up to 200 000', () => {
    const rng = new SeededRandom(5);
    for (const n of [1, 2, 3, 257, 1000, 4099, 50_000, 200_000]) {
      for (const shape of SHAPES) {
        const x = generate(rng, n, shape);
        expect(quantiles(x, PS), `${shape} n=${n}`).toEqual(byFullSort(x, PS));
      }
    }
  });
  it('handle a far outlier that crowds every other value into one bin (selection fallback)', () => {
    const rng = new SeededRandom(6);
    const x = generate(rng, 100_000, 'normal');
    x[500] = 1e12;
    expect(quantiles(x, PS)).toEqual(byFullSort(x, PS));
  });
  it('handle all-equal data', () => {
    expect(quantiles(Array(1000).fill(500), PS)).toEqual([500, 500, 500, 500, 500]);
  });
  it('selectInPlace puts the k-th smallest at k (Hoare 1961, Algorithm 65)', () => {
    const rng = new SeededRandom(7);
    const x = Float64Array.from(generate(rng, 5000, 'rounded'));
    const sorted = x.slice().sort();
    for (const k of [0, 1, 2499, 4998, 4999]) {
      const a = x.slice();
      selectInPlace(a, k);
      expect(a[k]).toBe(sorted[k]);
    }
  });
});
