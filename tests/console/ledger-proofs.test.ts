// The console's own RFC 9162 checks (console/src/lib/merkle.ts, WebCrypto) against a naive
// implementation of RFC 9162 §2.1 written here from the RFC's definitions (MTH §2.1.1, PATH §2.1.3.1,
// PROOF/SUBPROOF §2.1.4.1) with node:crypto; and the seal lookup's ledger panel, fed a ledger built
// by that implementation and checkpoints signed here (Ed25519 over the `canonicalize` package's
// RFC 8785 text, clients/verifier/FORMAT.md), saying NOT consistent when a kept checkpoint disagrees.
import { createHash, generateKeyPairSync, randomBytes, sign, type KeyObject } from 'node:crypto';
import canonicalize from 'canonicalize';
import { mount } from '@vue/test-utils';
import { beforeEach, describe, expect, it } from 'vitest';
import { verifyConsistency, verifyInclusion } from '../../console/src/lib/merkle';
import { keepCheckpoint, keptCheckpoints, proveSealInLedger, type Checkpoint, type LedgerSource } from '../../console/src/lib/checkpoints';
import LedgerProof from '../../console/src/components/ledger/LedgerProof.vue';

// --- naive RFC 9162 §2.1 -------------------------------------------------------------------------
const H = (...parts: Buffer[]) => createHash('sha256').update(Buffer.concat(parts)).digest();
/** The largest power of two smaller than n (n > 1), §2.1.1. */
const split = (n: number) => 2 ** Math.ceil(Math.log2(n) - 1);
function naive(leaves: Buffer[]) {
  const memo = new Map<string, Buffer>();
  // MTH(D[lo:hi]) by the recursive definition, memoised by range so sizes of 1 000 stay quick.
  const mth = (lo: number, hi: number): Buffer => {
    const key = `${lo}:${hi}`;
    let h = memo.get(key);
    if (!h) {
      const n = hi - lo;
      h = n === 0 ? H() : n === 1 ? H(Buffer.from([0]), leaves[lo]!) : H(Buffer.from([1]), mth(lo, lo + split(n)), mth(lo + split(n), hi));
      memo.set(key, h);
    }
    return h;
  };
  const path = (m: number, lo: number, hi: number): Buffer[] => {
    const n = hi - lo;
    if (n === 1) return [];
    const k = split(n);
    return m < k ? [...path(m, lo, lo + k), mth(lo + k, hi)] : [...path(m - k, lo + k, hi), mth(lo, lo + k)];
  };
  const subproof = (m: number, lo: number, hi: number, b: boolean): Buffer[] => {
    const n = hi - lo;
    if (m === n) return b ? [] : [mth(lo, hi)];
    const k = split(n);
    return m <= k ? [...subproof(m, lo, lo + k, b), mth(lo + k, hi)] : [...subproof(m - k, lo + k, hi, false), mth(lo, lo + k)];
  };
  return {
    root: (n: number) => mth(0, n).toString('hex'),
    inclusion: (m: number, n: number) => path(m, 0, n).map((h) => h.toString('hex')),
    consistency: (m: number, n: number) => subproof(m, 0, n, true).map((h) => h.toString('hex')),
  };
}
const leavesOf = (n: number) => Array.from({ length: n }, () => randomBytes(32));

