// The ledger under load: 200 concurrent submissions through two app instances (two listeners, two
// connection pools, two group-commit appenders — as two processes would be) against one
// organisation leave one unbroken chain, exactly one verdict per idempotency key, and one webhook
// delivery per verdict at a local receiver. Also: a changed record is found by the chain walk,
// and the fast canonicalisation agrees with the reference package.
import { createServer, type IncomingMessage, type Server } from 'node:http';
import type { AddressInfo } from 'node:net';
import { Webhook } from 'standardwebhooks';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startJobs, type RunningJobs } from '../../server/jobs';
import { canonicalJson, canonicalJsonReference } from '../../server/verdicts/canonical';
import { Sequelize } from 'sequelize';
import { buildTestApp, createTestKey, createTestOrganisation, testSuperuserUrl, type TestApp } from '../support/app';
import { createProduct, lotBody } from '../support/lots';

let a: TestApp;
let b: TestApp;
let servers: Server[] = [];
let urls: string[] = [];
let jobs: RunningJobs[] = [];

function listen(app: TestApp['app']): Promise<{ server: Server; url: string }> {
  return new Promise((resolve) => {
    const server = app.listen(0, '127.0.0.1', () => resolve({ server, url: `http://127.0.0.1:${(server.address() as AddressInfo).port}` }));
  });
}

beforeAll(async () => {
  a = buildTestApp({ verdicts: { ...buildTestApp().ctx.config.verdicts, webhookAllowPrivateTargets: true, webhookRetryDelaySeconds: 1 } });
  b = buildTestApp({ verdicts: { ...a.ctx.config.verdicts } });
  const la = await listen(a.app);
  const lb = await listen(b.app);
  servers = [la.server, lb.server];
  urls = [la.url, lb.url];
});
afterAll(async () => {
  for (const j of jobs) await j.stop();
  for (const s of servers) await new Promise((r) => s.close(r));
  await a.close();
  await b.close();
});

describe('concurrent submissions from two server instances', () => {
  it('leave an unbroken chain, one verdict per idempotency key, and one webhook delivery per verdict', async () => {
    const org = await createTestOrganisation('Busy packer');
    const key = await createTestKey(org.id, ['lots:submit', 'verdicts:read', 'products:write', 'audit:read', 'keys:manage']);
    const auth = { Authorization: `Bearer ${key}` };
    await createProduct(a.app, key);

    // A local receiver that checks every signature and counts deliveries per verdict.
    const received = new Map<string, number>();
    const badSignatures: string[] = [];
    let secret = '';
    const receiver = createServer((req: IncomingMessage, res) => {
      let body = '';
      req.on('data', (c) => (body += c));
      req.on('end', () => {
        try {
          const event = new Webhook(secret).verify(body, req.headers as Record<string, string>) as { data: { verdictId: string } };
          received.set(event.data.verdictId, (received.get(event.data.verdictId) ?? 0) + 1);
        } catch (err) {
          badSignatures.push(String(err));
        }
        res.writeHead(204).end();
      });
    });
    await new Promise<void>((r) => receiver.listen(0, '127.0.0.1', () => r()));
    const hookUrl = `http://127.0.0.1:${(receiver.address() as AddressInfo).port}/hook`;
    const hook = await request(a.app).post('/v1/webhooks').set(auth).send({ url: hookUrl, events: ['verdict.created'] });
    expect(hook.status, JSON.stringify(hook.body)).toBe(201);
    secret = hook.body.secret;

    // 160 distinct lots plus 40 retries of 20 of them (each key sent three times in all), half to each instance.
    const bodies = Array.from({ length: 160 }, (_, i) => ({ key: `k-${i}`, body: lotBody('T-OATS-500', 1000 + i) }));
    const sends = [...bodies, ...bodies.slice(0, 20), ...bodies.slice(0, 20)];
    const replies = await Promise.all(
      sends.map((s, i) => request(urls[i % 2]!).post('/v1/lots').set(auth).set('Idempotency-Key', s.key).send(s.body)),
    );
    expect(replies.map((r) => r.status).filter((s) => s !== 201)).toEqual([]);
    const byKey = new Map<string, Set<string>>();
    replies.forEach((r, i) => {
      const k = sends[i]!.key;
      if (!byKey.has(k)) byKey.set(k, new Set());
      byKey.get(k)!.add(r.body.id);
    });
    expect([...byKey.values()].every((ids) => ids.size === 1)).toBe(true);

    const [rows] = await a.ctx.db.sequelize.query('SELECT count(*)::int AS n, max(sequence)::int AS top FROM verdicts WHERE organisation_id = $1', { bind: [org.id] });
    expect(rows).toEqual([{ n: 160, top: 160 }]);
    const chain = await request(urls[1]!).get('/v1/ledger/verify').set(auth);
    expect(chain.body).toMatchObject({ intact: true, verdictsChecked: 160, firstBreak: null });

    // Deliver: both instances run the job workers, as two processes would.
    jobs = [await startJobs(a.ctx), await startJobs(b.ctx)];
    const deadline = Date.now() + 60_000;
    while (received.size < 160 && Date.now() < deadline) await new Promise((r) => setTimeout(r, 200));
    await new Promise((r) => setTimeout(r, 1500)); // room for any duplicate to arrive
    expect(badSignatures).toEqual([]);
    expect(received.size).toBe(160);
    expect([...received.values()].every((n) => n === 1)).toBe(true);

    const log = await request(a.app).get(`/v1/webhooks/${hook.body.id}/deliveries?limit=200`).set(auth);
    expect(log.body.items).toHaveLength(160);
    expect(log.body.items.every((d: { status: string; attemptLog: unknown[] }) => d.status === 'delivered' && d.attemptLog.length === 1)).toBe(true);

    const test = await request(a.app).post(`/v1/webhooks/${hook.body.id}/test`).set(auth);
    expect(test.status).toBe(202);
    await new Promise<void>((r) => receiver.close(() => r()));
  }, 120_000);
});

