// Issue 14, the fault suite's combined run: two real server processes on one database under a steady
// load of lots, through a PostgreSQL stop and start, a kill -9 of each process in turn (each started
// again, as its supervisor would), and a webhook receiver that is down, then slow, then back.
//
// What must hold (issue 14, "A fault suite in the project"):
// - no 5xx but 503 with Retry-After, and no process exits that was not killed;
// - every lot acknowledged with 201 is stored exactly once (clients retry with the same
//   Idempotency-Key, on the other process, as a real client would);
// - the chain is whole: positions 1..n without a gap, each record hashing to its seal, each linking
//   to the previous seal, each signature valid with a published key (checked here with node:crypto,
//   not with the server's own check);
// - every verdict's webhook arrives at least once, and the delivery log is right: delivered, its last
//   attempt the 2xx, no attempt left "in flight", at least as many attempts logged as arrivals seen;
// - nothing is stored for a refused request.
import { spawn, type ChildProcess } from 'node:child_process';
import { createHash, createPublicKey, randomBytes, randomUUID, verify } from 'node:crypto';
import { mkdtempSync, rmSync } from 'node:fs';
import { createServer, type Server } from 'node:http';
import type { AddressInfo } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { QueryTypes } from 'sequelize';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { openDatabase, type Database } from '../../server/db/database';
import { migrate } from '../../server/db/migrate';
import { destroyCluster, freePort, startCluster, type RunningCluster } from '../../server/platform/embedded-postgres';
import { createTestKey, createTestOrganisation } from '../support/app';
import { lotBody, OATS } from '../support/lots';

const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));
const dir = mkdtempSync(join(tmpdir(), 'lotproof-faults-combined-pg-'));
const dataDir = mkdtempSync(join(tmpdir(), 'lotproof-faults-combined-data-'));
const secretsKey = randomBytes(32).toString('base64');
let cluster: RunningCluster;
let pgPort: number;
let db: Database;
let output = '';

interface Child {
  port: number;
  proc: ChildProcess;
  /** Killed on purpose by the test (its exit is expected). */
  killed: boolean;
}
const children: Child[] = [];

function startChild(port: number): Child {
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
    LOG_LEVEL: 'error',
    LOTPROOF_DATA_DIR: dataDir,
    LOTPROOF_SECRETS_KEY: secretsKey,
    LOTPROOF_SEED_DEMO: 'false',
    LOTPROOF_SMTP_FAKE: 'false',
    LOTPROOF_WEBHOOK_ALLOW_PRIVATE: 'true',
    LOTPROOF_WEBHOOK_RETRY_DELAY_SECONDS: '1',
    LOTPROOF_WEBHOOK_RETRY_LIMIT: '50',
    LOTPROOF_WEBHOOK_TIMEOUT_MS: '2000',
    // This run is about faults, not limits: one test client sends everything.
    LOTPROOF_RATE_LIMIT_PER_IP: '1000000',
    LOTPROOF_RATE_LIMIT_PER_KEY: '1000000',
    LOTPROOF_RATE_LIMIT_PER_ORG: '1000000',
  };
  delete env.LOTPROOF_VALIDATE_RESPONSES;
  const proc = spawn(process.execPath, ['--import', 'tsx', '--input-type=module', '-e', entry], { cwd: process.cwd(), env, stdio: ['ignore', 'pipe', 'pipe'] });
  proc.stdout!.on('data', (d) => (output += d));
  proc.stderr!.on('data', (d) => (output += d));
  const child = { port, proc, killed: false };
  children.push(child);
  return child;
}

async function until(what: string, ok: () => boolean | Promise<boolean>, timeoutMs: number): Promise<void> {
  const deadline = Date.now() + timeoutMs;
  while (!(await ok())) {
    if (Date.now() > deadline) throw new Error(`no ${what} within ${timeoutMs} ms:\n${output.slice(-3000)}`);
    await sleep(100);
  }
}

const listening = (c: Child) => until(`a server on ${c.port}`, () => output.includes(`listening http://127.0.0.1:${c.port}`), 60_000);

async function kill9AndRestart(c: Child): Promise<Child> {
  c.killed = true;
  c.proc.kill('SIGKILL');
  await until(`the server on ${c.port} gone`, () => c.proc.exitCode !== null || c.proc.signalCode !== null, 10_000);
  output = output.replaceAll(`listening http://127.0.0.1:${c.port}`, `(was listening on ${c.port})`);
  const again = startChild(c.port);
  await listening(again);
  return again;
}

