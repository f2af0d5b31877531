// Issue 14, item 13: one Idempotency-Key sent by many requests at once gives one creation; every
// other request replays the first reply byte for byte (or, with other bytes, is refused as
// `idempotency-key-reused`) — for webhooks and products, which go through core/idempotency.ts.
import request from 'supertest';
import { QueryTypes } from 'sequelize';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildTestApp, createTestKey, createTestOrganisation, type TestApp } from '../support/app';
import { OATS } from '../support/lots';

let t: TestApp;
const N = 50;

beforeAll(() => {
  t = buildTestApp({ rateLimits: { ...buildTestApp().ctx.config.rateLimits, perKeyPerMinute: 100_000, perOrganisationPerMinute: 100_000, perIpPerMinute: 100_000 } });
});
afterAll(() => t.close());

async function count(sql: string, bind: unknown[]): Promise<number> {
  const rows = await t.ctx.db.sequelize.query<{ n: number }>(sql, { bind, type: QueryTypes.SELECT });
  return rows[0]!.n;
}

/** N requests with one key and one body, all sent before any answer arrives. */
async function race(path: string, key: string, idemKey: string, body: object) {
  const sends = Array.from({ length: N }, () =>
    request(t.app).post(path).set('Authorization', `Bearer ${key}`).set('Idempotency-Key', idemKey).set('Content-Type', 'application/json').send(JSON.stringify(body)),
  );
  return Promise.all(sends);
}

function expectOneCreationReplayed(replies: request.Response[]) {
  const statuses = new Set(replies.map((r) => r.status));
  expect([...statuses], replies.map((r) => `${r.status} ${r.text.slice(0, 120)}`).slice(0, 5).join('\n')).toEqual([201]);
  expect(new Set(replies.map((r) => r.text)).size).toBe(1);
  expect(replies.filter((r) => r.headers['idempotent-replayed'] === 'true')).toHaveLength(N - 1);
}

describe('50 concurrent POSTs with one Idempotency-Key', () => {
  it('create one webhook endpoint, with one secret, and replay it to the other 49', async () => {
    const org = await createTestOrganisation('Race packer hooks');
    const key = await createTestKey(org.id, ['keys:manage', 'verdicts:read']);
    const replies = await race('/v1/webhooks', key, 'race-hook-1', { url: 'https://hooks.race.example/in', events: ['verdict.created'] });
    expectOneCreationReplayed(replies);
    expect(await count('SELECT count(*)::int AS n FROM webhook_endpoints WHERE organisation_id = $1', [org.id])).toBe(1);
    expect(new Set(replies.map((r) => r.body.secret)).size).toBe(1);
  }, 30_000);

  it('create one product and replay it to the other 49 (no 409)', async () => {
    const org = await createTestOrganisation('Race packer products');
    const key = await createTestKey(org.id, ['products:write']);
    const replies = await race('/v1/products', key, 'race-product-1', { ...OATS, sku: 'RACE-1' });
    expectOneCreationReplayed(replies);
    expect(await count('SELECT count(*)::int AS n FROM products WHERE organisation_id = $1', [org.id])).toBe(1);
  }, 30_000);

  it('refuse the key reused with other bytes, even while the first is being created', async () => {
    const org = await createTestOrganisation('Race packer mixed');
    const key = await createTestKey(org.id, ['products:write']);
    const sends = Array.from({ length: 20 }, (_, i) =>
      request(t.app).post('/v1/products').set('Authorization', `Bearer ${key}`).set('Idempotency-Key', 'race-mixed').send({ ...OATS, sku: i % 2 ? 'MIX-A' : 'MIX-B' }),
    );
    const replies = await Promise.all(sends);
    const created = replies.filter((r) => r.status === 201);
    const refused = replies.filter((r) => r.status === 422);
    expect(created.length + refused.length, replies.map((r) => `${r.status} ${r.text.slice(0, 100)}`).join('\n')).toBe(20);
    expect(new Set(created.map((r) => r.text)).size).toBe(1);
    expect(refused.every((r) => /idempotency-key-reused/.test(r.body.type))).toBe(true);
    expect(await count('SELECT count(*)::int AS n FROM products WHERE organisation_id = $1', [org.id])).toBe(1);
  }, 30_000);
});
