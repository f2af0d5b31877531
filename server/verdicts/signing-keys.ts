// The server's Ed25519 seal-signing key. From LOTPROOF_SIGNING_KEY (PKCS#8 PEM) when set, else the
// git-ignored file <dataDir>/signing-key.pem, created on first start (mode 0600, never logged).
// The public half of every key that ever signed is kept in `signing_keys`, so /.well-known/jwks.json
// keeps serving old keys after a rotation and old seals stay verifiable.
import { createHash, createPrivateKey, createPublicKey, generateKeyPairSync, sign, verify, type KeyObject } from 'node:crypto';
import { renameSync } from 'node:fs';
import { join } from 'node:path';
import { readOrCreateKeyFile } from '../platform/key-files';
import { QueryTypes, type Sequelize } from 'sequelize';
import { ConfigError, type Config } from '../config';

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

function loadFromFile(dataDir: string): SigningKey {
  return fromPrivate(createPrivateKey(readOrCreateKeyFile(dataDir, KEY_FILE, newKeyPem)));
}

/**
 * Rotates the file key: the current key is kept beside it as signing-key.<kid>.retired.pem (mode
 * 0600, for the record; its public half stays published) and a new key takes its place. Servers
 * sign with the new key after their next start. Not for a key given in LOTPROOF_SIGNING_KEY.
 */
export function rotateSigningKeyFile(dataDir: string): { previous: SigningKey; next: SigningKey } {
  const previous = loadFromFile(dataDir);
  renameSync(join(dataDir, KEY_FILE), join(dataDir, `signing-key.${previous.kid}.retired.pem`));
  const next = loadFromFile(dataDir);
  cache.delete(`file:${dataDir}`);
  return { previous, next };
}

const cache = new Map<string, SigningKey>();

/** The current signing key for this configuration (read once per process). */
export function currentSigningKey(config: Pick<Config, 'dataDir' | 'verdicts'>): SigningKey {
  const pem = config.verdicts.signingKeyPem;
  const cacheKey = pem ? `env:${createHash('sha256').update(pem).digest('hex')}` : `file:${config.dataDir}`;
  let key = cache.get(cacheKey);
  if (!key) {
    if (pem) {
      try {
        key = fromPrivate(createPrivateKey(pem));
      } catch (err) {
        if (err instanceof ConfigError) throw err;
        throw new ConfigError('LOTPROOF_SIGNING_KEY is not a PKCS#8 PEM private key');
      }
    } else {
      key = loadFromFile(config.dataDir);
    }
    cache.set(cacheKey, key);
  }
  return key;
}

const published = new WeakMap<Sequelize, Set<string>>();

/** Records the public key in signing_keys (once per process and database). */
export async function publishSigningKey(sequelize: Sequelize, key: SigningKey): Promise<void> {
  let seen = published.get(sequelize);
  if (!seen) published.set(sequelize, (seen = new Set()));
  if (seen.has(key.kid)) return;
  await sequelize.query('INSERT INTO signing_keys (kid, public_jwk) VALUES ($1, $2) ON CONFLICT (kid) DO NOTHING', {
    bind: [key.kid, JSON.stringify(key.jwk)],
  });
  seen.add(key.kid);
}

/** Every public key that has signed seals here (RFC 7517 JWK Set). */
export async function jwks(sequelize: Sequelize): Promise<{ keys: PublicJwk[] }> {
  const rows = await sequelize.query<{ public_jwk: PublicJwk }>('SELECT public_jwk FROM signing_keys ORDER BY created_at DESC, kid', {
    type: QueryTypes.SELECT,
  });
  return { keys: rows.map((r) => r.public_jwk) };
}

/** Looks up a published public key by kid. */
export async function publicKeyFor(sequelize: Sequelize, kid: string): Promise<KeyObject | null> {
  const rows = await sequelize.query<{ public_jwk: PublicJwk }>('SELECT public_jwk FROM signing_keys WHERE kid = $1', {
    bind: [kid],
    type: QueryTypes.SELECT,
  });
  if (rows.length === 0) return null;
  const { kty, crv, x } = rows[0]!.public_jwk;
  return createPublicKey({ key: { kty, crv, x }, format: 'jwk' });
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
