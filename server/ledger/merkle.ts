// RFC 9162 §2.1 Merkle trees, pure: hashing, the hash of a range, inclusion and consistency proofs
// and their verification. Proofs are computed from a lookup of *perfect subtree* hashes (level k,
// index i covers leaves [i·2^k, (i+1)·2^k)), which is what the tree store keeps: every hash a proof
// or a root needs is one such node, O(log n) of them, and `*Nodes` functions name them up front so
// the store can read them in one query.
import { createHash } from 'node:crypto';

/** A perfect subtree: level k, index i covers leaves [i·2^k, (i+1)·2^k). */
export interface NodeRef {
  level: number;
  index: number;
}

/** Returns the stored hash of a perfect subtree (throws if the store has none). */
export type NodeLookup = (level: number, index: number) => Buffer;

/** The empty tree's hash, SHA-256 of nothing (RFC 9162 §2.1.1). */
export const EMPTY_ROOT = createHash('sha256').digest();

/** SHA-256(0x00 ‖ leaf) (RFC 9162 §2.1.1). */
export function leafHash(leaf: Buffer): Buffer {
  return createHash('sha256').update(Buffer.of(0)).update(leaf).digest();
}

/** SHA-256(0x01 ‖ left ‖ right) (RFC 9162 §2.1.1). */
export function nodeHash(left: Buffer, right: Buffer): Buffer {
  return createHash('sha256').update(Buffer.of(1)).update(left).update(right).digest();
}

/** The largest power of two smaller than n (n > 1): the split point k of RFC 9162 §2.1.1. */
export function splitPoint(n: number): number {
  let k = 1;
  while (k * 2 < n) k *= 2;
  return k;
}

const isPowerOfTwo = (n: number) => n > 0 && 2 ** Math.round(Math.log2(n)) === n;

/**
 * The perfect subtrees whose hashes make MTH(D[start:end]), left to right. Valid for the ranges the
 * RFC's recursions produce (start a multiple of a power of two ≥ end − start): the left part of each
 * split is then always a whole perfect subtree.
 */
export function rangeNodes(start: number, end: number): NodeRef[] {
  const out: NodeRef[] = [];
  const walk = (a: number, b: number) => {
    const size = b - a;
    if (isPowerOfTwo(size) && a % size === 0) {
      out.push({ level: Math.log2(size), index: a / size });
      return;
    }
    const k = splitPoint(size);
    walk(a, a + k);
    walk(a + k, b);
  };
  if (end > start) walk(start, end);
  return out;
}

/** MTH(D[start:end]) from stored perfect subtrees (start as in rangeNodes). */
export function rangeHash(start: number, end: number, lookup: NodeLookup): Buffer {
  if (end <= start) return EMPTY_ROOT;
  const size = end - start;
  if (isPowerOfTwo(size) && start % size === 0) return lookup(Math.log2(size), start / size);
  const k = splitPoint(size);
  return nodeHash(rangeHash(start, start + k, lookup), rangeHash(start + k, end, lookup));
}

/** The root of a tree of n leaves (RFC 9162 §2.1.1 MTH). */
export function rootHash(n: number, lookup: NodeLookup): Buffer {
  return rangeHash(0, n, lookup);
}

export function rootNodes(n: number): NodeRef[] {
  return rangeNodes(0, n);
}

/** The ranges whose hashes form PATH(m, D[n]) (RFC 9162 §2.1.3.1), in proof order. */
export function inclusionRanges(m: number, n: number): [number, number][] {
  if (!(Number.isInteger(m) && Number.isInteger(n) && m >= 0 && m < n)) throw new RangeError(`no leaf ${m} in a tree of ${n}`);
  const out: [number, number][] = [];
  const path = (m: number, a: number, b: number) => {
    if (b - a <= 1) return;
    const k = splitPoint(b - a);
    if (m < k) {
      path(m, a, a + k);
      out.push([a + k, b]);
    } else {
      path(m - k, a + k, b);
      out.push([a, a + k]);
    }
  };
  path(m, 0, n);
  return out;
}

