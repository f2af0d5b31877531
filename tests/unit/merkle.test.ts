// server/ledger/merkle.ts against an independent, naive implementation of RFC 9162 §2.1
// (tests/unit/merkle-naive.ts: the RFC's recursive definitions MTH §2.1.1, PATH §2.1.3.1,
// PROOF/SUBPROOF §2.1.4.1 over the whole list of leaves, with no stored subtrees and no shortcuts).
import { createHash } from 'node:crypto';
import { describe, expect, it } from 'vitest';
import {
  consistencyNodes,
  consistencyProof,
  EMPTY_ROOT,
  inclusionNodes,
  inclusionProof,
  leafHash,
  mixedRoot,
  mixedRootNodes,
  rootHash,
  subtreesWithin,
  TreeExtender,
  verifyConsistency,
  verifyInclusion,
  type NodeLookup,
} from '../../server/ledger/merkle';
import { naiveTree } from './merkle-naive';

// ---- The independent implementation (tests/unit/merkle-naive.ts) over the fixture leaves ----
// ---- Fixtures ----
/** Leaf inputs: 32 bytes each, like seals. */
const leaves = Array.from({ length: 2000 }, (_, i) => createHash('sha256').update(`leaf ${i}`).digest());
const { mth, pathOf, proofOf } = naiveTree(leaves);

/** Every perfect-subtree hash of the first n leaves, as the tree store keeps them (built by the extender). */
function storeOf(n: number): { lookup: NodeLookup; reads: Set<string> } {
  const nodes = new Map<string, Buffer>();
  const t = new TreeExtender(0, () => {
    throw new Error('empty tree has no frontier');
  });
  for (let i = 0; i < n; i++) for (const node of t.push(leafHash(leaves[i]!))) nodes.set(`${node.level}/${node.index}`, node.hash);
  const reads = new Set<string>();
  return {
    reads,
    lookup: (level, index) => {
      const h = nodes.get(`${level}/${index}`);
      if (!h) throw new Error(`no node ${level}/${index}`);
      reads.add(`${level}/${index}`);
      return h;
    },
  };
}
const full = storeOf(1000);
// Every complete subtree of the 1000-leaf tree is also a complete subtree of every larger prefix, so
// one store serves every size ≤ 1000 (only nodes wholly inside the prefix are ever read).

/** A deterministic pseudo-random generator (so a failure can be replayed). */
function rng(seed: number) {
  let s = seed >>> 0;
  return () => ((s = (s * 1664525 + 1013904223) >>> 0) / 2 ** 32);
}
const flip = (b: Buffer, bit = 0) => {
  const c = Buffer.from(b);
  c[bit >> 3]! ^= 1 << (bit & 7);
  return c;
};

