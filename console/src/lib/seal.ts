// Checking a seal in the browser, so an auditor need not take the server's word for it:
//  1. the SHA-256 of the record's RFC 8785 canonical form (canonicalize, npm) equals the seal;
//  2. the Ed25519 signature of the seal's 32 bytes verifies (WebCrypto) against the public key with
//     the record's key id in /.well-known/jwks.json (RFC 7517, OKP keys per RFC 8037), and the
//     record's recordedAt lies in that key's validity window [nbf, exp) (RFC 7519 NumericDates);
//  3. the chain link: the record names the seal of the verdict before it, and that verdict's own
//     record hashes to that seal.
import canonicalize from 'canonicalize';

export interface Jwk {
  kty: string;
  crv?: string;
  x?: string;
  kid?: string;
  alg?: string;
  /** Validity window, seconds since the epoch: the key signs nothing dated before nbf, or at or after exp. */
  nbf?: number;
  exp?: number;
}

export type CheckState = 'pass' | 'fail' | 'unknown';

export interface CheckResult {
  state: CheckState;
  detail: string;
}

function hex(bytes: ArrayBuffer): string {
  return Array.from(new Uint8Array(bytes), (b) => b.toString(16).padStart(2, '0')).join('');
}

function hexToBytes(h: string): Uint8Array<ArrayBuffer> {
  const out = new Uint8Array(h.length / 2);
  for (let i = 0; i < out.length; i++) out[i] = parseInt(h.slice(2 * i, 2 * i + 2), 16);
  return out;
}

function base64UrlToBytes(s: string): Uint8Array<ArrayBuffer> {
  const b64 = s.replace(/-/g, '+').replace(/_/g, '/').padEnd(Math.ceil(s.length / 4) * 4, '=');
  const bin = atob(b64);
  const out = new Uint8Array(bin.length);
  for (let i = 0; i < bin.length; i++) out[i] = bin.charCodeAt(i);
  return out;
}

/** The RFC 8785 canonical text of a record given as JSON text or as a parsed value. */
export function canonicalText(record: string | unknown): string {
  const value = typeof record === 'string' ? JSON.parse(record) : record;
  const text = canonicalize(value);
  if (text === undefined) throw new Error('the record cannot be canonicalised');
  return text;
}

export async function sha256Hex(text: string): Promise<string> {
  return hex(await crypto.subtle.digest('SHA-256', new TextEncoder().encode(text)));
}

export async function checkHash(record: string | unknown, seal: string): Promise<CheckResult & { computed: string | null }> {
  let computed: string;
  try {
    computed = await sha256Hex(canonicalText(record));
  } catch (err) {
    return { state: 'fail', computed: null, detail: `The record is not valid JSON (${err instanceof Error ? err.message : String(err)}).` };
  }
  return computed === seal.toLowerCase()
    ? { state: 'pass', computed, detail: 'The SHA-256 of the canonical record, computed in this browser, equals the seal.' }
    : { state: 'fail', computed, detail: 'The SHA-256 of the canonical record, computed in this browser, differs from the seal: the record is not the one that was sealed.' };
}

/** Why a key may not vouch for something dated `recordedAt`, or null when it lies in [nbf, exp). */
export function keyWindowProblem(jwk: Jwk, recordedAt: unknown): string | null {
  const at = typeof recordedAt === 'string' ? Date.parse(recordedAt) : NaN;
  if (Number.isNaN(at)) return 'The record has no recordedAt to check the key’s validity window against.';
  if (typeof jwk.nbf !== 'number') return `Key ${jwk.kid?.slice(0, 12)}… is published without a validity window (nbf).`;
  if (at < jwk.nbf * 1000) return `Key ${jwk.kid?.slice(0, 12)}… signs nothing dated before ${new Date(jwk.nbf * 1000).toISOString()}, and this record is dated ${recordedAt}.`;
  if (typeof jwk.exp === 'number' && at >= jwk.exp * 1000) {
    return `Key ${jwk.kid?.slice(0, 12)}… signs nothing dated at or after ${new Date(jwk.exp * 1000).toISOString()} (retired or revoked), and this record is dated ${recordedAt}.`;
  }
  return null;
}

export async function checkSignature(seal: string, signature: string, kid: string, jwks: { keys: Jwk[] }, recordedAt: unknown): Promise<CheckResult> {
  const jwk = jwks.keys.find((k) => k.kid === kid);
  if (!jwk || jwk.kty !== 'OKP' || jwk.crv !== 'Ed25519' || !jwk.x) {
    return { state: 'fail', detail: `No Ed25519 key with id ${kid} is published in /.well-known/jwks.json.` };
  }
  const outside = keyWindowProblem(jwk, recordedAt);
  if (outside) return { state: 'fail', detail: outside };
  if (!/^[0-9a-f]{64}$/i.test(seal)) return { state: 'fail', detail: 'The seal is not a SHA-256 digest (64 hexadecimal characters).' };
  try {
    const key = await crypto.subtle.importKey('jwk', { kty: 'OKP', crv: 'Ed25519', x: jwk.x }, { name: 'Ed25519' }, false, ['verify']);
    const ok = await crypto.subtle.verify({ name: 'Ed25519' }, key, base64UrlToBytes(signature), hexToBytes(seal));
    return ok
      ? { state: 'pass', detail: `The Ed25519 signature of the seal verifies, in this browser, against published key ${kid.slice(0, 12)}….` }
      : { state: 'fail', detail: `The Ed25519 signature does not verify against published key ${kid.slice(0, 12)}…: the seal was not signed by this service.` };
  } catch (err) {
    return { state: 'unknown', detail: `This browser could not check an Ed25519 signature (${err instanceof Error ? err.message : String(err)}).` };
  }
}

/**
 * The chain link. `previousSeal` is what the record says came before; `previous` is the record the
 * server holds under that seal (null when the record is the first of its chain).
 */
export async function checkChainLink(previousSeal: string | null, previous: { record: string | unknown; seal: string } | null): Promise<CheckResult> {
  if (previousSeal === null) {
    return previous === null
      ? { state: 'pass', detail: 'This is the first verdict of the organisation’s chain: it names no predecessor.' }
      : { state: 'fail', detail: 'The record names no predecessor, but the chain has a verdict before it.' };
  }
  if (!previous) return { state: 'fail', detail: `No verdict with the previous seal ${previousSeal.slice(0, 12)}… could be found.` };
  if (previous.seal !== previousSeal) return { state: 'fail', detail: 'The previous verdict’s seal is not the one this record names.' };
  const h = await checkHash(previous.record, previous.seal);
  return h.state === 'pass'
    ? { state: 'pass', detail: `The record names seal ${previousSeal.slice(0, 12)}… as its predecessor, and that verdict’s record hashes to it.` }
    : { state: 'fail', detail: 'The previous verdict’s record does not hash to its seal: the chain is broken there.' };
}
