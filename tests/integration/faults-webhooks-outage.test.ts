// Issue 14, item 1: a PostgreSQL outage while webhook deliveries are in flight must not end the
// server. A real server process (a child, as in production) on a cluster of this test's own,
// deliveries in flight to a slow local receiver, PostgreSQL stopped for about 5 s and started
// again: the process is still alive afterwards and every delivery completes.
import { spawn, type ChildProcess } from 'node:child_process';
import { randomBytes } from 'node:crypto';
import { mkdtempSync, rmSync } from 'node:fs';
import { createServer, type Server } from 'node:http';
import type { AddressInfo } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { openDatabase, type Database } from '../../server/db/database';
import { migrate } from '../../server/db/migrate';
import { destroyCluster, freePort, startCluster, type RunningCluster } from '../../server/platform/embedded-postgres';
import { createTestKey, createTestOrganisation } from '../support/app';
import { OATS, lotBody } from '../support/lots';

const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));
const dir = mkdtempSync(join(tmpdir(), 'lotproof-faults-outage-pg-'));
const dataDir = mkdtempSync(join(tmpdir(), 'lotproof-faults-outage-data-'));
let cluster: RunningCluster;
let pgPort: number;
let db: Database;
let child: ChildProcess | null = null;
let output = '';
let receiver: Server;

/** The API server as production runs it, minus the embedded cluster: a Node process of its own. */
function startChild(databaseUrl: string, port: number): ChildProcess {
  const entry = [
    "import { loadConfig } from './server/config.ts';",
    "import { createLogger } from './server/logger.ts';",
    "import { startServer } from './server/server.ts';",
    'const config = loadConfig();',
    'const running = await startServer({ ...config, databaseUrl: config.databaseUrl }, createLogger(config.logLevel));',
    "console.log('listening ' + running.url);",
    "process.on('SIGTERM', () => void running.stop().then(() => process.exit(0)));",
  ].join('\n');
  const env: NodeJS.ProcessEnv = {
    ...process.env,
    DATABASE_URL: databaseUrl,
    HOST: '127.0.0.1',
    PORT: String(port),
    NODE_ENV: 'test',
    LOG_LEVEL: 'warn',
    LOTPROOF_DATA_DIR: dataDir,
    LOTPROOF_SECRETS_KEY: randomBytes(32).toString('base64'),
    LOTPROOF_SEED_DEMO: 'false',
    LOTPROOF_SMTP_FAKE: 'false',
    LOTPROOF_WEBHOOK_ALLOW_PRIVATE: 'true',
    LOTPROOF_WEBHOOK_RETRY_DELAY_SECONDS: '1',
    LOTPROOF_WEBHOOK_TIMEOUT_MS: '8000',
  };
  delete env.LOTPROOF_VALIDATE_RESPONSES;
  const proc = spawn(process.execPath, ['--import', 'tsx', '--input-type=module', '-e', entry], { cwd: process.cwd(), env, stdio: ['ignore', 'pipe', 'pipe'] });
  proc.stdout!.on('data', (d) => (output += d));
  proc.stderr!.on('data', (d) => (output += d));
  return proc;
}

async function until(what: string, ok: () => boolean | Promise<boolean>, timeoutMs: number): Promise<void> {
  const deadline = Date.now() + timeoutMs;
  while (!(await ok())) {
    if (child && child.exitCode !== null) throw new Error(`the server exited (code ${child.exitCode}) while waiting for ${what}:\n${output.slice(-3000)}`);
    if (Date.now() > deadline) throw new Error(`no ${what} within ${timeoutMs} ms:\n${output.slice(-3000)}`);
    await sleep(100);
  }
}

beforeAll(async () => {
  pgPort = await freePort();
  cluster = startCluster({ dir, port: pgPort, database: 'faults_outage' });
  db = openDatabase(cluster.url, undefined, 4);
  await migrate(db.sequelize);
}, 60_000);

afterAll(async () => {
  if (child && child.exitCode === null) child.kill('SIGKILL');
  receiver?.closeAllConnections();
  receiver?.close();
  await db?.close().catch(() => {});
  if (cluster) destroyCluster(cluster);
  rmSync(dataDir, { recursive: true, force: true });
});

describe('a PostgreSQL outage with webhook deliveries in flight', () => {
  it('leaves the server process running, and every delivery completes once the database is back', async () => {
    // A receiver that takes 3 s to answer: deliveries are in flight when the database goes.
    const arrived = new Map<string, number>();
    receiver = createServer((req, res) => {
      req.resume();
      req.on('end', () => {
        const id = String(req.headers['webhook-id']);
        arrived.set(id, (arrived.get(id) ?? 0) + 1);
        setTimeout(() => res.writeHead(204).end(), 3_000);
      });
    });
    await new Promise<void>((r) => receiver.listen(0, '127.0.0.1', () => r()));
    const hookUrl = `http://127.0.0.1:${(receiver.address() as AddressInfo).port}/hook`;

    const org = await createTestOrganisation('Outage packer');
    const key = await createTestKey(org.id, ['lots:submit', 'verdicts:read', 'products:write', 'keys:manage']);
    const port = await freePort();
    child = startChild(cluster.url, port);
    const api = `http://127.0.0.1:${port}`;
    await until('a listening server', () => output.includes('listening '), 45_000);
    const call = (method: string, path: string, body?: unknown) =>
      fetch(`${api}${path}`, { method, headers: { Authorization: `Bearer ${key}`, 'Content-Type': 'application/json' }, body: body === undefined ? undefined : JSON.stringify(body) });
    expect((await call('POST', '/v1/webhooks', { url: hookUrl, events: ['verdict.created'] })).status).toBe(201);
    expect((await call('POST', '/v1/products', OATS)).status).toBe(201);
    const LOTS = 12;
    for (let i = 0; i < LOTS; i++) expect((await call('POST', '/v1/lots', lotBody(OATS.sku, 7000 + i))).status).toBe(201);

    // Deliveries in flight, then the database goes for about 5 s (the receiver answers meanwhile).
    await until('deliveries in flight', () => arrived.size >= 4, 20_000);
    cluster.stop();
    await sleep(5_000);
    cluster = startCluster({ dir, port: pgPort, database: 'faults_outage' });

    await until('every delivery recorded as delivered', async () => {
      const [rows] = await db.sequelize.query(`SELECT count(*)::int AS n FROM webhook_deliveries WHERE organisation_id = '${org.id}' AND status = 'delivered'`).catch(() => [[{ n: -1 }]]);
      return (rows as Array<{ n: number }>)[0]!.n === LOTS;
    }, 40_000);
    expect(child.exitCode, output.slice(-3000)).toBeNull();
    expect(arrived.size).toBe(LOTS);
    expect((await fetch(`${api}/healthz`)).status).toBe(200);
    expect((await fetch(`${api}/readyz`)).status).toBe(200);
    // what it logged about the outage names no secret
    expect(output).not.toMatch(/whsec_|lpk_|password=/);
  }, 120_000);
});
