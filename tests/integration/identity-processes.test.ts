// Several API processes share one database: a revoked key is refused on the very next request by
// every process, and rate-limit counters are shared. Also: the operator CLI bootstraps an install.
import { spawn, spawnSync, type ChildProcess } from 'node:child_process';
import { randomBytes, randomUUID } from 'node:crypto';
import { once } from 'node:events';
import { existsSync, readdirSync, readFileSync, statSync } from 'node:fs';
import { join } from 'node:path';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { initModels, WebhookEndpoint } from '../../server/models';
import { freePort } from '../../server/platform/embedded-postgres';
import { buildTestApp, createTestKey, createTestOrganisation, testConfig, testDatabaseUrl, testOwnerUrl, type TestApp } from '../support/app';
import { createTestUser, sessionCookieFor } from '../support/identity';
import { useTempDirs } from '../support/temp-dirs';
import { secretBox } from '../../server/core/secret-box';
import { newWebhookSecret, openWebhookSecret, webhookSecretContext } from '../../server/webhooks/endpoints';

const tempDir = useTempDirs('lotproof-rotate-');

let t: TestApp;
let second: ChildProcess;
let secondUrl: string;
const C = { 'X-Lotproof-Console': '1' };

async function startSecondProcess(): Promise<{ child: ChildProcess; url: string }> {
  const port = await freePort();
  // node itself with the tsx loader (no npx wrapper), so that SIGTERM reaches the server and it stops.
  const child = spawn(process.execPath, ['--import', 'tsx', 'server/bin/start.ts'], {
    env: {
      ...process.env,
      DATABASE_URL: testDatabaseUrl(),
      HOST: '127.0.0.1',
      PORT: String(port),
      NODE_ENV: 'test',
      LOG_LEVEL: 'silent',
      LOTPROOF_SEED_DEMO: 'false',
      LOTPROOF_SMTP_FAKE: 'false',
    },
    stdio: ['ignore', 'pipe', 'pipe'],
  });
  let out = '';
  child.stdout!.on('data', (d) => (out += String(d)));
  child.stderr!.on('data', (d) => (out += String(d)));
  const deadline = Date.now() + 60_000;
  while (!out.includes('Lotproof is running')) {
    if (child.exitCode !== null || Date.now() > deadline) throw new Error(`second process did not start:\n${out}`);
    await new Promise((r) => setTimeout(r, 100));
  }
  return { child, url: `http://127.0.0.1:${port}` };
}

beforeAll(async () => {
  t = buildTestApp();
  ({ child: second, url: secondUrl } = await startSecondProcess());
}, 90_000);
afterAll(async () => {
  if (second && second.exitCode === null) {
    second.kill('SIGTERM');
    await once(second, 'exit');
  }
  await t.close();
});

