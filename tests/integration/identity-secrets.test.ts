// Secrets never appear in logs, error bodies or the database in clear: API keys, passwords,
// session tokens, invitation and reset tokens, webhook signing secrets (stored sealed). Logs are captured at the most verbose level (SQL too).
import { Writable } from 'node:stream';
import { QueryTypes } from 'sequelize';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createApp } from '../../server/app';
import { openDatabase, type Database } from '../../server/db/database';
import type { AppContext } from '../../server/http/context';
import { createLogger } from '../../server/logger';
import type { RunningSmtpFake } from '../../server/platform/smtp-fake';
import { createTestOrganisation, testConfig, testDatabaseUrl } from '../support/app';
import { createTestUser, linkIn, startTestSmtp, TEST_PASSWORD } from '../support/identity';

let smtp: RunningSmtpFake;
let db: Database;
let app: ReturnType<typeof createApp>;
const logs: string[] = [];
const secrets = new Map<string, string>();
const bodies: string[] = [];
const C = { 'X-Lotproof-Console': '1' };
let hookReplay: { first: string; again: string };

function keep(res: request.Response): request.Response {
  bodies.push(res.text ?? '');
  return res;
}

beforeAll(async () => {
  smtp = await startTestSmtp();
  const sink = new Writable({
    write(chunk, _enc, cb) {
      logs.push(String(chunk));
      cb();
    },
  });
  const logger = createLogger('trace', sink);
  db = openDatabase(testDatabaseUrl(), logger, 5);
  const config = testConfig({ smtp: { ...testConfig().smtp, host: smtp.host, port: smtp.port } });
  const ctx: AppContext = { config: { ...config, databaseUrl: testDatabaseUrl() }, db, logger };
  app = createApp(ctx);

  const org = await createTestOrganisation('Secretive packer');
  const admin = await createTestUser(org.id, 'admin');
  secrets.set('test password', TEST_PASSWORD);

  const signIn = keep(await request(app).post('/v1/session').send({ email: admin.email, password: TEST_PASSWORD }));
  const cookie = ([] as string[]).concat(signIn.headers['set-cookie'] ?? [])[0]!.split(';')[0]!;
  secrets.set('session token', cookie.split('=')[1]!);

  // A webhook endpoint's signing secret (shown once; with an Idempotency-Key its reply is kept for replays).
  const hookBody = { url: 'https://receiver.example/lotproof', events: ['verdict.created'] };
  const hook = keep(await request(app).post('/v1/webhooks').set('Cookie', cookie).set(C).set('Idempotency-Key', 'secret-hook-1').send(hookBody));
  secrets.set('webhook signing secret', hook.body.secret);
  secrets.set('webhook signing secret body', String(hook.body.secret).slice('whsec_'.length));
  hookReplay = { first: hook.text, again: (await request(app).post('/v1/webhooks').set('Cookie', cookie).set(C).set('Idempotency-Key', 'secret-hook-1').send(hookBody)).text };

  const made = await request(app).post('/v1/api-keys').set('Cookie', cookie).set(C).send({ name: 'fresh', scopes: ['verdicts:read'] });
  const secret: string = made.body.secret;
  secrets.set('api key', secret);
  secrets.set('api key secret part', secret.slice('lpk_'.length + 13)); // after lpk_<prefix>_ (the secret itself may contain '_')
  keep(await request(app).get('/v1/me').set('Authorization', `Bearer ${secret}`));
  keep(await request(app).get('/v1/me?colour=blue').set('Authorization', `Bearer ${secret}`));
  keep(await request(app).get('/v1/me').set('Authorization', `Bearer ${secret.slice(0, -1)}X`));
  keep(await request(app).get('/v1/me').set('Authorization', `Bearer ${secret}`).set('Cookie', cookie));
  keep(await request(app).post('/v1/api-keys').set('Authorization', `Bearer ${secret}`).send({ name: 'x', scopes: ['verdicts:read'] }));

  const email = `invitee-${Date.now()}@packer.example`;
  keep(await request(app).post('/v1/invitations').set('Cookie', cookie).set(C).send({ email, role: 'quality' }));
  let mail;
  for (let i = 0; i < 50 && !mail; i++) {
    mail = smtp.messages().find((m) => m.to.includes(email));
    if (!mail) await new Promise((r) => setTimeout(r, 50));
  }
  const invitationToken = linkIn(mail!.text, '/accept-invite').searchParams.get('token')!;
  secrets.set('invitation token', invitationToken);
  const chosen = 'the invitee chose this passphrase';
  secrets.set('chosen password', chosen);
  keep(await request(app).post('/v1/invitations/accept').send({ token: invitationToken, password: chosen }));
  keep(await request(app).post('/v1/invitations/accept').send({ token: invitationToken, password: chosen }));
  keep(await request(app).post('/v1/session').send({ email, password: chosen + ' but wrong' }));
  secrets.set('wrong password', chosen + ' but wrong');

  keep(await request(app).post('/v1/password-resets').send({ email }));
  for (let i = 0; i < 50 && !smtp.messages().some((m) => m.to.includes(email) && /Reset/.test(m.subject)); i++) await new Promise((r) => setTimeout(r, 50));
  const resetToken = linkIn(smtp.messages().find((m) => m.to.includes(email) && /Reset/.test(m.subject))!.text, '/reset-password').searchParams.get('token')!;
  secrets.set('reset token', resetToken);
  const renewed = 'a renewed passphrase for the invitee';
  secrets.set('reset password', renewed);
  keep(await request(app).post('/v1/password-resets/complete').send({ token: resetToken, password: renewed }));
  keep(await request(app).post('/v1/session').send({ email, password: renewed }));
  await new Promise((r) => setTimeout(r, 100));
});

