// Identity end to end: invitations by e-mail through the local SMTP fake, sign-in and sessions,
// CSRF protection, password reset, users and roles, API keys, usage, rate limits, audit trail.
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Organisation, User } from '../../server/models';
import type { RunningSmtpFake } from '../../server/platform/smtp-fake';
import { recordLotUsage } from '../../server/metering/usage';
import { buildTestApp, createTestKey, createTestOrganisation, testConfig, type TestApp } from '../support/app';
import { createTestUser, linkIn, sessionCookieFor, startTestSmtp, TEST_PASSWORD } from '../support/identity';

let smtp: RunningSmtpFake;
let t: TestApp;
let org: Organisation;
let admin: User;
let adminCookie: string;
const C = { 'X-Lotproof-Console': '1' };

function cookieValue(res: request.Response): string {
  const raw = ([] as string[]).concat(res.headers['set-cookie'] ?? []).find((c) => c.startsWith('lotproof_session='));
  if (!raw) throw new Error('no session cookie set');
  return raw.split(';')[0]!;
}

async function waitForMail(to: string, subject: RegExp) {
  for (let i = 0; i < 50; i++) {
    const m = smtp.messages().find((x) => x.to.includes(to) && subject.test(x.subject));
    if (m) return m;
    await new Promise((r) => setTimeout(r, 50));
  }
  throw new Error(`no mail to ${to}`);
}

/** The same app with other settings, on the same database handle (models are bound to one pool) and mail server. */
function variant(overrides: Parameters<typeof buildTestApp>[0]): TestApp {
  return buildTestApp({ smtp: t.ctx.config.smtp, ...overrides }, t.ctx.db);
}

beforeAll(async () => {
  smtp = await startTestSmtp();
  t = buildTestApp({ smtp: { ...testConfig().smtp, host: smtp.host, port: smtp.port }, publicUrl: 'http://console.test' });
  org = await createTestOrganisation('Identity packer');
  admin = await createTestUser(org.id, 'admin');
  adminCookie = await sessionCookieFor(admin);
});
afterAll(async () => {
  await t.close();
  await smtp.stop();
});

