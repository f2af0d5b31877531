// The verifier's checkpoint memory (--checkpoints <folder>): every checkpoint it verifies is kept, and
// every new one must be consistent (RFC 9162 §2.1.4) with each kept one, from an export's own leaves
// or from consistency proofs; a rewritten or cut-back history is refused. Also the checkpoint mode for
// an auditor who receives only checkpoints. Proofs come from the test's own RFC 9162 tree.
import { existsSync, readdirSync } from 'node:fs';
import { join } from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { useTempDirs } from '../support/temp-dirs';
import { ORG_A, Ledger, jwksText, makeKey, runVerifier, writeJson, writeLines, type Checkpoint, type TestKey } from './verifier-fixtures';

const tempDir = useTempDirs('lotproof-verifier-cp-');
let dir: string;
let key: TestKey;
let jwks: string;
let ledger: Ledger;
/** The same organisation's ledger after an insider rewrote the nonconforming verdict at position 3. */
let forged: Ledger;

beforeAll(() => {
  dir = tempDir();
  key = makeKey(0);
  jwks = writeLines(dir, 'jwks.json', [jwksText(key)]);
  ledger = new Ledger(ORG_A, key).append(20);
  forged = ledger.rewritten(3, (rec) => ((rec.result as { decision: string }).decision = 'conforming'));
});

let n = 0;
const exportFile = (l: Ledger, cp: Checkpoint, opts: { from?: number; filter?: { decision: string } } = {}) => writeLines(dir, `export-${++n}.ndjson`, l.exportLines(cp, opts));
const proofsFile = (proofs: unknown) => writeJson(dir, `proofs-${++n}.json`, proofs);
const cpFile = (cp: Checkpoint) => writeJson(dir, `cp-${++n}.json`, cp);
const kept = (folder: string) => (existsSync(join(folder, ORG_A.id)) ? readdirSync(join(folder, ORG_A.id)).filter((f) => f.endsWith('.json')) : []);

describe('an export checked with a checkpoints folder', () => {
  it('keeps each checkpoint it verifies, and checks a later export against them from its own leaves', () => {
    const folder = join(tempDir(), 'kept');
    const first = runVerifier(['--jwks', jwks, '--checkpoints', folder, exportFile(ledger, ledger.checkpoint(8))]);
    expect(first.status, first.out).toBe(0);
    expect(kept(folder)).toHaveLength(1);
    const second = runVerifier(['--jwks', jwks, '--checkpoints', folder, exportFile(ledger, ledger.checkpoint(15))]);
    expect(second.status, second.out).toBe(0);
    expect(second.stdout).toMatch(/consistent with kept checkpoint size 8 .*recomputed/);
    expect(kept(folder)).toHaveLength(2);
    // An older export (size 8) after a newer checkpoint was kept: it needs the proof 8 → 15.
    const older = exportFile(ledger, ledger.checkpoint(8));
    const without = runVerifier(['--jwks', jwks, '--checkpoints', folder, older]);
    expect(without.status, without.out).toBe(1);
    expect(without.out).toMatch(/consistency proof from size 8 to size 15/);
    const withProof = runVerifier(['--jwks', jwks, '--checkpoints', folder, '--consistency', proofsFile([ledger.consistency(8, 15)]), older]);
    expect(withProof.status, withProof.out).toBe(0);
  });

  it('refuses a rewritten history that verifies perfectly on its own', () => {
    const folder = join(tempDir(), 'kept');
    expect(runVerifier(['--jwks', jwks, '--checkpoints', folder, exportFile(ledger, ledger.checkpoint(6))]).status).toBe(0);
    // Without memory the forged ledger passes every check: sealed, signed in-window, linked, proven.
    const alone = runVerifier(['--jwks', jwks, exportFile(forged, forged.checkpoint(12, 30))]);
    expect(alone.status, alone.out).toBe(0);
    const r = runVerifier(['--jwks', jwks, '--checkpoints', folder, exportFile(forged, forged.checkpoint(12, 30))]);
    expect(r.status, r.out).toBe(1);
    expect(r.out).toMatch(/INCONSISTENT with kept checkpoint size 6/);
    expect(r.out).toMatch(/rewritten/);
    expect(kept(folder)).toHaveLength(1); // the forged checkpoint is not kept
    // and a forged consistency proof does not help
    const p = runVerifier(['--jwks', jwks, '--checkpoints', folder, '--consistency', proofsFile([forged.consistency(6, 12)]), exportFile(forged, forged.checkpoint(12, 30))]);
    expect(p.status, p.out).toBe(1);
  });

  it('refuses a cut-back history: a checkpoint issued later naming a smaller tree than a kept one', () => {
    const folder = join(tempDir(), 'kept');
    expect(runVerifier(['--jwks', jwks, '--checkpoints', folder, exportFile(ledger, ledger.checkpoint(15))]).status).toBe(0);
    // Re-signed later with size 10: a complete, valid export of 1–10 on its own, and even a prefix of the kept tree.
    const shorter = ledger.checkpoint(10, 40);
    const alone = runVerifier(['--jwks', jwks, exportFile(ledger, shorter)]);
    expect(alone.status, alone.out).toBe(0);
    const r = runVerifier(['--jwks', jwks, '--checkpoints', folder, '--consistency', proofsFile([ledger.consistency(10, 15)]), exportFile(ledger, shorter)]);
    expect(r.status, r.out).toBe(1);
    expect(r.out).toMatch(/smaller tree/);
  });

  it('checks a partial export’s checkpoint by consistency proof, and an export from a pinned checkpoint against the folder', () => {
    const folder = join(tempDir(), 'kept');
    expect(runVerifier(['--jwks', jwks, '--checkpoints', folder, exportFile(ledger, ledger.checkpoint(5))]).status).toBe(0);
    const partial = exportFile(ledger, ledger.checkpoint(12), { filter: { decision: 'conforming' } });
    const noProof = runVerifier(['--jwks', jwks, '--checkpoints', folder, '--partial', partial]);
    expect(noProof.status, noProof.out).toBe(1);
    const ok = runVerifier(['--jwks', jwks, '--checkpoints', folder, '--partial', '--consistency', proofsFile([ledger.consistency(5, 12)]), partial]);
    expect(ok.status, ok.out).toBe(0);
    expect(kept(folder)).toHaveLength(2);
    // From the pinned size-12 checkpoint on: 13–20, with the kept 5 and 12 both reached.
    const resumed = runVerifier(['--jwks', jwks, '--checkpoints', folder, '--from-checkpoint', cpFile(ledger.checkpoint(12)), exportFile(ledger, ledger.checkpoint(20), { from: 13 })]);
    expect(resumed.status, resumed.out).toBe(0);
    expect(resumed.stdout).toMatch(/positions 13[–-]20 /);
    expect(kept(folder)).toHaveLength(3);
  });
});

