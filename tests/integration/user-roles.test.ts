// More than one role per person (issue 16, "Audit trail and roles"): a user holds any non-empty set
// of admin, quality and auditor; a session passes an operation when any one of its roles is allowed
// (DEVELOPERS.md, "x-lotproof-access": "a console session with any one of the roles"); invitations
// carry several roles; a change of roles is audited with the before and after; someone always keeps
// admin. Migration 0104 turns each user's and invitation's one role into a list of one, on a
// database of its own migrated to 0103 and filled as an older server would.
import { randomUUID } from 'node:crypto';
import request from 'supertest';
import { QueryTypes, Sequelize } from 'sequelize';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { migrator } from '../../server/db/migrate';
import type { RunningSmtpFake } from '../../server/platform/smtp-fake';
import { User, type Organisation } from '../../server/models';
import { buildTestApp, createTestKey, createTestOrganisation, testConfig, testSuperuserUrl, type TestApp } from '../support/app';
import { createTestUser, linkIn, sessionCookieFor, startTestSmtp } from '../support/identity';

let smtp: RunningSmtpFake;
let t: TestApp;
let org: Organisation;
let admin: User;
let adminCookie: string;
const C = { 'X-Lotproof-Console': '1' };

beforeAll(async () => {
  smtp = await startTestSmtp();
  t = buildTestApp({ smtp: { ...testConfig().smtp, host: smtp.host, port: smtp.port }, publicUrl: 'http://console.test' });
  org = await createTestOrganisation('Roles packer (test)');
  admin = await createTestUser(org.id, 'admin');
  adminCookie = await sessionCookieFor(admin);
});
afterAll(async () => {
  await t.close();
  await smtp.stop();
});

async function setRoles(userId: string, body: object, cookie = adminCookie): Promise<request.Response> {
  return request(t.app).patch(`/v1/users/${userId}`).set('Cookie', cookie).set(C).send(body);
}

describe('a user with several roles', () => {
  it('can do what each of them allows: quality and auditor define a product and read the audit trail', async () => {
    const person = await createTestUser(org.id, 'quality');
    const changed = await setRoles(person.id, { roles: ['auditor', 'quality'] });
    expect(changed.status, changed.text).toBe(200);
    // Kept in the enum's order (admin, quality, auditor); `role` stays for older clients: the first of them.
    expect(changed.body).toMatchObject({ id: person.id, roles: ['quality', 'auditor'], role: 'quality' });
    const cookie = await sessionCookieFor(person);

    const me = await request(t.app).get('/v1/session').set('Cookie', cookie);
    expect(me.body.user.roles).toEqual(['quality', 'auditor']);
    const caller = await request(t.app).get('/v1/me').set('Cookie', cookie);
    expect(caller.body).toMatchObject({ kind: 'session', roles: ['quality', 'auditor'] });

    // createProduct admits [admin, quality]; listAuditEvents [admin, auditor]; listUsers [admin] only.
    const product = await request(t.app).post('/v1/products').set('Cookie', cookie).set(C).send({
      sku: `ROLES-${randomUUID().slice(0, 8)}`, name: 'Oats 500 g', nominalQuantity: 500, unit: 'g', tareMode: 'none', rulebook: { id: 'eu-76-211' },
    });
    expect(product.status, product.text).toBe(201);
    expect((await request(t.app).get('/v1/audit-events').set('Cookie', cookie)).status).toBe(200);
    expect((await request(t.app).get('/v1/users').set('Cookie', cookie)).status).toBe(403);
  });

  it('records a change of roles with the before and after, and a repeat of the same roles changes nothing', async () => {
    const person = await createTestUser(org.id, 'auditor');
    expect((await setRoles(person.id, { roles: ['admin', 'auditor'] })).status).toBe(200);
    expect((await setRoles(person.id, { roles: ['auditor', 'admin'] })).status).toBe(200);
    const events = await request(t.app).get('/v1/audit-events?action=user.role-changed').set('Cookie', adminCookie);
    const mine = events.body.items.filter((e: { target: { id: string } | null }) => e.target?.id === person.id);
    expect(mine).toHaveLength(1);
    expect(mine[0].details).toMatchObject({ email: person.email, changes: [{ field: '/roles', before: ['auditor'], after: ['admin', 'auditor'] }] });
  });

  it('still takes the older single-role body, and refuses an empty list, an unknown role, or both forms at once', async () => {
    const person = await createTestUser(org.id, 'quality');
    const old = await setRoles(person.id, { role: 'auditor' });
    expect(old.status, old.text).toBe(200);
    expect(old.body).toMatchObject({ role: 'auditor', roles: ['auditor'] });
    for (const [body, field] of [
      [{ roles: [] }, '/body/roles'],
      [{ roles: ['owner'] }, '/body/roles/0'],
      [{ roles: ['quality', 'quality'] }, '/body/roles'],
      [{}, '/body/roles'],
      [{ role: 'quality', roles: ['auditor'] }, '/body/role'],
    ] as const) {
      const res = await setRoles(person.id, body);
      expect(res.status, `${JSON.stringify(body)}: ${res.text}`).toBe(400);
      expect(res.headers['content-type']).toMatch(/^application\/problem\+json/);
      expect(JSON.stringify(res.body.errors), JSON.stringify(body)).toContain(field);
    }
    expect((await User.findByPk(person.id))!.roles).toEqual(['auditor']);
  });
});