describe('invitation → e-mail → accept → sign in', () => {
  it('works end to end through the local SMTP fake, and the new user gets the invited role', async () => {
    const email = `new-${Date.now()}@packer.example`;
    const inv = await request(t.app).post('/v1/invitations').set('Cookie', adminCookie).set(C).send({ email, role: 'quality' });
    expect(inv.status).toBe(201);
    expect(inv.body).toMatchObject({ email, role: 'quality', status: 'pending' });

    const mail = await waitForMail(email, /invited/);
    expect(mail.text).toContain('Identity packer');
    const link = linkIn(mail.text, '/accept-invite');
    expect(link.origin).toBe('http://console.test');
    const token = link.searchParams.get('token')!;
    // the development mailbox API shows the same message
    const box = await request(t.app).get('/v1/dev/mailbox');
    expect(box.status).toBe(200);
    expect(box.body.items.some((m: { id: string }) => m.id === mail.id)).toBe(true);

    const seen = await request(t.app).post('/v1/invitations/inspect').send({ token });
    expect(seen.status).toBe(200);
    expect(seen.body).toMatchObject({ email, role: 'quality', organisation: { name: 'Identity packer' } });

    const short = await request(t.app).post('/v1/invitations/accept').send({ token, password: 'short' });
    expect(short.status).toBe(400);
    expect(JSON.stringify(short.body.errors)).toContain('/body/password');

    const accepted = await request(t.app).post('/v1/invitations/accept').send({ token, password: 'my own long passphrase', name: 'Rowan' });
    expect(accepted.status).toBe(201);
    expect(accepted.body).toMatchObject({ email, role: 'quality', name: 'Rowan' });
    const again = await request(t.app).post('/v1/invitations/accept').send({ token, password: 'my own long passphrase' });
    expect(again.status).toBe(422);

    const signIn = await request(t.app).post('/v1/session').send({ email: email.toUpperCase(), password: 'my own long passphrase' });
    expect(signIn.status).toBe(201);
    const raw = ([] as string[]).concat(signIn.headers['set-cookie'] ?? []).join('\n');
    expect(raw).toMatch(/HttpOnly/);
    expect(raw).toMatch(/SameSite=Strict/);
    expect(raw).not.toMatch(/Secure/);
    const cookie = cookieValue(signIn);
    const me = await request(t.app).get('/v1/session').set('Cookie', cookie);
    expect(me.status).toBe(200);
    expect(me.body.user).toMatchObject({ email, role: 'quality' });
    const caller = await request(t.app).get('/v1/me').set('Cookie', cookie);
    expect(caller.body).toMatchObject({ kind: 'session', role: 'quality', email, userId: me.body.user.id });
    // An API key has no user, so no e-mail address.
    const keyCaller = await request(t.app).get('/v1/me').set('Authorization', `Bearer ${await createTestKey(org.id, ['verdicts:read'])}`);
    expect(keyCaller.status).toBe(200);
    expect(keyCaller.body.kind).toBe('api-key');
    expect(keyCaller.body).not.toHaveProperty('email');
    expect(keyCaller.body).not.toHaveProperty('userId');

    expect((await request(t.app).delete('/v1/session').set('Cookie', cookie).set(C)).status).toBe(204);
    expect((await request(t.app).get('/v1/session').set('Cookie', cookie)).status).toBe(401);
  });

  it('refuses to invite an address that has an account (409) and a revoked invitation link (422)', async () => {
    const dup = await request(t.app).post('/v1/invitations').set('Cookie', adminCookie).set(C).send({ email: admin.email, role: 'auditor' });
    expect(dup.status).toBe(409);
    const email = `revoked-${Date.now()}@packer.example`;
    const inv = await request(t.app).post('/v1/invitations').set('Cookie', adminCookie).set(C).send({ email, role: 'auditor' });
    const token = linkIn((await waitForMail(email, /invited/)).text, '/accept-invite').searchParams.get('token')!;
    const revoked = await request(t.app).delete(`/v1/invitations/${inv.body.id}`).set('Cookie', adminCookie).set(C);
    expect(revoked.body.status).toBe('revoked');
    const res = await request(t.app).post('/v1/invitations/accept').send({ token, password: 'my own long passphrase' });
    expect(res.status).toBe(422);
    const list = await request(t.app).get('/v1/invitations').set('Cookie', adminCookie);
    expect(list.body.items.find((i: { id: string }) => i.id === inv.body.id).status).toBe('revoked');
  });

  it('replays an invitation retried with the same Idempotency-Key, without a second e-mail', async () => {
    const email = `retried-${Date.now()}@packer.example`;
    const send = (body: object) => request(t.app).post('/v1/invitations').set('Cookie', adminCookie).set(C).set('Idempotency-Key', `invite-${email}`).send(body);
    const first = await send({ email, role: 'quality' });
    expect(first.status).toBe(201);
    await waitForMail(email, /invited/);
    const again = await send({ email, role: 'quality' });
    expect(again.status).toBe(201);
    expect(again.text).toBe(first.text);
    expect(again.headers['idempotent-replayed']).toBe('true');
    await new Promise((r) => setTimeout(r, 300));
    expect(smtp.messages().filter((m) => m.to.includes(email))).toHaveLength(1);
    const other = await send({ email, role: 'auditor' });
    expect(other.status).toBe(422);
  });
});

