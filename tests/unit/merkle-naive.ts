// An independent, naive implementation of RFC 9162 §2.1 for the tests, written straight from the
// RFC's recursive definitions (MTH §2.1.1, PATH §2.1.3.1, PROOF/SUBPROOF §2.1.4.1) over a list of
// leaf inputs, with no stored subtrees and no shortcuts; MTH is memoised by range only for speed.
import { createHash } from 'node:crypto';

const sha = (...parts: Buffer[]) => createHash('sha256').update(Buffer.concat(parts)).digest();

/** RFC 9162 §2.1.1: k is the largest power of two smaller than n. */
export function k(n: number): number {
  let p = 1;
  while (p * 2 < n) p *= 2;
  return p;
}

export interface NaiveTree {
  /** MTH(D[a:b]). */
  mthOf(a: number, b: number): Buffer;
  /** MTH(D[0:n]). */
  mth(n: number): Buffer;
  /** PATH(m, D[0:n]). */
  pathOf(m: number, n: number): Buffer[];
  /** PROOF(m, D[0:n]). */
  proofOf(m: number, n: number): Buffer[];
}

/** The naive tree over `leaves` (the leaf inputs d(0)…, e.g. 32-byte seals). */
export function naiveTree(leaves: Buffer[]): NaiveTree {
  const memo = new Map<string, Buffer>();
  const mthOf = (a: number, b: number): Buffer => {
    const key = `${a}:${b}`;
    let h = memo.get(key);
    if (!h) {
      if (b === a) h = sha();
      else if (b - a === 1) h = sha(Buffer.of(0), leaves[a]!);
      else h = sha(Buffer.of(1), mthOf(a, a + k(b - a)), mthOf(a + k(b - a), b));
      memo.set(key, h);
    }
    return h;
  };
  const pathOf = (m: number, n: number, a = 0): Buffer[] => {
    if (n <= 1) return [];
    const s = k(n);
    return m < s ? [...pathOf(m, s, a), mthOf(a + s, a + n)] : [...pathOf(m - s, n - s, a + s), mthOf(a, a + s)];
  };
  const subproof = (m: number, n: number, b: boolean, a = 0): Buffer[] => {
    if (m === n) return b ? [] : [mthOf(a, a + n)];
    const s = k(n);
    return m <= s ? [...subproof(m, s, b, a), mthOf(a + s, a + n)] : [...subproof(m - s, n - s, false, a + s), mthOf(a, a + s)];
  };
  return { mthOf, mth: (n) => mthOf(0, n), pathOf: (m, n) => pathOf(m, n), proofOf: (m, n) => subproof(m, n, true) };
}
