// With the database gone, /readyz is 503 and API calls are 503 problems; when it returns, the same
// process recovers without a restart. Uses a cluster of its own, so stopping it disturbs no other test.
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { openDatabase } from '../../server/db/database';
import { migrate } from '../../server/db/migrate';
import { destroyCluster, freePort, startCluster, type RunningCluster } from '../../server/platform/embedded-postgres';
import { buildTestApp, createTestKey, createTestOrganisation, type TestApp } from '../support/app';

let cluster: RunningCluster;
let t: TestApp;
let key: string;
const dir = mkdtempSync(join(tmpdir(), 'lotproof-outage-pg-'));
let port: number;

beforeAll(async () => {
  port = await freePort();
  cluster = startCluster({ dir, port, database: 'outage' });
  const db = openDatabase(cluster.url, undefined, 4);
  await migrate(db.sequelize);
  t = buildTestApp({ databaseUrl: cluster.url }, db);
  const org = await createTestOrganisation();
  key = await createTestKey(org.id, ['verdicts:read']);
});

afterAll(async () => {
  await t?.close();
  if (cluster) destroyCluster(cluster);
});

describe('database outage', () => {
  it('reports 503 while the database is down and recovers when it is back', async () => {
    expect((await request(t.app).get('/readyz')).status).toBe(200);
    expect((await request(t.app).get('/v1/me').set('Authorization', `Bearer ${key}`)).status).toBe(200);

    cluster.stop();
    const ready = await request(t.app).get('/readyz');
    expect(ready.status).toBe(503);
    expect(ready.headers['content-type']).toMatch(/problem\+json/);
    const call = await request(t.app).get('/v1/me').set('Authorization', `Bearer ${key}`);
    expect(call.status).toBe(503);
    expect(call.headers['content-type']).toMatch(/problem\+json/);
    expect(call.body.detail).toMatch(/database is not reachable/);
    expect((await request(t.app).get('/healthz')).status).toBe(200);

    cluster = startCluster({ dir, port, database: 'outage' });
    let status = 0;
    for (let i = 0; i < 20 && status !== 200; i++) {
      status = (await request(t.app).get('/readyz')).status;
      if (status !== 200) await new Promise((r) => setTimeout(r, 250));
    }
    expect(status).toBe(200);
    expect((await request(t.app).get('/v1/me').set('Authorization', `Bearer ${key}`)).status).toBe(200);
  });
});
