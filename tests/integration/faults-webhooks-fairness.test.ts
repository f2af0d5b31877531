// Issue 14, item 8: one tenant's silent receiver must not hold up another tenant's webhooks. 32
// events for organisation A's receiver, which takes every connection and never answers, then one
// event for organisation B's receiver: B's arrives within a few seconds, and A's receiver never
// has more than its endpoint's share of deliveries in flight at once. A cluster of its own, so the
// job workers see only this test's deliveries.
import { randomUUID } from 'node:crypto';
import { mkdtempSync } from 'node:fs';
import { createServer, type Server } from 'node:http';
import type { AddressInfo } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { openDatabase } from '../../server/db/database';
import { migrate } from '../../server/db/migrate';
import { startJobs, type RunningJobs } from '../../server/jobs';
import { destroyCluster, freePort, startCluster, type RunningCluster } from '../../server/platform/embedded-postgres';
import { buildTestApp, createTestKey, createTestOrganisation, type TestApp } from '../support/app';

const dir = mkdtempSync(join(tmpdir(), 'lotproof-faults-fair-pg-'));
let cluster: RunningCluster;
let t: TestApp;
let jobs: RunningJobs | null = null;
const servers: Server[] = [];

beforeAll(async () => {
  cluster = startCluster({ dir, port: await freePort(), database: 'faults_fair' });
  const db = openDatabase(cluster.url, undefined, 10);
  await migrate(db.sequelize);
  const base = buildTestApp({ databaseUrl: cluster.url }, db);
  t = buildTestApp({ databaseUrl: cluster.url, verdicts: { ...base.ctx.config.verdicts, webhookAllowPrivateTargets: true, webhookTimeoutMs: 10_000, webhookRetryDelaySeconds: 10 } }, db);
}, 60_000);

afterAll(async () => {
  for (const s of servers) s.closeAllConnections();
  await jobs?.stop();
  for (const s of servers) s.close();
  await t?.close();
  if (cluster) destroyCluster(cluster);
}, 60_000);

async function listen(handler: Parameters<typeof createServer>[1]): Promise<string> {
  const s = createServer(handler);
  servers.push(s);
  await new Promise<void>((r) => s.listen(0, '127.0.0.1', () => r()));
  return `http://127.0.0.1:${(s.address() as AddressInfo).port}/hook`;
}

async function endpointFor(orgName: string, url: string): Promise<{ orgId: string; endpointId: string; key: string }> {
  const org = await createTestOrganisation(orgName);
  const key = await createTestKey(org.id, ['keys:manage', 'verdicts:read']);
  const res = await request(t.app).post('/v1/webhooks').set('Authorization', `Bearer ${key}`).send({ url, events: ['verdict.created'] });
  expect(res.status, res.text).toBe(201);
  return { orgId: org.id, endpointId: res.body.id, key };
}

/** Queues an event for an endpoint the way the ledger does: an outbox row (here a test event). */
async function queueEvent(orgId: string, endpointId: string): Promise<string> {
  const id = randomUUID();
  await t.ctx.db.sequelize.query(
    `INSERT INTO webhook_deliveries (id, organisation_id, endpoint_id, verdict_id, event_type, payload) VALUES ($1, $2, $3, NULL, 'webhook.test', $4)`,
    { bind: [id, orgId, endpointId, JSON.stringify({ type: 'webhook.test', timestamp: new Date().toISOString(), data: { endpointId } })] },
  );
  return id;
}

describe('two tenants, one receiver silent', () => {
  it("delivers B's event within a few seconds while A's 32 events hang, and caps A's deliveries in flight", async () => {
    let openAtA = 0;
    let mostAtA = 0;
    const silent = await listen((req, res) => {
      openAtA++;
      mostAtA = Math.max(mostAtA, openAtA);
      res.on('close', () => openAtA--); // the sender gave up on it
      req.resume(); // and never answer
    });
    let arrivedAtB = 0;
    const fast = await listen((req, res) => {
      req.resume();
      req.on('end', () => {
        arrivedAtB = Date.now();
        res.writeHead(204).end();
      });
    });
    const a = await endpointFor('Silent receiver packer', silent);
    const b = await endpointFor('Quick receiver packer', fast);
    for (let i = 0; i < 32; i++) await queueEvent(a.orgId, a.endpointId);
    await queueEvent(b.orgId, b.endpointId);

    const started = Date.now();
    jobs = await startJobs(t.ctx);
    const deadline = started + 15_000;
    while (!arrivedAtB && Date.now() < deadline) await new Promise((r) => setTimeout(r, 50));
    const waited = (arrivedAtB || Date.now()) - started;
    console.log(`B's event arrived after ${waited} ms; A's receiver had at most ${mostAtA} deliveries open at once`);
    expect(arrivedAtB, `B's event had not arrived after ${waited} ms`).toBeGreaterThan(0);
    expect(waited).toBeLessThan(5_000);
    // A's receiver is kept to its endpoint's share of the workers
    await new Promise((r) => setTimeout(r, 1_000));
    expect(mostAtA).toBeGreaterThan(0);
    expect(mostAtA).toBeLessThanOrEqual(16); // its endpoint's cap (server/jobs/index.ts)
  }, 45_000);
});
