// A verdict's place in the ledger, checked in this browser (clients/verifier/FORMAT.md):
//  1. the checkpoint is signed (Ed25519 over its RFC 8785 canonical JSON without the signature) by
//     the published key named by its kid, and was issued inside that key's validity window;
//  2. the inclusion proof leads from the leaf SHA-256(0x00 ‖ seal bytes) to the checkpoint's root;
//  3. the checkpoint is consistent with every checkpoint this browser kept before: a consistency
//     proof from each kept one leads to both roots (the kept root is ours, not the server's).
// Then the checkpoint is kept too (localStorage, per organisation), so the next lookup is checked
// against it. Someone who rewrites the ledger after a checkpoint was kept cannot make (3) pass.
import type { components } from '../../../shared/api/schema';
import { verifyConsistency, verifyInclusion, hexToBytes } from './merkle';
import { canonicalText, type CheckResult, type Jwk } from './seal';
import { formatCount } from './format';

export type Checkpoint = components['schemas']['Checkpoint'];
export type InclusionProofReply = components['schemas']['InclusionProofReply'];
export type ConsistencyProof = components['schemas']['ConsistencyProof'];

/** A published key with its validity window (RFC 7519 NumericDates, seconds). */
export interface WindowedJwk extends Jwk {
  nbf?: number;
  exp?: number;
}

function base64UrlToBytes(s: string): Uint8Array<ArrayBuffer> | null {
  if (!/^[A-Za-z0-9_-]*$/.test(s)) return null;
  const bin = atob(s.replace(/-/g, '+').replace(/_/g, '/').padEnd(Math.ceil(s.length / 4) * 4, '='));
  const out = new Uint8Array(bin.length);
  for (let i = 0; i < bin.length; i++) out[i] = bin.charCodeAt(i);
  return out;
}

const shortKid = (kid: string) => `${kid.slice(0, 12)}…`;

/** Check 1: the checkpoint's signature, with the key that was valid when it was issued. */
export async function checkCheckpointSignature(c: Checkpoint, jwks: { keys: WindowedJwk[] }): Promise<CheckResult> {
  const jwk = jwks.keys.find((k) => k.kid === c.kid);
  if (!jwk || jwk.kty !== 'OKP' || jwk.crv !== 'Ed25519' || !jwk.x) {
    return { state: 'fail', detail: `No Ed25519 key with id ${shortKid(c.kid)} is published: the checkpoint was not signed by this service.` };
  }
  const at = Date.parse(c.issuedAt) / 1000;
  if (!Number.isFinite(at)) return { state: 'fail', detail: 'The checkpoint’s issuedAt is not a date.' };
  if (jwk.nbf !== undefined && at < jwk.nbf) {
    return { state: 'fail', detail: `The checkpoint is dated before key ${shortKid(c.kid)} came into use: that key cannot have signed it.` };
  }
  if (jwk.exp !== undefined && at >= jwk.exp) {
    return { state: 'fail', detail: `The checkpoint is dated after key ${shortKid(c.kid)} was retired or revoked: that key no longer vouches for it.` };
  }
  const signature = base64UrlToBytes(c.signature);
  if (!signature) return { state: 'fail', detail: 'The checkpoint’s signature is not base64url.' };
  const { signature: _omit, ...unsigned } = c;
  try {
    const key = await crypto.subtle.importKey('jwk', { kty: 'OKP', crv: 'Ed25519', x: jwk.x }, { name: 'Ed25519' }, false, ['verify']);
    const ok = await crypto.subtle.verify({ name: 'Ed25519' }, key, signature, new TextEncoder().encode(canonicalText(unsigned)));
    return ok
      ? { state: 'pass', detail: `Signed by published key ${shortKid(c.kid)}, which was in use when the checkpoint was issued; the Ed25519 signature was checked in this browser.` }
      : { state: 'fail', detail: `The Ed25519 signature does not verify against published key ${shortKid(c.kid)}: this checkpoint was not signed by this service as it stands.` };
  } catch (err) {
    return { state: 'unknown', detail: `This browser could not check an Ed25519 signature (${err instanceof Error ? err.message : String(err)}).` };
  }
}

