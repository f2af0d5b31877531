// Issue 14, items 7 and 16 (webhooks' share): who may point verdict data at a receiver, the audit
// trail of webhook changes, and the limit on test events.
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildTestApp, createTestKey, createTestOrganisation, type TestApp } from '../support/app';
import { createTestUser, sessionCookieFor } from '../support/identity';

let t: TestApp;
beforeAll(() => {
  t = buildTestApp();
});
afterAll(() => t.close());

const hook = { url: 'https://hooks.access.example/in?token=s3cr3t-query-value', events: ['verdict.created', 'verdict.nonconforming'], description: 'Plant receiver (test)' };
const bearer = (k: string) => ({ Authorization: `Bearer ${k}` });

describe('keys:manage alone cannot route verdict data to a receiver', () => {
  it('refuses to create an endpoint, or to point one elsewhere, without a verdict-reading scope', async () => {
    const org = await createTestOrganisation('Access packer');
    const manager = await createTestKey(org.id, ['keys:manage']);
    // the same key cannot read verdicts directly
    expect((await request(t.app).get('/v1/verdicts').set(bearer(manager))).status).toBe(403);
    const create = await request(t.app).post('/v1/webhooks').set(bearer(manager)).send(hook);
    expect(create.status, create.text).toBe(403);
    expect(create.headers['content-type']).toMatch(/problem\+json/);
    expect(create.body.detail).toMatch(/verdicts:read/);

    // an endpoint made by a key that may read verdicts
    const reader = await createTestKey(org.id, ['keys:manage', 'verdicts:read']);
    const made = await request(t.app).post('/v1/webhooks').set(bearer(reader)).send(hook);
    expect(made.status, made.text).toBe(201);
    const id = made.body.id as string;

    for (const patch of [{ url: 'https://elsewhere.access.example/in' }, { events: ['verdict.created'] }, { enabled: true }]) {
      const res = await request(t.app).patch(`/v1/webhooks/${id}`).set(bearer(manager)).send(patch);
      expect(res.status, `${JSON.stringify(patch)}: ${res.text}`).toBe(403);
    }
    // what sends no verdict data elsewhere stays with keys:manage: pausing, describing, removing, a test event
    expect((await request(t.app).patch(`/v1/webhooks/${id}`).set(bearer(manager)).send({ enabled: false, description: 'paused' })).status).toBe(200);
    expect((await request(t.app).post(`/v1/webhooks/${id}/test`).set(bearer(manager))).status).toBe(202);
    expect((await request(t.app).delete(`/v1/webhooks/${id}`).set(bearer(manager))).status).toBe(204);
  });

  it('lets an admin session manage endpoints as before', async () => {
    const org = await createTestOrganisation('Access packer admin');
    const admin = await createTestUser(org.id, 'admin');
    const cookie = await sessionCookieFor(admin);
    const res = await request(t.app).post('/v1/webhooks').set('Cookie', cookie).set('X-Lotproof-Console', '1').send(hook);
    expect(res.status, res.text).toBe(201);
  });
});

describe('the audit trail', () => {
  it('records every webhook create, change, test and removal, with who did it and without the URL query', async () => {
    const org = await createTestOrganisation('Audited hooks packer');
    const key = await createTestKey(org.id, ['keys:manage', 'verdicts:read', 'audit:read']);
    const made = await request(t.app).post('/v1/webhooks').set(bearer(key)).set('Idempotency-Key', 'audit-hook-1').send(hook);
    expect(made.status).toBe(201);
    // a replay creates nothing, so it records nothing
    expect((await request(t.app).post('/v1/webhooks').set(bearer(key)).set('Idempotency-Key', 'audit-hook-1').send(hook)).status).toBe(201);
    const id = made.body.id as string;
    expect((await request(t.app).patch(`/v1/webhooks/${id}`).set(bearer(key)).send({ url: 'https://moved.access.example/in', enabled: false })).status).toBe(200);
    expect((await request(t.app).post(`/v1/webhooks/${id}/test`).set(bearer(key))).status).toBe(202);
    expect((await request(t.app).delete(`/v1/webhooks/${id}`).set(bearer(key))).status).toBe(204);

    const trail = await request(t.app).get('/v1/audit-events?limit=50').set(bearer(key));
    expect(trail.status, trail.text).toBe(200);
    const hooks = (trail.body.items as Array<{ action: string; actor: { kind: string }; target: { kind: string; id: string } | null; details: Record<string, unknown> }>)
      .filter((e) => e.action.startsWith('webhook.'))
      .reverse();
    expect(hooks.map((e) => e.action)).toEqual(['webhook.created', 'webhook.updated', 'webhook.tested', 'webhook.deleted']);
    for (const e of hooks) {
      expect(e.target).toEqual({ kind: 'webhook', id });
      expect(e.actor.kind).toBe('api-key');
    }
    expect(hooks[0]!.details).toMatchObject({ url: 'https://hooks.access.example/in', events: hook.events });
    expect(hooks[1]!.details).toMatchObject({ changed: expect.arrayContaining(['url', 'enabled']) });
    expect(JSON.stringify(trail.body)).not.toContain('s3cr3t-query-value');
    expect(JSON.stringify(trail.body)).not.toContain(made.body.secret);
  });
});

describe('test events', () => {
  it('are limited per endpoint: a second one within seconds is a 429 problem with Retry-After', async () => {
    const org = await createTestOrganisation('Throttled hooks packer');
    const key = await createTestKey(org.id, ['keys:manage', 'verdicts:read']);
    const a = (await request(t.app).post('/v1/webhooks').set(bearer(key)).send(hook)).body.id as string;
    const b = (await request(t.app).post('/v1/webhooks').set(bearer(key)).send(hook)).body.id as string;
    const burst = await Promise.all(Array.from({ length: 10 }, () => request(t.app).post(`/v1/webhooks/${a}/test`).set(bearer(key))));
    expect(burst.filter((r) => r.status === 202)).toHaveLength(1);
    const limited = burst.filter((r) => r.status === 429);
    expect(limited).toHaveLength(9);
    expect(limited[0]!.headers['content-type']).toMatch(/problem\+json/);
    expect(Number(limited[0]!.headers['retry-after'])).toBeGreaterThanOrEqual(1);
    // another endpoint has its own allowance
    expect((await request(t.app).post(`/v1/webhooks/${b}/test`).set(bearer(key))).status).toBe(202);
    const log = await request(t.app).get(`/v1/webhooks/${a}/deliveries`).set(bearer(key));
    expect(log.body.items).toHaveLength(1);
  });
});
