// Issue 14, item 14: webhook delivery scales with the backlog and stays off the lot path's
// connections. A backlog of deliveries to a fast local receiver (two organisations, three
// endpoints) is drained by one process's job workers; the test prints deliveries per second and
// checks that the workers never used the API's Sequelize pool. A cluster of its own, so the
// workers see only this test's deliveries.
import { randomUUID } from 'node:crypto';
import { mkdtempSync } from 'node:fs';
import { createServer, type Server } from 'node:http';
import type { AddressInfo } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import request from 'supertest';
import type { Sequelize } from 'sequelize';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { openDatabase } from '../../server/db/database';
import { migrate } from '../../server/db/migrate';
import { startJobs, type RunningJobs } from '../../server/jobs';
import { destroyCluster, freePort, startCluster, type RunningCluster } from '../../server/platform/embedded-postgres';
import { buildTestApp, createTestKey, createTestOrganisation, type TestApp } from '../support/app';

const dir = mkdtempSync(join(tmpdir(), 'lotproof-faults-rate-pg-'));
let cluster: RunningCluster;
let t: TestApp;
let jobs: RunningJobs | null = null;
let receiver: Server;

beforeAll(async () => {
  cluster = startCluster({ dir, port: await freePort(), database: 'faults_rate' });
  const db = openDatabase(cluster.url, undefined, 10);
  await migrate(db.sequelize);
  const base = buildTestApp({ databaseUrl: cluster.url }, db);
  t = buildTestApp({ databaseUrl: cluster.url, verdicts: { ...base.ctx.config.verdicts, webhookAllowPrivateTargets: true } }, db);
}, 60_000);

afterAll(async () => {
  await jobs?.stop();
  receiver?.close();
  await t?.close();
  if (cluster) destroyCluster(cluster);
}, 60_000);

describe('a backlog of webhook deliveries', () => {
  it('drains at well over a hundred per second, without touching the API pool', async () => {
    const arrived = new Set<string>();
    receiver = createServer((req, res) => {
      arrived.add(String(req.headers['webhook-id']));
      req.resume();
      req.on('end', () => res.writeHead(204).end());
    });
    await new Promise<void>((r) => receiver.listen(0, '127.0.0.1', () => r()));
    const url = `http://127.0.0.1:${(receiver.address() as AddressInfo).port}/hook`;

    const endpoints: Array<{ orgId: string; endpointId: string }> = [];
    for (const [name, count] of [['Backlog packer one', 2], ['Backlog packer two', 1]] as const) {
      const org = await createTestOrganisation(name);
      const key = await createTestKey(org.id, ['keys:manage', 'verdicts:read']);
      for (let i = 0; i < count; i++) {
        const res = await request(t.app).post('/v1/webhooks').set('Authorization', `Bearer ${key}`).send({ url, events: ['verdict.created'] });
        expect(res.status).toBe(201);
        endpoints.push({ orgId: org.id, endpointId: res.body.id });
      }
    }
    // The backlog, as the ledger writes it: outbox rows (test events here), 1 000 per endpoint.
    const PER_ENDPOINT = 1_000;
    for (const e of endpoints) {
      await t.ctx.db.sequelize.query(
        `INSERT INTO webhook_deliveries (id, organisation_id, endpoint_id, verdict_id, event_type, payload)
         SELECT gen_random_uuid(), $1, $2, NULL, 'webhook.test', json_build_object('type', 'webhook.test', 'data', json_build_object('n', g))::text
         FROM generate_series(1, $3) g`,
        { bind: [e.orgId, e.endpointId, PER_ENDPOINT] },
      );
    }
    const total = PER_ENDPOINT * endpoints.length;

    // The workers get a Sequelize that counts every use: they must not use it at all.
    let apiPoolUses = 0;
    const watched = new Proxy(t.ctx.db.sequelize, {
      get(target, prop, receiverObj) {
        if (prop === 'query' || prop === 'connectionManager' || prop === 'transaction') apiPoolUses++;
        return Reflect.get(target, prop, receiverObj);
      },
    }) as Sequelize;
    const started = Date.now();
    jobs = await startJobs({ ...t.ctx, db: { ...t.ctx.db, sequelize: watched } });
    const deadline = started + 25_000;
    const delivered = async () => {
      const [rows] = await t.ctx.db.sequelize.query(`SELECT count(*)::int AS n FROM webhook_deliveries WHERE status = 'delivered'`);
      return (rows as Array<{ n: number }>)[0]!.n;
    };
    let n = 0;
    while ((n = await delivered()) < total && Date.now() < deadline) await new Promise((r) => setTimeout(r, 100));
    const seconds = (Date.now() - started) / 1000;
    const rate = n / seconds;
    console.log(`webhook throughput: ${n} of ${total} deliveries in ${seconds.toFixed(1)} s = ${rate.toFixed(0)} per second (${arrived.size} distinct arrivals); API pool uses by the workers: ${apiPoolUses}`);
    expect(n).toBe(total);
    expect(arrived.size).toBe(total);
    expect(rate).toBeGreaterThan(100); // before: 15 per second (8 workers, one job per worker per 0.5 s poll)
    expect(apiPoolUses).toBe(0);
    const [attempts] = await t.ctx.db.sequelize.query('SELECT count(*)::int AS n FROM webhook_attempts');
    expect((attempts as Array<{ n: number }>)[0]!.n).toBe(total);
  }, 60_000);
});