/** Check 2: the verdict's seal is a leaf of the checkpoint's tree, at its own position. */
export async function checkInclusion(seal: string, reply: InclusionProofReply): Promise<CheckResult> {
  const { checkpoint, verdict, proof } = reply;
  if (verdict.seal.toLowerCase() !== seal.toLowerCase() || !/^[0-9a-fA-F]{64}$/.test(seal)) {
    return { state: 'fail', detail: 'The proof is for another seal than the one looked up.' };
  }
  if (proof.leafIndex !== verdict.sequence - 1 || proof.treeSize !== checkpoint.treeSize) {
    return { state: 'fail', detail: 'The proof does not name the verdict’s position or the checkpoint’s tree size.' };
  }
  const ok = await verifyInclusion(proof.leafIndex, proof.treeSize, hexToBytes(seal), proof.hashes, checkpoint.rootHash);
  return ok
    ? { state: 'pass', detail: `Verdict #${verdict.sequence} is in the ledger the checkpoint signs: ${proof.hashes.length} hash${proof.hashes.length === 1 ? '' : 'es'} lead from its seal to the root of ${formatCount(checkpoint.treeSize)} verdicts, recomputed in this browser.` }
    : { state: 'fail', detail: 'The proof’s hashes do not lead from this seal to the checkpoint’s root: the checkpoint does not contain this verdict.' };
}

/** One kept checkpoint compared with the new one. */
export interface KeptComparison {
  kept: Checkpoint;
  state: CheckResult['state'];
  detail: string;
}

/** What the server says for a consistency proof: the proof, or 'missing' when it has none (404). */
export type FetchConsistency = (fromSize: number, toSize: number) => Promise<ConsistencyProof | 'missing'>;

/** Check 3: the checkpoint against each kept one of its organisation. */
export async function compareWithKept(latest: Checkpoint, kept: readonly Checkpoint[], fetchProof: FetchConsistency): Promise<KeptComparison[]> {
  const out: KeptComparison[] = [];
  for (const k of kept.filter((x) => x.organisationId === latest.organisationId)) {
    const size = formatCount(k.treeSize);
    if (k.treeSize === latest.treeSize) {
      out.push(k.rootHash === latest.rootHash
        ? { kept: k, state: 'pass', detail: `The same checkpoint as the one kept at ${size} verdicts.` }
        : { kept: k, state: 'fail', detail: `The kept checkpoint of ${size} verdicts has another root: the same stretch of the ledger now hashes differently, so it was rewritten.` });
      continue;
    }
    if (k.treeSize > latest.treeSize) {
      out.push({ kept: k, state: 'fail', detail: `A checkpoint of ${size} verdicts was kept, but the latest now covers only ${formatCount(latest.treeSize)}: the ledger was cut back.` });
      continue;
    }
    let proof: ConsistencyProof | 'missing';
    try {
      proof = await fetchProof(k.treeSize, latest.treeSize);
    } catch (err) {
      out.push({ kept: k, state: 'unknown', detail: `Not checked: the consistency proof could not be fetched (${err instanceof Error ? err.message : String(err)}).` });
      continue;
    }
    if (proof === 'missing') {
      out.push({ kept: k, state: 'fail', detail: `The service has no consistency proof from the kept checkpoint of ${size} verdicts: it no longer vouches for what it signed then.` });
      continue;
    }
    const ok = proof.fromSize === k.treeSize && proof.toSize === latest.treeSize && (await verifyConsistency(k.treeSize, latest.treeSize, proof.hashes, k.rootHash, latest.rootHash));
    out.push(ok
      ? { kept: k, state: 'pass', detail: `The ledger still begins with the ${size} verdicts of the checkpoint kept from ${k.issuedAt.slice(0, 10)}: nothing in them was changed, removed or reordered.` }
      : { kept: k, state: 'fail', detail: `The latest checkpoint does not extend the one kept at ${size} verdicts: history before it was rewritten.` });
  }
  return out;
}

