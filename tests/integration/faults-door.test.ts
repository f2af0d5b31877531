// The door (issue 14, items 2, 11 and 16): what an anonymous or small request can make the server
// do before any rule runs. A compressed body is refused before it is inflated; anonymous and
// identity operations take small bodies only; JSON nesting and UTF-8 are checked on the raw bytes
// before JSON.parse; the API's paths are matched with their case. Served over real HTTP, so that
// /healthz is probed while a hostile request is in flight (the app runs in this process: a blocked
// event loop shows as a slow probe).
import { gzipSync, brotliCompressSync, constants as zlibConstants } from 'node:zlib';
import { request as httpRequest } from 'node:http';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { watchHealth } from '../support/health-probe';
import { buildTestApp, createTestKey, createTestOrganisation, listenOnLoopback, type TestApp } from '../support/app';
import { createProduct, lotBody } from '../support/lots';
import { apiOperations, exampleBody } from '../support/operations';

let t: TestApp;
let server: { url: string; close: () => Promise<void> };
let key: string;
let orgId: string;
let product: { id: string; sku: string };

beforeAll(async () => {
  t = buildTestApp();
  server = await listenOnLoopback(t.app);
  const org = await createTestOrganisation('Door test packer');
  orgId = org.id;
  key = await createTestKey(org.id, ['lots:submit', 'verdicts:read', 'products:write', 'audit:read']);
  product = await createProduct(t.app, key, { sku: 'DOOR-OATS-500' });
}, 60_000);
afterAll(async () => {
  await server?.close();
  await t?.close();
});

interface Answer {
  status: number;
  headers: Record<string, string | string[] | undefined>;
  text: string;
  body: any;
  ms: number;
}

/** One request over real HTTP; a body given as chunks is sent chunked (no Content-Length). */
function send(method: string, path: string, opts: { headers?: Record<string, string>; body?: Buffer | string; chunks?: Buffer[] } = {}): Promise<Answer> {
  const started = performance.now();
  return new Promise((resolve, reject) => {
    const url = new URL(path, server.url);
    const headers: Record<string, string | number> = { ...opts.headers };
    if (opts.body !== undefined) headers['Content-Length'] = Buffer.byteLength(opts.body);
    const req = httpRequest(url, { method, headers, agent: false }, (res) => {
      const parts: Buffer[] = [];
      res.on('data', (d: Buffer) => parts.push(d));
      res.on('end', () => {
        const text = Buffer.concat(parts).toString('utf8');
        let body: any = null;
        try {
          body = JSON.parse(text);
        } catch {
          /* not JSON */
        }
        resolve({ status: res.statusCode ?? 0, headers: res.headers, text, body, ms: performance.now() - started });
      });
    });
    // the server may answer (and close) before the whole body is written: that is an answer too
    req.on('error', reject);
    if (opts.chunks) for (const c of opts.chunks) req.write(c);
    else if (opts.body !== undefined) req.write(opts.body);
    req.end();
  });
}

const probeHealth = () => watchHealth(() => send('GET', '/healthz'));

function expectProblem(a: Answer, status: number): void {
  expect(a.status, a.text.slice(0, 300)).toBe(status);
  expect(a.headers['content-type']).toMatch(/^application\/problem\+json/);
  expect(a.body?.status).toBe(status);
}

async function verdictCount(): Promise<number> {
  const [rows] = await t.ctx.db.sequelize.query('SELECT count(*)::int AS n FROM verdicts WHERE organisation_id = $1', { bind: [orgId] });
  return (rows as { n: number }[])[0]!.n;
}

const anonymousWithBody = apiOperations.filter((op) => op.access === 'public' && op.definition.requestBody);

