// Secrets stored sealed (AES-256-GCM, NIST SP 800-38D, via node:crypto): they open only unaltered,
// in the place they were sealed for, under the key they were sealed with.
import { readFileSync, statSync } from 'node:fs';
import { join } from 'node:path';
import { randomBytes } from 'node:crypto';
import { describe, expect, it } from 'vitest';
import { loadConfig } from '../../server/config';
import { isSealed, rotateSecretsKeyFile, secretBox } from '../../server/core/secret-box';
import { useTempDirs } from '../support/temp-dirs';

const tempDir = useTempDirs('lotproof-box-');

describe('secretBox', () => {
  it('opens what it sealed, and nothing altered, moved or sealed under another key', () => {
    const box = secretBox({ dataDir: '/nonexistent', secretsKey: randomBytes(32), secretsKeysPrevious: [] });
    const sealed = box.seal('whsec_c2VjcmV0', 'webhook-secret:1');
    expect(isSealed(sealed)).toBe(true);
    expect(sealed).not.toContain('c2VjcmV0');
    expect(box.open(sealed, 'webhook-secret:1')).toBe('whsec_c2VjcmV0');
    expect(box.seal('same', 'x')).not.toBe(box.seal('same', 'x')); // a fresh IV each time
    expect(() => box.open(sealed, 'webhook-secret:2')).toThrow();
    const [iv, ct, tag] = sealed.slice('sealed:v1:'.length).split('.') as [string, string, string];
    const flipped = Buffer.from(ct, 'base64url');
    flipped[0]! ^= 1;
    expect(() => box.open(`sealed:v1:${iv}.${flipped.toString('base64url')}.${tag}`, 'webhook-secret:1')).toThrow();
    const other = secretBox({ dataDir: '/nonexistent', secretsKey: randomBytes(32), secretsKeysPrevious: [] });
    expect(() => other.open(sealed, 'webhook-secret:1')).toThrow();
  });

  it('creates its key in the data folder once, readable by the owner only', () => {
    const dir = tempDir();
    const a = secretBox({ dataDir: dir, secretsKey: null, secretsKeysPrevious: [] });
    const sealed = a.seal('kept', 'c');
    expect(Buffer.from(readFileSync(join(dir, 'secrets-key'), 'utf8').trim(), 'base64')).toHaveLength(32);
    expect(statSync(join(dir, 'secrets-key')).mode & 0o777).toBe(0o600);
    expect(secretBox({ dataDir: dir, secretsKey: null, secretsKeysPrevious: [] }).open(sealed, 'c')).toBe('kept');
  });

  it('takes LOTPROOF_SECRETS_KEY only as 32 bytes of base64', () => {
    expect(loadConfig({ LOTPROOF_SECRETS_KEY: randomBytes(32).toString('base64') }).secretsKey).toHaveLength(32);
    expect(() => loadConfig({ LOTPROOF_SECRETS_KEY: randomBytes(16).toString('base64') })).toThrow(/LOTPROOF_SECRETS_KEY/);
    expect(loadConfig({}).secretsKey).toBeNull();
  });

  it('rotates: values sealed under a previous key still open, are not current, and seal anew under the new key', () => {
    const old = randomBytes(32);
    const before = secretBox({ dataDir: '/nonexistent', secretsKey: old, secretsKeysPrevious: [] }).seal('whsec_b2xk', 'ctx');
    const box = secretBox({ dataDir: '/nonexistent', secretsKey: randomBytes(32), secretsKeysPrevious: [old] });
    expect(box.open(before, 'ctx')).toBe('whsec_b2xk');
    expect(box.isCurrent(before, 'ctx')).toBe(false);
    expect(box.isCurrent(box.seal('whsec_b2xk', 'ctx'), 'ctx')).toBe(true);
    expect(box.isCurrent('whsec_in_clear', 'ctx')).toBe(false);
  });

  it('rotates the file key: the old one is kept as secrets-key.previous and still opens', () => {
    const dir = tempDir();
    const files = { dataDir: dir, secretsKey: null, secretsKeysPrevious: [] };
    const sealed = secretBox(files).seal('kept across', 'c');
    rotateSecretsKeyFile(dir);
    const box = secretBox(files);
    expect(box.open(sealed, 'c')).toBe('kept across');
    expect(box.isCurrent(sealed, 'c')).toBe(false);
    expect(statSync(join(dir, 'secrets-key.previous')).mode & 0o777).toBe(0o600);
    expect(readFileSync(join(dir, 'secrets-key'), 'utf8')).not.toBe(readFileSync(join(dir, 'secrets-key.previous'), 'utf8'));
  });

  it('takes previous keys from LOTPROOF_SECRETS_KEY_PREVIOUS, comma-separated, each 32 bytes', () => {
    const [a, b] = [randomBytes(32).toString('base64'), randomBytes(32).toString('base64')];
    expect(loadConfig({ LOTPROOF_SECRETS_KEY_PREVIOUS: `${a},${b}` }).secretsKeysPrevious).toHaveLength(2);
    expect(() => loadConfig({ LOTPROOF_SECRETS_KEY_PREVIOUS: `${a},short` })).toThrow(/LOTPROOF_SECRETS_KEY_PREVIOUS/);
  });
});