describe('lib/merkle.ts against the naive RFC 9162 implementation', () => {
  const leaves = leavesOf(1000);
  const tree = naive(leaves);

  it('verifies every inclusion proof of tree sizes 1 to 40 and refuses a changed one (§2.1.3.2)', async () => {
    for (let n = 1; n <= 40; n++) {
      for (let m = 0; m < n; m++) {
        const proof = tree.inclusion(m, n);
        expect(await verifyInclusion(m, n, leaves[m]!, proof, tree.root(n)), `leaf ${m} of ${n}`).toBe(true);
        if (n > 1) {
          expect(await verifyInclusion(m, n, leaves[(m + 1) % n]!, proof, tree.root(n)), `other leaf at ${m} of ${n}`).toBe(false);
          expect(await verifyInclusion((m + 1) % n, n, leaves[m]!, proof, tree.root(n)), `wrong index ${m} of ${n}`).toBe(false);
          const bent = [...proof];
          bent[0] = bent[0]!.replace(/^./, (c) => (c === '0' ? '1' : '0'));
          expect(await verifyInclusion(m, n, leaves[m]!, bent, tree.root(n))).toBe(false);
        }
      }
    }
  });

  it('verifies inclusion at random places in trees up to 1 000 leaves', async () => {
    for (let i = 0; i < 60; i++) {
      const n = 1 + Math.floor(Math.random() * 1000);
      const m = Math.floor(Math.random() * n);
      expect(await verifyInclusion(m, n, leaves[m]!, tree.inclusion(m, n), tree.root(n)), `leaf ${m} of ${n}`).toBe(true);
      expect(await verifyInclusion(m, n, leaves[m]!, tree.inclusion(m, n), tree.root(n === 1 ? 2 : n - 1))).toBe(false);
    }
  });

  it('verifies every consistency proof between sizes 1 to 32 and refuses a wrong root (§2.1.4.2)', async () => {
    for (let n = 1; n <= 32; n++) {
      for (let m = 1; m <= n; m++) {
        const proof = tree.consistency(m, n);
        expect(await verifyConsistency(m, n, proof, tree.root(m), tree.root(n)), `${m} → ${n}`).toBe(true);
        if (m < n) {
          expect(await verifyConsistency(m, n, proof, tree.root(m === 1 ? 2 : m - 1), tree.root(n)), `wrong first root ${m} → ${n}`).toBe(false);
          expect(await verifyConsistency(m, n, proof, tree.root(m), tree.root(n - 1)), `wrong second root ${m} → ${n}`).toBe(false);
        }
      }
    }
    expect(await verifyConsistency(5, 3, [], tree.root(5), tree.root(3))).toBe(false);
  });

  it('verifies consistency between random pairs of sizes up to 1 000, and not against a rewritten past', async () => {
    const rewritten = [...leaves];
    for (let i = 0; i < 40; i++) {
      const n = 2 + Math.floor(Math.random() * 999);
      const m = 1 + Math.floor(Math.random() * (n - 1));
      expect(await verifyConsistency(m, n, tree.consistency(m, n), tree.root(m), tree.root(n)), `${m} → ${n}`).toBe(true);
      // The same sizes after one leaf inside the first m was changed: the kept root no longer fits.
      const at = Math.floor(Math.random() * m);
      rewritten[at] = randomBytes(32);
      const other = naive(rewritten);
      expect(await verifyConsistency(m, n, other.consistency(m, n), tree.root(m), other.root(n)), `rewritten ${m} → ${n}`).toBe(false);
      rewritten[at] = leaves[at]!;
    }
  });
});

// --- the lookup's ledger panel -------------------------------------------------------------------
const ORG = '5d0c6a1e-9b7f-4c1e-8a53-2f4b6c8d9e01';
const keys = generateKeyPairSync('ed25519');
const jwk = { ...(keys.publicKey.export({ format: 'jwk' }) as { kty: string; crv: string; x: string }), kid: 'test-key-1', nbf: Math.floor(Date.parse('2020-01-01T00:00:00Z') / 1000) };

function signed(size: number, root: string, issuedAt: string, key: KeyObject = keys.privateKey): Checkpoint {
  const unsigned = { format: 'lotproof.checkpoint/1' as const, organisationId: ORG, treeSize: size, rootHash: root, issuedAt, kid: jwk.kid };
  return { ...unsigned, signature: sign(null, Buffer.from(canonicalize(unsigned)!, 'utf8'), key).toString('base64url') };
}

/** A service answering from a ledger of these leaves, with its latest checkpoint at `size`. */
function serviceOf(leaves: Buffer[], size: number, issuedAt = '2026-03-02T10:00:00.000Z'): LedgerSource {
  const tree = naive(leaves);
  const latest = signed(size, tree.root(size), issuedAt);
  return {
    inclusion: async (seal) => {
      const i = leaves.findIndex((l) => l.toString('hex') === seal);
      if (i < 0 || i >= size) return null;
      return { checkpoint: latest, verdict: { id: '00000000-0000-4000-8000-000000000000', sequence: i + 1, seal }, proof: { leafIndex: i, treeSize: size, hashes: tree.inclusion(i, size) } };
    },
    consistency: async (fromSize, toSize) => (fromSize <= toSize && toSize <= size ? { fromSize, toSize, hashes: tree.consistency(fromSize, toSize) } : 'missing'),
    jwks: async () => ({ keys: [jwk] }),
  };
}