describe('sessions', () => {
  it('answers a wrong password with 401 and records the failure in the audit trail, with the address', async () => {
    const res = await request(t.app).post('/v1/session').send({ email: admin.email, password: 'not the password at all' });
    expect(res.status).toBe(401);
    expect(res.body.detail).not.toContain('not the password');
    const unknown = await request(t.app).post('/v1/session').send({ email: 'nobody@packer.example', password: 'whatever it may be' });
    expect(unknown.status).toBe(401);
    expect(unknown.body.detail).toBe(res.body.detail);
    const trail = await request(t.app).get('/v1/audit-events?action=user.sign-in-failed').set('Cookie', adminCookie);
    expect(trail.status).toBe(200);
    expect(trail.body.items[0]).toMatchObject({ action: 'user.sign-in-failed', target: { kind: 'user', id: admin.id } });
    expect(trail.body.items[0].ip).toBeTruthy();
  });

  it('refuses a session-authenticated change without X-Lotproof-Console (CSRF), but not a read', async () => {
    const post = await request(t.app).post('/v1/invitations').set('Cookie', adminCookie).send({ email: 'csrf@packer.example', role: 'quality' });
    expect(post.status).toBe(403);
    expect(post.body.detail).toMatch(/X-Lotproof-Console/);
    const del = await request(t.app).delete('/v1/session').set('Cookie', adminCookie);
    expect(del.status).toBe(403);
    expect((await request(t.app).get('/v1/session').set('Cookie', adminCookie)).status).toBe(200);
  });

  it('treats an unknown or expired session cookie as no credential (401)', async () => {
    const res = await request(t.app).get('/v1/session').set('Cookie', 'lotproof_session=' + 'x'.repeat(43));
    expect(res.status).toBe(401);
    const expired = await sessionCookieFor(admin, 0);
    expect((await request(t.app).get('/v1/session').set('Cookie', expired)).status).toBe(401);
  });

  it('ends a session left unused for longer than the idle timeout, and keeps one in use alive', async () => {
    const { Session } = await import('../../server/models');
    const idle = await sessionCookieFor(admin, 12);
    const busy = await sessionCookieFor(admin, 12);
    const token = (c: string) => c.slice('lotproof_session='.length);
    const { hashToken } = await import('../../server/identity/credentials');
    const minutesAgo = (m: number) => new Date(Date.now() - m * 60_000);
    // 31 minutes without a request (the default idle timeout is 30): ended
    await Session.update({ lastSeenAt: minutesAgo(31) }, { where: { tokenHash: hashToken(token(idle)) } });
    expect((await request(t.app).get('/v1/session').set('Cookie', idle)).status).toBe(401);
    // 29 minutes: still alive, and the request marks it as seen now, so it lives on
    await Session.update({ lastSeenAt: minutesAgo(29) }, { where: { tokenHash: hashToken(token(busy)) } });
    expect((await request(t.app).get('/v1/session').set('Cookie', busy)).status).toBe(200);
    const seen = await Session.findOne({ where: { tokenHash: hashToken(token(busy)) } });
    expect(Date.now() - seen!.lastSeenAt.getTime()).toBeLessThan(60_000);
    // a shorter idle timeout from the configuration applies
    const strict = variant({ sessions: { ...t.ctx.config.sessions, idleMinutes: 5 } });
    await Session.update({ lastSeenAt: minutesAgo(6) }, { where: { tokenHash: hashToken(token(busy)) } });
    expect((await request(strict.app).get('/v1/session').set('Cookie', busy)).status).toBe(401);
  });

  it('sets a Secure cookie when the public URL is https', async () => {
    const https = variant({ publicUrl: 'https://lotproof.example' });
    const user = await createTestUser(org.id, 'auditor');
    const res = await request(https.app).post('/v1/session').send({ email: user.email, password: TEST_PASSWORD });
    expect(res.status).toBe(201);
    expect(([] as string[]).concat(res.headers['set-cookie'] ?? []).join('')).toMatch(/; Secure/);
  });

  it('limits failed sign-ins per account with a 429 and Retry-After, even for the right password then', async () => {
    const strict = variant({ rateLimits: { ...testConfig().rateLimits, signInFailuresPerAccount: 3 } });
    const user = await createTestUser(org.id, 'quality');
    for (let i = 0; i < 3; i++) {
      expect((await request(strict.app).post('/v1/session').send({ email: user.email, password: 'wrong wrong wrong' })).status).toBe(401);
    }
    const blocked = await request(strict.app).post('/v1/session').send({ email: user.email, password: TEST_PASSWORD });
    expect(blocked.status).toBe(429);
    expect(blocked.headers['content-type']).toMatch(/problem\+json/);
    expect(Number(blocked.headers['retry-after'])).toBeGreaterThan(0);
  });

  it('limits failed sign-ins per IP across accounts', async () => {
    const strict = variant({ rateLimits: { ...testConfig().rateLimits, signInFailuresPerIp: 2 } });
    // a distinct client address for this test only (the app trusts X-Forwarded-For from loopback)
    const from = '198.51.100.77';
    await request(strict.app).post('/v1/session').set('X-Forwarded-For', from).send({ email: 'a@packer.example', password: 'wrong wrong wrong' });
    await request(strict.app).post('/v1/session').set('X-Forwarded-For', from).send({ email: 'b@packer.example', password: 'wrong wrong wrong' });
    const third = await request(strict.app).post('/v1/session').set('X-Forwarded-For', from).send({ email: admin.email, password: TEST_PASSWORD });
    expect(third.status).toBe(429);
    const elsewhere = await request(strict.app).post('/v1/session').set('X-Forwarded-For', '198.51.100.78').send({ email: admin.email, password: TEST_PASSWORD });
    expect(elsewhere.status).toBe(201);
  });
});

