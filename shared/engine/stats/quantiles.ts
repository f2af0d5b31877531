/**
 * Order statistics and sample quantiles without a full sort.
 *
 * Quantiles follow Hyndman & Fan (1996), "Sample quantiles in statistical packages", The American
 * Statistician 50(4):361–365, definition 7 (linear interpolation between order statistics at
 * h = (n − 1)·p; the default of R's `quantile`). The needed order statistics are found by
 * selection (Hoare 1961, "Algorithm 65: FIND", Communications of the ACM 4(7):321) on a copy, in
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
 * Quantiles at the given probabilities (ascending, each in [0, 1]) by definition 7 of Hyndman &
 * Fan (1996). Returns null for an empty sample. Does not modify `x`.
 */
export function quantiles(x: ArrayLike<number>, probabilities: readonly number[]): number[] | null {
  const n = x.length;
  if (n === 0) return null;
  const a = Float64Array.from(x);
  if (n <= 256) {
    a.sort();
    return probabilities.map((p) => {
      const h = (n - 1) * p;
      const lo = Math.floor(h);
      const hiIdx = Math.min(lo + 1, n - 1);
      return a[lo]! + (h - lo) * (a[hiIdx]! - a[lo]!);
    });
  }
  const out: number[] = [];
  let from = 0;
  for (const p of probabilities) {
    const h = (n - 1) * p;
    const lo = Math.floor(h);
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
