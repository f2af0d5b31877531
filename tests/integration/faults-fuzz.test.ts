// Fault suite, part 1: fuzzing every operation of the OpenAPI document over real HTTP, against a
// real server process's listener (startServer: the same HTTP server, parser-error answers and
// timeouts as production). At least 20 000 cases, from a fixed seed so a failure replays:
// fields of the documented example made wrong (fast-check values, huge strings, NUL and lone
// surrogates, extreme numbers), keys dropped and added, deep nesting, truncated bodies, invalid
// UTF-8, compressed bodies and bombs, wrong media types, CSV oddities, garbage parameters, abused
// headers, and raw requests Node's parser refuses.
//
// It asserts: never a 5xx; every refusal an RFC 9457 problem whose status is the answer's; the
// server answers /healthz after each round; and nothing is stored for a refused request — at the
// end, the organisation holds exactly as many verdicts, products, webhook endpoints and invitations
// as the fuzz got 201s for.
import { brotliCompressSync, deflateSync, gzipSync } from 'node:zlib';
import { mkdtempSync } from 'node:fs';
import { Agent, request as httpRequest } from 'node:http';
import { connect } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import fc from 'fast-check';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Operation } from '../../openapi/load';
import { createLogger } from '../../server/logger';
import { SCOPES } from '../../server/core/principal';
import { startSession } from '../../server/identity/sessions';
import type { User } from '../../server/models';
import { startServer, type RunningServer } from '../../server/server';
import { startSmtpFake, type RunningSmtpFake } from '../../server/platform/smtp-fake';
import { createTestKey, createTestOrganisation, testConfig, testDatabaseUrl } from '../support/app';
import { createTestUser } from '../support/identity';
import { apiOperations, exampleBody, parametersOf, resolveRef } from '../support/operations';

const SEED = 20261203;
/** An operation that would end the fuzz's own session (it is covered by the identity tests). */
const SKIP = new Set(['signOut']);
const FUZZED = apiOperations.filter((o) => !SKIP.has(o.operationId));
/** Requests in flight at a time per operation, as a busy client sends them. */
const LANES = 4;
const CASES_PER_LANE = Math.ceil(20_000 / (FUZZED.length * LANES));

let server: RunningServer;
let smtp: RunningSmtpFake;
let base: URL;
let orgId: string;
let key: string;
const users: Partial<Record<string, User>> = {};
const sessions = new Map<string, string>();
const agent = new Agent({ keepAlive: true, maxSockets: 16 });
/** The fuzz's own source address: per-IP rate-limit counters live in the shared database, and the
 *  fuzz's thousands of anonymous requests must not use up 127.0.0.1's for the other test files. */
const FROM = '127.0.0.2';
const tally = { cases: 0, byStatus: new Map<number, number>(), created: new Map<string, number>() };
const failures: string[] = [];

beforeAll(async () => {
  smtp = await startSmtpFake({ host: '127.0.0.1', port: 0 });
  const config = testConfig({
    smtp: { ...testConfig().smtp, host: smtp.host, port: smtp.port },
    host: '127.0.0.1',
    port: 0,
    dataDir: mkdtempSync(join(tmpdir(), 'lotproof-fuzz-')),
    rateLimits: { perKeyPerMinute: 10_000_000, perOrganisationPerMinute: 10_000_000, perIpPerMinute: 10_000_000, signInFailuresPerAccount: 10_000, signInFailuresPerIp: 100_000 },
  });
  const logger = createLogger('silent');
  server = await startServer({ ...config, databaseUrl: testDatabaseUrl(), verdicts: { ...config.verdicts, runJobs: false } }, logger);
  base = new URL(server.url);
  const org = await createTestOrganisation('Fuzzed packer (test data)');
  orgId = org.id;
  key = await createTestKey(org.id, [...SCOPES]);
  for (const role of ['admin', 'quality', 'auditor'] as const) users[role] = await createTestUser(org.id, role);
}, 60_000);

