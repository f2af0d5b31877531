// The verifier's RFC 9162 proof checks (clients/verifier/merkle.mjs) against the test's own naive
// recursive implementation of RFC 9162 §2.1 (verifier-fixtures.ts): every inclusion proof of trees of
// 1–70 leaves and every consistency proof between sizes 1–40 (and random pairs up to 300) must be
// accepted, and each one with a hash changed, dropped or added, or the sizes shifted, refused. The
// verifier's code runs in its own Node process, as the auditor runs it.
import { spawnSync } from 'node:child_process';
import { createHash } from 'node:crypto';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { useTempDirs } from '../support/temp-dirs';
import { consistencyPath, mth, path, writeJson } from './verifier-fixtures';

const tempDir = useTempDirs('lotproof-verifier-merkle-');
const MERKLE = join(process.cwd(), 'clients', 'verifier', 'merkle.mjs');

const seals = Array.from({ length: 300 }, (_, i) => createHash('sha256').update(`verdict ${i}`).digest());
const hex = (b: Buffer) => b.toString('hex');

/** Runs `body` in a Node process with merkle.mjs imported as M and the cases as C; returns its JSON answer. */
function inVerifier(cases: unknown, body: string): unknown {
  const file = writeJson(tempDir(), 'cases.json', cases);
  const script = `
    import * as M from ${JSON.stringify(MERKLE)};
    import { readFileSync } from 'node:fs';
    const C = JSON.parse(readFileSync(${JSON.stringify(file)}, 'utf8'));
    const B = (h) => Buffer.from(h, 'hex');
    ${body}`;
  const r = spawnSync(process.execPath, ['--input-type=module', '-e', script], { encoding: 'utf8', maxBuffer: 256 * 1024 * 1024 });
  if (r.status !== 0) throw new Error(r.stderr);
  return JSON.parse(r.stdout);
}

/** Variants of a proof that must all be refused: each hash flipped, one dropped, one added. */
function spoiled(hashes: string[]): string[][] {
  const out: string[][] = [];
  hashes.forEach((h, i) => out.push(hashes.map((x, j) => (j === i ? (h[0] === 'f' ? '0' : 'f') + h.slice(1) : x))));
  if (hashes.length) out.push(hashes.slice(0, -1));
  out.push([...hashes, hex(seals[0]!)]);
  return out;
}

describe('inclusion proofs (RFC 9162 §2.1.3)', () => {
  it('every leaf of trees of 1–70 leaves verifies; every spoiled proof, wrong index or wrong size is refused', () => {
    const cases: { index: number; size: number; leaf: string; root: string; good: string[]; bad: { index: number; size: number; hashes: string[]; root?: string }[] }[] = [];
    for (let size = 1; size <= 70; size++) {
      const leaves = seals.slice(0, size);
      const root = hex(mth(leaves));
      for (let m = 0; m < size; m++) {
        const good = path(m, leaves).map(hex);
        const bad: { index: number; size: number; hashes: string[]; root?: string }[] = spoiled(good).map((hashes) => ({ index: m, size, hashes }));
        if (size > 1) bad.push({ index: (m + 1) % size, size, hashes: good });
        // the same path against the next tree (its size and root): a path proves a leaf in one tree only
        bad.push({ index: m, size: size + 1, hashes: good, root: hex(mth(seals.slice(0, size + 1))) });
        // RFC 9162 §2.1.1: the leaf hash is SHA-256(0x00 ‖ seal)
        const leaf = createHash('sha256').update(Buffer.from([0])).update(leaves[m]!).digest('hex');
        cases.push({ index: m, size, leaf, root, good, bad });
      }
    }
    const answer = inVerifier(
      cases,
      `const out = C.map((c) => ({
        good: M.verifyInclusion(c.index, c.size, B(c.leaf), c.good.map(B), B(c.root)).ok,
        bad: c.bad.map((b) => M.verifyInclusion(b.index, b.size, B(c.leaf), b.hashes.map(B), B(b.root ?? c.root)).ok),
      }));
      console.log(JSON.stringify(out));`,
    ) as { good: boolean; bad: boolean[] }[];
    expect(answer).toHaveLength(cases.length);
    answer.forEach((a, i) => {
      expect(a.good, `leaf ${cases[i]!.index} of ${cases[i]!.size}`).toBe(true);
      expect(a.bad.some(Boolean), `a spoiled proof of leaf ${cases[i]!.index} of ${cases[i]!.size} passed`).toBe(false);
    });
  });

  it('the leaf hash is SHA-256(0x00 ‖ leaf) and the node hash SHA-256(0x01 ‖ left ‖ right) (RFC 9162 §2.1.1)', () => {
    const [a, b] = [seals[1]!, seals[2]!];
    const answer = inVerifier({ a: hex(a), b: hex(b) }, `console.log(JSON.stringify({ leaf: M.leafHash(B(C.a)).toString('hex'), node: M.nodeHash(B(C.a), B(C.b)).toString('hex') }));`) as { leaf: string; node: string };
    expect(answer.leaf).toBe(createHash('sha256').update(Buffer.concat([Buffer.from([0]), a])).digest('hex'));
    expect(answer.node).toBe(createHash('sha256').update(Buffer.concat([Buffer.from([1]), a, b])).digest('hex'));
  });
});