// --- checkpoints kept in this browser --------------------------------------------------------

const storageKey = (organisationId: string) => `lotproof.kept-checkpoints.${organisationId}`;
const isCheckpoint = (c: unknown): c is Checkpoint => {
  const x = c as Partial<Checkpoint> | null;
  return !!x && typeof x === 'object' && x.format === 'lotproof.checkpoint/1' && typeof x.organisationId === 'string' && Number.isSafeInteger(x.treeSize)
    && typeof x.rootHash === 'string' && typeof x.issuedAt === 'string' && typeof x.kid === 'string' && typeof x.signature === 'string';
};

/** The checkpoints of an organisation kept in this browser, smallest tree first. */
export function keptCheckpoints(organisationId: string, storage: Storage = localStorage): Checkpoint[] {
  try {
    const list = JSON.parse(storage.getItem(storageKey(organisationId)) ?? '[]') as unknown;
    return Array.isArray(list) ? list.filter(isCheckpoint).filter((c) => c.organisationId === organisationId).sort((a, b) => a.treeSize - b.treeSize) : [];
  } catch {
    return [];
  }
}

/** Keeps a checkpoint; one already kept at its tree size is never replaced (the first one seen stands). */
export function keepCheckpoint(c: Checkpoint, storage: Storage = localStorage): boolean {
  const kept = keptCheckpoints(c.organisationId, storage);
  if (kept.some((k) => k.treeSize === c.treeSize)) return false;
  const { format, organisationId, treeSize, rootHash, issuedAt, kid, signature } = c;
  storage.setItem(storageKey(c.organisationId), JSON.stringify([...kept, { format, organisationId, treeSize, rootHash, issuedAt, kid, signature }].sort((a, b) => a.treeSize - b.treeSize)));
  return true;
}

export function forgetKeptCheckpoints(organisationId: string, storage: Storage = localStorage): void {
  storage.removeItem(storageKey(organisationId));
}

// --- the whole check ---------------------------------------------------------------------------

export interface LedgerSource {
  /** The inclusion proof of a seal against the latest checkpoint, or null when the ledger has none for it. */
  inclusion: (seal: string) => Promise<InclusionProofReply | null>;
  consistency: FetchConsistency;
  jwks: () => Promise<{ keys: WindowedJwk[] }>;
}

export interface LedgerProofReport {
  checkpoint: Checkpoint;
  sequence: number;
  signature: CheckResult;
  inclusion: CheckResult;
  /** One entry per checkpoint kept before this check (empty: none was kept). */
  kept: KeptComparison[];
  /** pass: consistent with every kept one; fail: not consistent with at least one; unknown: not all could be checked; none: nothing kept yet. */
  consistency: CheckResult['state'] | 'none';
  /** This checkpoint was added to the kept ones (only when its signature and every comparison pass). */
  keptNow: boolean;
}

export async function proveSealInLedger(seal: string, source: LedgerSource, storage: Storage = localStorage): Promise<LedgerProofReport | null> {
  const reply = await source.inclusion(seal);
  if (!reply) return null;
  const checkpoint = reply.checkpoint;
  const [signature, inclusion] = [await checkCheckpointSignature(checkpoint, await source.jwks()), await checkInclusion(seal, reply)];
  const kept = await compareWithKept(checkpoint, keptCheckpoints(checkpoint.organisationId, storage), source.consistency);
  const consistency = kept.length === 0 ? 'none' : kept.some((k) => k.state === 'fail') ? 'fail' : kept.some((k) => k.state === 'unknown') ? 'unknown' : 'pass';
  const keptNow = signature.state === 'pass' && (consistency === 'none' || consistency === 'pass') && keepCheckpoint(checkpoint, storage);
  return { checkpoint, sequence: reply.verdict.sequence, signature, inclusion, kept, consistency, keptNow };
}
