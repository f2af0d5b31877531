// The door's limits as configuration (issue 14, items 2 and 15): their defaults, their variables,
// the request timeout derived from the body limit, and which operations take the full body limit.
import { describe, expect, it } from 'vitest';
import { loadApiDocument, operationsOf } from '../../openapi/load';
import { ConfigError, loadConfig } from '../../server/config';
import { createHttpServer, requestTimeoutMs } from '../../server/http/http-server';
import { bodyLimitOf, FULL_LIMIT_OPERATIONS } from '../../server/http/request-body';

describe('limits of the HTTP server', () => {
  it('have sensible defaults', () => {
    const c = loadConfig({});
    expect(c.smallBodyLimitBytes).toBe(64 * 1024);
    expect(c.http).toEqual({ headersTimeoutMs: 10_000, minBodyBytesPerSecond: 512 * 1024, keepAliveTimeoutMs: 5_000, maxConnections: 1000 });
    // 10 s of headers, then 40 MiB at 512 KiB/s
    expect(requestTimeoutMs(c.http, c.bodyLimitBytes)).toBe(90_000);
  });

  it('are read from their variables, and a value out of range stops the start', () => {
    const c = loadConfig({
      LOTPROOF_SMALL_BODY_LIMIT_KB: '16',
      LOTPROOF_HEADERS_TIMEOUT_MS: '4000',
      LOTPROOF_MIN_BODY_RATE_KB: '1024',
      LOTPROOF_KEEP_ALIVE_TIMEOUT_MS: '65000',
      LOTPROOF_MAX_CONNECTIONS: '200',
    });
    expect(c.smallBodyLimitBytes).toBe(16 * 1024);
    expect(c.http).toEqual({ headersTimeoutMs: 4000, minBodyBytesPerSecond: 1024 * 1024, keepAliveTimeoutMs: 65_000, maxConnections: 200 });
    for (const [name, value] of [
      ['LOTPROOF_HEADERS_TIMEOUT_MS', '0'],
      ['LOTPROOF_MIN_BODY_RATE_KB', 'fast'],
      ['LOTPROOF_MAX_CONNECTIONS', '-1'],
      ['LOTPROOF_SMALL_BODY_LIMIT_KB', '0'],
    ]) {
      expect(() => loadConfig({ [name!]: value }), name).toThrow(ConfigError);
    }
  });

  it('never let the small body limit exceed the full one', () => {
    expect(loadConfig({ LOTPROOF_BODY_LIMIT_MB: '1', LOTPROOF_SMALL_BODY_LIMIT_KB: '4096' }).smallBodyLimitBytes).toBe(1024 * 1024);
  });

  it('are set on the server it creates', () => {
    const c = loadConfig({ LOTPROOF_HEADERS_TIMEOUT_MS: '2000', LOTPROOF_MAX_CONNECTIONS: '7', LOTPROOF_KEEP_ALIVE_TIMEOUT_MS: '3000' });
    const server = createHttpServer(() => {}, c.http, c.bodyLimitBytes);
    expect(server.headersTimeout).toBe(2000);
    expect(server.requestTimeout).toBe(requestTimeoutMs(c.http, c.bodyLimitBytes));
    expect(server.keepAliveTimeout).toBe(3000);
    expect(server.maxConnections).toBe(7);
    server.close();
  });
});

describe('body limits per operation', () => {
  it('give the full limit to the operations that take lots, and the small one to every other (the anonymous ones among them)', () => {
    const c = loadConfig({});
    const ops = operationsOf(loadApiDocument());
    for (const id of FULL_LIMIT_OPERATIONS) expect(ops.map((o) => o.operationId), `${id} is an operation of the document`).toContain(id);
    for (const op of ops) {
      const limit = bodyLimitOf(op.operationId, c);
      if (FULL_LIMIT_OPERATIONS.has(op.operationId)) expect(limit).toEqual({ bytes: 40 * 2 ** 20, variable: 'LOTPROOF_BODY_LIMIT_MB' });
      else expect(limit, op.operationId).toEqual({ bytes: 64 * 1024, variable: 'LOTPROOF_SMALL_BODY_LIMIT_KB' });
    }
    expect(ops.filter((o) => o.access === 'public' && FULL_LIMIT_OPERATIONS.has(o.operationId))).toEqual([]);
  });
});
