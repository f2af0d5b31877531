// The offline verifier on NDJSON exports v2 (clients/verifier/FORMAT.md), run as the auditor runs it:
// `node clients/verifier/verify.mjs`. Exports are built here with the test's own RFC 9162 tree and
// keys (verifier-fixtures.ts); each tampering an auditor must catch is made and must be refused.
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { useTempDirs } from '../support/temp-dirs';
import {
  ORG_B, ORG_A, Ledger, canonical, isoAt, jwksText, makeKey, runVerifier, sealRecord, signCheckpoint, writeJson, writeLines,
  type TestKey,
} from './verifier-fixtures';

const tempDir = useTempDirs('lotproof-verifier-');
let dir: string;
let key: TestKey;
let jwks: string;
let ledger: Ledger;
const SIZE = 13;

beforeAll(() => {
  dir = tempDir();
  key = makeKey(0);
  jwks = join(dir, 'jwks.json');
  writeJsonText(jwks, jwksText(key));
  ledger = new Ledger(ORG_A, key).append(SIZE);
});

function writeJsonText(file: string, text: string) {
  writeLines(join(file, '..'), file.slice(file.lastIndexOf('/') + 1), [text]);
}

let n = 0;
/** Runs the verifier on these export lines with the pinned JWKS. */
function verify(lines: string[], ...extra: string[]) {
  return runVerifier(['--jwks', jwks, ...extra, writeLines(dir, `export-${++n}.ndjson`, lines)]);
}

const completeLines = () => ledger.exportLines(ledger.checkpoint(SIZE));

describe('a complete export', () => {
  it('is accepted, and the verifier prints the organisation, the positions covered and the checkpoint it used', () => {
    const r = verify(completeLines());
    expect(r.status, r.out).toBe(0);
    expect(r.stdout).toContain(ORG_A.id);
    expect(r.stdout).toMatch(/positions 1[–-]13 /);
    // the root as the test's own RFC 9162 §2.1.1 MTH computes it
    expect(r.stdout).toContain(`size 13`);
    expect(r.stdout).toContain(ledger.root(SIZE));
    expect(r.stdout).toMatch(/complete/i);
  });

  it('is accepted for a ledger of one verdict, and for sizes around powers of two', () => {
    for (const size of [1, 2, 3, 4, 5, 8, 9]) {
      const r = verify(ledger.exportLines(ledger.checkpoint(size)));
      expect(r.status, `size ${size}: ${r.out}`).toBe(0);
    }
  });

  it('is accepted from the position after a pinned checkpoint (--from-checkpoint)', () => {
    const pinned = writeJson(dir, 'pinned-5.json', ledger.checkpoint(5));
    const r = verify(ledger.exportLines(ledger.checkpoint(SIZE), { from: 6 }), '--from-checkpoint', pinned);
    expect(r.status, r.out).toBe(0);
    expect(r.stdout).toMatch(/positions 6[–-]13 /);
  });

  it('from a pinned checkpoint of another history is refused', () => {
    const other = ledger.rewritten(3, (rec) => ((rec.result as { decision: string }).decision = 'conforming'));
    const pinned = writeJson(dir, 'pinned-other-5.json', other.checkpoint(5));
    const r = verify(ledger.exportLines(ledger.checkpoint(SIZE), { from: 6 }), '--from-checkpoint', pinned);
    expect(r.status, r.out).toBe(1);
    expect(r.out).toMatch(/pinned checkpoint/i);
  });

  it('that starts elsewhere than position 1 without a pinned checkpoint is refused', () => {
    const r = verify(ledger.exportLines(ledger.checkpoint(SIZE), { from: 6 }));
    expect(r.status, r.out).toBe(1);
  });
});

