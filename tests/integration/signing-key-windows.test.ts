// Issue 15, keys: every signing key has a validity window [nbf, exp) published in the JWKS; rotation
// deletes the old private key and ends its window (plus a grace for running servers); a compromised
// key is revoked from a time. A seal counts only when its record's recordedAt lies in the window of
// the key named by its kid (clients/verifier/FORMAT.md, "Signing keys"; RFC 7519 §4.1.4 exp: "on or
// after which the JWT MUST NOT be accepted", §4.1.5 nbf: "before which the JWT MUST NOT be accepted").
import { execFile } from 'node:child_process';
import { createHash, createPrivateKey, createPublicKey, generateKeyPairSync, sign, verify } from 'node:crypto';
import { readdirSync, readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { promisify } from 'node:util';
import canonicalize from 'canonicalize';
import { Sequelize } from 'sequelize';
import request from 'supertest';
import { afterAll, describe, expect, it } from 'vitest';
import { KEY_FILE_CHECK_MS, publicKeyValidAt, ROTATION_GRACE_MS } from '../../server/verdicts/signing-keys';
import { buildTestApp, createTestKey, createTestOrganisation, testOwnerUrl, type TestApp } from '../support/app';
import { createProduct, lotBody } from '../support/lots';
import { useTempDirs } from '../support/temp-dirs';

const tempDir = useTempDirs('lotproof-signing-');
const apps: TestApp[] = [];
afterAll(async () => {
  for (const a of apps) await a.close();
});
const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));

function app(overrides: Parameters<typeof buildTestApp>[0]): TestApp {
  const t = buildTestApp(overrides);
  apps.push(t);
  return t;
}

/** `npm run cli -- …` as an operator runs it, as the tables' owner, on the test database. */
async function cli(dataDir: string, args: string[]): Promise<string> {
  const env: NodeJS.ProcessEnv = { ...process.env, LOTPROOF_DATA_DIR: dataDir, LOTPROOF_MIGRATION_DATABASE_URL: testOwnerUrl(), LOG_LEVEL: 'silent' };
  delete env.LOTPROOF_SIGNING_KEY;
  const { stdout } = await promisify(execFile)('npx', ['tsx', 'server/bin/cli.ts', ...args], { env, cwd: process.cwd(), timeout: 60_000 });
  return stdout;
}

async function packer(t: TestApp) {
  const org = await createTestOrganisation('Key window packer');
  const key = await createTestKey(org.id, ['lots:submit', 'verdicts:read', 'products:write', 'audit:read']);
  await createProduct(t.app, key);
  const auth = { Authorization: `Bearer ${key}` };
  let seed = 7100;
  const submit = async () => {
    const res = await request(t.app).post('/v1/lots').set(auth).send(lotBody('T-OATS-500', seed++));
    return res;
  };
  const doc = async (id: string) => JSON.parse((await request(t.app).get(`/v1/verdicts/${id}/export`).set(auth)).text);
  const check = async (d: unknown) => (await request(t.app).post('/v1/seals/verify').set(auth).send(d as object)).body;
  const walk = async () => (await request(t.app).get('/v1/ledger/verify').set(auth)).body;
  return { org, auth, submit, doc, check, walk };
}

type Jwk = { kid: string; x: string; nbf: number; exp?: number };
const jwksOf = async (t: TestApp): Promise<Jwk[]> => (await request(t.app).get('/.well-known/jwks.json')).body.keys;

