// The HTTP foundation: problem details for every client error, health and readiness, request ids.
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildTestApp, createTestKey, createTestOrganisation, type TestApp } from '../support/app';

let t: TestApp;
let key: string;
let submitKey: string;

beforeAll(async () => {
  t = buildTestApp({ bodyLimitBytes: 64 * 1024 });
  const org = await createTestOrganisation();
  key = await createTestKey(org.id, ['verdicts:read']);
  submitKey = await createTestKey(org.id, ['lots:submit']);
});
afterAll(() => t.close());

function expectProblem(res: request.Response, status: number) {
  expect(res.status).toBe(status);
  expect(res.headers['content-type']).toMatch(/^application\/problem\+json/);
  expect(res.body.status).toBe(status);
  expect(res.body.type).toMatch(/^https:\/\/lotproof\.dev\/problems\//);
  expect(typeof res.body.detail).toBe('string');
  expect(res.body.detail.length).toBeGreaterThan(5);
}

describe('health', () => {
  it('answers /healthz and /readyz with 200 while the database is up', async () => {
    expect((await request(t.app).get('/healthz')).body).toEqual({ status: 'ok' });
    const ready = await request(t.app).get('/readyz');
    expect(ready.status).toBe(200);
  });

  it('answers HEAD like GET without a body (RFC 9110 §9.3.2), as load balancers probe', async () => {
    for (const path of ['/healthz', '/readyz']) {
      const res = await request(t.app).head(path);
      expect(res.status, path).toBe(200);
      expect(res.headers['content-type'], path).toMatch(/^application\/json/);
      expect(res.text ?? '', path).toBe('');
    }
    expect((await request(t.app).head('/v1/verdicts').set('Authorization', `Bearer ${key}`)).status).toBe(200);
    expect((await request(t.app).head('/v1/verdicts')).status).toBe(401);
  });

  it('returns a request id, echoing a well-formed incoming one', async () => {
    const res = await request(t.app).get('/healthz').set('X-Request-Id', 'plant-7.req-42');
    expect(res.headers['x-request-id']).toBe('plant-7.req-42');
    const fresh = await request(t.app).get('/healthz').set('X-Request-Id', 'bad id with spaces');
    expect(fresh.headers['x-request-id']).toMatch(/^[0-9a-f-]{36}$/);
  });
});

/** Sends raw bytes to a server of the app (with the process's clientError handler) and returns the raw answer. */
async function rawExchange(bytes: string): Promise<{ status: number; headers: string; body: string }> {
  const { createServer } = await import('node:http');
  const net = await import('node:net');
  const { answerClientErrorsAsProblems } = await import('../../server/http/client-errors');
  const server = createServer(t.app);
  answerClientErrorsAsProblems(server);
  await new Promise<void>((r) => server.listen(0, '127.0.0.1', () => r()));
  const port = (server.address() as import('node:net').AddressInfo).port;
  try {
    const text = await new Promise<string>((resolve, reject) => {
      const s = net.connect(port, '127.0.0.1', () => s.write(bytes));
      let out = '';
      s.on('data', (d) => (out += String(d)));
      s.on('close', () => resolve(out));
      s.on('error', reject);
    });
    const [head = '', body = ''] = text.split('\r\n\r\n');
    return { status: Number(/^HTTP\/1\.1 (\d{3})/.exec(head)?.[1]), headers: head, body };
  } finally {
    server.closeAllConnections();
    await new Promise<void>((r) => server.close(() => r()));
  }
}

describe('requests the HTTP parser refuses are problem details too', () => {
  it.each([
    ['a request line that is not HTTP', 'GARBAGE\r\n\r\n', 400, 'malformed-request'],
    ['headers over 16 KiB', `GET /healthz HTTP/1.1\r\nHost: x\r\nX-Big: ${'a'.repeat(20_000)}\r\n\r\n`, 431, 'headers-too-large'],
    ['a Content-Length that is not a number', 'POST /v1/lots HTTP/1.1\r\nHost: x\r\nContent-Length: abc\r\n\r\n', 400, 'malformed-request'],
    ['a chunk size that is not hexadecimal', 'POST /v1/lots HTTP/1.1\r\nHost: x\r\nTransfer-Encoding: chunked\r\n\r\nZZ\r\n', 400, 'malformed-request'],
  ])('%s', async (_label, bytes, status, type) => {
    const res = await rawExchange(bytes);
    expect(res.status).toBe(status);
    expect(res.headers).toMatch(/\r\nContent-Type: application\/problem\+json\r\n/i);
    const body = JSON.parse(res.body);
    expect(body).toMatchObject({ type: `https://lotproof.dev/problems/${type}`, status });
    expect(body.detail.length).toBeGreaterThan(10);
  });
});

describe('client errors are problem details, never 5xx', () => {
  it('unknown route under /v1 is a 404 problem', async () => {
    const res = await request(t.app).get('/v1/no-such-thing');
    expectProblem(res, 404);
  });

  it('unknown method on a known route is a 405 problem', async () => {
    const res = await request(t.app).delete('/v1/me').set('Authorization', `Bearer ${key}`);
    expectProblem(res, 405);
  });

  it('malformed JSON is a 400 problem that says the body is not valid JSON', async () => {
    const res = await request(t.app).post('/v1/session').set('Content-Type', 'application/json').send('{"email": ');
    expectProblem(res, 400);
    expect(res.body.detail).toMatch(/not valid JSON/);
  });

  it('a body is read only after the caller is known: malformed JSON without a credential is a 401, with one a 400', async () => {
    const bad = '{"measurements": [500.1, ';
    const anonymous = await request(t.app).post('/v1/lots').set('Content-Type', 'application/json').send(bad);
    expectProblem(anonymous, 401);
    const wrongScope = await request(t.app).post('/v1/lots').set('Authorization', `Bearer ${key}`).set('Content-Type', 'application/json').send(bad);
    expectProblem(wrongScope, 403);
    const allowed = await request(t.app).post('/v1/lots').set('Authorization', `Bearer ${submitKey}`).set('Content-Type', 'application/json').send(bad);
    expectProblem(allowed, 400);
    expect(allowed.body.detail).toMatch(/not valid JSON/);
    // An undeclared path or method never has its body read: 404 / 405, not 400.
    expectProblem(await request(t.app).post('/v1/no-such-thing').set('Content-Type', 'application/json').send(bad), 404);
    expectProblem(await request(t.app).post('/v1/me').set('Authorization', `Bearer ${key}`).set('Content-Type', 'application/json').send(bad), 405);
  });

  it('a body of a content type the operation does not take is a 415 problem', async () => {
    const res = await request(t.app)
      .post('/v1/lots')
      .set('Authorization', `Bearer ${submitKey}`)
      .set('Content-Type', 'application/xml')
      .send('<lot><measurement>500.1</measurement></lot>');
    expectProblem(res, 415);
    expect(res.body.detail).toMatch(/application\/xml|media type/i);
  });

  it('an oversized body is a 413 problem naming the limit', async () => {
    const res = await request(t.app)
      .post('/v1/me')
      .set('Content-Type', 'application/json')
      .send(JSON.stringify({ measurements: new Array(20_000).fill(500.25) }));
    expectProblem(res, 413);
    expect(res.body.detail).toMatch(/65536 bytes/);
  });

  it('a missing credential is a 401 problem with a Bearer challenge', async () => {
    const res = await request(t.app).get('/v1/me');
    expectProblem(res, 401);
    expect(res.headers['www-authenticate']).toMatch(/^Bearer/);
  });

  it('a malformed bearer credential is a 401 problem saying so', async () => {
    const res = await request(t.app).get('/v1/me').set('Authorization', 'Bearer not-a-key');
    expectProblem(res, 401);
    expect(res.body.detail).toMatch(/not a Lotproof API key/);
  });

  it('a well-formed key that was never issued is a 401 problem', async () => {
    const forged = 'lpk_AAAAAAAAAAAA_' + 'A'.repeat(43);
    const res = await request(t.app).get('/v1/me').set('Authorization', `Bearer ${forged}`);
    expectProblem(res, 401);
  });

  it('an unknown query parameter is a 400 problem naming it', async () => {
    const res = await request(t.app).get('/v1/me?colour=blue').set('Authorization', `Bearer ${key}`);
    expectProblem(res, 400);
    expect(res.body.detail).toMatch(/colour/);
  });
});

describe('the caller', () => {
  it('GET /v1/me describes the key without revealing its secret', async () => {
    const res = await request(t.app).get('/v1/me').set('Authorization', `Bearer ${key}`);
    expect(res.status).toBe(200);
    expect(res.body.kind).toBe('api-key');
    expect(res.body.scopes).toEqual(['verdicts:read']);
    expect(JSON.stringify(res.body)).not.toContain(key);
  });
});

describe('docs', () => {
  it('serves Swagger UI and its assets locally, and the document at /v1/openapi.json', async () => {
    const page = await request(t.app).get('/docs/');
    expect(page.status).toBe(200);
    expect(page.text).toContain('swagger-ui');
    expect(page.text).not.toMatch(/https?:\/\/(unpkg|cdn)/);
    const css = await request(t.app).get('/docs/swagger-ui.css');
    expect(css.status).toBe(200);
    const doc = await request(t.app).get('/v1/openapi.json');
    expect(doc.body.openapi).toBe('3.1.0');
    expect(doc.body.paths['/v1/me'].get.security).toEqual([
      { apiKey: ['lots:submit', 'verdicts:read', 'products:write', 'audit:read', 'keys:manage'] },
      { session: ['admin', 'quality', 'auditor'] },
    ]);
  });
});

describe('console', () => {
  it('serves the built console at / and for client-side routes', async () => {
    const home = await request(t.app).get('/');
    expect(home.status).toBe(200);
    expect(home.text).toContain('<div id="app"></div>');
    const deep = await request(t.app).get('/verdicts/some-id');
    expect(deep.status).toBe(200);
    expect(deep.text).toContain('<div id="app"></div>');
  });
});
