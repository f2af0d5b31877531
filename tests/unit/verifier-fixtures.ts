// Signed Lotproof ledgers, checkpoints, proofs and NDJSON exports for the offline verifier's tests.
// Nothing here comes from the verifier under test: the Merkle tree is a naive recursion written
// straight from the definitions of RFC 9162 §2.1.1 (MTH), §2.1.3.1 (PATH) and §2.1.4.1
// (PROOF/SUBPROOF); RFC 8785 is the `canonicalize` package; Ed25519 is node:crypto.
import { spawnSync } from 'node:child_process';
import { createHash, generateKeyPairSync, sign, type KeyObject } from 'node:crypto';
import { writeFileSync } from 'node:fs';
import { join } from 'node:path';
import canonicalize from 'canonicalize';

// LOTPROOF_VERIFIER_UNDER_TEST runs these tests on another copy (to watch them fail on an older verifier).
export const VERIFIER = process.env.LOTPROOF_VERIFIER_UNDER_TEST ?? join(process.cwd(), 'clients', 'verifier', 'verify.mjs');

const canon = (v: unknown): string => {
  const text = canonicalize(v);
  if (text === undefined) throw new Error('cannot canonicalise');
  return text;
};
const sha256 = (...parts: (Buffer | string)[]): Buffer => {
  const h = createHash('sha256');
  for (const p of parts) h.update(p);
  return h.digest();
};

// ---- RFC 9162 §2.1, by the letter ----------------------------------------------------------------

/** Largest power of two smaller than n (n > 1), RFC 9162 §2.1.1. */
function split(n: number): number {
  let k = 1;
  while (k * 2 < n) k *= 2;
  return k;
}

/** MTH(D[n]) of RFC 9162 §2.1.1. */
export function mth(d: Buffer[]): Buffer {
  if (d.length === 0) return sha256(Buffer.alloc(0));
  if (d.length === 1) return sha256(Buffer.from([0]), d[0]!);
  const k = split(d.length);
  return sha256(Buffer.from([1]), mth(d.slice(0, k)), mth(d.slice(k)));
}

/** PATH(m, D[n]) of RFC 9162 §2.1.3.1. */
export function path(m: number, d: Buffer[]): Buffer[] {
  if (d.length <= 1) return [];
  const k = split(d.length);
  return m < k ? [...path(m, d.slice(0, k)), mth(d.slice(k))] : [...path(m - k, d.slice(k)), mth(d.slice(0, k))];
}

/** SUBPROOF(m, D[n], b) of RFC 9162 §2.1.4.1. */
function subproof(m: number, d: Buffer[], b: boolean): Buffer[] {
  if (m === d.length) return b ? [] : [mth(d)];
  const k = split(d.length);
  return m <= k ? [...subproof(m, d.slice(0, k), b), mth(d.slice(k))] : [...subproof(m - k, d.slice(k), false), mth(d.slice(0, k))];
}

/** PROOF(m, D[n]) of RFC 9162 §2.1.4.1. */
export const consistencyPath = (m: number, d: Buffer[]): Buffer[] => subproof(m, d, true);

// ---- keys, records, seals, checkpoints -------------------------------------------------------------

export interface TestKey {
  kid: string;
  privateKey: KeyObject;
  jwk: Record<string, unknown>;
}

export const T0 = Date.UTC(2026, 0, 5, 8, 0, 0);
/** Seconds since the epoch (RFC 7519 NumericDate) of T0 + minutes. */
export const numericDate = (minutes: number): number => Math.floor((T0 + minutes * 60_000) / 1000);
export const isoAt = (minutes: number): string => new Date(T0 + minutes * 60_000).toISOString();

/** An Ed25519 key whose kid is its RFC 7638 §3 thumbprint, valid [nbf, exp) in minutes after T0. */
export function makeKey(nbfMinutes: number, expMinutes?: number): TestKey {
  const { privateKey, publicKey } = generateKeyPairSync('ed25519');
  const x = (publicKey.export({ format: 'jwk' }) as { x: string }).x;
  // RFC 7638 §3.2: the required members of an OKP key (RFC 8037 §2: crv, kty, x), canonical.
  const kid = sha256(canon({ crv: 'Ed25519', kty: 'OKP', x })).toString('base64url');
  const jwk: Record<string, unknown> = { kty: 'OKP', crv: 'Ed25519', x, kid, alg: 'EdDSA', use: 'sig', nbf: numericDate(nbfMinutes) };
  if (expMinutes !== undefined) jwk.exp = numericDate(expMinutes);
  return { kid, privateKey, jwk };
}

export const jwksText = (...keys: TestKey[]): string => JSON.stringify({ keys: keys.map((k) => k.jwk) });

export interface Org {
  id: string;
  name: string;
}
export const ORG_A: Org = { id: '5d0c6b8e-1f2a-4c3d-9e8f-0a1b2c3d4e5f', name: 'Alpine Dairy' };
export const ORG_B: Org = { id: '7e1d2c3b-4a59-4687-b9a8-c7d6e5f4a3b2', name: 'Coastal Mills' };

export interface SealedDoc {
  format: 'lotproof.sealed-verdict/1';
  kid: string;
  record: Record<string, unknown>;
  seal: string;
  signature: string;
  inclusion?: { leafIndex: number; treeSize: number; hashes: string[] };
}

export interface Checkpoint {
  format: 'lotproof.checkpoint/1';
  organisationId: string;
  treeSize: number;
  rootHash: string;
  issuedAt: string;
  kid: string;
  signature: string;
}