describe('item 2: a compressed bomb at an anonymous operation', () => {
  // 39 MiB of balanced brackets (just under the 40 MiB body limit, which counted inflated bytes)
  const half = 39 * 2 ** 19;
  const inflated = Buffer.concat([Buffer.alloc(half, '['), Buffer.alloc(half, ']')]);
  const bombs = {
    br: brotliCompressSync(inflated, { params: { [zlibConstants.BROTLI_PARAM_QUALITY]: 9 } }),
    gzip: gzipSync(inflated, { level: 9 }),
  };

  it('there are anonymous operations that take a body (the sweep below is not empty)', () => {
    expect(anonymousWithBody.map((op) => op.operationId)).toEqual(expect.arrayContaining(['signIn', 'requestPasswordReset']));
  });

  it.each(anonymousWithBody.flatMap((op) => (['br', 'gzip'] as const).map((enc) => [op.operationId, enc, op] as const)))(
    '%s with Content-Encoding: %s is a 415 problem in under 1 s; /healthz stays under 200 ms and memory flat',
    async (_id, enc, op) => {
      const before = process.resourceUsage().maxRSS / 1024;
      const health = probeHealth();
      await new Promise((r) => setTimeout(r, 30));
      const a = await send(op.method.toUpperCase(), op.path, { headers: { 'Content-Type': 'application/json', 'Content-Encoding': enc }, body: bombs[enc] });
      const h = await health.stop();
      console.log(`bomb ${op.operationId} ${enc} (${bombs[enc].length} bytes → ${inflated.length}): ${a.status} in ${a.ms.toFixed(0)} ms; /healthz max ${h.maxMs.toFixed(0)} ms over ${h.probes} probes; peak RSS ${before.toFixed(0)} → ${h.peakRssMb.toFixed(0)} MiB`);
      expectProblem(a, 415);
      expect(a.body.detail).toMatch(/Content-Encoding/);
      expect(a.ms).toBeLessThan(1000);
      expect(h.maxMs).toBeLessThan(200);
      expect(h.peakRssMb - before).toBeLessThan(64);
    },
    60_000,
  );

  it('an authenticated operation takes no compressed body either, and says which header to drop', async () => {
    const a = await send('POST', '/v1/lots', { headers: { Authorization: `Bearer ${key}`, 'Content-Type': 'application/json', 'Content-Encoding': 'gzip' }, body: gzipSync(JSON.stringify(lotBody(product.sku, 1))) });
    expectProblem(a, 415);
    expect(a.body.detail).toMatch(/Content-Encoding/);
    // "identity" is no encoding at all
    const plain = await send('POST', '/v1/lots', { headers: { Authorization: `Bearer ${key}`, 'Content-Type': 'application/json', 'Content-Encoding': 'identity' }, body: JSON.stringify(lotBody(product.sku, 2)) });
    expect(plain.status, plain.text).toBe(201);
  });
});

describe('item 2: small bodies for anonymous and identity operations', () => {
  const bigSignIn = JSON.stringify({ email: 'someone@packer.example', password: 'x'.repeat(100 * 1024) });

  it('POST /v1/session with 100 KiB is a 413 naming the 64 KiB limit, declared or chunked', async () => {
    const declared = await send('POST', '/v1/session', { headers: { 'Content-Type': 'application/json' }, body: bigSignIn });
    expectProblem(declared, 413);
    expect(declared.body.detail).toMatch(/65536 bytes/);
    const chunked = await send('POST', '/v1/session', { headers: { 'Content-Type': 'application/json' }, chunks: [Buffer.from(bigSignIn.slice(0, 50_000)), Buffer.from(bigSignIn.slice(50_000))] });
    expectProblem(chunked, 413);
    expect(chunked.body.detail).toMatch(/65536 bytes/);
  });

  it('every operation but submitLot and verifySeal has the small limit; those two keep the full one', async () => {
    const invite = await send('POST', '/v1/password-resets', { headers: { 'Content-Type': 'application/json' }, body: JSON.stringify({ email: `${'a'.repeat(70_000)}@packer.example` }) });
    expectProblem(invite, 413);
    const product2 = await send('POST', '/v1/products', { headers: { Authorization: `Bearer ${key}`, 'Content-Type': 'application/json' }, body: JSON.stringify({ sku: 'BIG', name: 'n'.repeat(70_000) }) });
    expectProblem(product2, 413);
    // a lot of 20 000 measurements is about 160 KB: far above the small limit, well within the full one
    const big = await send('POST', '/v1/lots', { headers: { Authorization: `Bearer ${key}`, 'Content-Type': 'application/json' }, body: JSON.stringify({ ...lotBody(product.sku, 3), lotSize: 100_000, measurements: Array.from({ length: 20_000 }, (_, i) => 500 + (i % 97) / 10) }) });
    expect(big.status, big.text.slice(0, 300)).toBe(201);
  });
});

