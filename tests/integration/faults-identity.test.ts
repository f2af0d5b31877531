// Faults of the identity area found from outside (issue 14), each reproduced before it was fixed:
// sign-in limits raced by concurrent wrong passwords (4), keys minted by keys outliving their parent
// (5), invitations of a removed or demoted admin restoring admin access (6), and the smaller ones of
// 16: the last-admin check raced, an invitation's 409 telling one tenant about another's accounts,
// the session cookie without the __Host- prefix over https.
import { Op } from 'sequelize';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { AuditEvent, Invitation, User, type Organisation } from '../../server/models';
import type { RunningSmtpFake } from '../../server/platform/smtp-fake';
import { buildTestApp, createTestKey, createTestOrganisation, listenOnLoopback, testConfig, type TestApp } from '../support/app';
import { createTestUser, linkIn, sessionCookieFor, startTestSmtp, TEST_PASSWORD } from '../support/identity';

let smtp: RunningSmtpFake;
let t: TestApp;
const C = { 'X-Lotproof-Console': '1' };

beforeAll(async () => {
  smtp = await startTestSmtp();
  t = buildTestApp({ smtp: { ...testConfig().smtp, host: smtp.host, port: smtp.port }, publicUrl: 'http://console.test' });
});
afterAll(async () => {
  await t.close();
  await smtp.stop();
});

/** The same app with other settings, on the same database handle and mail server. */
function variant(overrides: Parameters<typeof buildTestApp>[0]): TestApp {
  return buildTestApp({ smtp: t.ctx.config.smtp, ...overrides }, t.ctx.db);
}

async function waitForMail(to: string, subject: RegExp) {
  for (let i = 0; i < 100; i++) {
    const m = smtp.messages().find((x) => x.to.includes(to) && subject.test(x.subject));
    if (m) return m;
    await new Promise((r) => setTimeout(r, 50));
  }
  throw new Error(`no mail to ${to}`);
}

async function invite(cookie: string, email: string, role: 'admin' | 'quality' | 'auditor'): Promise<{ id: string; token: string }> {
  const res = await request(t.app).post('/v1/invitations').set('Cookie', cookie).set(C).send({ email, role });
  expect(res.status).toBe(201);
  const token = linkIn((await waitForMail(email, /invited/)).text, '/accept-invite').searchParams.get('token')!;
  return { id: res.body.id, token };
}

const unique = (what: string) => `${what}-${Math.random().toString(36).slice(2, 10)}@packer.example`;

describe('sign-in failure limits (issue 14, item 4)', () => {
  it('checks no more passwords than the limit when 60 wrong passwords arrive at once', async () => {
    const limited = variant({ rateLimits: { ...testConfig().rateLimits, signInFailuresPerAccount: 10, signInFailuresPerIp: 100_000 } });
    const o = await createTestOrganisation('Raced sign-in packer');
    const user = await createTestUser(o.id, 'quality');
    const server = await listenOnLoopback(limited.app);
    try {
      const statuses = await Promise.all(
        Array.from({ length: 60 }, () =>
          fetch(`${server.url}/v1/session`, {
            method: 'POST',
            headers: { 'content-type': 'application/json' },
            body: JSON.stringify({ email: user.email, password: 'a wrong guess of a password' }),
          }).then((r) => r.status),
        ),
      );
      const checked = statuses.filter((s) => s === 401).length;
      expect(statuses.every((s) => s === 401 || s === 429)).toBe(true);
      expect(checked).toBeLessThanOrEqual(10);
      expect(checked).toBeGreaterThan(0);
      // every password that was checked and failed is in the audit trail; no more
      const failures = await AuditEvent.count({ where: { organisationId: o.id, action: 'user.sign-in-failed' } });
      expect(failures).toBe(checked);
      // and the right password is refused too while the account is locked
      const right = await fetch(`${server.url}/v1/session`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify({ email: user.email, password: TEST_PASSWORD }) });
      expect(right.status).toBe(429);
    } finally {
      await server.close();
    }
  });

  it('still checks exactly the limit when the wrong passwords come one by one', async () => {
    const limited = variant({ rateLimits: { ...testConfig().rateLimits, signInFailuresPerAccount: 4, signInFailuresPerIp: 100_000 } });
    const o = await createTestOrganisation('Sequential sign-in packer');
    const user = await createTestUser(o.id, 'quality');
    const statuses: number[] = [];
    for (let i = 0; i < 6; i++) statuses.push((await request(limited.app).post('/v1/session').send({ email: user.email, password: 'a wrong guess of a password' })).status);
    expect(statuses).toEqual([401, 401, 401, 401, 429, 429]);
  });
});