describe('a whole export is refused when', () => {
  const refused = (lines: string[], pattern: RegExp, ...extra: string[]) => {
    const r = verify(lines, ...extra);
    expect(r.status, r.out).toBe(1);
    expect(r.out).toMatch(pattern);
    expect(r.out).not.toMatch(/^VERIFIED/m);
    return r;
  };

  it('a position is missing (gap)', () => {
    const lines = completeLines();
    lines.splice(5, 1); // position 5
    refused(lines, /position 5 is missing|gap/i);
  });

  it('a verdict appears twice (duplicate)', () => {
    const lines = completeLines();
    lines.splice(5, 0, lines[5]!);
    refused(lines, /duplicate/i);
  });

  it('two different seals stand at one position (fork)', () => {
    // A second, validly signed record for position 7, linked to position 6, proven in its own tree.
    const fork = ledger.rewritten(7, (rec) => ((rec.result as { decision: string }).decision = 'nonconforming'));
    expect(fork.docs[6]!.seal).not.toBe(ledger.docs[6]!.seal);
    const lines = completeLines();
    lines.splice(8, 0, fork.line(fork.docs[6]!, SIZE));
    refused(lines, /fork/i);
  });

  it('the lines are reordered', () => {
    const lines = completeLines();
    [lines[4], lines[5]] = [lines[5]!, lines[4]!];
    refused(lines, /order/i);
  });

  it('the tail is cut off but the header claims the whole tree (to beyond the last line)', () => {
    const lines = completeLines().slice(0, -2);
    refused(lines, /positions 12[–-]13 .*missing|truncated/i);
  });

  it('the header claims a range other than the checkpoint’s tree', () => {
    const lines = completeLines();
    const header = JSON.parse(lines[0]!);
    lines[0] = canonical({ ...header, to: 11 });
    refused(lines.slice(0, 12), /tree size|to/i);
  });

  it('a record of another organisation is in it', () => {
    // The server itself sealed it into this organisation's tree, linked and proven: only the organisation shows.
    const mixed = new Ledger(ORG_A, key).append(6).append(1, { org: ORG_B }).append(SIZE - 7);
    refused(mixed.exportLines(mixed.checkpoint(SIZE)), /another organisation|organisation/i);
  });

  it('a record is signed by a key outside its validity window', () => {
    // Pinned: the key signs from minute 0 until minute 10; the records at positions 10–13 are recorded at minutes 10–13.
    const windowed = makeKey(0, 10);
    const l = new Ledger(ORG_A, windowed).append(SIZE);
    const pinned = join(dir, 'jwks-windowed.json');
    writeJsonText(pinned, jwksText(windowed));
    const r = runVerifier(['--jwks', pinned, writeLines(dir, 'windowed.ndjson', l.exportLines(l.checkpoint(9)))]);
    expect(r.status, r.out).toBe(0);
    const r2 = runVerifier(['--jwks', pinned, writeLines(dir, 'windowed-2.ndjson', l.exportLines(l.checkpoint(SIZE, 9.5)))]);
    expect(r2.status, r2.out).toBe(1);
    expect(r2.out).toMatch(/position 10.*(window|valid)/i);
    // A key that becomes valid only after the records were recorded (nbf after recordedAt) is refused as well.
    const late = makeKey(5);
    const l2 = new Ledger(ORG_A, late).append(6);
    writeJsonText(pinned, jwksText(late));
    const r3 = runVerifier(['--jwks', pinned, writeLines(dir, 'late.ndjson', l2.exportLines(l2.checkpoint(6)))]);
    expect(r3.status, r3.out).toBe(1);
    expect(r3.out).toMatch(/position 1.*(window|valid)/i);
  });

  it('the checkpoint is signed outside its key’s window, or by a key that is not pinned', () => {
    const windowed = makeKey(0, 20);
    const pinned = join(dir, 'jwks-cp.json');
    writeJsonText(pinned, jwksText(windowed));
    const l = new Ledger(ORG_A, windowed).append(5);
    expect(runVerifier(['--jwks', pinned, writeLines(dir, 'cp-ok.ndjson', l.exportLines(l.checkpoint(5, 19)))]).status).toBe(0);
    const late = runVerifier(['--jwks', pinned, writeLines(dir, 'cp-late.ndjson', l.exportLines(l.checkpoint(5, 20)))]);
    expect(late.status, late.out).toBe(1);
    expect(late.out).toMatch(/checkpoint.*(window|valid)/i);
    const stranger = makeKey(0);
    const foreign = runVerifier(['--jwks', pinned, writeLines(dir, 'cp-foreign.ndjson', l.exportLines(l.checkpoint(5, 6, stranger)))]);
    expect(foreign.status, foreign.out).toBe(1);
    expect(foreign.out).toMatch(/not in the pinned JWKS/i);
  });

  it('a record is sealed by a key the auditor did not pin', () => {
    const intruder = makeKey(0);
    const l = new Ledger(ORG_A, key).append(4).append(1, { key: intruder }).append(3);
    refused(l.exportLines(l.checkpoint(8)), /position 5.*not in the pinned JWKS/i);
  });

  it('any byte is changed', () => {
    const lines = completeLines();
    const text = lines.join('\n');
    const positions = new Set<number>();
    for (let i = 0; i < 16; i++) positions.add(Math.floor(((i + 0.5) / 16) * text.length));
    for (const marker of ['"decision":"', '"seal":"', '"signature":"', '"rootHash":"', '"treeSize":', '"leafIndex":', '"previousSeal":"', '"sequence":']) {
      positions.add(text.indexOf(marker) + marker.length);
      positions.add(text.lastIndexOf(marker) + marker.length + 3);
    }
    for (const pos of positions) {
      if (text[pos] === '\n') continue;
      const bytes = Buffer.from(text, 'utf8');
      bytes[pos] = bytes[pos]! ^ 0x01;
      const r = runVerifier(['--jwks', jwks, writeLines(dir, 'byte.ndjson', [bytes.toString('latin1')])]);
      expect(r.status, `byte ${pos} (${JSON.stringify(text.slice(pos - 12, pos + 4))}) was accepted: ${r.out}`).toBe(1);
    }
  });

  it('an inclusion proof does not lead to the checkpoint root', () => {
    const lines = completeLines();
    const doc = JSON.parse(lines[4]!);
    const h = doc.inclusion.hashes[1] as string;
    doc.inclusion.hashes[1] = (h[0] === '0' ? '1' : '0') + h.slice(1);
    lines[4] = canonical(doc);
    refused(lines, /position 4.*inclusion/i);
    const doc2 = JSON.parse(completeLines()[4]!);
    doc2.inclusion.hashes.pop();
    lines[4] = canonical(doc2);
    refused(lines, /position 4.*inclusion/i);
  });

  it('the export has no header (a version 1 export), or is empty', () => {
    refused(completeLines().slice(1), /header/i);
    refused([''], /empty|header/i);
  });
});