describe('consistency proofs (RFC 9162 §2.1.4)', () => {
  it('every pair of sizes 1 ≤ m ≤ n ≤ 40 and 200 random pairs up to 300 verify; spoiled ones are refused', () => {
    const pairs: [number, number][] = [];
    for (let n = 1; n <= 40; n++) for (let m = 1; m <= n; m++) pairs.push([m, n]);
    let x = 12345; // a fixed linear congruential sequence, so a failure can be replayed
    const rand = (k: number) => ((x = (x * 1103515245 + 12345) % 2 ** 31), 1 + (x % k));
    for (let i = 0; i < 200; i++) {
      const n = rand(300);
      pairs.push([rand(n), n]);
    }
    const roots = new Map<number, string>();
    const rootOf = (s: number) => roots.get(s) ?? (roots.set(s, hex(mth(seals.slice(0, s)))), roots.get(s)!);
    const cases = pairs.map(([m, n]) => {
      const good = consistencyPath(m, seals.slice(0, n)).map(hex);
      const bad = spoiled(good).map((hashes) => ({ m, n, hashes, a: rootOf(m), b: rootOf(n) }));
      if (m < n) bad.push({ m: m + 1, n, hashes: good, a: rootOf(m + 1), b: rootOf(n) }); // the sizes do not match the proof
      if (m < n) bad.push({ m, n, hashes: good, a: rootOf(m), b: rootOf(n - 1) }); // another new root
      if (m > 1) bad.push({ m, n, hashes: good, a: rootOf(m - 1), b: rootOf(n) }); // another old root
      return { m, n, a: rootOf(m), b: rootOf(n), good, bad };
    });
    const answer = inVerifier(
      cases,
      `console.log(JSON.stringify(C.map((c) => ({
        good: M.verifyConsistency(c.m, c.n, c.good.map(B), B(c.a), B(c.b)),
        bad: c.bad.map((d) => M.verifyConsistency(d.m, d.n, d.hashes.map(B), B(d.a), B(d.b))),
      }))));`,
    ) as { good: boolean; bad: boolean[] }[];
    answer.forEach((a, i) => {
      const [m, n] = pairs[i]!;
      expect(a.good, `${m} → ${n}`).toBe(true);
      expect(a.bad.some(Boolean), `a spoiled proof ${m} → ${n} passed`).toBe(false);
    });
  });
});

describe('the compact range', () => {
  it('gives the root of every prefix of 1–300 leaves, and resumes from the left siblings of an inclusion proof', () => {
    const expected = Array.from({ length: 300 }, (_, i) => hex(mth(seals.slice(0, i + 1))));
    const resumeAt = [1, 2, 3, 7, 8, 9, 100, 255, 256, 257];
    const answer = inVerifier(
      { seals: seals.map(hex), resumeAt, paths: resumeAt.map((k) => ({ k, hashes: path(k, seals).map(hex) })), root300: hex(mth(seals)) },
      `const r = new M.CompactRange();
      const roots = C.seals.map((s) => (r.push(B(s)), r.root().toString('hex')));
      const resumed = C.paths.map(({ k, hashes }) => {
        const v = M.verifyInclusion(k, 300, M.leafHash(B(C.seals[k])), hashes.map(B), B(C.root300));
        const t = M.CompactRange.resume(k, v.left);
        const at = t.root().toString('hex');
        for (const s of C.seals.slice(k)) t.push(B(s));
        return { ok: v.ok, at, end: t.root().toString('hex') };
      });
      console.log(JSON.stringify({ roots, resumed }));`,
    ) as { roots: string[]; resumed: { ok: boolean; at: string; end: string }[] };
    expect(answer.roots).toEqual(expected);
    answer.resumed.forEach((r, i) => {
      expect(r.ok).toBe(true);
      expect(r.at, `resumed at ${resumeAt[i]}`).toBe(expected[resumeAt[i]! - 1]);
      expect(r.end).toBe(expected[299]);
    });
  });
});