describe('keys minted by keys (issue 14, item 5)', () => {
  let org: Organisation;
  let adminCookie: string;
  beforeAll(async () => {
    org = await createTestOrganisation('Key family packer');
    adminCookie = await sessionCookieFor(await createTestUser(org.id, 'admin'));
  });
  const mint = (bearer: string, body: object) => request(t.app).post('/v1/api-keys').set('Authorization', `Bearer ${bearer}`).send(body);
  const me = (bearer: string) => request(t.app).get('/v1/me').set('Authorization', `Bearer ${bearer}`);

  it('gives a key made by a key no later expiry than its parent, and refuses a later one naming the field', async () => {
    const parentExpiry = new Date(Date.now() + 3600_000);
    parentExpiry.setMilliseconds(0);
    const parent = await createTestKey(org.id, ['keys:manage', 'verdicts:read'], { expiresAt: parentExpiry });
    const forever = await mint(parent, { name: 'asks for no expiry', scopes: ['verdicts:read'] });
    expect(forever.status).toBe(201);
    expect(forever.body.key.expiresAt).toBe(parentExpiry.toISOString());
    const later = await mint(parent, { name: 'asks for more', scopes: ['verdicts:read'], expiresAt: '2099-01-01T00:00:00Z' });
    expect(later.status).toBe(422);
    expect(later.body.errors[0].pointer).toBe('/body/expiresAt');
    const sooner = new Date(Date.now() + 600_000).toISOString();
    const ok = await mint(parent, { name: 'asks for less', scopes: ['verdicts:read'], expiresAt: sooner });
    expect(ok.status).toBe(201);
    expect(new Date(ok.body.key.expiresAt).getTime()).toBe(new Date(sooner).getTime());
    // an admin's key has no parent: no expiry unless asked
    const free = await request(t.app).post('/v1/api-keys').set('Cookie', adminCookie).set(C).send({ name: 'console key', scopes: ['verdicts:read'] });
    expect(free.body.key.expiresAt).toBeNull();
  });

  it('ends the children and grandchildren of a revoked key, and says so in the audit trail', async () => {
    const parent = await createTestKey(org.id, ['keys:manage', 'verdicts:read']);
    const parentId = (await me(parent)).body.keyId as string;
    const child = await mint(parent, { name: 'child', scopes: ['keys:manage', 'verdicts:read'] });
    expect(child.status).toBe(201);
    const grandchild = await mint(child.body.secret, { name: 'grandchild', scopes: ['verdicts:read'] });
    expect(grandchild.status).toBe(201);
    expect((await me(grandchild.body.secret)).status).toBe(200);

    const revoked = await request(t.app).delete(`/v1/api-keys/${parentId}`).set('Cookie', adminCookie).set(C);
    expect(revoked.status).toBe(200);
    expect((await me(parent)).status).toBe(401);
    expect((await me(child.body.secret)).status).toBe(401);
    expect((await me(grandchild.body.secret)).status).toBe(401);
    const listed = await request(t.app).get('/v1/api-keys').set('Cookie', adminCookie);
    const status = (id: string) => listed.body.items.find((k: { id: string }) => k.id === id).status;
    expect([status(child.body.key.id), status(grandchild.body.key.id)]).toEqual(['revoked', 'revoked']);
    const trail = await AuditEvent.findAll({ where: { organisationId: org.id, action: 'key.revoked' } });
    const byTarget = new Map(trail.map((e) => [e.targetId, e]));
    expect(byTarget.get(child.body.key.id)?.details).toMatchObject({ reason: 'parent-revoked', parentKeyId: parentId });
    expect(byTarget.get(grandchild.body.key.id)?.details).toMatchObject({ reason: 'parent-revoked', parentKeyId: child.body.key.id });
  });

  it('leaves no live child when the parent is revoked while it mints one', async () => {
    for (let round = 0; round < 8; round++) {
      const parent = await createTestKey(org.id, ['keys:manage', 'verdicts:read']);
      const parentId = (await me(parent)).body.keyId as string;
      const [made] = await Promise.all([
        mint(parent, { name: `raced ${round}`, scopes: ['verdicts:read'] }),
        request(t.app).delete(`/v1/api-keys/${parentId}`).set('Cookie', adminCookie).set(C),
      ]);
      if (made.status === 201) expect((await me(made.body.secret)).status).toBe(401);
    }
  });
});

