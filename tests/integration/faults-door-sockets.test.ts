// Slow and many clients at the door (issue 14, item 15; and item 16's request without a Host
// header): the HTTP server as `startServer` builds it, spoken to with raw sockets. Headers that
// trickle in, a body that trickles in, an idle keep-alive connection and connections beyond the cap
// are each cut in about the configured time, with a problem document where HTTP still allows one.
import { connect, type Socket } from 'node:net';
import { createLogger } from '../../server/logger';
import { startServer, type RunningServer } from '../../server/server';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createTestKey, createTestOrganisation, testConfig, testDatabaseUrl } from '../support/app';

const LIMITS = { headersTimeoutMs: 1000, minBodyBytesPerSecond: 512 * 1024, keepAliveTimeoutMs: 500, maxConnections: 8 };
const BODY_LIMIT = 1024 * 1024;
const SMALL_LIMIT = 64 * 1024;
let running: RunningServer;
let port: number;
let key: string;

beforeAll(async () => {
  const base = testConfig();
  const config = {
    ...base,
    host: '127.0.0.1',
    port: 0,
    bodyLimitBytes: BODY_LIMIT,
    databaseUrl: testDatabaseUrl(),
    verdicts: { ...base.verdicts, runJobs: false },
    http: LIMITS,
  };
  running = await startServer(config, createLogger('silent'));
  port = Number(new URL(running.url).port);
  const org = await createTestOrganisation('Slow client packer');
  key = await createTestKey(org.id, ['lots:submit']);
}, 60_000);
afterAll(async () => {
  await running?.stop();
});

interface Exchange {
  socket: Socket;
  /** Everything the server sent so far. */
  received: () => string;
  /** Resolves with the time (ms since connecting) at which the server closed the connection, or null after `withinMs`. */
  closed: (withinMs: number) => Promise<number | null>;
}

function open(): Promise<Exchange> {
  return new Promise((resolve, reject) => {
    const started = performance.now();
    let out = '';
    let closedAt: number | null = null;
    const waiters: (() => void)[] = [];
    const socket = connect(port, '127.0.0.1', () =>
      resolve({
        socket,
        received: () => out,
        closed: (withinMs) =>
          closedAt !== null
            ? Promise.resolve(closedAt)
            : new Promise((r) => {
                const timer = setTimeout(() => r(null), withinMs);
                waiters.push(() => {
                  clearTimeout(timer);
                  r(closedAt);
                });
              }),
      }),
    );
    socket.on('data', (d) => (out += String(d)));
    socket.on('error', () => {});
    socket.on('close', () => {
      closedAt = performance.now() - started;
      for (const w of waiters) w();
    });
    socket.once('error', reject);
  });
}

/** Writes `line` every `everyMs` until the socket closes. */
function trickle(x: Exchange, line: string, everyMs: number): () => void {
  const timer = setInterval(() => {
    if (!x.socket.destroyed) x.socket.write(line);
  }, everyMs);
  x.socket.on('close', () => clearInterval(timer));
  return () => clearInterval(timer);
}

function problemOf(raw: string): { status: number; body: any; head: string } {
  const [head = '', body = ''] = raw.split('\r\n\r\n');
  return { status: Number(/^HTTP\/1\.1 (\d{3})/.exec(head)?.[1]), head, body: body ? JSON.parse(body) : null };
}

