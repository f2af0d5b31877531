// Issue 14, items 14 and 16: a delivery in flight when its server is killed (kill -9). The attempt
// made before the crash is in the delivery log at once (not only the one after it), and another
// server delivers it again soon after — not a quarter of an hour later — with the same webhook-id,
// the log then showing both attempts and the delivery delivered. Real server processes on a
// cluster of this test's own.
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

const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));
const dir = mkdtempSync(join(tmpdir(), 'lotproof-faults-crash-pg-'));
const dataDir = mkdtempSync(join(tmpdir(), 'lotproof-faults-crash-data-'));
const secretsKey = randomBytes(32).toString('base64');
let cluster: RunningCluster;
let db: Database;
const children: ChildProcess[] = [];
let output = '';
let receiver: Server;

function startChild(port: number): ChildProcess {
  const entry = [
    "import { loadConfig } from './server/config.ts';",
    "import { createLogger } from './server/logger.ts';",
    "import { startServer } from './server/server.ts';",
    'const config = loadConfig();',
    'const running = await startServer({ ...config, databaseUrl: config.databaseUrl }, createLogger(config.logLevel));',
    "console.log('listening ' + running.url);",
  ].join('\n');
  const env: NodeJS.ProcessEnv = {
    ...process.env,
    DATABASE_URL: cluster.url,
    HOST: '127.0.0.1',
    PORT: String(port),
    NODE_ENV: 'test',
    LOG_LEVEL: 'warn',
    LOTPROOF_DATA_DIR: dataDir,
    LOTPROOF_SECRETS_KEY: secretsKey,
    LOTPROOF_SEED_DEMO: 'false',
    LOTPROOF_SMTP_FAKE: 'false',
    LOTPROOF_WEBHOOK_ALLOW_PRIVATE: 'true',
    LOTPROOF_WEBHOOK_RETRY_DELAY_SECONDS: '1',
    LOTPROOF_WEBHOOK_TIMEOUT_MS: '2000',
  };
  delete env.LOTPROOF_VALIDATE_RESPONSES;
  const proc = spawn(process.execPath, ['--import', 'tsx', '--input-type=module', '-e', entry], { cwd: process.cwd(), env, stdio: ['ignore', 'pipe', 'pipe'] });
  proc.stdout!.on('data', (d) => (output += d));
  proc.stderr!.on('data', (d) => (output += d));
  children.push(proc);
  return proc;
}

async function until(what: string, ok: () => boolean | Promise<boolean>, timeoutMs: number): Promise<void> {
  const deadline = Date.now() + timeoutMs;
  while (!(await ok())) {
    if (Date.now() > deadline) throw new Error(`no ${what} within ${timeoutMs} ms:\n${output.slice(-3000)}`);
    await sleep(100);
  }
}

beforeAll(async () => {
  cluster = startCluster({ dir, port: await freePort(), database: 'faults_crash' });
  db = openDatabase(cluster.url, undefined, 4);
  await migrate(db.sequelize);
}, 60_000);

afterAll(async () => {
  for (const c of children) if (c.exitCode === null && c.signalCode === null) c.kill('SIGKILL');
  receiver?.closeAllConnections();
  receiver?.close();
  await db?.close().catch(() => {});
  if (cluster) destroyCluster(cluster);
  rmSync(dataDir, { recursive: true, force: true });
});

describe('a server killed with a delivery in flight', () => {
  it('logs the attempt made before the crash, and another server delivers it again within seconds', async () => {
    let answer = false; // first: take the delivery and never answer (the sender dies meanwhile)
    const arrivals: string[] = [];
    receiver = createServer((req, res) => {
      arrivals.push(String(req.headers['webhook-id']));
      req.resume();
      if (answer) req.on('end', () => res.writeHead(204).end());
    });
    await new Promise<void>((r) => receiver.listen(0, '127.0.0.1', () => r()));
    const hookUrl = `http://127.0.0.1:${(receiver.address() as AddressInfo).port}/hook`;
    const org = await createTestOrganisation('Crash packer');
    const key = await createTestKey(org.id, ['verdicts:read', 'keys:manage']);

    const firstPort = await freePort();
    const first = startChild(firstPort);
    await until('the first server', () => output.includes(`listening http://127.0.0.1:${firstPort}`), 45_000);
    const api1 = `http://127.0.0.1:${firstPort}`;
    const auth = { Authorization: `Bearer ${key}`, 'Content-Type': 'application/json' };
    const hook = await (await fetch(`${api1}/v1/webhooks`, { method: 'POST', headers: auth, body: JSON.stringify({ url: hookUrl, events: ['verdict.created'] }) })).json() as { id: string };
    const test = await fetch(`${api1}/v1/webhooks/${hook.id}/test`, { method: 'POST', headers: auth });
    expect(test.status).toBe(202);
    const deliveryId = ((await test.json()) as { id: string }).id;
    await until('the delivery at the receiver', () => arrivals.includes(deliveryId), 15_000);
    await sleep(300);
    first.kill('SIGKILL');
    await until('the first server gone', () => first.exitCode !== null || first.signalCode !== null, 5_000);

    // What the log says now: the attempt that was under way when the server died.
    const log = async (api: string) =>
      ((await (await fetch(`${api}/v1/webhooks/${hook.id}/deliveries`, { headers: auth })).json()) as { items: Array<{ id: string; status: string; attempts: number; attemptLog: Array<{ attempt: number; error: string | null; statusCode: number | null }> }> }).items.find((d) => d.id === deliveryId)!;
    const secondPort = await freePort();
    startChild(secondPort);
    await until('the second server', () => output.includes(`listening http://127.0.0.1:${secondPort}`), 45_000);
    const api2 = `http://127.0.0.1:${secondPort}`;
    const before = await log(api2);
    expect(before.attemptLog, JSON.stringify(before)).toHaveLength(1);
    expect(before.attemptLog[0]!.attempt).toBe(1);
    expect(before.attemptLog[0]!.statusCode).toBeNull();
    expect(before.attemptLog[0]!.error).toMatch(/no outcome yet/);

    // The receiver answers from now on: the delivery is made again, soon, and the log is right.
    answer = true;
    const crashedAt = Date.now();
    await until('the delivery delivered again', async () => (await log(api2)).status === 'delivered', 40_000);
    console.log(`delivered again ${Date.now() - crashedAt} ms after the second server was up`);
    const after = await log(api2);
    expect(after.attempts).toBe(2);
    expect(after.attemptLog.map((a) => a.attempt)).toEqual([1, 2]);
    expect(after.attemptLog[0]!.error).toMatch(/no outcome/i);
    expect(after.attemptLog[1]!.statusCode).toBe(204);
    expect(arrivals.filter((id) => id === deliveryId)).toHaveLength(2); // at least once: the same webhook-id twice
  }, 120_000);
});