describe('password reset', () => {
  it('sends a one-time link, sets the new password, and ends the old sessions', async () => {
    const user = await createTestUser(org.id, 'quality');
    const oldCookie = await sessionCookieFor(user);
    expect((await request(t.app).post('/v1/password-resets').send({ email: user.email })).status).toBe(202);
    const link = linkIn((await waitForMail(user.email, /Reset/)).text, '/reset-password');
    const token = link.searchParams.get('token')!;
    const done = await request(t.app).post('/v1/password-resets/complete').send({ token, password: 'a brand new passphrase' });
    expect(done.status).toBe(204);
    expect((await request(t.app).get('/v1/session').set('Cookie', oldCookie)).status).toBe(401);
    expect((await request(t.app).post('/v1/session').send({ email: user.email, password: TEST_PASSWORD })).status).toBe(401);
    expect((await request(t.app).post('/v1/session').send({ email: user.email, password: 'a brand new passphrase' })).status).toBe(201);
    const reuse = await request(t.app).post('/v1/password-resets/complete').send({ token, password: 'yet another passphrase' });
    expect(reuse.status).toBe(422);
  });

  it('sends at most 5 reset links per account per hour, still answering 202', async () => {
    const user = await createTestUser(org.id, 'auditor');
    for (let i = 0; i < 7; i++) expect((await request(t.app).post('/v1/password-resets').send({ email: user.email })).status).toBe(202);
    // the links go out after the answer (its timing must not tell whether the account exists): wait for them
    const sent = () => smtp.messages().filter((m) => m.to.includes(user.email)).length;
    for (let i = 0; i < 100 && sent() < 5; i++) await new Promise((r) => setTimeout(r, 50));
    await new Promise((r) => setTimeout(r, 300));
    expect(sent()).toBe(5);
  });

  it('answers 202 for an unknown address and sends nothing', async () => {
    const before = smtp.messages().length;
    expect((await request(t.app).post('/v1/password-resets').send({ email: 'ghost@packer.example' })).status).toBe(202);
    await new Promise((r) => setTimeout(r, 200));
    expect(smtp.messages().length).toBe(before);
  });
});

describe('users and roles', () => {
  it('lists users, changes a role, and removing a user ends their session at once', async () => {
    const user = await createTestUser(org.id, 'quality');
    const cookie = await sessionCookieFor(user);
    const list = await request(t.app).get('/v1/users').set('Cookie', adminCookie);
    expect(list.body.items.map((u: { id: string }) => u.id)).toContain(user.id);
    const changed = await request(t.app).patch(`/v1/users/${user.id}`).set('Cookie', adminCookie).set(C).send({ role: 'auditor' });
    expect(changed.status).toBe(200);
    expect(changed.body.role).toBe('auditor');
    // the role applies to the session already open
    expect((await request(t.app).get('/v1/audit-events').set('Cookie', cookie)).status).toBe(200);
    expect((await request(t.app).delete(`/v1/users/${user.id}`).set('Cookie', adminCookie).set(C)).status).toBe(204);
    expect((await request(t.app).get('/v1/session').set('Cookie', cookie)).status).toBe(401);
    expect((await request(t.app).delete(`/v1/users/${user.id}`).set('Cookie', adminCookie).set(C)).status).toBe(404);
  });

  it('keeps the last admin (409)', async () => {
    const lone = await createTestOrganisation('Lone admin packer');
    const a = await createTestUser(lone.id, 'admin');
    const cookie = await sessionCookieFor(a);
    const res = await request(t.app).patch(`/v1/users/${a.id}`).set('Cookie', cookie).set(C).send({ role: 'quality' });
    expect(res.status).toBe(409);
    expect((await request(t.app).delete(`/v1/users/${a.id}`).set('Cookie', cookie).set(C)).status).toBe(409);
  });

  it('names the bad field when a role is not one of ours', async () => {
    const res = await request(t.app).patch(`/v1/users/${admin.id}`).set('Cookie', adminCookie).set(C).send({ role: 'owner' });
    expect(res.status).toBe(400);
    expect(JSON.stringify(res.body.errors)).toContain('/body/role');
  });
});