describe('the last admin', () => {
  it('cannot lose the admin role, even when keeping others; with a second admin it can', async () => {
    const lone = await createTestOrganisation('Lone admin with roles (test)');
    const a = await createTestUser(lone.id, 'admin');
    const cookie = await sessionCookieFor(a);
    const add = await setRoles(a.id, { roles: ['admin', 'quality'] }, cookie);
    expect(add.status, add.text).toBe(200);
    const drop = await setRoles(a.id, { roles: ['quality', 'auditor'] }, cookie);
    expect(drop.status, drop.text).toBe(409);
    expect(drop.body.type).toMatch(/last-admin$/);
    expect((await User.findByPk(a.id))!.roles).toEqual(['admin', 'quality']);

    const b = await createTestUser(lone.id, 'quality');
    expect((await setRoles(b.id, { roles: ['quality', 'admin'] }, cookie)).status).toBe(200);
    const now = await setRoles(a.id, { roles: ['quality'] }, cookie);
    expect(now.status, now.text).toBe(200);
    expect(now.body.roles).toEqual(['quality']);
  });

  it('holds when two admins take each other’s admin role at the same moment', async () => {
    for (let round = 0; round < 5; round++) {
      const o = await createTestOrganisation(`Admin race with roles ${round} (test)`);
      const a = await createTestUser(o.id, 'admin');
      const b = await createTestUser(o.id, 'admin');
      const [ca, cb] = [await sessionCookieFor(a), await sessionCookieFor(b)];
      const answers = await Promise.all([setRoles(b.id, { roles: ['quality', 'auditor'] }, ca), setRoles(a.id, { roles: ['auditor'] }, cb)]);
      const admins = await User.sequelize!.query<{ n: number }>(
        "SELECT count(*)::int AS n FROM users WHERE organisation_id = $1 AND removed_at IS NULL AND 'admin' = ANY(roles)",
        { bind: [o.id], type: QueryTypes.SELECT },
      );
      expect(admins[0]!.n, answers.map((r) => `${r.status} ${r.text.slice(0, 120)}`).join(' | ')).toBe(1);
      expect(answers.filter((r) => r.status === 200)).toHaveLength(1);
    }
  });
});

describe('invitations with several roles', () => {
  it('carry them to the new account, and the audit trail names them', async () => {
    const email = `both-${randomUUID().slice(0, 8)}@packer.example`;
    const inv = await request(t.app).post('/v1/invitations').set('Cookie', adminCookie).set(C).send({ email, roles: ['auditor', 'quality'] });
    expect(inv.status, inv.text).toBe(201);
    expect(inv.body).toMatchObject({ email, roles: ['quality', 'auditor'], role: 'quality' });
    let mail;
    for (let i = 0; i < 50 && !mail; i++) {
      mail = smtp.messages().find((m) => m.to.includes(email));
      if (!mail) await new Promise((r) => setTimeout(r, 50));
    }
    expect(mail!.text).toMatch(/Quality engineer and Auditor/);
    const token = linkIn(mail!.text, '/accept-invite').searchParams.get('token')!;
    const seen = await request(t.app).post('/v1/invitations/inspect').send({ token });
    expect(seen.body).toMatchObject({ email, roles: ['quality', 'auditor'] });
    const accepted = await request(t.app).post('/v1/invitations/accept').send({ token, password: 'a perfectly long passphrase' });
    expect(accepted.status, accepted.text).toBe(201);
    expect(accepted.body.roles).toEqual(['quality', 'auditor']);
    const events = await request(t.app).get('/v1/audit-events').set('Cookie', adminCookie);
    const invited = events.body.items.find((e: { action: string; details: { email?: string } }) => e.action === 'user.invited' && e.details.email === email);
    expect(invited.details.roles).toEqual(['quality', 'auditor']);
  });

  it('are void once whoever sent them has lost the admin role, though they keep another', async () => {
    const o = await createTestOrganisation('Demoted inviter with roles (test)');
    const boss = await createTestUser(o.id, 'admin');
    const inviter = await createTestUser(o.id, 'admin');
    const inviterCookie = await sessionCookieFor(inviter);
    const email = `void-${randomUUID().slice(0, 8)}@packer.example`;
    expect((await request(t.app).post('/v1/invitations').set('Cookie', inviterCookie).set(C).send({ email, roles: ['quality'] })).status).toBe(201);
    expect((await setRoles(inviter.id, { roles: ['quality', 'auditor'] }, await sessionCookieFor(boss))).status).toBe(200);
    const list = await request(t.app).get('/v1/invitations').set('Cookie', await sessionCookieFor(boss));
    expect(list.body.items.find((i: { email: string }) => i.email === email).status).toBe('revoked');
  });
});