describe('RFC 9162 §2.1 against an independent recursive implementation', () => {
  it('the empty tree is SHA-256 of nothing, and roots match MTH for every size 1..1000', () => {
    expect(EMPTY_ROOT.equals(mth(0))).toBe(true);
    for (let n = 1; n <= 1000; n++) expect(rootHash(n, full.lookup).toString('hex'), `size ${n}`).toBe(mth(n).toString('hex'));
  });

  it('the extender root matches MTH after each leaf, also when resumed from a stored frontier', () => {
    const t = new TreeExtender(0, () => Buffer.alloc(0));
    for (let n = 1; n <= 300; n++) {
      t.push(leafHash(leaves[n - 1]!));
      expect(t.root().equals(mth(n)), `size ${n}`).toBe(true);
      // Resuming from the frontier of size n gives the same next nodes as going on.
      const resumed = new TreeExtender(n, full.lookup);
      expect(resumed.root().equals(t.root())).toBe(true);
    }
  });

  it('inclusion proofs equal PATH(m, D[n]) for all leaves of sizes 1..1000 (sampled above 200) and verify by §2.1.3.2', () => {
    const r = rng(1);
    for (let n = 1; n <= 1000; n++) {
      const d = leaves;
      const root = mth(n);
      const ms = n <= 200 ? [...Array(n).keys()] : [0, n - 1, ...Array.from({ length: 8 }, () => Math.floor(r() * n))];
      for (const m of ms) {
        const proof = inclusionProof(m, n, full.lookup);
        const naive = pathOf(m, n);
        expect(proof.map((h) => h.toString('hex')), `PATH(${m}, D[${n}])`).toEqual(naive.map((h) => h.toString('hex')));
        expect(verifyInclusion(m, n, leafHash(d[m]!), naive, root), `verify ${m} in ${n}`).toBe(true);
      }
    }
  });

  it('consistency proofs equal PROOF(m, D[n]) for every pair up to 64 and random pairs up to 1000, and verify by §2.1.4.2', () => {
    const pairs: [number, number][] = [];
    for (let n = 1; n <= 64; n++) for (let m = 1; m <= n; m++) pairs.push([m, n]);
    const r = rng(2);
    for (let i = 0; i < 2000; i++) {
      const n = 1 + Math.floor(r() * 1000);
      pairs.push([1 + Math.floor(r() * n), n]);
    }
    for (const [m, n] of pairs) {
      const proof = consistencyProof(m, n, full.lookup);
      const naive = proofOf(m, n);
      expect(proof.map((h) => h.toString('hex')), `PROOF(${m}, D[${n}])`).toEqual(naive.map((h) => h.toString('hex')));
      expect(verifyConsistency(m, n, mth(m), mth(n), naive), `verify ${m} → ${n}`).toBe(true);
    }
  });

  it('a proof reads only O(log n) stored nodes, and names them up front', () => {
    for (const [m, n] of [[0, 1000], [999, 1000], [517, 1000], [333, 777]] as const) {
      const s = storeOf(n);
      inclusionProof(m, n, s.lookup);
      expect(s.reads.size).toBeLessThanOrEqual(2 * Math.ceil(Math.log2(n)));
      expect(new Set(inclusionNodes(m, n).map((x) => `${x.level}/${x.index}`))).toEqual(s.reads);
    }
    for (const [m, n] of [[1, 1000], [999, 1000], [512, 1000], [333, 777]] as const) {
      const s = storeOf(n);
      consistencyProof(m, n, s.lookup);
      expect(s.reads.size).toBeLessThanOrEqual(2 * Math.ceil(Math.log2(n)));
      expect(new Set(consistencyNodes(m, n).map((x) => `${x.level}/${x.index}`))).toEqual(s.reads);
    }
  });
});

describe('the range check: recomputed leaves of a range plus stored nodes outside it', () => {
  it('gives MTH(D[n]) for random ranges, reads only the nodes it names, and recomputes every subtree inside the range', () => {
    const r = rng(5);
    for (let t = 0; t < 400; t++) {
      const n = 1 + Math.floor(r() * 1000);
      const lo = Math.floor(r() * n);
      const hi = lo + 1 + Math.floor(r() * (n - lo));
      const recomputed = leaves.slice(lo, hi).map(leafHash);
      const s = storeOf(n);
      expect(mixedRoot(n, lo, recomputed, s.lookup).equals(mth(n)), `${n} [${lo}, ${hi})`).toBe(true);
      expect(s.reads).toEqual(new Set(mixedRootNodes(n, lo, hi).map((x) => `${x.level}/${x.index}`)));
      // A changed leaf inside the range changes the root (RFC 9162 §2.1.1: the root commits to every leaf).
      const changed = [...recomputed];
      changed[Math.floor(r() * changed.length)] = flip(changed[0]!);
      expect(mixedRoot(n, lo, changed, s.lookup).equals(mth(n))).toBe(false);
      for (const [key, h] of subtreesWithin(lo, recomputed)) {
        const [level, index] = key.split('/').map(Number);
        expect(h.equals(full.lookup(level!, index!)), key).toBe(true);
        expect(index! * 2 ** level! >= lo && (index! + 1) * 2 ** level! <= hi).toBe(true);
      }
    }
  });
});

