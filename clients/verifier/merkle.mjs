// RFC 9162 §2.1 Merkle tree hashing, inclusion and consistency proof verification, and a compact
// range that recomputes a root from leaves as they stream by (never holding them all).
import { createHash } from 'node:crypto';

const LEAF = Buffer.from([0]);
const NODE = Buffer.from([1]);

/** RFC 9162 §2.1.1: leaf hash SHA-256(0x00 ‖ leaf). */
export const leafHash = (leaf) => createHash('sha256').update(LEAF).update(leaf).digest();
/** RFC 9162 §2.1.1: node hash SHA-256(0x01 ‖ left ‖ right). */
export const nodeHash = (left, right) => createHash('sha256').update(NODE).update(left).update(right).digest();
export const EMPTY_ROOT = createHash('sha256').digest();

// Sizes stay exact to 2^53: halving with Math.floor, not >>, which would cut at 2^31.
const half = (n) => Math.floor(n / 2);
const odd = (n) => n % 2 === 1;

/**
 * RFC 9162 §2.1.3.2: does `path` (Buffers) prove `leaf` (its leaf hash) at `index` in the tree of
 * `size` whose root is `root`? Also returns the left siblings met on the way (bottom up): for a
 * verified proof they are the subtrees that make up leaves [0, index), used to resume a tree.
 */
export function verifyInclusion(index, size, leaf, path, root) {
  const fail = { ok: false, left: [] };
  if (!Number.isSafeInteger(index) || !Number.isSafeInteger(size) || index < 0 || index >= size) return fail;
  let fn = index;
  let sn = size - 1;
  let r = leaf;
  const left = [];
  for (const p of path) {
    if (sn === 0) return fail;
    if (odd(fn) || fn === sn) {
      r = nodeHash(p, r);
      left.push(p);
      if (!odd(fn)) {
        while (!odd(fn) && fn !== 0) {
          fn = half(fn);
          sn = half(sn);
        }
      }
    } else {
      r = nodeHash(r, p);
    }
    fn = half(fn);
    sn = half(sn);
  }
  if (sn !== 0 || !r.equals(root)) return fail;
  // Each hash met in the first branch is a left sibling (after skipping levels where the node has
  // none): together they are the perfect subtrees of [0, index).
  return { ok: true, left };
}

/** RFC 9162 §2.1.4.2: does `path` prove the tree (fromSize, fromRoot) a prefix of (toSize, toRoot)? */
export function verifyConsistency(fromSize, toSize, path, fromRoot, toRoot) {
  if (!Number.isSafeInteger(fromSize) || !Number.isSafeInteger(toSize) || fromSize < 1 || fromSize > toSize) return false;
  if (fromSize === toSize) return path.length === 0 && fromRoot.equals(toRoot);
  // 1. when fromSize is an exact power of two, the first subtree is the old root itself
  const nodes = isPowerOfTwo(fromSize) ? [fromRoot, ...path] : [...path];
  if (nodes.length === 0) return false;
  let fn = fromSize - 1;
  let sn = toSize - 1;
  while (odd(fn)) {
    fn = half(fn);
    sn = half(sn);
  }
  let fr = nodes[0];
  let sr = nodes[0];
  for (const c of nodes.slice(1)) {
    if (sn === 0) return false;
    if (odd(fn) || fn === sn) {
      fr = nodeHash(c, fr);
      sr = nodeHash(c, sr);
      if (!odd(fn)) {
        while (!odd(fn) && fn !== 0) {
          fn = half(fn);
          sn = half(sn);
        }
      }
    } else {
      sr = nodeHash(sr, c);
    }
    fn = half(fn);
    sn = half(sn);
  }
  return sn === 0 && fr.equals(fromRoot) && sr.equals(toRoot);
}

function isPowerOfTwo(n) {
  while (n > 1) {
    if (odd(n)) return false;
    n = half(n);
  }
  return n === 1;
}

/**
 * The perfect subtrees covering leaves [0, size), largest first (the binary digits of size): enough
 * to append further leaves and to give the root at any size reached.
 */
export class CompactRange {
  constructor() {
    this.hashes = [];
    this.sizes = [];
    this.size = 0;
  }

  /** Resumes at `size` from the subtrees of [0, size) smallest first (left siblings of leaf `size`'s path). */
  static resume(size, smallestFirst) {
    const range = new CompactRange();
    const sizes = [];
    for (let bit = 2 ** 52; bit >= 1; bit /= 2) if (Math.floor(size / bit) % 2 === 1) sizes.push(bit);
    if (sizes.length !== smallestFirst.length) return null;
    range.hashes = [...smallestFirst].reverse();
    range.sizes = sizes;
    range.size = size;
    return range;
  }

  /** Appends one leaf (its raw bytes). */
  push(leaf) {
    let h = leafHash(leaf);
    let s = 1;
    while (this.sizes.length > 0 && this.sizes[this.sizes.length - 1] === s) {
      h = nodeHash(this.hashes.pop(), h);
      this.sizes.pop();
      s *= 2;
    }
    this.hashes.push(h);
    this.sizes.push(s);
    this.size++;
  }

  /** MTH of the leaves so far (RFC 9162 §2.1.1): the subtrees folded right to left. */
  root() {
    if (this.hashes.length === 0) return EMPTY_ROOT;
    let r = this.hashes[this.hashes.length - 1];
    for (let i = this.hashes.length - 2; i >= 0; i--) r = nodeHash(this.hashes[i], r);
    return r;
  }
}