/** The ranges whose hashes form PROOF(m, D[n]) (RFC 9162 §2.1.4.1), in proof order; empty for m = n. */
export function consistencyRanges(m: number, n: number): [number, number][] {
  if (!(Number.isInteger(m) && Number.isInteger(n) && m >= 1 && m <= n)) throw new RangeError(`no consistency proof from ${m} to ${n}`);
  const out: [number, number][] = [];
  const subproof = (m: number, a: number, b: number, whole: boolean) => {
    const n = b - a;
    if (m === n) {
      if (!whole) out.push([a, b]);
      return;
    }
    const k = splitPoint(n);
    if (m <= k) {
      subproof(m, a, a + k, whole);
      out.push([a + k, b]);
    } else {
      subproof(m - k, a + k, b, false);
      out.push([a, a + k]);
    }
  };
  subproof(m, 0, n, true);
  return out;
}

const nodesOf = (ranges: [number, number][]) => ranges.flatMap(([a, b]) => rangeNodes(a, b));

/** Every stored node an inclusion proof of leaf m in a tree of n needs. */
export const inclusionNodes = (m: number, n: number): NodeRef[] => nodesOf(inclusionRanges(m, n));
/** Every stored node a consistency proof from m to n needs. */
export const consistencyNodes = (m: number, n: number): NodeRef[] => nodesOf(consistencyRanges(m, n));

export function inclusionProof(m: number, n: number, lookup: NodeLookup): Buffer[] {
  return inclusionRanges(m, n).map(([a, b]) => rangeHash(a, b, lookup));
}

export function consistencyProof(m: number, n: number, lookup: NodeLookup): Buffer[] {
  return consistencyRanges(m, n).map(([a, b]) => rangeHash(a, b, lookup));
}

// The verification algorithms use bit shifts on sizes below 2^53, so they work on BigInt.
const lsb = (x: bigint) => (x & 1n) === 1n;

/** RFC 9162 §2.1.3.2: does `path` prove the leaf hash at `leafIndex` in the tree of `treeSize` with `root`? */
export function verifyInclusion(leafIndex: number, treeSize: number, leaf: Buffer, path: Buffer[], root: Buffer): boolean {
  if (!Number.isSafeInteger(leafIndex) || !Number.isSafeInteger(treeSize) || leafIndex < 0 || leafIndex >= treeSize) return false;
  let fn = BigInt(leafIndex);
  let sn = BigInt(treeSize - 1);
  let r = leaf;
  for (const p of path) {
    if (sn === 0n) return false;
    if (lsb(fn) || fn === sn) {
      r = nodeHash(p, r);
      if (!lsb(fn)) {
        while (!lsb(fn) && fn !== 0n) {
          fn >>= 1n;
          sn >>= 1n;
        }
      }
    } else {
      r = nodeHash(r, p);
    }
    fn >>= 1n;
    sn >>= 1n;
  }
  return sn === 0n && r.equals(root);
}

/** RFC 9162 §2.1.4.2: does `proof` show the tree of `second` (root `secondRoot`) extends the one of `first`? */
export function verifyConsistency(first: number, second: number, firstRoot: Buffer, secondRoot: Buffer, proof: Buffer[]): boolean {
  if (!Number.isSafeInteger(first) || !Number.isSafeInteger(second) || first < 1 || first > second) return false;
  if (first === second) return proof.length === 0 && firstRoot.equals(secondRoot);
  if (proof.length === 0) return false;
  const path = isPowerOfTwo(first) ? [firstRoot, ...proof] : [...proof];
  let fn = BigInt(first - 1);
  let sn = BigInt(second - 1);
  while (lsb(fn)) {
    fn >>= 1n;
    sn >>= 1n;
  }
  let fr = path[0]!;
  let sr = path[0]!;
  for (const c of path.slice(1)) {
    if (sn === 0n) return false;
    if (lsb(fn) || fn === sn) {
      fr = nodeHash(c, fr);
      sr = nodeHash(c, sr);
      while (!lsb(fn) && fn !== 0n) {
        fn >>= 1n;
        sn >>= 1n;
      }
    } else {
      sr = nodeHash(sr, c);
    }
    fn >>= 1n;
    sn >>= 1n;
  }
  return fr.equals(firstRoot) && sr.equals(secondRoot) && sn === 0n;
}

/**
 * Extends a tree leaf by leaf from its right frontier: `frontier[k]` is the hash of the perfect
 * subtree at level k still waiting for a right sibling (bit k of the size is set). Each new leaf
 * yields the nodes it completes, so the store only ever appends.
 */