describe('a filtered export', () => {
  const conforming = () => ledger.exportLines(ledger.checkpoint(SIZE), { filter: { decision: 'conforming' } });

  it('is reported as partial, every member proven, and exits non-zero unless --partial is given', () => {
    const lines = conforming();
    expect(lines.length - 1).toBe(9); // positions 3, 6, 9 and 12 are nonconforming in the fixture
    const r = verify(lines);
    expect(r.status, r.out).toBe(1);
    expect(r.stdout).toMatch(/partial/i);
    expect(r.stdout).toMatch(/9 .*proven/i);
    expect(r.stdout).toMatch(/nothing is claimed about .*left out/i);
    for (const p of [1, 2, 4, 5, 7, 8, 10, 11, 13]) expect(r.stdout).toMatch(new RegExp(`position ${p} .*included`));
    const ok = verify(lines, '--partial');
    expect(ok.status, ok.out).toBe(0);
    expect(ok.stdout).toMatch(/partial/i);
    expect(ok.stdout).not.toMatch(/complete from/i);
  });

  it('with a bad member fails even with --partial', () => {
    const lines = conforming();
    const doc = JSON.parse(lines[3]!);
    doc.inclusion.hashes[0] = doc.inclusion.hashes[0].replace(/^./, (c: string) => (c === 'a' ? 'b' : 'a'));
    lines[3] = canonical(doc);
    const r = verify(lines, '--partial');
    expect(r.status, r.out).toBe(1);
    expect(r.out).toMatch(/inclusion/i);
  });

  it('cannot pass itself off as complete', () => {
    const lines = conforming();
    const header = JSON.parse(lines[0]!);
    lines[0] = canonical({ ...header, complete: true, filter: null });
    const r = verify(lines);
    expect(r.status, r.out).toBe(1);
    expect(r.out).toMatch(/position 3 is missing|gap/i);
  });
});