describe('verification rejects every alteration (RFC 9162 §2.1.3.2, §2.1.4.2)', () => {
  it('inclusion: any changed hash, index, size, leaf or root, or a path too long or short, fails', () => {
    const r = rng(3);
    let sizeChecks = 0;
    for (let t = 0; t < 300; t++) {
      const n = 2 + Math.floor(r() * 999);
      const m = Math.floor(r() * n);
      const root = mth(n);
      const leaf = leafHash(leaves[m]!);
      const path = pathOf(m, n);
      expect(verifyInclusion(m, n, leaf, path, root)).toBe(true);
      for (let i = 0; i < path.length; i++) {
        const bad = [...path];
        bad[i] = flip(bad[i]!, Math.floor(r() * 256));
        expect(verifyInclusion(m, n, leaf, bad, root), `hash ${i} of ${m}/${n}`).toBe(false);
      }
      const otherIndex = (m + 1 + Math.floor(r() * (n - 1))) % n;
      expect(verifyInclusion(otherIndex, n, leaf, path, root), `index ${otherIndex} for ${m}/${n}`).toBe(false);
      // A proof alone does not fix the size where two sizes give the same path shape (the signed
      // checkpoint does, RFC 9162 §2.1.3.2 takes tree_size from it); it must fail whenever the path
      // PATH(m, D[n']) of the other size has another length.
      for (const other of [n + 1, n - 1, n * 2, Math.ceil(n / 2), n + 17]) {
        if (other <= m || other === n) continue;
        if (pathOf(m, other).length !== path.length) {
          sizeChecks++;
          expect(verifyInclusion(m, other, leaf, path, root), `size ${other} for ${m}/${n}`).toBe(false);
        }
      }
      expect(verifyInclusion(m, n, flip(leaf), path, root)).toBe(false);
      expect(verifyInclusion(m, n, leaf, path, flip(root))).toBe(false);
      expect(verifyInclusion(m, n, leaf, [...path, leaf], root)).toBe(false);
      if (path.length > 0) expect(verifyInclusion(m, n, leaf, path.slice(0, -1), root)).toBe(false);
      expect(verifyInclusion(n, n, leaf, path, root)).toBe(false);
      expect(verifyInclusion(-1, n, leaf, path, root)).toBe(false);
    }
    expect(sizeChecks).toBeGreaterThan(300);
  });

  it('consistency: any changed hash, size or root, or a proof too long or short, fails', () => {
    const r = rng(4);
    let sizeChecks = 0;
    for (let t = 0; t < 300; t++) {
      const n = 2 + Math.floor(r() * 999);
      const m = 1 + Math.floor(r() * (n - 1)); // m < n
      const r1 = mth(m);
      const r2 = mth(n);
      const proof = proofOf(m, n);
      expect(verifyConsistency(m, n, r1, r2, proof)).toBe(true);
      for (let i = 0; i < proof.length; i++) {
        const bad = [...proof];
        bad[i] = flip(bad[i]!, Math.floor(r() * 256));
        expect(verifyConsistency(m, n, r1, r2, bad), `hash ${i} of ${m}→${n}`).toBe(false);
      }
      expect(verifyConsistency(m, n, flip(r1), r2, proof)).toBe(false);
      expect(verifyConsistency(m, n, r1, flip(r2), proof)).toBe(false);
      // As for inclusion: another pair of sizes must fail whenever its PROOF has another length.
      for (const [a, b] of [[m, n + 1], [m - 1, n], [m + 1, n], [m, n * 2], [Math.ceil(m / 2), n]] as const) {
        if (a < 1 || a >= b || (a === m && b === n)) continue;
        if (proofOf(a, b).length !== proof.length) {
          sizeChecks++;
          expect(verifyConsistency(a, b, r1, r2, proof), `${a} → ${b} for ${m} → ${n}`).toBe(false);
        }
      }
      expect(verifyConsistency(m, n, r1, r2, [...proof, r1])).toBe(false);
      expect(verifyConsistency(m, n, r1, r2, proof.slice(0, -1))).toBe(false);
      expect(verifyConsistency(m, n, r1, r2, [])).toBe(false);
    }
    expect(sizeChecks).toBeGreaterThan(300);
    // Equal sizes: the proof is empty and the roots must be equal (FORMAT.md, RFC 9162 §2.1.4.2).
    const r7 = mth(7);
    expect(verifyConsistency(7, 7, r7, r7, [])).toBe(true);
    expect(verifyConsistency(7, 7, r7, flip(r7), [])).toBe(false);
    expect(verifyConsistency(7, 7, r7, r7, [r7])).toBe(false);
    expect(verifyConsistency(8, 7, r7, r7, [])).toBe(false);
  });
});
