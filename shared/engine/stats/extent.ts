/** Smallest and largest value in one pass; null for an empty sample. */
export function extent(x: ArrayLike<number>): { min: number; max: number } | null {
  const n = x.length;
  if (n === 0) return null;
  let min = x[0]!;
  let max = min;
  for (let i = 1; i < n; i++) {
    const v = x[i]!;
    if (v < min) min = v;
    else if (v > max) max = v;
  }
  return { min, max };
}