describe('invitations of an admin who is removed or demoted (issue 14, item 6)', () => {
  async function adminsOf(name: string) {
    const o = await createTestOrganisation(name);
    const a = await createTestUser(o.id, 'admin');
    const b = await createTestUser(o.id, 'admin');
    return { o, a, b, aCookie: await sessionCookieFor(a), bCookie: await sessionCookieFor(b) };
  }
  const accept = (token: string) => request(t.app).post('/v1/invitations/accept').send({ token, password: 'my own long passphrase' });

  it('revokes the pending invitations of a removed admin, in the audit trail, and their links stop working', async () => {
    const { o, a, aCookie, bCookie } = await adminsOf('Removed inviter packer');
    const inv = await invite(aCookie, unique('comeback'), 'admin');
    expect((await request(t.app).delete(`/v1/users/${a.id}`).set('Cookie', bCookie).set(C)).status).toBe(204);
    const list = await request(t.app).get('/v1/invitations').set('Cookie', bCookie);
    expect(list.body.items.find((i: { id: string }) => i.id === inv.id).status).toBe('revoked');
    expect((await accept(inv.token)).status).toBe(422);
    const trail = await AuditEvent.findOne({ where: { organisationId: o.id, action: 'invitation.revoked', targetId: inv.id } });
    expect(trail?.details).toMatchObject({ reason: 'inviter-removed' });
  });

  it('revokes the pending invitations of a demoted admin', async () => {
    const { o, a, aCookie, bCookie } = await adminsOf('Demoted inviter packer');
    const inv = await invite(aCookie, unique('comeback'), 'quality');
    expect((await request(t.app).patch(`/v1/users/${a.id}`).set('Cookie', bCookie).set(C).send({ role: 'auditor' })).status).toBe(200);
    expect((await accept(inv.token)).status).toBe(422);
    const trail = await AuditEvent.findOne({ where: { organisationId: o.id, action: 'invitation.revoked', targetId: inv.id } });
    expect(trail?.details).toMatchObject({ reason: 'inviter-demoted' });
  });

  it('refuses an invitation whose inviter may no longer invite, however it was left pending', async () => {
    const { a, aCookie } = await adminsOf('Stale inviter packer');
    const inv = await invite(aCookie, unique('stale'), 'admin');
    // as a row written before this rule existed would be: the inviter demoted, the invitation still pending
    await User.update({ roles: ['quality'] }, { where: { id: a.id } });
    expect((await Invitation.findByPk(inv.id))?.revokedAt).toBeNull();
    const res = await accept(inv.token);
    expect(res.status).toBe(422);
    expect(await User.count({ where: { email: (await Invitation.findByPk(inv.id))!.email } })).toBe(0);
  });

  it('still lets an invitation of an admin in good standing be accepted', async () => {
    const { aCookie } = await adminsOf('Good inviter packer');
    const inv = await invite(aCookie, unique('welcome'), 'quality');
    expect((await accept(inv.token)).status).toBe(201);
  });
});

