// Big bodies at the door (issue 14, item 12): a limit on rows or on nesting stops the parse when it
// is reached, not after the whole body has been parsed; the CSV reader gives the event loop back
// between slices of the body, so /healthz answers while a big lot is read. Served over real HTTP
// in this process: a blocked event loop shows as a slow /healthz probe. Prints what it measured.
//
// The probes measure the whole machine too: when other processes take the CPU, this one waits,
// idle or not (on a shared two-core test machine an idle /healthz took up to 176 ms). So each
// attempt first probes an idle second, and the bound is on what the scenario adds to the slowest
// idle probe; a scenario that misses it is tried again (three times at most) and the bound holds
// for the best attempt. An event loop that is really blocked (a whole body parsed at once: 30 s
// before issue 14) misses it every time.
import { request as httpRequest } from 'node:http';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { watchHealth, type Health } from '../support/health-probe';
import { buildTestApp, createTestKey, createTestOrganisation, listenOnLoopback, type TestApp } from '../support/app';
import { createProduct } from '../support/lots';

let t: TestApp;
let server: { url: string; close: () => Promise<void> };
let key: string;
let orgId: string;

beforeAll(async () => {
  t = buildTestApp();
  server = await listenOnLoopback(t.app);
  const org = await createTestOrganisation('Big body packer');
  orgId = org.id;
  key = await createTestKey(org.id, ['lots:submit', 'verdicts:read', 'products:write']);
  await createProduct(t.app, key, { sku: 'BIG-OATS-500' });
}, 60_000);
afterAll(async () => {
  await server?.close();
  await t?.close();
});

interface Answer {
  status: number;
  text: string;
  body: any;
  ms: number;
}

function send(method: string, path: string, headers: Record<string, string>, body?: Buffer | string): Promise<Answer> {
  const started = performance.now();
  return new Promise((resolve, reject) => {
    const h: Record<string, string | number> = { ...headers };
    if (body !== undefined) h['Content-Length'] = Buffer.byteLength(body);
    const req = httpRequest(new URL(path, server.url), { method, headers: h, agent: false }, (res) => {
      const parts: Buffer[] = [];
      res.on('data', (d: Buffer) => parts.push(d));
      res.on('end', () => {
        const text = Buffer.concat(parts).toString('utf8');
        let parsed: any = null;
        try {
          parsed = JSON.parse(text);
        } catch {
          /* not JSON */
        }
        resolve({ status: res.statusCode ?? 0, text, body: parsed, ms: performance.now() - started });
      });
    });
    req.on('error', reject);
    if (body !== undefined) req.write(body);
    req.end();
  });
}

const probeHealth = () => watchHealth(() => send('GET', '/healthz', {}));

const fmt = (h: Health) => `/healthz max ${h.maxMs.toFixed(0)} ms over ${h.probes} probes (event loop delay max ${h.loopMaxMs.toFixed(0)} ms)`;

/**
 * Runs `scenario` while /healthz is probed, after an idle second of probes, up to three times
 * until the slowest probe is less than `boundMs` slower than the slowest idle one; returns the
 * attempt that added least (its answer is checked by the caller), with `addedMs`.
 */
async function probed(label: string, boundMs: number, scenario: () => Promise<Answer>): Promise<{ answer: Answer; health: Health; addedMs: number }> {
  let best: { answer: Answer; health: Health; addedMs: number } | null = null;
  for (let attempt = 1; attempt <= 3; attempt++) {
    const quiet = probeHealth();
    await new Promise((r) => setTimeout(r, 1000));
    const idle = await quiet.stop();
    const health = probeHealth();
    const answer = await scenario();
    const h = await health.stop();
    const addedMs = h.maxMs - idle.maxMs;
    console.log(`${label}, attempt ${attempt}: ${answer.status} in ${answer.ms.toFixed(0)} ms; ${fmt(h)}; idle before it: ${fmt(idle)}`);
    if (!best || addedMs < best.addedMs) best = { answer, health: h, addedMs };
    if (addedMs < boundMs) break;
  }
  return best!;
}

const peakRssMb = () => process.resourceUsage().maxRSS / 1024;

async function verdictCount(): Promise<number> {
  const [rows] = await t.ctx.db.sequelize.query('SELECT count(*)::int AS n FROM verdicts WHERE organisation_id = $1', { bind: [orgId] });
  return (rows as { n: number }[])[0]!.n;
}