export class TreeExtender {
  size: number;
  private frontier: (Buffer | undefined)[];

  /** `frontier(k)` gives the stored node at level k, index (size >> k) − 1, for each set bit k of size. */
  constructor(size: number, frontier: (level: number, index: number) => Buffer) {
    this.size = size;
    this.frontier = [];
    for (let k = 0; 2 ** k <= size; k++) {
      if (Math.floor(size / 2 ** k) % 2 === 1) this.frontier[k] = frontier(k, Math.floor(size / 2 ** k) - 1);
    }
  }

  /** The frontier nodes a tree of `size` leaves is extended from. */
  static frontierNodes(size: number): NodeRef[] {
    const out: NodeRef[] = [];
    for (let k = 0; 2 ** k <= size; k++) if (Math.floor(size / 2 ** k) % 2 === 1) out.push({ level: k, index: Math.floor(size / 2 ** k) - 1 });
    return out;
  }

  /** Adds a leaf (its leaf hash) and returns every node it completes, the leaf itself first. */
  push(leaf: Buffer): { level: number; index: number; hash: Buffer }[] {
    const i = this.size;
    const out = [{ level: 0, index: i, hash: leaf }];
    let h = leaf;
    let k = 0;
    while (this.frontier[k]) {
      h = nodeHash(this.frontier[k]!, h);
      this.frontier[k] = undefined;
      k++;
      out.push({ level: k, index: Math.floor(i / 2 ** k), hash: h });
    }
    this.frontier[k] = h;
    this.size++;
    return out;
  }

  /** The root of the tree as it stands (right to left over the frontier). */
  root(): Buffer {
    let r: Buffer | undefined;
    for (let k = 0; k < this.frontier.length; k++) {
      const f = this.frontier[k];
      if (f) r = r ? nodeHash(f, r) : f;
    }
    return r ?? EMPTY_ROOT;
  }
}

/**
 * MTH(D[0:n]) from the leaf hashes of positions [lo, lo + leaves.length), recomputed by the caller,
 * and the stored perfect subtrees wholly outside that range: what a range check compares with a
 * checkpoint's root. `mixedRootNodes` names the stored nodes it reads.
 */
export function mixedRoot(n: number, lo: number, leaves: Buffer[], lookup: NodeLookup): Buffer {
  const hi = lo + leaves.length;
  const inner = (a: number, b: number): Buffer => {
    if (b - a === 1) return leaves[a - lo]!;
    const k = splitPoint(b - a);
    return nodeHash(inner(a, a + k), inner(a + k, b));
  };
  const walk = (a: number, b: number): Buffer => {
    if (a >= lo && b <= hi) return inner(a, b);
    if (b <= lo || a >= hi) return rangeHash(a, b, lookup);
    const k = splitPoint(b - a);
    return nodeHash(walk(a, a + k), walk(a + k, b));
  };
  return n === 0 ? EMPTY_ROOT : walk(0, n);
}

export function mixedRootNodes(n: number, lo: number, hi: number): NodeRef[] {
  const out: NodeRef[] = [];
  const walk = (a: number, b: number) => {
    if (a >= lo && b <= hi) return;
    if (b <= lo || a >= hi) {
      out.push(...rangeNodes(a, b));
      return;
    }
    const k = splitPoint(b - a);
    walk(a, a + k);
    walk(a + k, b);
  };
  if (n > 0) walk(0, n);
  return out;
}

/** Every perfect subtree wholly inside [lo, lo + leaves.length), computed from the leaf hashes ("level/index" → hash). */
export function subtreesWithin(lo: number, leaves: Buffer[]): Map<string, Buffer> {
  const hi = lo + leaves.length;
  const out = new Map<string, Buffer>();
  leaves.forEach((h, i) => out.set(`0/${lo + i}`, h));
  for (let k = 1; 2 ** k <= leaves.length; k++) {
    const size = 2 ** k;
    for (let i = Math.ceil(lo / size); (i + 1) * size <= hi; i++) {
      out.set(`${k}/${i}`, nodeHash(out.get(`${k - 1}/${2 * i}`)!, out.get(`${k - 1}/${2 * i + 1}`)!));
    }
  }
  return out;
}