describe('API keys are untouched by roles', () => {
  it('still pass by scope alone', async () => {
    const key = await createTestKey(org.id, ['audit:read']);
    expect((await request(t.app).get('/v1/audit-events').set('Authorization', `Bearer ${key}`)).status).toBe(200);
    expect((await request(t.app).get('/v1/users').set('Authorization', `Bearer ${key}`)).status).toBe(403);
  });
});

describe('migration 0104', () => {
  const name = `lotproof_mig_${randomUUID().slice(0, 8)}`;
  let su: Sequelize;
  let db: Sequelize;
  beforeAll(async () => {
    su = new Sequelize(testSuperuserUrl(), { dialect: 'postgres', logging: false });
    await su.query(`CREATE DATABASE ${name}`);
    const url = new URL(testSuperuserUrl());
    url.pathname = `/${name}`;
    db = new Sequelize(url.toString(), { dialect: 'postgres', logging: false, define: { underscored: true, timestamps: false } });
    await migrator(db).up({ to: '0103-api-key-parents' });
  });
  afterAll(async () => {
    await db?.close();
    await su?.query(`DROP DATABASE IF EXISTS ${name}`);
    await su?.close();
  });

  it('turns each role into a list of one, and the list must then be non-empty and known', async () => {
    const q = <T extends object>(sql: string, bind: unknown[] = []) => db.query<T>(sql, { bind, type: QueryTypes.SELECT });
    const [o] = await q<{ id: string }>(`INSERT INTO organisations (name, slug) VALUES ('Legacy roles', $1) RETURNING id`, [`legacy-${randomUUID().slice(0, 8)}`]);
    const ids: Record<string, string> = {};
    for (const role of ['admin', 'quality', 'auditor']) {
      const [u] = await q<{ id: string }>(`INSERT INTO users (organisation_id, email, role, password_hash) VALUES ($1, $2, $3, 'x') RETURNING id`, [o!.id, `${role}@legacy.example`, role]);
      ids[role] = u!.id;
    }
    const [inv] = await q<{ id: string }>(
      `INSERT INTO invitations (organisation_id, email, role, token_hash, expires_at) VALUES ($1, 'new@legacy.example', 'auditor', '\\x01', now() + interval '1 day') RETURNING id`,
      [o!.id],
    );

    await migrator(db).up({ to: '0104-user-roles' });

    const users = await q<{ id: string; roles: string[] }>('SELECT id, roles FROM users WHERE organisation_id = $1', [o!.id]);
    expect(Object.fromEntries(users.map((u) => [u.id, u.roles]))).toEqual({ [ids.admin!]: ['admin'], [ids.quality!]: ['quality'], [ids.auditor!]: ['auditor'] });
    expect(await q('SELECT roles FROM invitations WHERE id = $1', [inv!.id])).toEqual([{ roles: ['auditor'] }]);
    const columns = await q<{ column_name: string }>("SELECT column_name FROM information_schema.columns WHERE table_name IN ('users', 'invitations') AND column_name = 'role'");
    expect(columns).toEqual([]);

    for (const bad of ['{}', '{owner}', '{admin,NULL}']) {
      await expect(db.query('UPDATE users SET roles = $1::text[] WHERE id = $2', { bind: [bad, ids.quality] }), bad).rejects.toThrow(/check constraint/);
      await expect(db.query('UPDATE invitations SET roles = $1::text[] WHERE id = $2', { bind: [bad, inv!.id] }), bad).rejects.toThrow(/check constraint/);
    }
    await db.query("UPDATE users SET roles = '{quality,auditor}' WHERE id = $1", { bind: [ids.quality] });
  });
});
