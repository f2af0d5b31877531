// The server's Ed25519 seal-signing key. From LOTPROOF_SIGNING_KEY (PKCS#8 PEM) when set, else the
// git-ignored file <dataDir>/signing-key.pem, created on first start (mode 0600, never logged).
// The public half of every key that ever signed is kept in `signing_keys` with its validity window
// (nbf, exp, a revocation), so /.well-known/jwks.json keeps serving old keys after a rotation and
// old seals stay verifiable, while nothing dated outside a key's window verifies anywhere.
import { createHash, createPrivateKey, createPublicKey, generateKeyPairSync, randomBytes, sign, verify, type KeyObject } from 'node:crypto';
import { readdirSync, renameSync, rmSync, statSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { readOrCreateKeyFile } from '../platform/key-files';
import { QueryTypes, type Sequelize } from 'sequelize';
import { ConfigError, type Config } from '../config';
import { Unavailable } from '../core/errors';

export interface PublicJwk {
  kty: 'OKP';
  crv: 'Ed25519';
  x: string;
  kid: string;
  alg: 'EdDSA';
  use: 'sig';
}

export interface SigningKey {
  kid: string;
  privateKey: KeyObject;
  publicKey: KeyObject;
  jwk: PublicJwk;
}

/** RFC 7638 JWK thumbprint of an OKP key: SHA-256 of {"crv","kty","x"} in that order, base64url. */
export function jwkThumbprint(x: string): string {
  return createHash('sha256').update(`{"crv":"Ed25519","kty":"OKP","x":"${x}"}`).digest('base64url');
}

function fromPrivate(privateKey: KeyObject): SigningKey {
  if (privateKey.asymmetricKeyType !== 'ed25519') throw new ConfigError('the seal signing key must be an Ed25519 key');
  const publicKey = createPublicKey(privateKey);
  const x = (publicKey.export({ format: 'jwk' }) as { x: string }).x;
  const kid = jwkThumbprint(x);
  return { kid, privateKey, publicKey, jwk: { kty: 'OKP', crv: 'Ed25519', x, kid, alg: 'EdDSA', use: 'sig' } };
}

const KEY_FILE = 'signing-key.pem';
const newKeyPem = () => generateKeyPairSync('ed25519').privateKey.export({ format: 'pem', type: 'pkcs8' }) as string;

/**
 * How long after a rotation the retired key may still sign: servers that hold it in memory notice the
 * new key file within KEY_FILE_CHECK_MS, so a minute covers them with room to spare, and nothing a
 * running server seals falls outside its key's window.
 */
export const ROTATION_GRACE_MS = 60_000;
/** A running server looks at its key file (and its key's window in the database) at most this often. */
export const KEY_FILE_CHECK_MS = 2_000;
/**
 * A server stops sealing with a key this long before the key's exp: its view of the window may be
 * KEY_FILE_CHECK_MS old, and a batch takes a moment between the check and its recordedAt.
 */
const STOP_BEFORE_EXP_MS = 10_000;

interface FileKey {
  key: SigningKey;
  /** Identity of the file the key was read from, to notice a rotation by another process. */
  stamp: string;
  checkedAt: number;
}

const fileStamp = (file: string): string | null => {
  try {
    const st = statSync(file);
    return `${st.ino}:${st.size}:${st.mtimeMs}`;
  } catch {
    return null;
  }
};

function loadFromFile(dataDir: string): FileKey {
  const pem = readOrCreateKeyFile(dataDir, KEY_FILE, newKeyPem);
  return { key: fromPrivate(createPrivateKey(pem)), stamp: fileStamp(join(dataDir, KEY_FILE)) ?? '', checkedAt: Date.now() };
}

/** Files an earlier version kept beside the key after a rotation (signing-key.<kid>.retired.pem). */
function retiredKeyFiles(dataDir: string): string[] {
  try {
    return readdirSync(dataDir).filter((f) => /^signing-key\..+\.retired\.pem$/.test(f));
  } catch {
    return [];
  }
}

/**
 * Rotates the file key in two steps, so the new key can be published before any server signs with
 * it: `rotateSigningKeyFile` makes the new key in memory; its `replace()` puts it in place of the
 * current one in one rename (the old private half is gone from disk, and no process ever finds the
 * file missing) and deletes the private halves an earlier version kept beside it
 * (signing-key.<kid>.retired.pem), returning their names. Not for a key given in LOTPROOF_SIGNING_KEY.
 */
export function rotateSigningKeyFile(dataDir: string): { previous: SigningKey; next: SigningKey; replace: () => string[] } {
  const previous = loadFromFile(dataDir).key;
  const pem = newKeyPem();
  const next = fromPrivate(createPrivateKey(pem));
  const replace = () => {
    const file = join(dataDir, KEY_FILE);
    const temp = `${file}.${randomBytes(6).toString('hex')}.new`;
    writeFileSync(temp, pem, { mode: 0o600, flag: 'wx' });
    renameSync(temp, file);
    const deleted = retiredKeyFiles(dataDir);
    for (const f of deleted) rmSync(join(dataDir, f), { force: true });
    cache.delete(`file:${dataDir}`);
    return deleted;
  };
  return { previous, next, replace };
}

const cache = new Map<string, FileKey>();

/**
 * The current signing key for this configuration. A key from LOTPROOF_SIGNING_KEY is read once; the
 * key file is looked at again at most every KEY_FILE_CHECK_MS, so a server picks up a rotation the
 * CLI made while it ran (a file gone meanwhile leaves the key in memory as it is).
 */
export function currentSigningKey(config: Pick<Config, 'dataDir' | 'verdicts'>): SigningKey {
  const pem = config.verdicts.signingKeyPem;
  const cacheKey = pem ? `env:${createHash('sha256').update(pem).digest('hex')}` : `file:${config.dataDir}`;
  let entry = cache.get(cacheKey);
  if (entry && !pem && Date.now() - entry.checkedAt >= KEY_FILE_CHECK_MS) {
    entry.checkedAt = Date.now();
    const stamp = fileStamp(join(config.dataDir, KEY_FILE));
    if (stamp !== null && stamp !== entry.stamp) entry = undefined;
  }
  if (!entry) {
    if (pem) {
      try {
        entry = { key: fromPrivate(createPrivateKey(pem)), stamp: '', checkedAt: Date.now() };
      } catch (err) {
        if (err instanceof ConfigError) throw err;
        throw new ConfigError('LOTPROOF_SIGNING_KEY is not a PKCS#8 PEM private key');
      }
    } else {
      entry = loadFromFile(config.dataDir);
    }
    cache.set(cacheKey, entry);
  }
  return entry.key;
}

/** Whole seconds, as the JWKS publishes windows (RFC 7519 NumericDate). */
const floorToSecond = (d: Date) => new Date(Math.floor(d.getTime() / 1000) * 1000);
const ceilToSecond = (d: Date) => new Date(Math.ceil(d.getTime() / 1000) * 1000);

/** A signing key whose window no longer lets it seal: the server refuses rather than make a seal nobody can verify. */
export class RetiredSigningKey extends Unavailable {
  constructor(kid: string, exp: Date) {
    super(`the seal signing key ${kid} may sign nothing dated at or after ${exp.toISOString()} (rotated or revoked): sealing waits for the new key (see signing-key:rotate)`);
  }
}

const published = new WeakMap<Sequelize, Map<string, { checkedAt: number; exp: Date | null }>>();

/**
 * Records the public key in signing_keys on first use (nbf = that moment, to the second; a key given
 * in LOTPROOF_SIGNING_KEY gets its window this way), and checks, at most every KEY_FILE_CHECK_MS,
 * that its window still lets it sign: called before every batch is sealed, it throws
 * RetiredSigningKey once the key has been given an exp that is (almost) reached.
 */
export async function publishSigningKey(sequelize: Sequelize, key: SigningKey): Promise<void> {
  let seen = published.get(sequelize);
  if (!seen) published.set(sequelize, (seen = new Map()));
  let state = seen.get(key.kid);
  if (!state || Date.now() - state.checkedAt >= KEY_FILE_CHECK_MS) {
    const checkedAt = Date.now();
    if (!state) await recordPublicKey(sequelize, key, new Date(checkedAt));
    const rows = await sequelize.query<{ exp: Date | null }>('SELECT exp FROM signing_keys WHERE kid = $1', { bind: [key.kid], type: QueryTypes.SELECT });
    state = { checkedAt, exp: rows[0]?.exp ? new Date(rows[0].exp) : null };
    seen.set(key.kid, state);
  }
  if (state.exp && Date.now() >= state.exp.getTime() - STOP_BEFORE_EXP_MS) throw new RetiredSigningKey(key.kid, state.exp);
}

/** Inserts a key's public half with its nbf (to the second), unless it is published already. */
export async function recordPublicKey(sequelize: Sequelize, key: SigningKey, nbf: Date): Promise<void> {
  await sequelize.query('INSERT INTO signing_keys (kid, public_jwk, nbf) VALUES ($1, $2, $3) ON CONFLICT (kid) DO NOTHING', {
    bind: [key.kid, JSON.stringify(key.jwk), floorToSecond(nbf).toISOString()],
  });
}

export type PublishedJwk = PublicJwk & { nbf: number; exp?: number };

interface KeyRow {
  kid: string;
  public_jwk: PublicJwk;
  nbf: Date;
  exp: Date | null;
  revoked_from: Date | null;
  revocation_reason: string | null;
}

const seconds = (d: Date) => Math.floor(new Date(d).getTime() / 1000);

/** Every public key that has signed seals here (RFC 7517 JWK Set), each with its window (nbf, exp). */
export async function jwks(sequelize: Sequelize): Promise<{ keys: PublishedJwk[] }> {
  const rows = await sequelize.query<KeyRow>('SELECT public_jwk, nbf, exp FROM signing_keys ORDER BY created_at DESC, kid', {
    type: QueryTypes.SELECT,
  });
  return { keys: rows.map((r) => ({ ...r.public_jwk, nbf: seconds(r.nbf), ...(r.exp ? { exp: seconds(r.exp) } : {}) })) };
}

/** A published key and its validity window. */
export interface KeyWindow {
  kid: string;
  publicKey: KeyObject;
  nbf: Date;
  exp: Date | null;
  revokedFrom: Date | null;
  revocationReason: string | null;
}

export type KeyRefusal = { reason: 'unknown-kid' | 'before-nbf' | 'at-or-after-exp' | 'revoked'; message: string };

/** A published key's window, or null when no key has this kid. */
export async function keyWindow(sequelize: Sequelize, kid: string): Promise<KeyWindow | null> {
  const rows = await sequelize.query<KeyRow>('SELECT kid, public_jwk, nbf, exp, revoked_from, revocation_reason FROM signing_keys WHERE kid = $1', {
    bind: [kid],
    type: QueryTypes.SELECT,
  });
  const r = rows[0];
  if (!r) return null;
  const { kty, crv, x } = r.public_jwk;
  return {
    kid: r.kid,
    publicKey: createPublicKey({ key: { kty, crv, x }, format: 'jwk' }),
    nbf: new Date(r.nbf),
    exp: r.exp ? new Date(r.exp) : null,
    revokedFrom: r.revoked_from ? new Date(r.revoked_from) : null,
    revocationReason: r.revocation_reason,
  };
}

/** Why `window` may not vouch for something dated `at`, or null when `at` lies in [nbf, exp). */
export function refusalAt(window: KeyWindow | null, kid: string, at: Date): KeyRefusal | null {
  if (!window) return { reason: 'unknown-kid', message: `no published key has kid ${JSON.stringify(kid)}` };
  const t = at.getTime();
  if (Number.isNaN(t)) return { reason: 'before-nbf', message: 'the date to check the key against is not a date' };
  const short = `${kid.slice(0, 12)}…`;
  if (window.revokedFrom && t >= window.revokedFrom.getTime()) {
    return { reason: 'revoked', message: `key ${short} is revoked from ${window.revokedFrom.toISOString()} (${window.revocationReason}), and this is dated ${at.toISOString()}` };
  }
  if (t < window.nbf.getTime()) return { reason: 'before-nbf', message: `key ${short} signs nothing dated before ${window.nbf.toISOString()} (its nbf), and this is dated ${at.toISOString()}` };
  if (window.exp && t >= window.exp.getTime()) return { reason: 'at-or-after-exp', message: `key ${short} signs nothing dated at or after ${window.exp.toISOString()} (its exp), and this is dated ${at.toISOString()}` };
  return null;
}

/**
 * The one window-aware key lookup: the public key named `kid` when `at` lies in its window
 * [nbf, exp) and before any revocation, else why not. Every server-side check of a seal (and of a
 * checkpoint, by its issuedAt) goes through this or through keyWindow + refusalAt.
 */
export async function publicKeyValidAt(sequelize: Sequelize, kid: string, at: Date): Promise<{ key: KeyObject; window: KeyWindow } | KeyRefusal> {
  const window = await keyWindow(sequelize, kid);
  const refusal = refusalAt(window, kid, at);
  return refusal ?? { key: window!.publicKey, window: window! };
}

/**
 * Ends a key's window at `exp` (rotation: its time plus ROTATION_GRACE_MS), never later than an exp it
 * has already; the owner's side only (the CLI): the app's role may not change signing_keys.
 */
export async function retireSigningKey(sequelize: Sequelize, kid: string, exp: Date): Promise<Date | null> {
  const rows = await sequelize.query<{ exp: Date }>(
    'UPDATE signing_keys SET exp = LEAST(COALESCE(exp, $2::timestamptz), $2::timestamptz) WHERE kid = $1 RETURNING exp',
    { bind: [kid, ceilToSecond(exp).toISOString()], type: QueryTypes.SELECT },
  );
  return rows[0] ? new Date(rows[0].exp) : null;
}

/** Sets a published key's nbf (the new key of a rotation: from the rotation time), never later than it is. */
export async function setSigningKeyNbf(sequelize: Sequelize, kid: string, nbf: Date): Promise<void> {
  await sequelize.query('UPDATE signing_keys SET nbf = LEAST(nbf, $2::timestamptz) WHERE kid = $1', { bind: [kid, floorToSecond(nbf).toISOString()] });
}

/**
 * Marks a compromised key revoked from `from` (to the second, rounded down): anything it signed dated
 * at or after that is invalid, and its exp moves back to that time. An earlier revocation stays.
 */
export async function revokeSigningKey(sequelize: Sequelize, kid: string, from: Date, reason: string): Promise<KeyWindow | null> {
  const at = floorToSecond(from).toISOString();
  await sequelize.query(
    `UPDATE signing_keys SET
       revocation_reason = CASE WHEN revoked_from IS NULL OR $2::timestamptz < revoked_from THEN $3 ELSE revocation_reason END,
       revoked_from = LEAST(COALESCE(revoked_from, $2::timestamptz), $2::timestamptz),
       exp = LEAST(COALESCE(exp, $2::timestamptz), $2::timestamptz)
     WHERE kid = $1`,
    { bind: [kid, at, reason] },
  );
  return keyWindow(sequelize, kid);
}

/** Ed25519 signature of the 32 bytes of the seal (its SHA-256 digest), base64url. */
export function signSeal(key: SigningKey, sealHex: string): string {
  return sign(null, Buffer.from(sealHex, 'hex'), key.privateKey).toString('base64url');
}

export function verifySealSignature(publicKey: KeyObject, sealHex: string, signature: string): boolean {
  // Strict encodings: text that decodes to the same bytes but is not their canonical spelling is refused.
  if (!/^[0-9a-f]{64}$/.test(sealHex) || !/^[A-Za-z0-9_-]+$/.test(signature)) return false;
  const sig = Buffer.from(signature, 'base64url');
  if (sig.toString('base64url') !== signature) return false;
  try {
    return verify(null, Buffer.from(sealHex, 'hex'), publicKey, sig);
  } catch {
    return false;
  }
}