describe('two API processes on one database', () => {
  it('refuses a revoked key on the very next request, in this process and in the other one', async () => {
    const org = await createTestOrganisation('Two-process packer');
    const admin = await createTestUser(org.id, 'admin');
    const cookie = await sessionCookieFor(admin);
    const made = await request(t.app).post('/v1/api-keys').set('Cookie', cookie).set(C).send({ name: 'shared', scopes: ['verdicts:read'] });
    const { secret, key } = made.body;
    expect((await request(secondUrl).get('/v1/me').set('Authorization', `Bearer ${secret}`)).status).toBe(200);
    expect((await request(t.app).get('/v1/me').set('Authorization', `Bearer ${secret}`)).status).toBe(200);

    // revoke through the second process, then call both at once
    const revoked = await request(secondUrl).delete(`/v1/api-keys/${key.id}`).set('Cookie', cookie).set(C);
    expect(revoked.status).toBe(200);
    const here = await request(t.app).get('/v1/me').set('Authorization', `Bearer ${secret}`);
    const there = await request(secondUrl).get('/v1/me').set('Authorization', `Bearer ${secret}`);
    expect([here.status, there.status]).toEqual([401, 401]);
    expect(there.body.detail).toMatch(/revoked/);
  });

  it('ends a removed user\'s session in the other process too', async () => {
    const org = await createTestOrganisation('Two-process packer');
    const admin = await createTestUser(org.id, 'admin');
    const worker = await createTestUser(org.id, 'quality');
    const adminCookie = await sessionCookieFor(admin);
    const workerCookie = await sessionCookieFor(worker);
    expect((await request(secondUrl).get('/v1/session').set('Cookie', workerCookie)).status).toBe(200);
    expect((await request(t.app).delete(`/v1/users/${worker.id}`).set('Cookie', adminCookie).set(C)).status).toBe(204);
    expect((await request(secondUrl).get('/v1/session').set('Cookie', workerCookie)).status).toBe(401);
  });

  it('shares rate-limit counters between app instances through PostgreSQL', async () => {
    // a second instance in this process with its own connection pool and a low limit
    const low = { rateLimits: { ...testConfig().rateLimits, perKeyPerMinute: 4 } };
    const a = buildTestApp(low, t.ctx.db);
    const b = buildTestApp(low);
    try {
      const org = await createTestOrganisation('Shared-limit packer');
      const key = await createTestKey(org.id, ['verdicts:read']);
      const seen: number[] = [];
      for (const app of [a.app, b.app, a.app, b.app, a.app, b.app]) seen.push((await request(app).get('/v1/me').set('Authorization', `Bearer ${key}`)).status);
      expect(seen).toEqual([200, 200, 200, 200, 429, 429]);
    } finally {
      // b's pool is where the models point now; hand them back to t's before closing b
      initModels(t.ctx.db.sequelize);
      await b.close();
    }
  });
});