describe('the seal lookup’s ledger panel', () => {
  const leaves = leavesOf(12);
  beforeEach(() => localStorage.clear());

  it('proves the seal, keeps the checkpoint, and finds the next one consistent with it', async () => {
    const first = await proveSealInLedger(leaves[3]!.toString('hex'), serviceOf(leaves, 7, '2026-03-01T10:00:00.000Z'));
    expect(first).toMatchObject({ sequence: 4, consistency: 'none', keptNow: true });
    expect(first!.signature.state).toBe('pass');
    expect(first!.inclusion.state).toBe('pass');
    expect(keptCheckpoints(ORG).map((c) => c.treeSize)).toEqual([7]);

    const second = await proveSealInLedger(leaves[9]!.toString('hex'), serviceOf(leaves, 12));
    expect(second!.consistency).toBe('pass');
    expect(second!.kept.map((k) => k.state)).toEqual(['pass']);
    const w = mount(LedgerProof, { props: { report: second! } });
    expect(w.find('[data-ledger-proof]').attributes('data-consistency')).toBe('pass');
    expect(w.find('[data-consistent]').text()).toMatch(/Consistent with every checkpoint this browser kept/);
    expect(w.find('[data-not-consistent]').exists()).toBe(false);
    expect(keptCheckpoints(ORG).map((c) => c.treeSize)).toEqual([7, 12]);
  });

  it('says NOT consistent when a kept checkpoint disagrees with the rewritten ledger, and does not keep the new one', async () => {
    keepCheckpoint(signed(7, naive(leaves).root(7), '2026-03-01T10:00:00.000Z'));
    // The service rewrote verdict #3 and re-signed everything: its own proofs are self-consistent.
    const rewritten = [...leaves];
    rewritten[2] = randomBytes(32);
    const report = await proveSealInLedger(rewritten[9]!.toString('hex'), serviceOf(rewritten, 12));
    expect(report!.signature.state).toBe('pass');
    expect(report!.inclusion.state).toBe('pass');
    expect(report!.consistency).toBe('fail');
    expect(report!.keptNow).toBe(false);
    expect(keptCheckpoints(ORG).map((c) => c.treeSize)).toEqual([7]);

    const w = mount(LedgerProof, { props: { report: report! } });
    expect(w.find('[data-ledger-proof]').attributes('data-consistency')).toBe('fail');
    expect(w.find('[data-not-consistent]').text()).toMatch(/NOT consistent — history was rewritten/);
    expect(w.find('[data-kept-comparisons] tr[data-state="fail"]').text()).toMatch(/NOT consistent/);
  });

  it('says NOT consistent when the ledger was cut back below a kept checkpoint, or one of the same size has another root', async () => {
    keepCheckpoint(signed(10, naive(leaves).root(10), '2026-03-01T10:00:00.000Z'));
    const shorter = await proveSealInLedger(leaves[1]!.toString('hex'), serviceOf(leaves, 8));
    expect(shorter!.consistency).toBe('fail');
    expect(shorter!.kept[0]!.detail).toMatch(/cut back/);

    const rewritten = [...leaves];
    rewritten[0] = randomBytes(32);
    const same = await proveSealInLedger(rewritten[1]!.toString('hex'), serviceOf(rewritten, 10));
    expect(same!.consistency).toBe('fail');
  });

  it('refuses a checkpoint dated outside its key’s window, and one signed by another key', async () => {
    const early = await proveSealInLedger(leaves[0]!.toString('hex'), serviceOf(leaves, 4, '2019-06-01T00:00:00.000Z'));
    expect(early!.signature.state).toBe('fail');
    expect(early!.keptNow).toBe(false);

    const intruder = generateKeyPairSync('ed25519').privateKey;
    const tree = naive(leaves);
    const forged = signed(4, tree.root(4), '2026-03-02T10:00:00.000Z', intruder);
    const source: LedgerSource = { ...serviceOf(leaves, 4), inclusion: async (seal) => ({ checkpoint: forged, verdict: { id: '00000000-0000-4000-8000-000000000000', sequence: 1, seal }, proof: { leafIndex: 0, treeSize: 4, hashes: tree.inclusion(0, 4) } }) };
    const report = await proveSealInLedger(leaves[0]!.toString('hex'), source);
    expect(report!.signature.state).toBe('fail');
    expect(report!.inclusion.state).toBe('pass');
    expect(keptCheckpoints(ORG)).toEqual([]);
  });
});
