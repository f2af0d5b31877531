// A webhook change in the audit trail names the before and after of each field it changed
// (issue 16, "Audit trail and roles"); a URL keeps only its origin and path there, as every webhook
// event does, since a receiver's token may travel in its query.
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildTestApp, createTestKey, createTestOrganisation, type TestApp } from '../support/app';

let t: TestApp;
beforeAll(() => {
  t = buildTestApp();
});
afterAll(async () => {
  await t.close();
});

const bearer = (k: string) => ({ Authorization: `Bearer ${k}` });

describe('webhook changes in the audit trail', () => {
  it('carry the before and after of each changed field, without the query of a URL', async () => {
    const org = await createTestOrganisation('Webhook audit changes packer (test)');
    const key = await createTestKey(org.id, ['keys:manage', 'verdicts:read', 'audit:read']);
    const made = await request(t.app).post('/v1/webhooks').set(bearer(key)).send({ url: 'https://hooks.changes.example/in?token=first-secret', events: ['verdict.created'], description: 'Line 1' });
    expect(made.status, made.text).toBe(201);
    const id = made.body.id as string;

    const patch = await request(t.app)
      .patch(`/v1/webhooks/${id}`)
      .set(bearer(key))
      .send({ url: 'https://other.changes.example/hook?token=second-secret', events: ['verdict.created'], description: 'Line 1 and 2', enabled: false });
    expect(patch.status, patch.text).toBe(200);

    const events = await request(t.app).get('/v1/audit-events?action=webhook.updated').set(bearer(key));
    expect(events.status, events.text).toBe(200);
    expect(events.body.items).toHaveLength(1);
    // events were sent unchanged: not among the changes
    expect(events.body.items[0].details.changes).toEqual([
      { field: '/url', before: 'https://hooks.changes.example/in', after: 'https://other.changes.example/hook' },
      { field: '/description', before: 'Line 1', after: 'Line 1 and 2' },
      { field: '/enabled', before: true, after: false },
    ]);
    expect(JSON.stringify(events.body.items)).not.toMatch(/secret/);
  });
});
