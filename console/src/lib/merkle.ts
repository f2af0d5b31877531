// RFC 9162 (Certificate Transparency 2.0) §2.1 proof verification in the browser, with WebCrypto's
// SHA-256: an inclusion proof shows a verdict's seal is a leaf of the tree a checkpoint signs
// (§2.1.3.2), a consistency proof shows a later checkpoint's tree extends an earlier one (§2.1.4.2).
// The server's proofs are only hashes: whatever it sends, these checks pass only when the hashes
// lead to the roots the auditor already holds.
//
// Tree sizes reach 2^53 (JavaScript's safe integers), past the 32 bits that `>>` handles, so the
// bit steps below divide by two instead.

export type Bytes = Uint8Array<ArrayBuffer>;

export function hexToBytes(hex: string): Bytes {
  if (!/^(?:[0-9a-fA-F]{2})*$/.test(hex)) throw new Error('not a hexadecimal string');
  const out = new Uint8Array(hex.length / 2);
  for (let i = 0; i < out.length; i++) out[i] = parseInt(hex.slice(2 * i, 2 * i + 2), 16);
  return out;
}

export function bytesToHex(bytes: Uint8Array): string {
  return Array.from(bytes, (b) => b.toString(16).padStart(2, '0')).join('');
}

async function sha256(...parts: Uint8Array[]): Promise<Bytes> {
  const all = new Uint8Array(parts.reduce((n, p) => n + p.length, 0));
  let at = 0;
  for (const p of parts) {
    all.set(p, at);
    at += p.length;
  }
  return new Uint8Array(await crypto.subtle.digest('SHA-256', all));
}

const LEAF = new Uint8Array([0x00]);
const NODE = new Uint8Array([0x01]);

/** RFC 9162 §2.1.1: MTH({d(0)}) = SHA-256(0x00 ‖ d(0)). A verdict's leaf input is its seal's 32 bytes. */
export function leafHash(leaf: Uint8Array): Promise<Bytes> {
  return sha256(LEAF, leaf);
}

/** RFC 9162 §2.1.1: SHA-256(0x01 ‖ left ‖ right). */
export function nodeHash(left: Uint8Array, right: Uint8Array): Promise<Bytes> {
  return sha256(NODE, left, right);
}

const odd = (n: number) => n % 2 === 1;
const half = (n: number) => Math.floor(n / 2);
const isSize = (n: number) => Number.isSafeInteger(n) && n >= 1;
const isHash = (h: string) => /^[0-9a-fA-F]{64}$/.test(h);

function equal(a: Uint8Array, b: Uint8Array): boolean {
  return a.length === b.length && a.every((x, i) => x === b[i]);
}

/**
 * RFC 9162 §2.1.3.2: does the audit path lead from the leaf hash at `leafIndex` to `rootHex` in a
 * tree of `treeSize` leaves?
 */
export async function verifyInclusion(leafIndex: number, treeSize: number, leaf: Uint8Array, path: readonly string[], rootHex: string): Promise<boolean> {
  if (!isSize(treeSize) || !Number.isSafeInteger(leafIndex) || leafIndex < 0 || leafIndex >= treeSize) return false;
  if (!isHash(rootHex) || !path.every(isHash)) return false;
  let fn = leafIndex;
  let sn = treeSize - 1;
  let r = await leafHash(leaf);
  for (const p of path.map(hexToBytes)) {
    if (sn === 0) return false;
    if (odd(fn) || fn === sn) {
      r = await nodeHash(p, r);
      if (!odd(fn)) {
        while (!odd(fn) && fn !== 0) {
          fn = half(fn);
          sn = half(sn);
        }
      }
    } else {
      r = await nodeHash(r, p);
    }
    fn = half(fn);
    sn = half(sn);
  }
  return sn === 0 && equal(r, hexToBytes(rootHex));
}

const isPowerOfTwo = (n: number) => n >= 1 && 2 ** Math.round(Math.log2(n)) === n;

/**
 * RFC 9162 §2.1.4.2: does the proof show that the tree of `firstSize` leaves with root `firstRootHex`
 * is a prefix of the tree of `secondSize` leaves with root `secondRootHex`? For equal sizes the
 * proof is empty and the roots must be equal (clients/verifier/FORMAT.md, "Proofs").
 */
export async function verifyConsistency(firstSize: number, secondSize: number, proof: readonly string[], firstRootHex: string, secondRootHex: string): Promise<boolean> {
  if (!isSize(firstSize) || !isSize(secondSize) || firstSize > secondSize) return false;
  if (!isHash(firstRootHex) || !isHash(secondRootHex) || !proof.every(isHash)) return false;
  if (firstSize === secondSize) return proof.length === 0 && firstRootHex.toLowerCase() === secondRootHex.toLowerCase();
  if (proof.length === 0) return false;
  const firstRoot = hexToBytes(firstRootHex);
  const path = proof.map(hexToBytes);
  if (isPowerOfTwo(firstSize)) path.unshift(firstRoot);
  let fn = firstSize - 1;
  let sn = secondSize - 1;
  while (odd(fn)) {
    fn = half(fn);
    sn = half(sn);
  }
  let fr = path[0]!;
  let sr = path[0]!;
  for (const c of path.slice(1)) {
    if (sn === 0) return false;
    if (odd(fn) || fn === sn) {
      fr = await nodeHash(c, fr);
      sr = await nodeHash(c, sr);
      if (!odd(fn)) {
        while (!odd(fn) && fn !== 0) {
          fn = half(fn);
          sn = half(sn);
        }
      }
    } else {
      sr = await nodeHash(sr, c);
    }
    fn = half(fn);
    sn = half(sn);
  }
  return equal(fr, firstRoot) && equal(sr, hexToBytes(secondRootHex)) && sn === 0;
}