describe('API keys', () => {
  it('shows the secret once, lists keys without it, and a revoked key is refused on the next request', async () => {
    const created = await request(t.app).post('/v1/api-keys').set('Cookie', adminCookie).set(C).send({ name: 'Line 3 gateway', scopes: ['verdicts:read'] });
    expect(created.status).toBe(201);
    expect(created.headers['cache-control']).toBe('no-store');
    const { secret, key } = created.body;
    expect(secret.startsWith(key.prefix + '_')).toBe(true);
    expect((await request(t.app).get('/v1/me').set('Authorization', `Bearer ${secret}`)).status).toBe(200);
    const list = await request(t.app).get('/v1/api-keys').set('Cookie', adminCookie);
    expect(JSON.stringify(list.body)).not.toContain(secret);
    const listed = list.body.items.find((k: { id: string }) => k.id === key.id);
    expect(listed).toMatchObject({ name: 'Line 3 gateway', scopes: ['verdicts:read'], status: 'active', revokedAt: null });
    expect(listed.lastUsedAt).not.toBeNull();

    const revoked = await request(t.app).delete(`/v1/api-keys/${key.id}`).set('Cookie', adminCookie).set(C);
    expect(revoked.body.status).toBe('revoked');
    const next = await request(t.app).get('/v1/me').set('Authorization', `Bearer ${secret}`);
    expect(next.status).toBe(401);
    expect(next.body.detail).toMatch(/revoked/);
  });

  it('lets a keys:manage key manage keys, and refuses an expiry in the past naming the field', async () => {
    const manager = await createTestKey(org.id, ['keys:manage', 'lots:submit']);
    const made = await request(t.app).post('/v1/api-keys').set('Authorization', `Bearer ${manager}`).send({ name: 'scripted', scopes: ['lots:submit'], expiresAt: '2099-01-01T00:00:00Z' });
    expect(made.status).toBe(201);
    expect(made.body.key.expiresAt).toBe('2099-01-01T00:00:00.000Z');
    const past = await request(t.app).post('/v1/api-keys').set('Authorization', `Bearer ${manager}`).send({ name: 'old', scopes: ['lots:submit'], expiresAt: '2001-01-01T00:00:00Z' });
    expect(past.status).toBe(400);
    expect(past.body.errors[0].pointer).toBe('/body/expiresAt');
    const badScope = await request(t.app).post('/v1/api-keys').set('Authorization', `Bearer ${manager}`).send({ name: 'x', scopes: ['everything'] });
    expect(badScope.status).toBe(400);
    expect(JSON.stringify(badScope.body.errors)).toContain('/body/scopes/0');
  });
});

describe('usage', () => {
  it('counts requests, lots and measurements per key per day, filtered by key and date range', async () => {
    const u = await createTestOrganisation('Usage packer');
    const key = await createTestKey(u.id, ['verdicts:read', 'keys:manage']);
    const other = await createTestKey(u.id, ['verdicts:read']);
    for (let i = 0; i < 3; i++) await request(t.app).get('/v1/me').set('Authorization', `Bearer ${key}`);
    await request(t.app).get('/v1/me').set('Authorization', `Bearer ${other}`);
    const me = await request(t.app).get('/v1/me').set('Authorization', `Bearer ${key}`);
    await recordLotUsage({ organisationId: u.id, kind: 'api-key', scopes: ['lots:submit'], keyId: me.body.keyId }, 125);
    await recordLotUsage({ organisationId: u.id, kind: 'api-key', scopes: ['lots:submit'], keyId: me.body.keyId }, 40);

    const res = await request(t.app).get(`/v1/usage?keyId=${me.body.keyId}`).set('Authorization', `Bearer ${key}`);
    expect(res.status).toBe(200);
    expect(res.body.days).toHaveLength(1);
    // 4 calls to /v1/me, plus this usage request itself
    expect(res.body.days[0]).toMatchObject({ keyId: me.body.keyId, requests: 5, lots: 2, measurements: 165 });
    const all = await request(t.app).get('/v1/usage').set('Authorization', `Bearer ${key}`);
    expect(all.body.days).toHaveLength(2);
    expect(all.body.totals.requests).toBe(7);
    const past = await request(t.app).get('/v1/usage?from=2020-01-01&to=2020-01-31').set('Authorization', `Bearer ${key}`);
    expect(past.body.days).toHaveLength(0);
    const backwards = await request(t.app).get('/v1/usage?from=2020-02-01&to=2020-01-01').set('Authorization', `Bearer ${key}`);
    expect(backwards.status).toBe(400);
    const notADate = await request(t.app).get('/v1/usage?from=yesterday').set('Authorization', `Bearer ${key}`);
    expect(notADate.status).toBe(400);
  });
});

