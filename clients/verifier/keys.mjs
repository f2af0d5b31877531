// The pinned JWK Set: Ed25519 keys (RFC 8037) with their validity windows `nbf`/`exp` (RFC 7519
// NumericDates). A key signs only what is dated in [nbf, exp); a key without `nbf` is refused.
import { createHash, createPublicKey, verify } from 'node:crypto';
import { base64url, canonicalize, isObject } from './canonical.mjs';

/** Parses the JWKS text; throws (a usage error) when it is not a JWK Set at all. */
export function loadPinnedJwks(text) {
  const jwks = JSON.parse(text);
  if (!isObject(jwks) || !Array.isArray(jwks.keys)) throw new Error('not a JWK Set (no "keys" list)');
  const keys = new Map();
  for (const k of jwks.keys) {
    if (!isObject(k) || typeof k.kid !== 'string') continue;
    if (k.kty !== 'OKP' || k.crv !== 'Ed25519') continue; // other kinds of key sign nothing of Lotproof's
    const entry = { kid: k.kid, key: null, nbf: null, exp: null, problem: null };
    const x = base64url(k.x);
    // RFC 7638 §3.2: the thumbprint covers crv, kty and x; Lotproof's kid is that thumbprint.
    const thumbprint = x ? createHash('sha256').update(canonicalize({ crv: 'Ed25519', kty: 'OKP', x: k.x })).digest('base64url') : null;
    if (!x || x.length !== 32) entry.problem = 'its public key "x" is not 32 bytes of base64url';
    else if (thumbprint !== k.kid) entry.problem = 'its kid is not the RFC 7638 thumbprint of its key';
    else if (typeof k.nbf !== 'number' || !Number.isFinite(k.nbf)) entry.problem = 'it has no "nbf": a key without a validity window is valid for no date';
    else if (k.exp !== undefined && (typeof k.exp !== 'number' || !Number.isFinite(k.exp) || k.exp <= k.nbf)) entry.problem = 'its "exp" is not a NumericDate after its "nbf"';
    else {
      entry.key = createPublicKey({ key: { kty: 'OKP', crv: 'Ed25519', x: k.x }, format: 'jwk' });
      entry.nbf = k.nbf;
      entry.exp = k.exp ?? null;
    }
    if (keys.has(k.kid)) entry.problem = 'the pinned JWKS lists this kid more than once';
    keys.set(k.kid, entry);
  }
  return keys;
}

/** Milliseconds of an ISO 8601 UTC timestamp with a zone, or null when it is not one. */
export function instant(text) {
  if (typeof text !== 'string' || !/^\d{4}-\d{2}-\d{2}T\d{2}:\d{2}:\d{2}(\.\d{1,9})?(Z|[+-]\d{2}:\d{2})$/.test(text)) return null;
  const ms = Date.parse(text);
  return Number.isFinite(ms) ? ms : null;
}

const date = (seconds) => new Date(seconds * 1000).toISOString();
export const windowText = (e) => `[${date(e.nbf)}, ${e.exp === null ? 'open' : date(e.exp)})`;

/**
 * Checks that `signature` (base64url) over `message` is by the pinned key `kid` and that `at` (ISO
 * time the signed thing is dated) lies in that key's window. Returns a problem text or null.
 */
export function checkSignature(keys, kid, at, message, signature) {
  if (typeof kid !== 'string') return 'no kid';
  const entry = keys.get(kid);
  if (!entry) return `the key ${JSON.stringify(kid)} is not in the pinned JWKS`;
  if (entry.problem) return `the pinned key ${JSON.stringify(kid)} is refused: ${entry.problem}`;
  const ms = instant(at);
  if (ms === null) return `its date ${JSON.stringify(at)} is not an ISO 8601 time`;
  if (ms < entry.nbf * 1000 || (entry.exp !== null && ms >= entry.exp * 1000)) {
    return `dated ${at}, outside the validity window ${windowText(entry)} of key ${kid}`;
  }
  const sig = base64url(signature);
  if (!sig || sig.length !== 64) return 'the signature is not 64 bytes of base64url';
  if (!verify(null, message, entry.key, sig)) return `the signature is not valid for key ${kid}`;
  return null;
}
