/**
 * Order statistics and sample quantiles without a full sort.
 *
 * Quantiles follow Hyndman & Fan (1996), "Sample quantiles in statistical packages", The American
 * Statistician 50(4):361–365, definition 7 (linear interpolation between order statistics at
 * h = (n − 1)·p; the default of R's `quantile`). The needed order statistics are found by
 * counting into bins, or selection (Hoare 1961, "Algorithm 65: FIND", Communications of the ACM 4(7):321) on a copy, in
 * expected O(n), falling back to a typed-array sort when partitioning degenerates.
 */

function swap(a: Float64Array, i: number, j: number): void {
  const t = a[i]!;
  a[i] = a[j]!;
  a[j] = t;
}

/**
 * Rearranges a[lo..hi] so that a[k] holds the value it would have in sorted order, every value
 * left of k is ≤ a[k] and every value right of k is ≥ a[k] (Hoare's FIND with a median-of-three pivot).
 */
export function selectInPlace(a: Float64Array, k: number, lo = 0, hi = a.length - 1): void {
  let budget = 4 * Math.ceil(Math.log2(hi - lo + 2)) + 8;
  while (hi > lo) {
    if (budget-- <= 0) {
      a.subarray(lo, hi + 1).sort();
      return;
    }
    const mid = (lo + hi) >>> 1;
    if (a[mid]! < a[lo]!) swap(a, mid, lo);
    if (a[hi]! < a[lo]!) swap(a, hi, lo);
    if (a[hi]! < a[mid]!) swap(a, hi, mid);
    const pivot = a[mid]!;
    let i = lo;
    let j = hi;
    while (i <= j) {
      while (a[i]! < pivot) i++;
      while (a[j]! > pivot) j--;
      if (i <= j) {
        swap(a, i, j);
        i++;
        j--;
      }
    }
    if (k <= j) hi = j;
    else if (k >= i) lo = i;
    else return;
  }
}

/** Smallest value of a[lo..hi]. */
function minOf(a: Float64Array, lo: number, hi: number): number {
  let m = a[lo]!;
  for (let i = lo + 1; i <= hi; i++) if (a[i]! < m) m = a[i]!;
  return m;
}

/**
 * The order statistics at 0-based ranks `ranks` of a large sample, by one counting pass over
 * equal-width bins between min and max (binning is monotone, so every order statistic lies in the
 * bin its rank falls into) and a sort of only the values in the needed bins — O(n), a few
 * milliseconds for 10⁶ values where a full sort takes ~100 ms. Falls back to selection when the
 * values crowd into few bins.
 */
function orderStatisticsByBins(x: ArrayLike<number>, ranks: readonly number[], min: number, max: number): number[] | null {
  const n = x.length;
  const bins = Math.min(4096, Math.max(16, n >>> 4)); // small enough for the counts to stay in L1 cache
  const scale = bins / (max - min);
  if (!Number.isFinite(scale)) return null;
  const binIndex = new Uint16Array(n);
  const counts = new Int32Array(bins);
  for (let i = 0; i < n; i++) {
    let b = Math.floor((x[i]! - min) * scale);
    if (b >= bins) b = bins - 1;
    binIndex[i] = b;
    counts[b]!++;
  }
  // For each rank: its bin, and the rank of that bin's first value.
  const rankBin = new Int32Array(ranks.length);
  const rankBase = new Int32Array(ranks.length);
  const offset = new Int32Array(bins).fill(-1);
  let acc = 0;
  let total = 0;
  for (let b = 0; b < bins; b++) {
    const c = counts[b]!;
    for (let r = 0; r < ranks.length; r++) {
      const k = ranks[r]!;
      if (k >= acc && k < acc + c) {
        rankBin[r] = b;
        rankBase[r] = acc;
        if (offset[b] === -1) {
          offset[b] = total;
          total += c;
        }
      }
    }
    acc += c;
  }
  if (total > n / 4) return null;
  const buf = new Float64Array(total);
  const cursor = offset.slice();
  for (let i = 0; i < n; i++) {
    const b = binIndex[i]!;
    const at = cursor[b]!;
    if (at >= 0) {
      buf[at] = x[i]!;
      cursor[b] = at + 1;
    }
  }
  for (let b = 0; b < bins; b++) {
    const o = offset[b]!;
    if (o >= 0) buf.subarray(o, o + counts[b]!).sort();
  }
  return ranks.map((k, r) => buf[offset[rankBin[r]!]! + (k - rankBase[r]!)]!);
}

/**
 * Quantiles at the given probabilities (ascending, each in [0, 1]) by definition 7 of Hyndman &
 * Fan (1996). Returns null for an empty sample. Does not modify `x`. Pass the sample's extent when
 * known (it saves a pass on large samples).
 */
export function quantiles(x: ArrayLike<number>, probabilities: readonly number[], known?: { min: number; max: number }): number[] | null {
  const n = x.length;
  if (n === 0) return null;
  const positions = probabilities.map((p) => {
    const h = (n - 1) * p;
    const lo = Math.floor(h);
    return { h, lo, hi: Math.min(lo + 1, n - 1) };
  });
  const interpolate = (get: (k: number) => number) =>
    positions.map(({ h, lo, hi }) => {
      const a = get(lo);
      return a + (h - lo) * (get(hi) - a);
    });
  if (n <= 256) {
    const a = Float64Array.from(x).sort();
    return interpolate((k) => a[k]!);
  }
  let min = known?.min;
  let max = known?.max;
  if (min === undefined || max === undefined) {
    min = Infinity;
    max = -Infinity;
    for (let i = 0; i < n; i++) {
      const v = x[i]!;
      if (v < min) min = v;
      if (v > max) max = v;
    }
  }
  if (min === max) return probabilities.map(() => min);
  const ranks = positions.flatMap(({ lo, hi }) => [lo, hi]);
  const byBins = orderStatisticsByBins(x, ranks, min, max);
  if (byBins !== null) {
    const at = new Map(ranks.map((k, i) => [k, byBins[i]!]));
    return interpolate((k) => at.get(k)!);
  }
  const a = Float64Array.from(x);
  const out: number[] = [];
  let from = 0;
  for (const { h, lo } of positions) {
    selectInPlace(a, lo, from, n - 1);
    const xlo = a[lo]!;
    const xhi = lo + 1 < n ? minOf(a, lo + 1, n - 1) : xlo;
    out.push(xlo + (h - lo) * (xhi - xlo));
    from = lo;
  }
  return out;
}

/** Median by definition 7 of Hyndman & Fan (1996); null for an empty sample. */
export function median(x: ArrayLike<number>): number | null {
  const q = quantiles(x, [0.5]);
  return q === null ? null : q[0]!;
}