describe('operator CLI', () => {
  function cli(...args: string[]) {
    return cliWith({}, ...args);
  }
  function cliWith(env: Record<string, string>, ...args: string[]) {
    const r = spawnSync('npx', ['tsx', 'server/bin/cli.ts', ...args], {
      env: { ...process.env, DATABASE_URL: testDatabaseUrl(), LOTPROOF_MIGRATION_DATABASE_URL: testOwnerUrl(), NODE_ENV: 'test', LOTPROOF_PUBLIC_URL: 'http://console.test', ...env },
      encoding: 'utf8',
    });
    return { code: r.status, out: r.stdout, err: r.stderr };
  }

  it('creates an organisation with a first admin who can sign in, issues a key printed once, lists and revokes it', async () => {
    const slug = `cli-${Date.now()}`;
    const email = `${slug}@packer.example`;
    const made = cli('org:create', '--name', 'CLI packer', '--slug', slug, '--admin-email', email);
    expect(made.code, made.err).toBe(0);
    const password = /one-time password[^\n]*\n\s+(\S+)/.exec(made.out)?.[1];
    expect(password).toBeTruthy();
    const signIn = await request(t.app).post('/v1/session').send({ email, password });
    expect(signIn.status).toBe(201);
    expect(signIn.body.user.role).toBe('admin');

    const key = cli('key:create', '--org', slug, '--name', 'scripted gateway', '--scopes', 'lots:submit,verdicts:read');
    expect(key.code, key.err).toBe(0);
    const secret = /(lpk_\S+)\s*$/.exec(key.out.trim())?.[1]!;
    expect((await request(t.app).get('/v1/me').set('Authorization', `Bearer ${secret}`)).body.scopes).toEqual(['lots:submit', 'verdicts:read']);

    const list = cli('key:list', '--org', slug);
    expect(list.out).toContain('scripted gateway');
    expect(list.out).not.toContain(secret);
    const revoke = cli('key:revoke', '--org', slug, '--key', secret.split('_').slice(0, 2).join('_'));
    expect(revoke.code, revoke.err).toBe(0);
    expect((await request(t.app).get('/v1/me').set('Authorization', `Bearer ${secret}`)).status).toBe(401);

    const again = cli('org:create', '--name', 'CLI packer', '--slug', slug, '--admin-email', `other-${email}`);
    expect(again.code).not.toBe(0);
    const badScope = cli('key:create', '--org', slug, '--name', 'x', '--scopes', 'root');
    expect(badScope.code).toBe(2);
    expect(badScope.err).toMatch(/scopes/);
  }, 90_000);

  it('rotates the seal signing key: the old private half is deleted, both public keys are published with their windows', async () => {
    const dataDir = tempDir();
    const env = { LOTPROOF_DATA_DIR: dataDir };
    const first = cliWith(env, 'signing-key:rotate');
    expect(first.code, first.err).toBe(0);
    const [, oldKid, exp, newKid, nbf] = /retired (\S+): its private key is deleted; it signs nothing dated at or after (\S+) .*\nsigning key is now (\S+) \(valid from (\S+)\)/s.exec(first.out) ?? [];
    expect(oldKid, first.out).toMatch(/^[A-Za-z0-9_-]{43}$/);
    expect(newKid).toMatch(/^[A-Za-z0-9_-]{43}$/);
    expect(newKid).not.toBe(oldKid);
    // issue 15: no private half of a retired key stays on disk
    expect(readdirSync(dataDir).filter((f) => f.includes('retired'))).toEqual([]);
    expect(statSync(join(dataDir, 'signing-key.pem')).mode & 0o777).toBe(0o600);
    const keys = (await request(t.app).get('/.well-known/jwks.json')).body.keys as { kid: string; nbf?: number; exp?: number }[];
    const byKid = new Map(keys.map((k) => [k.kid, k]));
    expect(byKid.get(oldKid!)?.exp).toBe(Math.floor(new Date(exp!).getTime() / 1000));
    expect(byKid.get(newKid!)?.nbf).toBe(Math.floor(new Date(nbf!).getTime() / 1000));
    const fromEnv = cliWith({ ...env, LOTPROOF_SIGNING_KEY: readFileSync(join(dataDir, 'signing-key.pem'), 'utf8') }, 'signing-key:rotate');
    expect(fromEnv.code).toBe(2);
    expect(fromEnv.err).toMatch(/LOTPROOF_SIGNING_KEY/);
  }, 60_000);

  it('rotates the secrets key: stored webhook secrets are sealed again under the new key and still open', async () => {
    const dataDir = tempDir();
    const files = { dataDir, secretsKey: null, secretsKeysPrevious: [] };
    const org = await createTestOrganisation('Rotating secrets packer');
    const id = randomUUID();
    const secret = newWebhookSecret();
    await WebhookEndpoint.create({ id, organisationId: org.id, url: 'https://receiver.example/rotate', events: ['verdict.created'], description: '', enabled: true, secret: secretBox(files).seal(secret, webhookSecretContext(id)) });
    const rotated = cliWith({ LOTPROOF_DATA_DIR: dataDir }, 'secrets-key:rotate');
    expect(rotated.code, rotated.err).toBe(0);
    expect(rotated.out).toMatch(/[1-9]\d* stored secret\(s\) sealed again/);
    const box = secretBox(files);
    const stored = (await WebhookEndpoint.findByPk(id))!.secret;
    expect(box.isCurrent(stored, webhookSecretContext(id))).toBe(true);
    expect(openWebhookSecret(box, id, stored)).toBe(secret);
    const fromEnv = cliWith({ LOTPROOF_DATA_DIR: dataDir, LOTPROOF_SECRETS_KEY: randomBytes(32).toString('base64') }, 'secrets-key:rotate');
    expect(fromEnv.code).toBe(2);
    expect(fromEnv.err).toMatch(/LOTPROOF_SECRETS_KEY_PREVIOUS/);
  }, 60_000);

  it('prints an invitation link for the first admin with --invite', () => {
    const slug = `cli-inv-${Date.now()}`;
    const made = cli('org:create', '--name', 'Invited packer', '--slug', slug, '--admin-email', `${slug}@packer.example`, '--invite');
    expect(made.code, made.err).toBe(0);
    expect(made.out).toMatch(/http:\/\/console\.test\/accept-invite\?token=[A-Za-z0-9_-]{43}/);
  }, 60_000);
});
