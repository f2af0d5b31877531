import type { DescriptiveStatistics, Unit } from '../types';
import { mean } from './mean';
import { sampleStandardDeviation } from './variance';
import { extent } from './extent';
import { quantiles } from './quantiles';
import { lag1Autocorrelation } from './lag1Autocorrelation';

/** Descriptive summary of a non-empty series in production order (see each function for its method). */
export function describe(x: ArrayLike<number>, unit: Unit): DescriptiveStatistics {
  const m = mean(x) as number;
  const sd = sampleStandardDeviation(x, m);
  const ext = extent(x) as { min: number; max: number };
  const [q1, med, q3] = quantiles(x, [0.25, 0.5, 0.75], ext) as [number, number, number];
  const r1 = lag1Autocorrelation(x, m);
  return {
    n: x.length,
    mean: m,
    standardDeviation: sd,
    min: ext.min,
    max: ext.max,
    median: med,
    q1,
    q3,
    lag1Autocorrelation: r1.value,
    unit,
  };
}
