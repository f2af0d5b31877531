// Issue 15, least privilege: the server connects as a role that owns nothing. On the ledger's
// append-only tables it may read and insert, nothing else: UPDATE, DELETE, TRUNCATE, switching a
// trigger off or dropping it all fail (PostgreSQL 15 docs, §5.8 "Privileges": only the owner may
// ALTER or DROP an object; UPDATE/DELETE/TRUNCATE need their own privilege). The job queue still works.
import { randomUUID } from 'node:crypto';
import PgBoss from 'pg-boss';
import pg from 'pg';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { APPEND_ONLY_TABLES } from '../../server/db/privileges';
import { buildTestApp, createTestKey, createTestOrganisation, testDatabaseUrl, testOwnerUrl, type TestApp } from '../support/app';
import { createProduct, lotBody } from '../support/lots';

let app: pg.Client;
let owner: pg.Client;
let t: TestApp;
let ledgerTables: string[] = [];
let guardedTables: string[] = [];

beforeAll(async () => {
  app = new pg.Client({ connectionString: testDatabaseUrl() });
  owner = new pg.Client({ connectionString: testOwnerUrl() });
  await app.connect();
  await owner.connect();
  t = buildTestApp();
  // Every append-only table of the list that exists, and every table whose trigger refuses changes
  // (lotproof_append_only): one of those missing from the list fails below.
  const existing = await owner.query<{ t: string }>("SELECT tablename AS t FROM pg_tables WHERE schemaname = 'public'");
  const guarded = await owner.query<{ t: string }>(
    "SELECT DISTINCT c.relname AS t FROM pg_trigger g JOIN pg_class c ON c.oid = g.tgrelid JOIN pg_proc p ON p.oid = g.tgfoid WHERE p.proname = 'lotproof_append_only'",
  );
  guardedTables = guarded.rows.map((r) => r.t);
  ledgerTables = [...new Set([...APPEND_ONLY_TABLES.filter((n) => existing.rows.some((r) => r.t === n)), ...guardedTables])];
});
afterAll(async () => {
  await app?.end();
  await owner?.end();
  await t?.close();
});

/** The error PostgreSQL answers `sql` with, as the app's role (null when it succeeds). */
async function refusal(sql: string): Promise<{ code: string; message: string } | null> {
  await app.query('BEGIN');
  try {
    await app.query(sql);
    return null;
  } catch (err) {
    const e = err as { code: string; message: string };
    return { code: e.code, message: e.message };
  } finally {
    await app.query('ROLLBACK');
  }
}

describe('the app role on the ledger tables', () => {
  it('connects as a role that is neither superuser nor owner of anything', async () => {
    const who = await app.query<{ user: string; superuser: boolean; owned: string }>(
      `SELECT current_user AS user, r.rolsuper AS superuser,
              (SELECT count(*) FROM pg_class c WHERE c.relowner = r.oid) + (SELECT count(*) FROM pg_proc p WHERE p.proowner = r.oid) AS owned
       FROM pg_roles r WHERE r.rolname = current_user`,
    );
    expect(who.rows[0]).toMatchObject({ superuser: false, owned: '0' });
    const owners = await owner.query<{ owner: string }>("SELECT DISTINCT tableowner AS owner FROM pg_tables WHERE schemaname = 'public'");
    expect(owners.rows.map((r) => r.owner)).not.toContain(who.rows[0]!.user);
  });

  it('cannot UPDATE, DELETE, TRUNCATE, disable or drop a trigger of any of them', async () => {
    expect(ledgerTables).toEqual(expect.arrayContaining(['verdicts', 'signing_keys']));
    expect(APPEND_ONLY_TABLES).toEqual(expect.arrayContaining(guardedTables));
    for (const table of ledgerTables) {
      const triggers = await owner.query<{ tgname: string }>('SELECT tgname FROM pg_trigger WHERE tgrelid = $1::regclass AND NOT tgisinternal', [table]);
      const column = (await owner.query<{ c: string }>("SELECT column_name AS c FROM information_schema.columns WHERE table_name = $1 ORDER BY ordinal_position LIMIT 1", [table])).rows[0]!.c;
      const attempts = [
        `UPDATE ${table} SET ${column} = ${column}`,
        `DELETE FROM ${table}`,
        `TRUNCATE ${table}`,
        `ALTER TABLE ${table} DISABLE TRIGGER ALL`,
        `ALTER TABLE ${table} DISABLE TRIGGER USER`,
        ...triggers.rows.map((r) => `ALTER TABLE ${table} DISABLE TRIGGER ${r.tgname}`),
        ...triggers.rows.map((r) => `DROP TRIGGER ${r.tgname} ON ${table}`),
        `ALTER TABLE ${table} ADD COLUMN forged text`,
        `DROP TABLE ${table}`,
      ];
      for (const sql of attempts) {
        const r = await refusal(sql);
        expect(r, sql).not.toBeNull();
        // 42501 insufficient_privilege: "permission denied for table …" or "must be owner of table …"
        expect(r!.code, sql).toBe('42501');
        expect(r!.message, sql).toMatch(/permission denied|must be owner/);
      }
    }
  });

  it('cannot change the function behind the append-only trigger, nor create tables of its own', async () => {
    for (const sql of [
      "CREATE OR REPLACE FUNCTION lotproof_append_only() RETURNS trigger LANGUAGE plpgsql AS $$ BEGIN RETURN NEW; END $$",
      'CREATE TABLE public.forged (id int)',
      'CREATE SCHEMA forged',
    ]) {
      const r = await refusal(sql);
      expect(r?.code, sql).toBe('42501');
    }
  });

  it('can insert: a lot is sealed through the app, and a public key is published', async () => {
    const org = await createTestOrganisation('Privileges packer');
    const key = await createTestKey(org.id, ['lots:submit', 'products:write', 'audit:read']);
    await createProduct(t.app, key);
    const res = await request(t.app).post('/v1/lots').set('Authorization', `Bearer ${key}`).send(lotBody('T-OATS-500', 8800));
    expect(res.status, JSON.stringify(res.body)).toBe(201);
    const inserted = await refusal(`INSERT INTO signing_keys (kid, public_jwk, nbf) VALUES ('${randomUUID()}', '{}', now())`);
    expect(inserted).toBeNull();
    const walk = await request(t.app).get('/v1/ledger/verify').set('Authorization', `Bearer ${key}`);
    expect(walk.body.intact).toBe(true);
  });
});

describe('the job queue as the app role', () => {
  it('starts, creates a new queue, and sends and fetches a job', async () => {
    const boss = new PgBoss({ connectionString: testDatabaseUrl(), schema: 'pgboss', max: 2, supervise: false, schedule: false });
    boss.on('error', () => {});
    await boss.start();
    try {
      const queue = `privileges-${randomUUID().slice(0, 8)}`;
      await boss.createQueue(queue);
      const id = await boss.send(queue, { n: 1 });
      expect(id).toBeTruthy();
      const [job] = await boss.fetch<{ n: number }>(queue);
      expect(job?.data).toEqual({ n: 1 });
      await boss.complete(queue, job!.id);
    } finally {
      await boss.stop({ graceful: false, wait: true, timeout: 1_000 });
    }
  });
});