export function sealRecord(record: Record<string, unknown>, key: TestKey): SealedDoc {
  const seal = sha256(canon(record)).toString('hex');
  const signature = sign(null, Buffer.from(seal, 'hex'), key.privateKey).toString('base64url');
  return { format: 'lotproof.sealed-verdict/1', kid: key.kid, record, seal, signature };
}

export function signCheckpoint(body: Omit<Checkpoint, 'format' | 'kid' | 'signature'>, key: TestKey): Checkpoint {
  const unsigned = { format: 'lotproof.checkpoint/1' as const, ...body, kid: key.kid };
  return { ...unsigned, signature: sign(null, Buffer.from(canon(unsigned), 'utf8'), key.privateKey).toString('base64url') };
}

export interface AppendOptions {
  key?: TestKey;
  org?: Org;
  decision?: string;
  /** minutes after T0 this record is recorded (default: its position) */
  at?: number;
}

/** One organisation's ledger as the server would hold it, built in the test. */
export class Ledger {
  docs: SealedDoc[] = [];
  constructor(
    public org: Org,
    public key: TestKey,
  ) {}

  append(n: number, opts: AppendOptions = {}): this {
    for (let i = 0; i < n; i++) {
      const sequence = this.docs.length + 1;
      const org = opts.org ?? this.org;
      const record = {
        format: 'lotproof.verdict-record/1',
        verdictId: `00000000-0000-4000-8000-${String(sequence).padStart(12, '0')}`,
        organisation: { id: org.id, name: org.name },
        sequence,
        previousSeal: sequence === 1 ? null : this.docs[sequence - 2]!.seal,
        recordedAt: isoAt(opts.at ?? sequence),
        product: { id: 'p-1', sku: 'OAT-500', name: 'Rolled oats 500 g' },
        lot: { lotCode: `L-${sequence}`, line: null, packedAt: null, clientReference: null, source: { format: 'json' } },
        firstSample: null,
        input: { measurements: [501.5, 499.25, 502, 1e21, 0.1 + sequence] },
        engine: { version: '1.0.0' },
        rulebook: { id: 'eu-76-211', version: '1' },
        result: { decision: opts.decision ?? (sequence % 3 === 0 ? 'nonconforming' : 'conforming') },
      };
      this.docs.push(sealRecord(record, opts.key ?? this.key));
    }
    return this;
  }

  /** A copy with the record at `position` rewritten and everything after it re-sealed and re-linked. */
  rewritten(position: number, change: (record: Record<string, unknown>) => void, key: TestKey = this.key): Ledger {
    const copy = new Ledger(this.org, key);
    for (const d of this.docs) {
      const record = structuredClone(d.record);
      if (record.sequence === position) change(record);
      if ((record.sequence as number) > 1) record.previousSeal = copy.docs[copy.docs.length - 1]!.seal;
      copy.docs.push((record.sequence as number) >= position ? sealRecord(record, key) : d);
    }
    return copy;
  }

  leaves(size: number): Buffer[] {
    return this.docs.slice(0, size).map((d) => Buffer.from(d.seal, 'hex'));
  }

  root(size: number): string {
    return mth(this.leaves(size)).toString('hex');
  }

  checkpoint(size: number, issuedMinutes = size + 0.5, key: TestKey = this.key): Checkpoint {
    return signCheckpoint({ organisationId: this.org.id, treeSize: size, rootHash: this.root(size), issuedAt: isoAt(issuedMinutes) }, key);
  }

  inclusion(position: number, size: number) {
    return { leafIndex: position - 1, treeSize: size, hashes: path(position - 1, this.leaves(size)).map((h) => h.toString('hex')) };
  }

  consistency(fromSize: number, toSize: number) {
    return { fromSize, toSize, hashes: consistencyPath(fromSize, this.leaves(toSize)).map((h) => h.toString('hex')) };
  }

  /** NDJSON export v2 lines (header first) against `checkpoint`, of positions from..treeSize kept by `keep`. */
  exportLines(checkpoint: Checkpoint, opts: { from?: number; filter?: { decision: string } } = {}): string[] {
    const from = opts.from ?? 1;
    const size = checkpoint.treeSize;
    const filter = opts.filter ?? null;
    const members = this.docs.slice(from - 1, size).filter((d) => !filter || (d.record.result as { decision: string }).decision === filter.decision);
    const header = { format: 'lotproof.export/2', organisationId: checkpoint.organisationId, checkpoint, complete: filter === null, filter, from, to: size };
    return [canon(header), ...members.map((d) => this.line(d, size))];
  }

  /** One document's export line with its inclusion proof in a tree of `size`. */
  line(d: SealedDoc, size: number): string {
    return canon({ ...d, inclusion: this.inclusion(d.record.sequence as number, size) });
  }
}

export const canonical = canon;

export interface Run {
  status: number | null;
  stdout: string;
  stderr: string;
  out: string;
}

export function runVerifier(args: string[]): Run {
  const r = spawnSync(process.execPath, [VERIFIER, ...args], { encoding: 'utf8', maxBuffer: 64 * 1024 * 1024 });
  return { status: r.status, stdout: r.stdout, stderr: r.stderr, out: r.stdout + r.stderr };
}

/** Writes the lines as an NDJSON file (one trailing newline) and returns its path. */
export function writeLines(dir: string, name: string, lines: string[]): string {
  const file = join(dir, name);
  writeFileSync(file, lines.join('\n') + '\n');
  return file;
}

export function writeJson(dir: string, name: string, value: unknown): string {
  const file = join(dir, name);
  writeFileSync(file, JSON.stringify(value, null, 2));
  return file;
}