afterAll(async () => {
  const statuses = [...tally.byStatus].sort((a, b) => a[0] - b[0]).map(([s, n]) => `${s}×${n}`).join(' ');
  console.log(`fuzz: ${tally.cases} cases over ${apiOperations.length} operations; answers ${statuses}`);
  agent.destroy();
  await server?.stop();
  await smtp?.stop();
});

interface Sent {
  status: number;
  headers: Record<string, string | string[] | undefined>;
  body: Buffer;
}

function send(method: string, path: string, headers: Record<string, string>, body?: Buffer): Promise<Sent> {
  return new Promise((resolve, reject) => {
    const req = httpRequest(
      { host: base.hostname, port: base.port, localAddress: FROM, method: method.toUpperCase(), path, headers: { ...headers, ...(body ? { 'Content-Length': String(body.length) } : {}) }, agent },
      (res) => {
        const chunks: Buffer[] = [];
        res.on('data', (c: Buffer) => chunks.push(c));
        res.on('end', () => resolve({ status: res.statusCode ?? 0, headers: res.headers, body: Buffer.concat(chunks) }));
        res.on('error', reject);
      },
    );
    req.setTimeout(30_000, () => req.destroy(new Error(`no answer in 30 s: ${method} ${path}`)));
    req.on('error', reject);
    req.end(body);
  });
}

/** Sends raw bytes on a fresh connection and reads the answer's status line. */
function sendRaw(bytes: Buffer): Promise<{ status: number; text: string }> {
  return new Promise((resolve, reject) => {
    const socket = connect({ port: Number(base.port), host: base.hostname, localAddress: FROM }, () => socket.end(bytes));
    let text = '';
    socket.setTimeout(15_000, () => socket.destroy(new Error('raw request: no answer in 15 s')));
    socket.on('data', (c) => (text += c.toString('latin1')));
    socket.on('close', () => resolve({ status: Number(/^HTTP\/1\.1 (\d{3})/.exec(text)?.[1] ?? 0), text }));
    socket.on('error', (err) => ((err as NodeJS.ErrnoException).code === 'ECONNRESET' ? resolve({ status: Number(/^HTTP\/1\.1 (\d{3})/.exec(text)?.[1] ?? 0), text }) : reject(err)));
  });
}

async function credentialsFor(op: Operation): Promise<Record<string, string>> {
  if (op.access === 'public') return {};
  if ((op.access.scopes ?? []).length > 0) return { Authorization: `Bearer ${key}` };
  const role = op.access.roles![0]!;
  let token = sessions.get(role);
  if (!token) {
    token = (await startSession(users[role]!, 1)).token;
    sessions.set(role, token);
  }
  return { Cookie: `lotproof_session=${token}`, 'X-Lotproof-Console': '1' };
}

/** The answer is never a server error, and a refusal is a problem document that says its own status. */
function check(what: string, res: Sent): void {
  tally.cases++;
  tally.byStatus.set(res.status, (tally.byStatus.get(res.status) ?? 0) + 1);
  const fail = (why: string) => failures.length < 20 && failures.push(`${what}: ${why} (${res.status} ${res.body.toString('utf8').slice(0, 200)})`);
  if (res.status >= 500) return void fail('server error');
  if (res.status >= 400) {
    if (!/^application\/problem\+json/.test(String(res.headers['content-type']))) return void fail('not problem+json');
    try {
      const p = JSON.parse(res.body.toString('utf8'));
      if (p.status !== res.status || typeof p.title !== 'string') fail('problem status or title wrong');
    } catch {
      fail('problem body is not JSON');
    }
  }
}

const rng = fc.sample(fc.integer({ min: 0, max: 2 ** 31 - 1 }), { seed: SEED, numRuns: 200_000 });
let r = 0;
const next = () => rng[r++ % rng.length]!;
const pick = <T,>(xs: readonly T[]): T => xs[next() % xs.length]!;