afterAll(async () => {
  await db.close();
  await smtp.stop();
});

describe('secrets at rest and in transit', () => {
  it('keeps every secret out of the logs, SQL included', () => {
    const all = logs.join('');
    expect(all.length).toBeGreaterThan(1000);
    expect(all).toContain('INSERT INTO'); // the SQL was logged, so the check below means something
    for (const [what, value] of secrets) expect(all.includes(value), `${what} in logs`).toBe(false);
  });

  it('keeps every secret out of error bodies', () => {
    const errors = bodies.filter((b) => b.includes('"status":4'));
    expect(errors.length).toBeGreaterThan(4);
    for (const [what, value] of secrets) for (const b of errors) expect(b.includes(value), `${what} in ${b}`).toBe(false);
  });

  it('stores no secret in clear in any text, json, array or binary column of any table', async () => {
    const columns = await db.sequelize.query<{ table_name: string; column_name: string; data_type: string }>(
      `SELECT c.table_name, c.column_name, c.data_type FROM information_schema.columns c
       JOIN information_schema.tables t ON t.table_name = c.table_name AND t.table_schema = c.table_schema
       WHERE c.table_schema = 'public' AND t.table_type = 'BASE TABLE'
         AND c.data_type IN ('text', 'character varying', 'character', 'json', 'jsonb', 'bytea', 'ARRAY')`,
      { type: QueryTypes.SELECT },
    );
    const tables = new Set(columns.map((c) => c.table_name));
    for (const t of ['api_keys', 'users', 'sessions', 'invitations', 'password_resets', 'audit_events']) expect(tables).toContain(t);
    const hits: string[] = [];
    for (const c of columns) {
      const col = `"${c.column_name}"`;
      const expr = c.data_type === 'bytea' ? `position(convert_to(:v, 'UTF8') in ${col}) > 0` : `position(:v in ${c.data_type === 'ARRAY' ? `array_to_string(${col}, ' ')` : `${col}::text`}) > 0`;
      for (const [what, value] of secrets) {
        const [row] = await db.sequelize.query<{ n: string }>(`SELECT count(*) AS n FROM "${c.table_name}" WHERE ${expr}`, { replacements: { v: value }, type: QueryTypes.SELECT });
        if (Number(row!.n) > 0) hits.push(`${what} in ${c.table_name}.${c.column_name}`);
      }
    }
    expect(hits).toEqual([]);
  });

  it('replays an idempotent webhook creation with its secret although the stored reply is sealed', () => {
    expect(JSON.parse(hookReplay.first).secret).toMatch(/^whsec_/);
    expect(hookReplay.again).toBe(hookReplay.first);
  });

  it('stores passwords as scrypt with a per-user salt', async () => {
    const rows = await db.sequelize.query<{ password_hash: string }>('SELECT password_hash FROM users ORDER BY created_at DESC LIMIT 5', { type: QueryTypes.SELECT });
    const salts = new Set<string>();
    for (const r of rows) {
      expect(r.password_hash).toMatch(/^scrypt\$ln=15,r=8,p=1\$[A-Za-z0-9+/=]{24}\$[A-Za-z0-9+/=]{44}$/);
      salts.add(r.password_hash.split('$')[2]!);
    }
    expect(salts.size).toBe(rows.length);
  });
});
