// The console's seal check refuses a key outside its validity window (clients/verifier/FORMAT.md,
// "Signing keys": a seal counts only when its record's recordedAt lies in [nbf, exp) of its key;
// RFC 7519 §4.1.4 exp "on or after which … MUST NOT be accepted", §4.1.5 nbf "before which … MUST NOT
// be accepted"). The signature is made here with node:crypto, an implementation independent of WebCrypto.
import { generateKeyPairSync, sign } from 'node:crypto';
import { describe, expect, it } from 'vitest';
import { checkSignature, type Jwk } from '../../console/src/lib/seal';

const { privateKey, publicKey } = generateKeyPairSync('ed25519');
const x = (publicKey.export({ format: 'jwk' }) as { x: string }).x;
const seal = 'ab'.repeat(32);
const signature = sign(null, Buffer.from(seal, 'hex'), privateKey).toString('base64url');
const nbf = Date.parse('2030-01-01T00:00:00Z') / 1000;
const exp = Date.parse('2030-01-02T00:00:00Z') / 1000;
const jwks = (extra: Partial<Jwk>) => ({ keys: [{ kty: 'OKP', crv: 'Ed25519', x, kid: 'k1', ...extra }] });

describe('checkSignature with the key window', () => {
  it('passes inside [nbf, exp), nbf itself included', async () => {
    expect((await checkSignature(seal, signature, 'k1', jwks({ nbf, exp }), '2030-01-01T00:00:00.000Z')).state).toBe('pass');
    expect((await checkSignature(seal, signature, 'k1', jwks({ nbf }), '2031-06-01T00:00:00.000Z')).state).toBe('pass');
  });

  it('fails before nbf, at exp and after it, and without a recordedAt, though the signature itself is sound', async () => {
    const before = await checkSignature(seal, signature, 'k1', jwks({ nbf, exp }), '2029-12-31T23:59:59.999Z');
    expect(before).toMatchObject({ state: 'fail' });
    expect(before.detail).toMatch(/before 2030-01-01T00:00:00.000Z/);
    const atExp = await checkSignature(seal, signature, 'k1', jwks({ nbf, exp }), '2030-01-02T00:00:00.000Z');
    expect(atExp).toMatchObject({ state: 'fail' });
    expect(atExp.detail).toMatch(/at or after 2030-01-02T00:00:00.000Z/);
    expect((await checkSignature(seal, signature, 'k1', jwks({ nbf, exp }), undefined)).state).toBe('fail');
    expect((await checkSignature(seal, signature, 'k1', jwks({}), '2030-01-01T12:00:00.000Z')).state).toBe('fail');
  });
});
