// Secrets the server has to read back are stored encrypted, not in clear: webhook signing secrets
// (Standard Webhooks signs with the secret itself, so it cannot be hashed like API keys and
// passwords) and the stored reply of an idempotent webhook creation (it shows that secret once).
// AES-256-GCM (node:crypto) under a key kept outside the database: LOTPROOF_SECRETS_KEY (32 bytes,
// base64) or <dataDir>/secrets-key, created on first start with mode 0600, like the signing key.
// Rotation: the key before (LOTPROOF_SECRETS_KEY_PREVIOUS, or <dataDir>/secrets-key.previous)
// still opens; whatever is not sealed under the current key is sealed again at start.
// A dump of the database alone does not give the secrets away. Each value is bound to where it
// belongs (its row) as associated data, so a ciphertext copied elsewhere does not decrypt.
import { createCipheriv, createDecipheriv, randomBytes } from 'node:crypto';
import { existsSync, readFileSync, renameSync } from 'node:fs';
import { join } from 'node:path';
import { readOrCreateKeyFile } from '../platform/key-files';
import { decodeSecretsKey, type Config } from '../config';

const PREFIX = 'sealed:v1:';

export interface SecretBox {
  /** The stored form of a secret (ASCII): "sealed:v1:<iv>.<ciphertext>.<tag>", base64url. */
  seal(plain: string, context: string): string;
  /** The secret back; throws when the value was altered, moved, or sealed under a key not known here. */
  open(stored: string, context: string): string;
  /** True when the value is sealed under the current key (not a previous one, not in clear). */
  isCurrent(stored: string, context: string): boolean;
}

export function isSealed(stored: string): boolean {
  return stored.startsWith(PREFIX);
}

const KEY_FILE = 'secrets-key';
const PREVIOUS_FILE = 'secrets-key.previous';

function newKeyText(): string {
  return randomBytes(32).toString('base64') + '\n';
}

/** The current key and the ones before it (still opened, never sealed with). */
function keysOf(config: Pick<Config, 'dataDir' | 'secretsKey' | 'secretsKeysPrevious'>): { current: Buffer; previous: Buffer[] } {
  if (config.secretsKey) return { current: config.secretsKey, previous: config.secretsKeysPrevious };
  const previousFile = join(config.dataDir, PREVIOUS_FILE);
  return {
    current: decodeSecretsKey(readOrCreateKeyFile(config.dataDir, KEY_FILE, newKeyText), join(config.dataDir, KEY_FILE)),
    previous: existsSync(previousFile) ? [decodeSecretsKey(readFileSync(previousFile, 'utf8'), previousFile)] : [],
  };
}

/**
 * Rotates the file key: the current key becomes <dataDir>/secrets-key.previous (replacing an older
 * one) and a new key takes its place. Values sealed under the previous key still open; the
 * start-up pass (and the CLI right away) seals them again under the new key.
 */
export function rotateSecretsKeyFile(dataDir: string): void {
  readOrCreateKeyFile(dataDir, KEY_FILE, newKeyText);
  renameSync(join(dataDir, KEY_FILE), join(dataDir, PREVIOUS_FILE));
  readOrCreateKeyFile(dataDir, KEY_FILE, newKeyText);
}

function openWith(key: Buffer, stored: string, context: string): string {
  const [iv, ct, tag] = stored.slice(PREFIX.length).split('.');
  const d = createDecipheriv('aes-256-gcm', key, Buffer.from(iv ?? '', 'base64url'));
  d.setAAD(Buffer.from(context, 'utf8'));
  d.setAuthTag(Buffer.from(tag ?? '', 'base64url'));
  return Buffer.concat([d.update(Buffer.from(ct ?? '', 'base64url')), d.final()]).toString('utf8');
}

/** The secret box for this configuration; its keys are read when it is made (once per app or job runner). */
export function secretBox(config: Pick<Config, 'dataDir' | 'secretsKey' | 'secretsKeysPrevious'>): SecretBox {
  const { current, previous } = keysOf(config);
  const isCurrent = (stored: string, context: string): boolean => {
    if (!isSealed(stored)) return false;
    try {
      openWith(current, stored, context);
      return true;
    } catch {
      return false;
    }
  };
  return {
    seal(plain, context) {
      const iv = randomBytes(12);
      const c = createCipheriv('aes-256-gcm', current, iv);
      c.setAAD(Buffer.from(context, 'utf8'));
      const ct = Buffer.concat([c.update(plain, 'utf8'), c.final()]);
      return `${PREFIX}${iv.toString('base64url')}.${ct.toString('base64url')}.${c.getAuthTag().toString('base64url')}`;
    },
    open(stored, context) {
      if (!isSealed(stored)) throw new Error('not a sealed secret');
      for (const key of [current, ...previous]) {
        try {
          return openWith(key, stored, context);
        } catch {
          /* the next key */
        }
      }
      throw new Error('the sealed secret does not open with any key known here');
    },
    isCurrent,
  };
}