/** The receiver's phases: refusing connections, answering after 1.2 s (inside the 2 s timeout), answering at once. */
type ReceiverMode = 'down' | 'slow' | 'up';

class Receiver {
  mode: ReceiverMode = 'down';
  port = 0;
  /** webhook-id of every request that reached the receiver and was answered 2xx. */
  readonly arrivals: string[] = [];
  private server: Server | null = null;

  async reservePort(): Promise<void> {
    this.port = await freePort();
  }

  async setMode(mode: ReceiverMode): Promise<void> {
    this.mode = mode;
    if (mode !== 'down' && !this.server) {
      this.server = createServer((req, res) => {
        const id = String(req.headers['webhook-id']);
        req.resume();
        req.on('end', () => {
          const answer = () => {
            this.arrivals.push(id);
            res.writeHead(204).end();
          };
          if (this.mode === 'slow') setTimeout(answer, 1_200);
          else answer();
        });
      });
      await new Promise<void>((r) => this.server!.listen(this.port, '127.0.0.1', () => r()));
    }
  }

  close(): void {
    this.server?.closeAllConnections();
    this.server?.close();
  }
}
const receiver = new Receiver();

interface Outcome {
  lotCode: string;
  valid: boolean;
  /** The verdict id of the 201 (or its replay), when one came. */
  verdictId: string | null;
  statuses: number[];
  networkErrors: number;
  /** 5xx replies other than 503 with Retry-After, and 503s without it. */
  bad: string[];
}

beforeAll(async () => {
  pgPort = await freePort();
  cluster = startCluster({ dir, port: pgPort, database: 'faults_combined' });
  db = openDatabase(cluster.url, undefined, 4);
  await migrate(db.sequelize);
  await receiver.reservePort();
}, 60_000);

afterAll(async () => {
  for (const c of children) if (c.proc.exitCode === null && c.proc.signalCode === null) c.proc.kill('SIGKILL');
  receiver.close();
  await db?.close().catch(() => {});
  if (cluster) destroyCluster(cluster);
  rmSync(dataDir, { recursive: true, force: true });
});