describe('rate limits', () => {
  it('sends RateLimit headers on API responses and a 429 problem with Retry-After past the per-key limit', async () => {
    const low = variant({ rateLimits: { ...testConfig().rateLimits, perKeyPerMinute: 3 } });
    const key = await createTestKey(org.id, ['verdicts:read']);
    const first = await request(low.app).get('/v1/me').set('Authorization', `Bearer ${key}`);
    expect(first.headers['ratelimit-limit']).toBe('3');
    expect(first.headers['ratelimit-remaining']).toBe('2');
    expect(Number(first.headers['ratelimit-reset'])).toBeGreaterThan(0);
    await request(low.app).get('/v1/me').set('Authorization', `Bearer ${key}`);
    await request(low.app).get('/v1/me').set('Authorization', `Bearer ${key}`);
    const over = await request(low.app).get('/v1/me').set('Authorization', `Bearer ${key}`);
    expect(over.status).toBe(429);
    expect(over.headers['content-type']).toMatch(/problem\+json/);
    expect(over.body.type).toBe('https://lotproof.dev/problems/rate-limited');
    expect(Number(over.headers['retry-after'])).toBeGreaterThan(0);
    expect(over.headers['ratelimit-remaining']).toBe('0');
    // another key of the same organisation is not affected
    const fresh = await createTestKey(org.id, ['verdicts:read']);
    expect((await request(low.app).get('/v1/me').set('Authorization', `Bearer ${fresh}`)).status).toBe(200);
  });

  it('limits the organisation as a whole, across its keys', async () => {
    const low = variant({ rateLimits: { ...testConfig().rateLimits, perOrganisationPerMinute: 4 } });
    const o = await createTestOrganisation('Busy packer');
    const keys = [await createTestKey(o.id, ['verdicts:read']), await createTestKey(o.id, ['verdicts:read'])];
    const statuses: number[] = [];
    for (let i = 0; i < 6; i++) statuses.push((await request(low.app).get('/v1/me').set('Authorization', `Bearer ${keys[i % 2]}`)).status);
    expect(statuses).toEqual([200, 200, 200, 200, 429, 429]);
  });

  it('limits requests without a credential per IP', async () => {
    const low = variant({ rateLimits: { ...testConfig().rateLimits, perIpPerMinute: 2 } });
    const from = '203.0.113.9';
    const s = [];
    for (let i = 0; i < 3; i++) s.push((await request(low.app).get('/v1/me').set('X-Forwarded-For', from)).status);
    expect(s).toEqual([401, 401, 429]);
  });
});

describe('audit trail', () => {
  it('records key and user changes with who and from where, readable by admins and auditors, paged by cursor', async () => {
    const a = await createTestOrganisation('Audited packer');
    const boss = await createTestUser(a.id, 'admin');
    const bossCookie = await sessionCookieFor(boss);
    const made = await request(t.app).post('/v1/api-keys').set('Cookie', bossCookie).set(C).send({ name: 'audited', scopes: ['lots:submit'] });
    await request(t.app).delete(`/v1/api-keys/${made.body.key.id}`).set('Cookie', bossCookie).set(C);
    const worker = await createTestUser(a.id, 'quality');
    await request(t.app).patch(`/v1/users/${worker.id}`).set('Cookie', bossCookie).set(C).send({ role: 'auditor' });
    const auditorCookie = await sessionCookieFor(worker);

    const page1 = await request(t.app).get('/v1/audit-events?limit=2').set('Cookie', auditorCookie);
    expect(page1.status).toBe(200);
    expect(page1.body.items.map((e: { action: string }) => e.action)).toEqual(['user.role-changed', 'key.revoked']);
    expect(page1.body.items[0].actor).toMatchObject({ kind: 'user', id: boss.id, label: boss.email });
    const page2 = await request(t.app).get(`/v1/audit-events?limit=2&cursor=${page1.body.nextCursor}`).set('Cookie', auditorCookie);
    expect(page2.body.items.map((e: { action: string }) => e.action)).toEqual(['key.created']);
    expect(page2.body.nextCursor).toBeNull();
    const bad = await request(t.app).get('/v1/audit-events?cursor=bm9wZQ').set('Cookie', auditorCookie);
    expect(bad.status).toBe(400);
    const quality = await sessionCookieFor(await createTestUser(a.id, 'quality'));
    expect((await request(t.app).get('/v1/audit-events').set('Cookie', quality)).status).toBe(403);
  });
});

describe('development mailbox', () => {
  it('is 404 in production', async () => {
    const prod = variant({ development: false });
    const res = await request(prod.app).get('/v1/dev/mailbox');
    expect(res.status).toBe(404);
  });
});