describe('signing-key:rotate', () => {
  it('deletes the old private key (and retired copies), ends its window after a grace, and old seals stay valid', async () => {
    const dataDir = tempDir();
    const t = app({ dataDir });
    const p = await packer(t);
    const first = await p.submit();
    expect(first.status, JSON.stringify(first.body)).toBe(201);
    const oldPem = readFileSync(join(dataDir, 'signing-key.pem'), 'utf8');
    writeFileSync(join(dataDir, 'signing-key.earlier.retired.pem'), generateKeyPairSync('ed25519').privateKey.export({ format: 'pem', type: 'pkcs8' }), { mode: 0o600 });
    const oldDoc = await p.doc(first.body.id);

    const before = Date.now();
    const out = await cli(dataDir, ['signing-key:rotate']);
    const after = Date.now();
    expect(out).toMatch(/deleted .*signing-key\.earlier\.retired\.pem/);
    expect(out).toContain(`retired ${oldDoc.kid}`);

    // No copy of the old private key anywhere in the data folder, and no retired copies.
    const files = readdirSync(dataDir);
    expect(files.filter((f) => f.endsWith('.retired.pem'))).toEqual([]);
    for (const f of files) expect(readFileSync(join(dataDir, f), 'utf8')).not.toContain(oldPem.split('\n')[1]);

    // JWKS: the old key's exp is the rotation time plus the grace (whole seconds, rounded up); the new key's nbf is the rotation time (rounded down), no exp.
    const keys = await jwksOf(t);
    const oldKey = keys.find((k) => k.kid === oldDoc.kid)!;
    const newKid = createHash('sha256').update(`{"crv":"Ed25519","kty":"OKP","x":"${(createPublicKey(createPrivateKey(readFileSync(join(dataDir, 'signing-key.pem')))).export({ format: 'jwk' }) as { x: string }).x}"}`).digest('base64url');
    const newKey = keys.find((k) => k.kid === newKid)!;
    expect(newKey).toBeDefined();
    expect(newKey.exp).toBeUndefined();
    expect(oldKey.nbf * 1000).toBeLessThanOrEqual(Date.parse(oldDoc.record.recordedAt));
    expect(oldKey.exp! * 1000).toBeGreaterThanOrEqual(before + ROTATION_GRACE_MS);
    expect(oldKey.exp! * 1000).toBeLessThanOrEqual(after + ROTATION_GRACE_MS + 1000);
    expect(newKey.nbf * 1000).toBeGreaterThanOrEqual(before - 1000);
    expect(newKey.nbf * 1000).toBeLessThanOrEqual(after);

    // The old seal still verifies.
    expect((await p.check(oldDoc)).valid).toBe(true);

    // The running server notices the new key file and seals with the new key.
    await sleep(KEY_FILE_CHECK_MS + 200);
    const second = await p.submit();
    expect(second.status).toBe(201);
    expect((await p.doc(second.body.id)).kid).toBe(newKid);
    expect((await p.walk()).intact).toBe(true);

    // Someone who kept the old private key signs a record dated after its exp: the signature is
    // mathematically sound, and still the seal is refused.
    const forgedRecord = { ...oldDoc.record, recordedAt: new Date(oldKey.exp! * 1000 + 1000).toISOString() };
    const seal = createHash('sha256').update(canonicalize(forgedRecord)!).digest('hex');
    const signature = sign(null, Buffer.from(seal, 'hex'), createPrivateKey(oldPem)).toString('base64url');
    expect(verify(null, Buffer.from(seal, 'hex'), createPublicKey(createPrivateKey(oldPem)), Buffer.from(signature, 'base64url'))).toBe(true);
    const forged = await p.check({ ...oldDoc, record: forgedRecord, seal, signature });
    expect(forged.hashMatches).toBe(true);
    expect(forged.signatureValid).toBe(false);
    expect(forged.valid).toBe(false);
    expect(forged.findings.join(' ')).toMatch(/at or after/);
  }, 120_000);
});