const strangeValues: unknown[] = [
  null, true, false, 0, -0, -1, 1e308, -1e308, 5e-324, 2 ** 53 + 1, 1e21, '', ' ', '\u0000', '\ud800', '\udfff\ud800', 'a'.repeat(100_000),
  '٣', 'NaN', 'Infinity', '1e999', '--', '../../etc/passwd', '<script>', "'; DROP TABLE verdicts; --", '%00', '\u202e', '😀'.repeat(1000),
  [], {}, [[[[[]]]]], { __proto__: { admin: true } }, { constructor: { prototype: {} } }, Array(5000).fill(1), Array(100).fill('x'),
];
const jsonValues = fc.sample(fc.jsonValue({ maxDepth: 4 }), { seed: SEED + 1, numRuns: 4000 });

function pathsOf(v: unknown, prefix: (string | number)[] = []): (string | number)[][] {
  if (Array.isArray(v)) return [prefix, ...v.slice(0, 5).flatMap((x, i) => pathsOf(x, [...prefix, i]))];
  if (v && typeof v === 'object') return [prefix, ...Object.entries(v).flatMap(([k, x]) => pathsOf(x, [...prefix, k]))];
  return [prefix];
}

function setAt(v: unknown, path: (string | number)[], value: unknown, drop = false): unknown {
  if (path.length === 0) return value;
  const copy: any = Array.isArray(v) ? [...v] : { ...(v as object) };
  const [head, ...rest] = path;
  if (rest.length === 0 && drop) {
    if (Array.isArray(copy)) copy.splice(Number(head), 1);
    else delete copy[head!];
  } else copy[head!] = setAt(copy[head!], rest, value, drop);
  return copy;
}

function nested(depth: number): string {
  return '['.repeat(depth) + ']'.repeat(depth);
}

function urlFor(op: Operation, mangle: boolean): string {
  let url = op.path;
  const params = parametersOf(op);
  for (const p of params.filter((x) => x.in === 'path')) {
    const schema = resolveRef(p.schema ?? {});
    const good = schema.format === 'uuid' ? '00000000-0000-4000-8000-000000000000' : 'a'.repeat(64);
    const bad = pick(['%00', '%ff%fe', '..%2f..', 'x'.repeat(3000), '%E2%80%AE', '-1', '1e999', '%', '%zz', encodeURIComponent('😀')]);
    url = url.replace(`{${p.name}}`, mangle && next() % 2 === 0 ? bad : encodeURIComponent(good));
  }
  const query = params.filter((x) => x.in === 'query');
  if (mangle && query.length > 0) {
    const parts = query.filter(() => next() % 2 === 0).map((q) => `${encodeURIComponent(q.name)}=${pick(['', '%00', 'x'.repeat(5000), '-1', '1e999', 'NaN', '[]', '%ff', 'a&b=c', '0x10', '2026-02-30', '9999999999999999999999'])}`);
    if (next() % 4 === 0) parts.push(`${pick(['unknown', 'limit[]', '__proto__[x]', 'a'.repeat(300)])}=1`);
    if (parts.length > 0) url += `?${parts.join('&')}`;
  }
  return url;
}

const CSV_ODDITIES = [
  '', '\ufeffnet_g\n500.1\n', 'net_g\r\n500\r\n501\r', 'net_g\n"500\n', 'net_g\n500,501\n', 'a,b\n1\n', 'net_g\n\u0000\n', 'net_g\n1e999\n',
  'net_g\n-5\n', `net_g\n${'9'.repeat(5000)}\n`, 'net_g\n500\n'.repeat(3), `${'x,'.repeat(3000)}net_g\n`, 'net_g\n"a""b"\n', 'net_g\n\ud800\n',
  'net_g;tare\n500;5\n', 'net_g\n 500 \n\n\n', 'net_g\n0x1F4\n', 'net_g\n5e2\n', '"net_g"\n"500"\n',
];