describe('a single sealed document', () => {
  it('is checked on its own (seal, signature, key window) and says its place in the ledger is not proven', () => {
    const doc = ledger.docs[2]!;
    const file = writeLines(dir, 'single.json', [canonical(doc)]);
    const r = runVerifier(['--jwks', jwks, file]);
    expect(r.status, r.out).toBe(0);
    expect(r.stdout).toMatch(/all 1 sealed verdict\(s\) verified/);
    expect(r.stdout).toMatch(/not proven/i);
    const outside = makeKey(100);
    const signed = sealRecord(doc.record, outside);
    const pinned = join(dir, 'jwks-outside.json');
    writeJsonText(pinned, jwksText(outside));
    const bad = runVerifier(['--jwks', pinned, writeLines(dir, 'single-bad.json', [canonical(signed)])]);
    expect(bad.status, bad.out).toBe(1);
  });
});

describe('the command line', () => {
  it('--help prints the usage and exits 0; a missing --jwks or file exits 2', () => {
    const help = runVerifier(['--help']);
    expect(help.status).toBe(0);
    expect(help.stdout).toMatch(/--jwks/);
    expect(help.stdout).toMatch(/--checkpoints/);
    expect(help.stdout).toMatch(/exit/i);
    expect(runVerifier([writeLines(dir, 'x.ndjson', completeLines())]).status).toBe(2);
    expect(runVerifier(['--jwks', jwks]).status).toBe(2);
    expect(runVerifier(['--jwks', join(dir, 'no-such.json'), writeLines(dir, 'y.ndjson', completeLines())]).status).toBe(2);
    expect(runVerifier(['--jwks', jwks, '--bogus', writeLines(dir, 'z.ndjson', completeLines())]).status).toBe(2);
  });

  it('refuses a JWKS key with no validity window (nbf), which would be valid for any date', () => {
    const k = makeKey(0);
    delete k.jwk.nbf;
    const l = new Ledger(ORG_A, k).append(2);
    const pinned = join(dir, 'jwks-nonbf.json');
    writeJsonText(pinned, jwksText(k));
    const r = runVerifier(['--jwks', pinned, writeLines(dir, 'nonbf.ndjson', l.exportLines(l.checkpoint(2)))]);
    expect(r.status, r.out).toBe(1);
    expect(r.out).toMatch(/nbf|window/i);
  });

  it('is not fooled by a checkpoint whose organisation differs from the header’s', () => {
    const lines = completeLines();
    const header = JSON.parse(lines[0]!);
    const cp = signCheckpoint({ organisationId: ORG_B.id, treeSize: SIZE, rootHash: ledger.root(SIZE), issuedAt: isoAt(20) }, key);
    lines[0] = canonical({ ...header, checkpoint: cp });
    const r = verify(lines);
    expect(r.status, r.out).toBe(1);
    expect(r.out).toMatch(/organisation/i);
    expect(readFileSync(jwks, 'utf8')).toContain(key.kid);
  });
});