describe('signing-key:revoke', () => {
  it('invalidates what the key sealed from the revocation time on, in the seal check and the chain walk; earlier seals stay valid', async () => {
    const dataDir = tempDir();
    const t = app({ dataDir });
    const p = await packer(t);
    const v1 = await p.submit();
    await sleep(1_100); // a whole second between them: revocation times are whole seconds
    const v2 = await p.submit();
    expect([v1.status, v2.status]).toEqual([201, 201]);
    const d1 = await p.doc(v1.body.id);
    const d2 = await p.doc(v2.body.id);
    expect(d2.kid).toBe(d1.kid);

    const out = await cli(dataDir, ['signing-key:revoke', d1.kid, '--from', d2.record.recordedAt, '--reason', 'test: key file leaked']);
    expect(out).toMatch(/rotated first/);
    expect(out).toContain(`revoked ${d1.kid}`);

    const c1 = await p.check(d1);
    const c2 = await p.check(d2);
    expect(c1.valid).toBe(true);
    expect(c2.valid).toBe(false);
    expect(c2.findings.join(' ')).toMatch(/revoked.*test: key file leaked/);
    const walk = await p.walk();
    expect(walk.intact).toBe(false);
    expect(walk.firstBreak.sequence).toBe(2);
    expect(walk.firstBreak.reason).toMatch(/revoked/);

    const revoked = (await jwksOf(t)).find((k) => k.kid === d1.kid)!;
    expect(revoked.exp).toBe(Math.floor(Date.parse(d2.record.recordedAt) / 1000));

    // The running server has moved to the new key: what it seals now verifies.
    await sleep(KEY_FILE_CHECK_MS + 200);
    const v3 = await p.submit();
    expect(v3.status).toBe(201);
    const c3 = await p.check(await p.doc(v3.body.id));
    expect(c3.valid).toBe(true);
  }, 120_000);

  it('a key given in LOTPROOF_SIGNING_KEY is published on first use, and once revoked the server refuses to seal with it', async () => {
    const pem = generateKeyPairSync('ed25519').privateKey.export({ format: 'pem', type: 'pkcs8' }) as string;
    const base = buildTestApp();
    await base.close();
    const started = Date.now();
    const t = app({ verdicts: { ...base.ctx.config.verdicts, signingKeyPem: pem } });
    const p = await packer(t);
    const v1 = await p.submit();
    expect(v1.status).toBe(201);
    const d1 = await p.doc(v1.body.id);
    const published = (await jwksOf(t)).find((k) => k.kid === d1.kid)!;
    expect(published.nbf * 1000).toBeGreaterThanOrEqual(Math.floor(started / 1000) * 1000);
    expect(published.exp).toBeUndefined();

    // From the second after the one d1 was sealed in (revocation times are whole seconds).
    const from = new Date(Date.parse(d1.record.recordedAt) + 1000).toISOString();
    await cli(tempDir(), ['signing-key:revoke', d1.kid, '--from', from, '--reason', 'test: leaked']);
    await sleep(KEY_FILE_CHECK_MS + 200);
    const refused = await p.submit();
    expect(refused.status).toBe(503);
    expect(refused.body.detail).toMatch(/signing key/);
    expect((await p.check(d1)).valid).toBe(true);
  }, 120_000);
});

describe('publicKeyValidAt', () => {
  it('answers the key inside [nbf, exp) and names why not outside it', async () => {
    const owner = new Sequelize(testOwnerUrl(), { dialect: 'postgres', logging: false });
    try {
      const { publicKey } = generateKeyPairSync('ed25519');
      const x = (publicKey.export({ format: 'jwk' }) as { x: string }).x;
      const kid = createHash('sha256').update(`{"crv":"Ed25519","kty":"OKP","x":"${x}"}`).digest('base64url');
      await owner.query(
        `INSERT INTO signing_keys (kid, public_jwk, nbf, exp, revoked_from, revocation_reason) VALUES ($1, $2, '2030-01-01T00:00:00Z', '2030-01-02T00:00:00Z', '2030-01-02T00:00:00Z', 'test')`,
        { bind: [kid, JSON.stringify({ kty: 'OKP', crv: 'Ed25519', x, kid })] },
      );
      const at = (iso: string) => publicKeyValidAt(owner, kid, new Date(iso));
      expect('key' in (await at('2030-01-01T00:00:00.000Z'))).toBe(true); // nbf itself is inside
      expect('key' in (await at('2030-01-01T23:59:59.999Z'))).toBe(true);
      expect(await at('2029-12-31T23:59:59.999Z')).toMatchObject({ reason: 'before-nbf' });
      expect(await at('2030-01-02T00:00:00.000Z')).toMatchObject({ reason: 'revoked' }); // exp itself is outside
      expect(await publicKeyValidAt(owner, `${kid}x`, new Date('2030-01-01T12:00:00Z'))).toMatchObject({ reason: 'unknown-kid' });
      await owner.query('UPDATE signing_keys SET revoked_from = NULL, revocation_reason = NULL WHERE kid = $1', { bind: [kid] });
      expect(await at('2030-01-02T00:00:00.000Z')).toMatchObject({ reason: 'at-or-after-exp' });
    } finally {
      await owner.close();
    }
  });
});
