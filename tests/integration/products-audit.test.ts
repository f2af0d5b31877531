// Product changes in the organisation's audit trail (issue 16, "Audit trail and roles"): creating,
// changing and archiving a product each write one event, in the change's own transaction, with the
// before and after of every field that changed — spec fields, the rulebook and its parameters, and
// the alert recipients (named as such, with who was added and who was removed). When the event
// cannot be written, the change is not made either (the trigger technique of
// webhook-audit-atomic.test.ts: a trigger on audit_events, made by the tables' owner, refuses one
// organisation's rows).
import { randomUUID } from 'node:crypto';
import request from 'supertest';
import { QueryTypes } from 'sequelize';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { openDatabase, type Database } from '../../server/db/database';
import { buildTestApp, createTestKey, createTestOrganisation, testDatabaseUrl, type TestApp } from '../support/app';
import { createTestUser, sessionCookieFor } from '../support/identity';

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
const C = { 'X-Lotproof-Console': '1' };

interface Change { field: string; before: unknown; after: unknown; added?: string[]; removed?: string[] }
interface Event { action: string; actor: { kind: string; id: string | null; label: string }; target: { kind: string; id: string } | null; details: { sku?: string; changes?: Change[] } }

const flour = (sku: string, recipients: string[]) => ({
  sku,
  name: 'Wholemeal flour 1 kg',
  nominalQuantity: 1000,
  unit: 'g',
  tareMode: 'fixed',
  fixedTare: 12.5,
  rulebook: { id: 'custom', params: { alpha: 0.05, minimumSampleSize: 5 } },
  alertRecipients: recipients,
});

async function productEvents(orgId: string, productId: string): Promise<Event[]> {
  const rows = await owner.sequelize.query<{ action: string; actor_kind: string; actor_id: string | null; actor_label: string; target_kind: string | null; target_id: string | null; details: Event['details'] }>(
    `SELECT action, actor_kind, actor_id, actor_label, target_kind, target_id, details FROM audit_events
      WHERE organisation_id = $1 AND target_id = $2 ORDER BY at, id`,
    { bind: [orgId, productId], type: QueryTypes.SELECT },
  );
  return rows.map((r) => ({
    action: r.action,
    actor: { kind: r.actor_kind, id: r.actor_id, label: r.actor_label },
    target: r.target_kind && r.target_id ? { kind: r.target_kind, id: r.target_id } : null,
    details: r.details,
  }));
}

