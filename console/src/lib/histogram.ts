// Bins for the histogram of net contents. The bin width follows Freedman & Diaconis (1981,
// "On the histogram as a density estimator", Z. Wahrscheinlichkeitstheorie 57:453–476):
// h = 2·IQR·n^(−1/3), falling back to Sturges' rule when the IQR is zero; the range is widened so
// that the reference lines (Qn, T1, T2) are inside the drawn axis.
export interface Bin {
  from: number;
  to: number;
  count: number;
}

function quantile(sorted: number[], p: number): number {
  const h = (sorted.length - 1) * p;
  const lo = Math.floor(h);
  const hi = Math.ceil(h);
  return sorted[lo]! + (h - lo) * (sorted[hi]! - sorted[lo]!);
}

export function histogramBins(values: readonly number[], maxBins = 40): Bin[] {
  if (values.length === 0) return [];
  const sorted = [...values].sort((a, b) => a - b);
  const min = sorted[0]!;
  const max = sorted[sorted.length - 1]!;
  if (min === max) return [{ from: min - 0.5, to: max + 0.5, count: values.length }];
  const iqr = quantile(sorted, 0.75) - quantile(sorted, 0.25);
  let width = iqr > 0 ? (2 * iqr) / Math.cbrt(values.length) : (max - min) / (Math.ceil(Math.log2(values.length)) + 1);
  let count = Math.ceil((max - min) / width);
  if (count > maxBins) {
    count = maxBins;
    width = (max - min) / count;
  }
  count = Math.max(1, count);
  const bins: Bin[] = Array.from({ length: count }, (_, i) => ({ from: min + i * width, to: min + (i + 1) * width, count: 0 }));
  for (const v of values) {
    const i = Math.min(count - 1, Math.floor((v - min) / width));
    bins[i]!.count++;
  }
  return bins;
}

/** An axis range covering the data and every reference value, with a little room either side. */
export function axisRange(values: readonly number[], references: ReadonlyArray<number | null | undefined>): { min: number; max: number } {
  const all = [...values, ...references.filter((r): r is number => typeof r === 'number' && Number.isFinite(r))];
  let min = Math.min(...all);
  let max = Math.max(...all);
  if (min === max) {
    min -= 1;
    max += 1;
  }
  const pad = (max - min) * 0.06;
  return { min: min - pad, max: max + pad };
}
