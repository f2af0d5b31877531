// A webhook change and its audit event are one transaction: when the audit event cannot be written,
// the change is not made either (issue 14: "every change of an organisation's data in its audit
// trail"). The audit write is made to fail with a trigger on audit_events that refuses one
// organisation's rows; the trigger is created by the tables' owner and removed afterwards.
import { randomUUID } from 'node:crypto';
import request from 'supertest';
import { QueryTypes } from 'sequelize';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { openDatabase, type Database } from '../../server/db/database';
import { buildTestApp, createTestKey, createTestOrganisation, testDatabaseUrl, type TestApp } from '../support/app';

let t: TestApp;
let owner: Database;
const fn = `refuse_audit_${randomUUID().replace(/-/g, '').slice(0, 12)}`;
beforeAll(() => {
  t = buildTestApp();
  owner = openDatabase(process.env.LOTPROOF_TEST_OWNER_URL ?? testDatabaseUrl(), undefined, 2);
});
afterAll(async () => {
  await owner.sequelize.query(`DROP TRIGGER IF EXISTS ${fn} ON audit_events; DROP FUNCTION IF EXISTS ${fn}()`).catch(() => {});
  await owner.close();
  await t.close();
});

const bearer = (k: string) => ({ Authorization: `Bearer ${k}` });

describe('webhook changes and their audit events', () => {
  it('make no change when the audit event cannot be written', async () => {
    const org = await createTestOrganisation('Atomic audit packer (test)');
    const key = await createTestKey(org.id, ['keys:manage', 'verdicts:read']);
    const made = await request(t.app).post('/v1/webhooks').set(bearer(key)).send({ url: 'https://hooks.atomic.example/in', events: ['verdict.created'] });
    expect(made.status, made.text).toBe(201);
    const id = made.body.id as string;

    await owner.sequelize.query(`
      CREATE FUNCTION ${fn}() RETURNS trigger LANGUAGE plpgsql AS $f$
      BEGIN
        IF NEW.organisation_id = '${org.id}' THEN RAISE EXCEPTION 'audit refused (test)'; END IF;
        RETURN NEW;
      END $f$;
      CREATE TRIGGER ${fn} BEFORE INSERT ON audit_events FOR EACH ROW EXECUTE FUNCTION ${fn}();`);

    const endpoints = async () =>
      owner.sequelize.query<{ id: string; url: string; deleted_at: Date | null }>('SELECT id, url, deleted_at FROM webhook_endpoints WHERE organisation_id = $1 ORDER BY created_at', {
        bind: [org.id],
        type: QueryTypes.SELECT,
      });
    const before = await endpoints();

    const create = await request(t.app).post('/v1/webhooks').set(bearer(key)).send({ url: 'https://hooks.atomic.example/second', events: ['verdict.created'] });
    expect(create.status).toBeGreaterThanOrEqual(500);
    const patch = await request(t.app).patch(`/v1/webhooks/${id}`).set(bearer(key)).send({ url: 'https://elsewhere.atomic.example/in' });
    expect(patch.status).toBeGreaterThanOrEqual(500);
    const del = await request(t.app).delete(`/v1/webhooks/${id}`).set(bearer(key));
    expect(del.status).toBeGreaterThanOrEqual(500);

    expect(await endpoints()).toEqual(before);
    const tests = await owner.sequelize.query('SELECT 1 FROM webhook_deliveries WHERE endpoint_id = $1', { bind: [id], type: QueryTypes.SELECT });
    const test = await request(t.app).post(`/v1/webhooks/${id}/test`).set(bearer(key));
    expect(test.status).toBeGreaterThanOrEqual(500);
    expect(await owner.sequelize.query('SELECT 1 FROM webhook_deliveries WHERE endpoint_id = $1', { bind: [id], type: QueryTypes.SELECT })).toHaveLength(tests.length);
  });
});