describe('two servers under load through a database restart, a kill -9 of each and a receiver down, slow and back', () => {
  it('answers nothing but 2xx, 4xx and 503 with Retry-After, loses no acknowledged lot, keeps the chain whole and delivers every webhook', async () => {
    const org = await createTestOrganisation('Combined faults packer (test)');
    const key = await createTestKey(org.id, ['lots:submit', 'verdicts:read', 'products:write', 'keys:manage']);
    const auth = { Authorization: `Bearer ${key}`, 'Content-Type': 'application/json' };

    let a = startChild(await freePort());
    let b = startChild(await freePort());
    await Promise.all([listening(a), listening(b)]);
    const api = (c: Child) => `http://127.0.0.1:${c.port}`;

    const product = await fetch(`${api(a)}/v1/products`, { method: 'POST', headers: auth, body: JSON.stringify({ ...OATS, sku: 'CF-OATS-500' }) });
    expect(product.status).toBe(201);
    const hook = await fetch(`${api(a)}/v1/webhooks`, {
      method: 'POST',
      headers: auth,
      body: JSON.stringify({ url: `http://127.0.0.1:${receiver.port}/hook`, events: ['verdict.created'] }),
    });
    expect(hook.status).toBe(201);
    const endpointId = ((await hook.json()) as { id: string }).id;

    // The load: 6 clients, each submitting lots one after another to either process; every tenth lot
    // is refused by validation (a text among the measurements). A lot is retried — same
    // Idempotency-Key — on a 503 or when the connection fails, until it is answered or the load ends.
    let loadRunning = true;
    const outcomes: Outcome[] = [];
    const servers = () => [a, b];
    const client = async (n: number) => {
      for (let i = 0; loadRunning; i++) {
        const valid = i % 10 !== 9;
        const lotCode = `CF-${n}-${i}`;
        const body = lotBody('CF-OATS-500', n * 100_000 + i, { lotCode });
        if (!valid) (body.measurements as unknown[])[3] = 'five hundred';
        const o: Outcome = { lotCode, valid, verdictId: null, statuses: [], networkErrors: 0, bad: [] };
        outcomes.push(o);
        const idempotencyKey = randomUUID();
        for (let attempt = 0; attempt < 200; attempt++) {
          const target = servers()[(n + attempt) % 2]!;
          let res: Response;
          try {
            res = await fetch(`${api(target)}/v1/lots`, {
              method: 'POST',
              headers: { ...auth, 'Idempotency-Key': idempotencyKey },
              body: JSON.stringify(body),
              signal: AbortSignal.timeout(15_000),
            });
          } catch {
            o.networkErrors++;
            await sleep(200);
            continue;
          }
          o.statuses.push(res.status);
          const text = await res.text().catch(() => '');
          if (res.status === 503) {
            if (!res.headers.get('retry-after')) o.bad.push(`503 without Retry-After: ${text.slice(0, 200)}`);
            await sleep(300);
            continue;
          }
          if (res.status >= 500) o.bad.push(`${res.status}: ${text.slice(0, 300)}`);
          if (res.status === 201 || res.status === 200) o.verdictId = (JSON.parse(text) as { id: string }).id;
          break;
        }
        if (!loadRunning && o.verdictId === null && o.valid) outcomes.splice(outcomes.indexOf(o), 1); // cut off by the end of the load, never answered
      }
    };
    const clients = Array.from({ length: 6 }, (_, n) => client(n));

    // The faults, on a timeline.
    const started = Date.now();
    const at = async (seconds: number) => sleep(Math.max(0, started + seconds * 1000 - Date.now()));
    await at(4);
    cluster.stop(); // PostgreSQL down for 5 s, then started again on the same port and folder
    await sleep(5_000);
    cluster = startCluster({ dir, port: pgPort, database: 'faults_combined' });
    await at(14);
    a = await kill9AndRestart(a);
    await receiver.setMode('slow');
    await at(22);
    b = await kill9AndRestart(b);
    await at(28);
    await receiver.setMode('up');
    await at(34);
    loadRunning = false;
    await Promise.all(clients);

    // No 5xx but 503 with Retry-After; every lot answered in the end was answered as expected.
    const bad = outcomes.flatMap((o) => o.bad.map((b) => `${o.lotCode}: ${b}`));
    // … and if one is not, the servers' own log of it (LOG_LEVEL error) says why.
    const unexpected = output.split('\n').filter((l) => l.includes('unexpected error')).slice(0, 3).join('\n');
    expect(bad, `${bad.slice(0, 5).join('\n')}\n${unexpected}`).toEqual([]);
    const acknowledged = outcomes.filter((o) => o.verdictId !== null);
    const refused = outcomes.filter((o) => !o.valid);
    for (const o of refused) expect(o.statuses.at(-1), o.lotCode).toBe(400);
    const unanswered = outcomes.filter((o) => o.valid && o.verdictId === null);
    expect(unanswered.map((o) => `${o.lotCode} ${o.statuses.join(',')}`)).toEqual([]);
    const saw503 = outcomes.some((o) => o.statuses.includes(503));
    const sawNetworkErrors = outcomes.reduce((s, o) => s + o.networkErrors, 0);
    console.log(
      `combined faults: ${outcomes.length} lots sent, ${acknowledged.length} acknowledged, ${refused.length} refused, ` +
        `503s seen: ${outcomes.reduce((s, o) => s + o.statuses.filter((x) => x === 503).length, 0)}, connection failures: ${sawNetworkErrors}`,
    );
    expect(acknowledged.length).toBeGreaterThan(50);
    expect(saw503 || sawNetworkErrors > 0, 'the faults were felt by the clients').toBe(true);

    // No process exited that was not killed on purpose.
    for (const c of children) if (!c.killed) expect(c.proc.exitCode ?? c.proc.signalCode, `server on ${c.port}`).toBeNull();

    // Every acknowledged lot stored exactly once; nothing stored for a refused one.
    const rows = await db.sequelize.query<{ id: string; lot_code: string }>('SELECT id, lot_code FROM verdicts WHERE organisation_id = $1', {
      bind: [org.id],
      type: QueryTypes.SELECT,
    });
    const byCode = new Map<string, string[]>();
    for (const r of rows) byCode.set(r.lot_code, [...(byCode.get(r.lot_code) ?? []), r.id]);
    for (const o of acknowledged) expect(byCode.get(o.lotCode), o.lotCode).toEqual([o.verdictId]);
    for (const [code, ids] of byCode) expect(ids, code).toHaveLength(1);
    for (const o of refused) expect(byCode.has(o.lotCode), o.lotCode).toBe(false);

    // The chain is whole, checked here from the stored rows and the published keys.
    const chain = await db.sequelize.query<{ sequence: string; seal: string; previous_seal: string | null; signature: string; kid: string; record: string }>(
      'SELECT sequence, seal, previous_seal, signature, kid, record FROM verdicts WHERE organisation_id = $1 ORDER BY sequence',
      { bind: [org.id], type: QueryTypes.SELECT },
    );
    const jwks = (await (await fetch(`${api(a)}/.well-known/jwks.json`)).json()) as { keys: Array<{ kid: string; x: string }> };
    const keys = new Map(jwks.keys.map((k) => [k.kid, createPublicKey({ key: { kty: 'OKP', crv: 'Ed25519', x: k.x }, format: 'jwk' })]));
    let previous: string | null = null;
    chain.forEach((r, i) => {
      expect(Number(r.sequence), 'no gap').toBe(i + 1);
      expect(r.previous_seal, `link at ${i + 1}`).toBe(previous);
      expect(createHash('sha256').update(r.record, 'utf8').digest('hex'), `seal at ${i + 1}`).toBe(r.seal);
      const record = JSON.parse(r.record) as { sequence: number; previousSeal: string | null; organisation: { id: string } };
      expect([record.sequence, record.previousSeal, record.organisation.id]).toEqual([i + 1, previous, org.id]);
      expect(verify(null, Buffer.from(r.seal, 'hex'), keys.get(r.kid)!, Buffer.from(r.signature, 'base64url')), `signature at ${i + 1}`).toBe(true);
      previous = r.seal;
    });
    expect(chain).toHaveLength(rows.length);

    // Every verdict's webhook arrives at least once, and the log says so.
    const deliveries = async () =>
      db.sequelize.query<{ id: string; verdict_id: string; status: string; attempts: number }>(
        "SELECT id, verdict_id, status, attempts FROM webhook_deliveries WHERE endpoint_id = $1 AND event_type = 'verdict.created'",
        { bind: [endpointId], type: QueryTypes.SELECT },
      );
    await until(
      'every webhook delivered',
      async () => {
        const d = await deliveries();
        return d.length === rows.length && d.every((x) => x.status === 'delivered');
      },
      120_000,
    );
    const delivered = await deliveries();
    expect(new Set(delivered.map((d) => d.verdict_id))).toEqual(new Set(rows.map((r) => r.id)));
    const attempts = await db.sequelize.query<{ delivery_id: string; attempt: number; status_code: number | null; in_flight: boolean; error: string | null }>(
      'SELECT a.delivery_id, a.attempt, a.status_code, a.in_flight, a.error FROM webhook_attempts a JOIN webhook_deliveries d ON d.id = a.delivery_id WHERE d.endpoint_id = $1 ORDER BY a.delivery_id, a.attempt',
      { bind: [endpointId], type: QueryTypes.SELECT },
    );
    const logOf = new Map<string, typeof attempts>();
    for (const x of attempts) logOf.set(x.delivery_id, [...(logOf.get(x.delivery_id) ?? []), x]);
    const arrivalsOf = new Map<string, number>();
    for (const id of receiver.arrivals) arrivalsOf.set(id, (arrivalsOf.get(id) ?? 0) + 1);
    let redelivered = 0;
    for (const d of delivered) {
      const log = logOf.get(d.id) ?? [];
      expect(arrivalsOf.get(d.id) ?? 0, `arrivals of ${d.id}`).toBeGreaterThanOrEqual(1);
      expect(log.length, `attempts logged for ${d.id}`).toBe(d.attempts);
      expect(log.length, `every arrival of ${d.id} logged`).toBeGreaterThanOrEqual(arrivalsOf.get(d.id)!);
      expect(log.map((x) => x.attempt)).toEqual(log.map((_, i) => i + 1));
      expect(log.some((x) => x.in_flight), `an attempt of ${d.id} left in flight`).toBe(false);
      expect(log.at(-1)!.status_code, `last attempt of ${d.id}`).toBe(204);
      if ((arrivalsOf.get(d.id) ?? 0) > 1) redelivered++;
    }
    console.log(
      `combined faults: ${delivered.length} webhooks delivered, ${receiver.arrivals.length} arrivals, ${redelivered} delivered more than once, ` +
        `${attempts.length} attempts logged (${attempts.filter((x) => /no outcome/.test(x.error ?? '')).length} cut short by a kill)`,
    );
  }, 400_000);
});