describe('checkpoint mode (a checkpoint received by e-mail or webhook)', () => {
  const check = (folder: string, cp: Checkpoint, ...proofs: unknown[]) =>
    runVerifier(['checkpoint', '--jwks', jwks, '--checkpoints', folder, ...(proofs.length ? ['--consistency', proofsFile(proofs)] : []), cpFile(cp)]);

  it('keeps the first, then accepts each new one only with a valid consistency proof to the kept ones', () => {
    const folder = join(tempDir(), 'kept');
    const first = check(folder, ledger.checkpoint(4));
    expect(first.status, first.out).toBe(0);
    expect(first.stdout).toMatch(/first checkpoint/);
    const noProof = check(folder, ledger.checkpoint(9));
    expect(noProof.status, noProof.out).toBe(1);
    expect(noProof.out).toMatch(/--consistency/);
    expect(kept(folder)).toHaveLength(1);
    // as GET /v1/ledger/proofs/consistency replies: {from, to, proof}
    const good = check(folder, ledger.checkpoint(9), { from: ledger.checkpoint(4), to: ledger.checkpoint(9), proof: ledger.consistency(4, 9) });
    expect(good.status, good.out).toBe(0);
    expect(kept(folder)).toHaveLength(2);
    // 16 needs a proof from the nearest kept (9); the kept 4 is covered through it.
    const next = check(folder, ledger.checkpoint(16), ledger.consistency(9, 16));
    expect(next.status, next.out).toBe(0);
    // a checkpoint between kept ones needs both neighbours
    const between = check(folder, ledger.checkpoint(12), ledger.consistency(9, 12));
    expect(between.status, between.out).toBe(1);
    expect(check(folder, ledger.checkpoint(12), ledger.consistency(9, 12), ledger.consistency(12, 16)).status).toBe(0);
    expect(kept(folder)).toHaveLength(4);
  });

  it('refuses a checkpoint of a rewritten history, a spoiled proof, another root for a kept size, and a key out of its window', () => {
    const folder = join(tempDir(), 'kept');
    expect(check(folder, ledger.checkpoint(6)).status).toBe(0);
    const rewritten = check(folder, forged.checkpoint(14, 30), forged.consistency(6, 14));
    expect(rewritten.status, rewritten.out).toBe(1);
    expect(rewritten.out).toMatch(/INCONSISTENT/);
    const proof = ledger.consistency(6, 14);
    proof.hashes[0] = proof.hashes[0]!.replace(/^./, (c) => (c === 'a' ? 'b' : 'a'));
    const spoiledProof = check(folder, ledger.checkpoint(14), proof);
    expect(spoiledProof.status, spoiledProof.out).toBe(1);
    const sameSize = check(folder, forged.checkpoint(6, 31));
    expect(sameSize.status, sameSize.out).toBe(1);
    expect(sameSize.out).toMatch(/two different roots/);
    const expired = makeKey(0, 10);
    const pinned = writeLines(dir, 'jwks-expired.json', [jwksText(key, expired)]);
    const late = runVerifier(['checkpoint', '--jwks', pinned, '--checkpoints', folder, '--consistency', proofsFile([ledger.consistency(6, 14)]), cpFile(ledger.checkpoint(14, 12, expired))]);
    expect(late.status, late.out).toBe(1);
    expect(late.out).toMatch(/window/);
    expect(kept(folder)).toHaveLength(1);
  });

  it('refuses to go on when a kept checkpoint no longer verifies with the pinned JWKS', () => {
    const folder = join(tempDir(), 'kept');
    expect(check(folder, ledger.checkpoint(6)).status).toBe(0);
    const other = makeKey(0);
    const r = runVerifier(['checkpoint', '--jwks', writeLines(dir, 'jwks-other.json', [jwksText(other)]), '--checkpoints', folder, cpFile(new Ledger(ORG_A, other).append(3).checkpoint(3))]);
    expect(r.status, r.out).toBe(1);
    expect(r.out).toMatch(/kept checkpoint .* no longer verifies/);
  });
});