/** A CSV of `rows` packs, about 29 bytes a row (a pack number, a station, the net weight). */
function bigCsv(rows: number): Buffer {
  const parts: string[] = ['pack,station,net_g\n'];
  for (let i = 1; i <= rows; i++) parts.push(`${i},Line-7/scale-B,${(497 + ((i * 7919) % 1000) / 100).toFixed(2)}\n`);
  return Buffer.from(parts.join(''));
}

const csvQuery = (lotCode: string) =>
  `/v1/lots?sku=BIG-OATS-500&lotCode=${lotCode}&lotSize=5000000&testing=non-destructive&measurementUnit=g&measurementBasis=net&column=net_g`;

describe('item 12: a 1 000 000-row CSV lot', () => {
  // first in the file: the process's peak RSS (a high-water mark) is then this request's
  it('is judged in a few seconds and with little memory', async () => {
    const csv = bigCsv(1_000_000);
    const before = peakRssMb();
    const health = probeHealth();
    const a = await send('POST', csvQuery('L-BIG-CSV'), { Authorization: `Bearer ${key}`, 'Content-Type': 'text/csv' }, csv);
    const h = await health.stop();
    console.log(`1 000 000-row CSV lot (${(csv.length / 2 ** 20).toFixed(1)} MiB): ${a.status} in ${a.ms.toFixed(0)} ms; peak RSS ${before.toFixed(0)} → ${peakRssMb().toFixed(0)} MiB; ${fmt(h)}`);
    expect(a.status, a.text.slice(0, 300)).toBe(201);
    expect(a.body.lot.measurementCount).toBe(1_000_000);
    expect(a.ms).toBeLessThan(10_000);
    expect(peakRssMb() - before).toBeLessThan(300);
    // the same lot as JSON, for comparison (printed only)
    const values = Array.from({ length: 1_000_000 }, (_, i) => 497 + (((i + 1) * 7919) % 1000) / 100);
    const json = JSON.stringify({ sku: 'BIG-OATS-500', lotCode: 'L-BIG-JSON', lotSize: 5_000_000, testing: 'non-destructive', measurementUnit: 'g', measurementBasis: 'net', measurements: values });
    const j = await send('POST', '/v1/lots', { Authorization: `Bearer ${key}`, 'Content-Type': 'application/json' }, json);
    console.log(`the same lot as JSON (${(Buffer.byteLength(json) / 2 ** 20).toFixed(1)} MiB): ${j.status} in ${j.ms.toFixed(0)} ms`);
    expect(j.status).toBe(201);
    expect(j.body.result).toEqual(a.body.result);
  }, 90_000);
});

describe('item 12: limits stop the parse when they are reached', () => {
  it('a CSV of 1 000 001 rows is a 413 at the row limit; /healthz answers within 100 ms meanwhile; nothing is stored', async () => {
    const csv = bigCsv(1_000_001);
    const stored = await verdictCount();
    const { answer, addedMs } = await probed('1 000 001-row CSV', 100, () =>
      send('POST', csvQuery('L-TOO-MANY'), { Authorization: `Bearer ${key}`, 'Content-Type': 'text/csv' }, csv),
    );
    expect(answer.status, answer.text.slice(0, 300)).toBe(413);
    expect(answer.body.detail).toMatch(/1 ?000 ?000/);
    expect(addedMs).toBeLessThan(100);
    expect(await verdictCount()).toBe(stored);
  }, 90_000);

  it('39 MB of nested brackets in a lot is a 400 as soon as it has arrived; /healthz stays under 200 ms', async () => {
    const half = 39 * 2 ** 19;
    const body = Buffer.concat([Buffer.from('{"sku":"BIG-OATS-500","measurements":'), Buffer.alloc(half, '['), Buffer.alloc(half, ']'), Buffer.from('}')]);
    const { answer, addedMs } = await probed('39 MiB of nested brackets', 200, () => send('POST', '/v1/lots', { Authorization: `Bearer ${key}`, 'Content-Type': 'application/json' }, body));
    expect(answer.status, answer.text.slice(0, 300)).toBe(400);
    expect(answer.body.errors[0].detail).toMatch(/nested deeper than 64 levels/);
    expect(answer.body.errors[0].pointer).toMatch(/^\/body\/measurements\/0\/0\//);
    expect(answer.ms).toBeLessThan(2000);
    expect(addedMs).toBeLessThan(200);
  }, 90_000);
});