async function fuzzOperation(op: Operation): Promise<void> {
  const example = exampleBody(op);
  const hasBody = example !== undefined || op.definition.requestBody !== undefined;
  const paths = example === undefined ? [[]] : pathsOf(example);
  for (let i = 0; i < CASES_PER_LANE; i++) {
    const creds = await credentialsFor(op);
    const kind = next() % 12;
    const headers: Record<string, string> = { ...creds, 'Content-Type': 'application/json' };
    let body: Buffer | undefined;
    let what = `${op.operationId}#${i}`;
    const json = (v: unknown) => Buffer.from(JSON.stringify(v) ?? 'null');
    switch (hasBody ? kind : kind % 2 === 0 ? 8 : 9) {
      case 0:
      case 1: {
        const path = pick(paths);
        const value = next() % 2 === 0 ? pick(strangeValues) : pick(jsonValues);
        body = json(setAt(example, path, value));
        what += ` field /${path.join('/')}`;
        break;
      }
      case 2: {
        const path = pick(paths);
        body = json(next() % 2 === 0 ? setAt(example, path, undefined, true) : { ...(example as object), [pick(['extra', '__proto__', 'constructor', 'a'.repeat(500)])]: pick(jsonValues) });
        what += ' keys';
        break;
      }
      case 3: {
        const text = JSON.stringify(example);
        body = Buffer.from(text.slice(0, next() % Math.max(text.length, 1)));
        what += ' truncated';
        break;
      }
      case 4: {
        const text = Buffer.from(JSON.stringify(example));
        const at = Math.max(1, text.indexOf('"', next() % Math.max(text.length, 1)) + 1);
        body = Buffer.concat([text.subarray(0, at), Buffer.from(pick([[0xff], [0xc3, 0x28], [0xed, 0xa0, 0x80], [0xf8, 0x88, 0x80, 0x80, 0x80], [0xe2, 0x82]])), text.subarray(at)]);
        what += ' invalid UTF-8';
        break;
      }
      case 5: {
        const depth = pick([65, 200, 5_000, 100_000]);
        body = Buffer.from(next() % 2 === 0 ? nested(depth) : `{"a":${nested(depth)}}`);
        what += ` nesting ${depth}`;
        break;
      }
      case 6: {
        const inner = next() % 2 === 0 ? Buffer.from(nested(pick([1_000, 100_000, 2_000_000]))) : json(example);
        const [encoding, bytes] = pick([
          ['gzip', () => gzipSync(inner)],
          ['deflate', () => deflateSync(inner)],
          ['br', () => brotliCompressSync(inner)],
          ['gzip', () => inner.subarray(0, 10)],
          ['x-unknown', () => inner],
        ] as const);
        headers['Content-Encoding'] = encoding;
        body = bytes();
        what += ` Content-Encoding ${encoding}`;
        break;
      }
      case 7: {
        headers['Content-Type'] = pick(['text/plain', 'application/xml', 'multipart/form-data; boundary=x', 'application/json; charset=latin1', 'text/csv', 'application/x-www-form-urlencoded', '']);
        if (headers['Content-Type'] === '') delete headers['Content-Type'];
        body = headers['Content-Type'] === 'text/csv' ? Buffer.from(pick(CSV_ODDITIES)) : json(example);
        what += ` media ${headers['Content-Type'] ?? 'none'}`;
        break;
      }
      case 8:
        what += ' parameters';
        break;
      case 9: {
        const name = pick(['Idempotency-Key', 'X-Request-Id', 'Accept', 'If-None-Match', 'X-Forwarded-For', 'Cookie']);
        headers[name] = pick(['x'.repeat(8000), '\t', 'ü', '1.1.1.1, 2.2.2.2, ' + 'x'.repeat(1000), 'lotproof_session=' + 'a'.repeat(4000)]);
        what += ` header ${name}: ${headers[name]!.slice(0, 24)}…`;
        if (next() % 3 === 0) {
          headers.Authorization = pick(['Bearer', 'Bearer ' + 'a'.repeat(5000), 'Basic Zm9vOmJhcg==', 'Bearer lpk_aaaaaaaaaaaa_' + 'b'.repeat(43)]);
          what += ` Authorization: ${headers.Authorization.slice(0, 24)}…`;
        }
        body = hasBody ? json(example) : undefined;
        break;
      }
      case 10: {
        if (op.operationId !== 'submitLot') {
          body = json(pick(jsonValues));
          what += ' any JSON';
          break;
        }
        headers['Content-Type'] = 'text/csv';
        body = Buffer.from(pick(CSV_ODDITIES));
        what += ' CSV';
        break;
      }
      default: {
        body = Buffer.from(pick(['', 'null', '[]', '"x"', '1', 'true', '{', '}', '{"a":1,}', "{'a':1}", '\u0000', '{"a":"\\ud800"}', '{"__proto__":{"x":1}}']));
        what += ' body shape';
      }
    }
    const url = urlFor(op, kind === 8 || next() % 6 === 0);
    const res = await send(op.method, url, headers, body);
    check(`${what} ${op.method.toUpperCase()} ${url.slice(0, 120)}`, res);
    // (a replay of an Idempotency-Key answers 201 too, and creates nothing)
    if (res.status === 201 && res.headers['idempotent-replayed'] !== 'true') tally.created.set(op.operationId, (tally.created.get(op.operationId) ?? 0) + 1);
    if (res.status === 401 && !('Authorization' in creds)) sessions.clear();
  }
}

