// Secrets the server has to read back are stored encrypted, not in clear: webhook signing secrets
// (Standard Webhooks signs with the secret itself, so it cannot be hashed like API keys and
// passwords) and the stored reply of an idempotent webhook creation (it shows that secret once).
// AES-256-GCM (node:crypto) under a key kept outside the database: LOTPROOF_SECRETS_KEY (32 bytes,
// base64) or <dataDir>/secrets-key, created on first start with mode 0600, like the signing key.
// A dump of the database alone does not give the secrets away. Each value is bound to where it
// belongs (its row) as associated data, so a ciphertext copied elsewhere does not decrypt.
import { createCipheriv, createDecipheriv, createHash, randomBytes } from 'node:crypto';
import { readOrCreateKeyFile } from '../platform/key-files';
import type { Config } from '../config';

const PREFIX = 'sealed:v1:';

export interface SecretBox {
  /** The stored form of a secret (ASCII): "sealed:v1:<iv>.<ciphertext>.<tag>", base64url. */
  seal(plain: string, context: string): string;
  /** The secret back; throws when the value was altered, moved, or sealed under another key. */
  open(stored: string, context: string): string;
}

export function isSealed(stored: string): boolean {
  return stored.startsWith(PREFIX);
}

function keyFromFile(dataDir: string): Buffer {
  const key = Buffer.from(readOrCreateKeyFile(dataDir, 'secrets-key', () => randomBytes(32).toString('base64') + '\n').trim(), 'base64');
  if (key.length !== 32) throw new Error(`${dataDir}/secrets-key does not hold a 32-byte key (base64)`);
  return key;
}

const boxes = new Map<string, SecretBox>();

/** The secret box for this configuration (the key is read once per process). */
export function secretBox(config: Pick<Config, 'dataDir' | 'secretsKey'>): SecretBox {
  const id = config.secretsKey ? `env:${createHash('sha256').update(config.secretsKey).digest('hex')}` : `file:${config.dataDir}`;
  let box = boxes.get(id);
  if (box) return box;
  const key = config.secretsKey ?? keyFromFile(config.dataDir);
  box = {
    seal(plain, context) {
      const iv = randomBytes(12);
      const c = createCipheriv('aes-256-gcm', key, iv);
      c.setAAD(Buffer.from(context, 'utf8'));
      const ct = Buffer.concat([c.update(plain, 'utf8'), c.final()]);
      return `${PREFIX}${iv.toString('base64url')}.${ct.toString('base64url')}.${c.getAuthTag().toString('base64url')}`;
    },
    open(stored, context) {
      if (!isSealed(stored)) throw new Error('not a sealed secret');
      const [iv, ct, tag] = stored.slice(PREFIX.length).split('.');
      const d = createDecipheriv('aes-256-gcm', key, Buffer.from(iv ?? '', 'base64url'));
      d.setAAD(Buffer.from(context, 'utf8'));
      d.setAuthTag(Buffer.from(tag ?? '', 'base64url'));
      return Buffer.concat([d.update(Buffer.from(ct ?? '', 'base64url')), d.final()]).toString('utf8');
    },
  };
  boxes.set(id, box);
  return box;
}