describe('a changed record', () => {
  it('is reported by the chain walk at its position', async () => {
    const org = await createTestOrganisation('Tampered packer');
    const key = await createTestKey(org.id, ['lots:submit', 'products:write', 'audit:read']);
    const auth = { Authorization: `Bearer ${key}` };
    await createProduct(a.app, key);
    for (let i = 0; i < 4; i++) expect((await request(a.app).post('/v1/lots').set(auth).send(lotBody('T-OATS-500', 2000 + i))).status).toBe(201);
    // Only the database administrator can do this (the app's role may not: ledger-privileges.test.ts):
    // switch the append-only trigger off for one forged change.
    const sq = new Sequelize(testSuperuserUrl(), { dialect: 'postgres', logging: false });
    try {
      await sq.transaction(async (t) => {
        await sq.query('ALTER TABLE verdicts DISABLE TRIGGER verdicts_append_only', { transaction: t });
        await sq.query(`UPDATE verdicts SET record = replace(record, '"decision":"conforming"', '"decision":"nonconforming"') WHERE organisation_id = $1 AND sequence = 3`, { bind: [org.id], transaction: t });
        await sq.query('ALTER TABLE verdicts ENABLE TRIGGER verdicts_append_only', { transaction: t });
      });
    } finally {
      await sq.close();
    }
    const chain = await request(a.app).get('/v1/ledger/verify').set(auth);
    expect(chain.body.intact).toBe(false);
    expect(chain.body.firstBreak.sequence).toBe(3);
    expect(chain.body.firstBreak.reason).toMatch(/hash/);
    expect(chain.body.verdictsChecked).toBe(2);
  });
});

describe('canonical JSON', () => {
  it('the fast path agrees with the reference RFC 8785 package', () => {
    const values = [
      { b: [1, 2.5, -0, 1e21, 1e-7, 0.1 + 0.2], a: 'é\u2028"\\', c: { z: null, y: true, '€': 1, '\u0080': 2 } },
      { m: Array.from({ length: 500 }, (_, i) => i / 7 - 30), nested: [[1, 2], [{ k: 'v' }]] },
    ];
    for (const v of values) expect(canonicalJson(v)).toBe(canonicalJsonReference(v));
  });
});