describe('item 15: slow clients are cut in time', () => {
  it('headers that trickle in are cut after the headers timeout with a 408 problem', async () => {
    const x = await open();
    x.socket.write('GET /healthz HTTP/1.1\r\nHost: door.example\r\n');
    const stop = trickle(x, 'X-Slow: still-coming\r\n', 150);
    const at = await x.closed(5000);
    stop();
    console.log(`trickled headers: closed after ${at?.toFixed(0) ?? '> 5000'} ms (headers timeout ${LIMITS.headersTimeoutMs} ms)`);
    expect(at, 'connection still open after 5 s').not.toBeNull();
    expect(at!).toBeLessThan(LIMITS.headersTimeoutMs + 1000);
    const p = problemOf(x.received());
    expect(p.status).toBe(408);
    expect(p.head).toMatch(/Content-Type: application\/problem\+json/i);
    expect(p.body.type).toBe('https://lotproof.dev/problems/request-timeout');
  });

  const requestTimeout = LIMITS.headersTimeoutMs + (BODY_LIMIT / LIMITS.minBodyBytesPerSecond) * 1000;

  it('a lot body that trickles in is cut once the request timeout (headers + body limit at the minimum rate) has passed', async () => {
    const x = await open();
    x.socket.write(`POST /v1/lots HTTP/1.1\r\nHost: door.example\r\nAuthorization: Bearer ${key}\r\nContent-Type: application/json\r\nContent-Length: 600000\r\n\r\n{"measurements":[`);
    const stop = trickle(x, '500.1,', 100);
    const at = await x.closed(requestTimeout + 3000);
    stop();
    console.log(`trickled lot: closed after ${at?.toFixed(0) ?? `> ${requestTimeout + 3000}`} ms (request timeout ${requestTimeout} ms)`);
    expect(at, 'connection still open').not.toBeNull();
    expect(at!).toBeLessThan(requestTimeout + 1000);
    const p = problemOf(x.received());
    expect(p.status).toBe(408);
    expect(p.body.type).toBe('https://lotproof.dev/problems/request-timeout');
  });

  it("an anonymous sign-in that trickles in is cut at its own operation's time (its small limit at the minimum rate), long before that", async () => {
    const own = LIMITS.headersTimeoutMs + (SMALL_LIMIT / LIMITS.minBodyBytesPerSecond) * 1000;
    const x = await open();
    x.socket.write(`POST /v1/session HTTP/1.1\r\nHost: door.example\r\nContent-Type: application/json\r\nContent-Length: 60000\r\n\r\n{"email":"`);
    const stop = trickle(x, 'a', 100);
    const at = await x.closed(requestTimeout + 3000);
    stop();
    console.log(`trickled sign-in: closed after ${at?.toFixed(0) ?? `> ${requestTimeout + 3000}`} ms (its own time ${own} ms, the request timeout ${requestTimeout} ms)`);
    expect(at, 'connection still open').not.toBeNull();
    expect(at!).toBeLessThan(own + 700);
    const p = problemOf(x.received());
    expect(p.status).toBe(408);
    expect(p.body.detail).toMatch(/LOTPROOF_MIN_BODY_RATE_KB/);
  });

  it('an idle keep-alive connection is closed after the keep-alive timeout (and the 1 s Node adds to it)', async () => {
    const x = await open();
    x.socket.write('GET /healthz HTTP/1.1\r\nHost: door.example\r\n\r\n');
    const at = await x.closed(4000);
    console.log(`idle keep-alive: closed after ${at?.toFixed(0) ?? '> 4000'} ms (keep-alive timeout ${LIMITS.keepAliveTimeoutMs} ms)`);
    expect(x.received()).toMatch(/^HTTP\/1\.1 200/);
    expect(at, 'idle connection still open').not.toBeNull();
    // Node closes an idle connection 1 s after the timeout it advertises, so a client never sends into a closing one
    expect(at!).toBeLessThan(LIMITS.keepAliveTimeoutMs + 1000 + 700);
  });

  it(`connections beyond the cap are closed at once; a connection under it is served`, async () => {
    const held = await Promise.all(Array.from({ length: LIMITS.maxConnections }, () => open()));
    const extra = await open();
    const at = await extra.closed(500);
    expect(at, 'a connection beyond the cap stayed open').not.toBeNull();
    expect(extra.received()).toBe('');
    for (const h of held) h.socket.destroy();
    await new Promise((r) => setTimeout(r, 100));
    const again = await open();
    again.socket.write('GET /healthz HTTP/1.1\r\nHost: door.example\r\nConnection: close\r\n\r\n');
    await again.closed(3000);
    expect(again.received()).toMatch(/^HTTP\/1\.1 200/);
  });
});

describe('item 16: a request without a Host header', () => {
  it('is a 400 problem document, not a bare status line', async () => {
    const x = await open();
    x.socket.write('GET /healthz HTTP/1.1\r\nAccept: application/json\r\n\r\n');
    await x.closed(3000);
    const p = problemOf(x.received());
    expect(p.status).toBe(400);
    expect(p.head).toMatch(/Content-Type: application\/problem\+json/i);
    expect(p.body).toMatchObject({ status: 400, type: 'https://lotproof.dev/problems/malformed-request' });
    expect(p.body.detail).toMatch(/Host/);
  });

  it('HTTP/1.0 may leave it out (RFC 9112 asks it of HTTP/1.1 only)', async () => {
    const x = await open();
    x.socket.write('GET /healthz HTTP/1.0\r\n\r\n');
    await x.closed(3000);
    expect(x.received()).toMatch(/^HTTP\/1\.1 200/);
  });
});