describe('smaller identity faults (issue 14, item 16)', () => {
  it('never leaves an organisation without an admin when its last two admins are demoted or removed at once', async () => {
    for (let round = 0; round < 6; round++) {
      const o = await createTestOrganisation(`Two admins packer ${round}`);
      const a = await createTestUser(o.id, 'admin');
      const b = await createTestUser(o.id, 'admin');
      const [aCookie, bCookie] = [await sessionCookieFor(a), await sessionCookieFor(b)];
      const change = (cookie: string, target: string) =>
        round % 2 === 0
          ? request(t.app).patch(`/v1/users/${target}`).set('Cookie', cookie).set(C).send({ role: 'quality' })
          : request(t.app).delete(`/v1/users/${target}`).set('Cookie', cookie).set(C);
      const statuses = (await Promise.all([change(aCookie, b.id), change(bCookie, a.id)])).map((r) => r.status);
      expect(await User.count({ where: { organisationId: o.id, roles: { [Op.contains]: ['admin'] }, removedAt: null } })).toBe(1);
      // one change goes through; the other is refused (409 last admin, or 401/403 when its caller lost the role first)
      expect(statuses.filter((s) => s < 300)).toHaveLength(1);
      expect(statuses.every((s) => s < 300 || [401, 403, 409].includes(s))).toBe(true);
    }
  });

  it("answers an invitation to an address with an account in another organisation as any other, and acceptance refuses it", async () => {
    const mine = await createTestOrganisation('Inviting packer');
    const theirs = await createTestOrganisation('Other tenant packer');
    const cookie = await sessionCookieFor(await createTestUser(mine.id, 'admin'));
    const elsewhere = await createTestUser(theirs.id, 'quality');
    const res = await request(t.app).post('/v1/invitations').set('Cookie', cookie).set(C).send({ email: elsewhere.email, role: 'quality' });
    expect(res.status).toBe(201);
    expect(res.body).toMatchObject({ email: elsewhere.email, status: 'pending' });
    const token = linkIn((await waitForMail(elsewhere.email, /invited/)).text, '/accept-invite').searchParams.get('token')!;
    const accepted = await request(t.app).post('/v1/invitations/accept').send({ token, password: 'my own long passphrase' });
    expect(accepted.status).toBe(409);
    expect((await User.findByPk(elsewhere.id))?.organisationId).toBe(theirs.id);
    // inside one's own organisation the answer is still 409 (the admin can list those users anyway)
    const own = await createTestUser(mine.id, 'auditor');
    expect((await request(t.app).post('/v1/invitations').set('Cookie', cookie).set(C).send({ email: own.email, role: 'quality' })).status).toBe(409);
  });

  describe('session cookie', () => {
    const setCookies = (res: request.Response) => ([] as string[]).concat(res.headers['set-cookie'] ?? []);

    it('is __Host-lotproof_session, Secure, Path=/ and without Domain when the public URL is https', async () => {
      const https = variant({ publicUrl: 'https://lotproof.example' });
      const o = await createTestOrganisation('Cookie packer');
      const user = await createTestUser(o.id, 'auditor');
      const res = await request(https.app).post('/v1/session').send({ email: user.email, password: TEST_PASSWORD });
      expect(res.status).toBe(201);
      const cookie = setCookies(res).find((c) => c.startsWith('__Host-lotproof_session='));
      expect(cookie).toBeDefined();
      expect(cookie).toMatch(/; Secure/);
      expect(cookie).toMatch(/; Path=\/(;|$)/);
      expect(cookie).toMatch(/; HttpOnly/);
      expect(cookie).not.toMatch(/Domain=/i);
      const value = cookie!.split(';')[0]!.slice('__Host-lotproof_session='.length);
      const secure = { 'X-Forwarded-Proto': 'https' };
      expect((await request(https.app).get('/v1/session').set(secure).set('Cookie', `__Host-lotproof_session=${value}`)).status).toBe(200);
      // the same token under the unprefixed name (as a sibling domain or plain http could plant it) is not read over https
      expect((await request(https.app).get('/v1/session').set(secure).set('Cookie', `lotproof_session=${value}`)).status).toBe(401);
      // sign-out clears the prefixed cookie
      const out = await request(https.app).delete('/v1/session').set(secure).set(C).set('Cookie', `__Host-lotproof_session=${value}`);
      expect(out.status).toBe(204);
      expect(setCookies(out).some((c) => c.startsWith('__Host-lotproof_session=;'))).toBe(true);
    });

    it('is Secure and prefixed for a request that arrived over TLS, whatever the public URL says', async () => {
      const o = await createTestOrganisation('Proxied cookie packer');
      const user = await createTestUser(o.id, 'auditor');
      const res = await request(t.app).post('/v1/session').set('X-Forwarded-Proto', 'https').send({ email: user.email, password: TEST_PASSWORD });
      expect(res.status).toBe(201);
      expect(setCookies(res).find((c) => c.startsWith('__Host-lotproof_session='))).toMatch(/; Secure/);
    });
  });
});