describe('fuzzing every operation', () => {
  for (const op of FUZZED) {
    it(`${op.operationId}: ${LANES * CASES_PER_LANE} cases, never a 5xx, refusals are problems`, async () => {
      const before = tally.cases;
      failures.length = 0;
      await Promise.all(Array.from({ length: LANES }, () => fuzzOperation(op)));
      expect(tally.cases - before).toBe(LANES * CASES_PER_LANE);
      const health = await send('get', '/healthz', {});
      expect(health.status).toBe(200);
      expect(failures).toEqual([]);
    }, 240_000);
  }

  it('answers raw requests the HTTP parser refuses as problems or closes them, never with a 5xx', async () => {
    const host = `Host: ${base.host}\r\n`;
    const raws = [
      'GARBAGE\r\n\r\n',
      `GET /v1/rulebooks HTTP/1.1\r\n${host}X-A: ${'a'.repeat(20_000)}\r\n\r\n`,
      `POST /v1/session HTTP/1.1\r\n${host}Content-Length: 5\r\nContent-Length: 6\r\n\r\nabcdef`,
      `POST /v1/session HTTP/1.1\r\n${host}Transfer-Encoding: chunked\r\n\r\nzz\r\n`,
      `POST /v1/session HTTP/1.1\r\n${host}Content-Length: -1\r\n\r\n`,
      `GET /v1/rulebooks HTTP/1.1\r\n\r\n`,
      `GET /${'a'.repeat(20_000)} HTTP/1.1\r\n${host}\r\n`,
      `POST /v1/session HTTP/1.1\r\n${host}Content-Type: application/json\r\nContent-Length: 100\r\n\r\n{"email":`,
      `GET /v1/rulebooks HTTP/1.1\r\n${host}Transfer-Encoding: chunked\r\nContent-Length: 3\r\n\r\n0\r\n\r\n`,
    ];
    for (const raw of raws) {
      const res = await sendRaw(Buffer.from(raw, 'latin1'));
      tally.cases++;
      expect(res.status < 500, `${JSON.stringify(raw.slice(0, 60))} → ${res.text.slice(0, 120)}`).toBe(true);
    }
    expect((await send('get', '/healthz', {})).status).toBe(200);
  }, 120_000);

  it('stored exactly what it answered 201 for, and nothing for a refused request', async () => {
    const db = server.ctx.db.sequelize;
    const count = async (table: string) => Number(((await db.query(`SELECT count(*)::int AS n FROM ${table} WHERE organisation_id = $1`, { bind: [orgId], plain: true })) as { n: number }).n);
    expect(await count('verdicts')).toBe(tally.created.get('submitLot') ?? 0);
    expect(await count('products')).toBe(tally.created.get('createProduct') ?? 0);
    expect(await count('webhook_endpoints')).toBe(tally.created.get('createWebhook') ?? 0);
    expect(await count('invitations')).toBe(tally.created.get('createInvitation') ?? 0);
    expect(tally.cases).toBeGreaterThanOrEqual(20_000);
  });
});