describe('product changes in the audit trail', () => {
  it('writes one event per create, change and archive, with the before and after of each changed field', async () => {
    const org = await createTestOrganisation('Product audit packer (test)');
    const quality = await createTestUser(org.id, 'quality');
    const other = await createTestUser(org.id, 'auditor');
    const cookie = await sessionCookieFor(quality);
    const auditor = await sessionCookieFor(other);

    const made = await request(t.app).post('/v1/products').set('Cookie', cookie).set(C).send(flour('AUD-FLOUR-1', [quality.email]));
    expect(made.status, made.text).toBe(201);
    const id = made.body.id as string;
    let events = await productEvents(org.id, id);
    expect(events.map((e) => e.action)).toEqual(['product.created']);
    expect(events[0]!.actor).toEqual({ kind: 'user', id: quality.id, label: quality.email });
    expect(events[0]!.target).toEqual({ kind: 'product', id });
    // A new product: every field it was given, from nothing.
    const created = new Map(events[0]!.details.changes!.map((c) => [c.field, c]));
    expect(created.get('/nominalQuantity')).toMatchObject({ before: null, after: 1000 });
    expect(created.get('/rulebook/id')).toMatchObject({ before: null, after: 'custom' });
    expect(created.get('/rulebook/params/alpha')).toMatchObject({ before: null, after: 0.05 });
    expect(created.get('/alertRecipients')).toMatchObject({ before: [], after: [quality.email], added: [quality.email], removed: [] });

    // One PATCH that changes a spec field, a rulebook parameter and the recipients; the name is
    // sent unchanged and so is not among the changes.
    const patch = await request(t.app)
      .patch(`/v1/products/${id}`)
      .set('Cookie', cookie)
      .set(C)
      .send({ name: 'Wholemeal flour 1 kg', fixedTare: 13, rulebook: { id: 'custom', params: { alpha: 0.01, minimumSampleSize: 5 } }, alertRecipients: [other.email] });
    expect(patch.status, patch.text).toBe(200);
    events = await productEvents(org.id, id);
    expect(events.map((e) => e.action)).toEqual(['product.created', 'product.updated']);
    expect(events[1]!.details.sku).toBe('AUD-FLOUR-1');
    expect(events[1]!.details.changes).toEqual([
      { field: '/fixedTare', before: 12.5, after: 13 },
      { field: '/rulebook/params/alpha', before: 0.05, after: 0.01 },
      { field: '/alertRecipients', before: [quality.email], after: [other.email], added: [other.email], removed: [quality.email] },
    ]);

    // A rulebook switched: its id, and each parameter that went or came.
    const switched = await request(t.app).patch(`/v1/products/${id}`).set('Cookie', cookie).set(C).send({ rulebook: { id: 'eu-76-211' } });
    expect(switched.status, switched.text).toBe(200);
    events = await productEvents(org.id, id);
    expect(events[2]!.details.changes).toEqual([
      { field: '/rulebook/id', before: 'custom', after: 'eu-76-211' },
      { field: '/rulebook/params/alpha', before: 0.01, after: null },
      { field: '/rulebook/params/minimumSampleSize', before: 5, after: null },
    ]);

    // Archived: one event, the archive instant from nothing.
    expect((await request(t.app).delete(`/v1/products/${id}`).set('Cookie', cookie).set(C)).status).toBe(204);
    events = await productEvents(org.id, id);
    expect(events.map((e) => e.action)).toEqual(['product.created', 'product.updated', 'product.updated', 'product.archived']);
    const archived = events[3]!.details.changes!;
    expect(archived).toHaveLength(1);
    expect(archived[0]).toMatchObject({ field: '/archivedAt', before: null });
    expect(Number.isNaN(Date.parse(String(archived[0]!.after)))).toBe(false);

    // The API shows them to an auditor, filtered by kind.
    const listed = await request(t.app).get('/v1/audit-events?action=product.updated').set('Cookie', auditor);
    expect(listed.status, listed.text).toBe(200);
    expect(listed.body.items).toHaveLength(2);
  });

  it('writes nothing for a change that changes nothing', async () => {
    const org = await createTestOrganisation('Product audit no-op packer (test)');
    const key = await createTestKey(org.id, ['products:write']);
    const made = await request(t.app).post('/v1/products').set(bearer(key)).send(flour('AUD-NOOP-1', []));
    expect(made.status, made.text).toBe(201);
    const same = await request(t.app).patch(`/v1/products/${made.body.id}`).set(bearer(key)).send({ name: 'Wholemeal flour 1 kg', fixedTare: 12.5 });
    expect(same.status, same.text).toBe(200);
    const events = await productEvents(org.id, made.body.id);
    expect(events.map((e) => e.action)).toEqual(['product.created']);
    expect(events[0]!.actor.kind).toBe('api-key');
  });

  it('makes no change when the audit event cannot be written', async () => {
    const org = await createTestOrganisation('Product audit atomic packer (test)');
    const key = await createTestKey(org.id, ['products:write']);
    const made = await request(t.app).post('/v1/products').set(bearer(key)).send(flour('AUD-ATOM-1', []));
    expect(made.status, made.text).toBe(201);
    const id = made.body.id as string;

    await owner.sequelize.query(`
      CREATE FUNCTION ${fn}() RETURNS trigger LANGUAGE plpgsql AS $f$
      BEGIN
        IF NEW.organisation_id = '${org.id}' THEN RAISE EXCEPTION 'audit refused (test)'; END IF;
        RETURN NEW;
      END $f$;
      CREATE TRIGGER ${fn} BEFORE INSERT ON audit_events FOR EACH ROW EXECUTE FUNCTION ${fn}();`);

    const products = async () =>
      owner.sequelize.query('SELECT id, sku, name, fixed_tare, rulebook, alert_recipients, updated_at, archived_at FROM products WHERE organisation_id = $1 ORDER BY created_at', {
        bind: [org.id],
        type: QueryTypes.SELECT,
      });
    const before = await products();
    expect(before).toHaveLength(1);

    const create = await request(t.app).post('/v1/products').set(bearer(key)).send(flour('AUD-ATOM-2', []));
    expect(create.status).toBeGreaterThanOrEqual(500);
    const patch = await request(t.app).patch(`/v1/products/${id}`).set(bearer(key)).send({ fixedTare: 20 });
    expect(patch.status).toBeGreaterThanOrEqual(500);
    const del = await request(t.app).delete(`/v1/products/${id}`).set(bearer(key));
    expect(del.status).toBeGreaterThanOrEqual(500);

    expect(await products()).toEqual(before);
  });
});