describe('item 16: invalid UTF-8 in a JSON body is refused, not sealed as U+FFFD', () => {
  /** The JSON text of `body` with the bytes of `marker` replaced by `bytes`. */
  const withBytes = (body: object, marker: string, bytes: number[]) => {
    const text = Buffer.from(JSON.stringify(body));
    const at = text.indexOf(marker);
    return Buffer.concat([text.subarray(0, at), Buffer.from(bytes), text.subarray(at + marker.length)]);
  };

  it('a lot whose lotCode holds a byte that is not UTF-8 is a 400 naming /body; nothing is stored', async () => {
    const before = await verdictCount();
    for (const bytes of [[0xff], [0xc3], [0xed, 0xa0, 0x80] /* an encoded surrogate */, [0xc0, 0xaf] /* overlong "/" */]) {
      const a = await send('POST', '/v1/lots', {
        headers: { Authorization: `Bearer ${key}`, 'Content-Type': 'application/json' },
        body: withBytes(lotBody(product.sku, 4, { lotCode: 'L-@@' }), '@@', bytes),
      });
      expectProblem(a, 400);
      expect(a.body.errors?.[0]?.pointer, a.text).toBe('/body');
      expect(a.body.detail).toMatch(/UTF-8/);
    }
    expect(await verdictCount()).toBe(before);
  });

  it('an anonymous sign-in with a broken byte is refused the same way', async () => {
    const a = await send('POST', '/v1/session', { headers: { 'Content-Type': 'application/json' }, body: withBytes({ email: 'x@@@packer.example', password: 'p' }, '@@', [0xfe]) });
    expectProblem(a, 400);
    expect(a.body.errors?.[0]?.pointer).toBe('/body');
  });

  it('well-formed UTF-8 (two, three and four bytes) is sealed as sent', async () => {
    const lotCode = 'L-Ærø-麦-\u{1F33E}';
    const a = await send('POST', '/v1/lots', { headers: { Authorization: `Bearer ${key}`, 'Content-Type': 'application/json' }, body: JSON.stringify(lotBody(product.sku, 5, { lotCode })) });
    expect(a.status, a.text.slice(0, 300)).toBe(201);
    expect(a.body.lot.lotCode).toBe(lotCode);
  });
});

describe('item 11: the API is routed with its case (and strictly)', () => {
  it('POST /V1/session with a bad body is a 404 problem, never reaching the handler', async () => {
    const a = await send('POST', '/V1/session', { headers: { 'Content-Type': 'application/json' }, body: '{"email": 17}' });
    expectProblem(a, 404);
  });

  it('other spellings of a path are 404 problems too', async () => {
    for (const [method, path] of [
      ['GET', '/V1/me'],
      ['GET', '/v1/ME'],
      ['POST', '/v1/Lots'],
      ['GET', '/HEALTHZ'],
      ['GET', '/v1/rulebooks/'],
    ] as const) {
      const a = await send(method, path, { headers: { Authorization: `Bearer ${key}` } });
      expect(a.status, `${method} ${path}: ${a.text.slice(0, 200)}`).toBe(404);
      expect(a.headers['content-type'], `${method} ${path}`).toMatch(/^application\/problem\+json/);
    }
    expect((await send('GET', '/v1/rulebooks', { headers: { Authorization: `Bearer ${key}` } })).status).toBe(200);
  });
});
