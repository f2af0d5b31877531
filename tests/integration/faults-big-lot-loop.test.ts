// A big lot must not hold up the server (issue 14, "heavy work"): while a lot of 1 000 000
// measurements — as a 6.6 MiB JSON body, or as a 1 000 000-row CSV — is parsed, checked, judged,
// canonicalised and sealed, /healthz keeps answering within 100 ms of what it takes idle. And the
// verdict is the one the main thread would give: the test judges the stored input itself with the
// engine, in this process, and checks the stored record's bytes against the reference RFC 8785
// implementation (the `canonicalize` package) and its seal against SHA-256 of those bytes.
//
// Served over real HTTP in this process: a blocked event loop shows as a slow /healthz probe. The
// machine is shared and noisy, so each attempt first probes an idle second and the bound is on what
// the lot adds to the slowest idle probe; a lot that misses it is sent again (three times at most).
// A lot judged on the event loop (several hundred ms of parse, engine and canonical JSON) misses
// it every time. Prints what it measured.
import { createHash } from 'node:crypto';
import { request as httpRequest } from 'node:http';
import canonicalize from 'canonicalize';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { evaluateLot, type LotInput } from '../../shared/engine';
import { watchHealth, type Health } from '../support/health-probe';
import { buildTestApp, createTestKey, createTestOrganisation, listenOnLoopback, type TestApp } from '../support/app';
import { createProduct } from '../support/lots';

let t: TestApp;
let server: { url: string; close: () => Promise<void> };
let key: string;

const ROWS = 1_000_000;
const SKU = 'LOOP-OATS-500';

beforeAll(async () => {
  t = buildTestApp();
  server = await listenOnLoopback(t.app);
  const org = await createTestOrganisation('Big lot loop packer');
  key = await createTestKey(org.id, ['lots:submit', 'verdicts:read', 'products:write']);
  await createProduct(t.app, key, { sku: SKU });
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

/** As faults-door-bodies.test.ts: an idle second of probes, then the scenario, up to three times until it adds less than `boundMs`. */
async function probed(label: string, boundMs: number, scenario: (attempt: number) => Promise<Answer>): Promise<{ answer: Answer; health: Health; addedMs: number }> {
  let best: { answer: Answer; health: Health; addedMs: number } | null = null;
  for (let attempt = 1; attempt <= 3; attempt++) {
    const quiet = probeHealth();
    await new Promise((r) => setTimeout(r, 1000));
    const idle = await quiet.stop();
    const health = probeHealth();
    const answer = await scenario(attempt);
    const h = await health.stop();
    const addedMs = h.maxMs - idle.maxMs;
    console.log(`${label}, attempt ${attempt}: ${answer.status} in ${answer.ms.toFixed(0)} ms; ${fmt(h)}; idle before it: ${fmt(idle)}; added ${addedMs.toFixed(0)} ms`);
    if (answer.status !== 201) return { answer, health: h, addedMs };
    if (!best || addedMs < best.addedMs) best = { answer, health: h, addedMs };
    if (addedMs < boundMs) break;
  }
  return best!;
}

/**
 * The values of the lot, as the CSV writes them (two decimals) and as JSON carries them (those
 * texts read as numbers). The bodies are built once, before any probing, and held as Buffers: this
 * process is the server too, and a million live strings here would slow its garbage collection.
 */
const valueText = (i: number) => (497 + (((i + 1) * 7919) % 1000) / 100).toFixed(2);
const values = Array.from({ length: ROWS }, (_, i) => Number(valueText(i)));

function csvBody(): Buffer {
  const blocks: Buffer[] = [Buffer.from('pack,station,net_g\n')];
  for (let from = 0; from < ROWS; from += 10_000) {
    blocks.push(Buffer.from(Array.from({ length: Math.min(10_000, ROWS - from) }, (_, k) => `${from + k + 1},Line-7/scale-B,${valueText(from + k)}\n`).join('')));
  }
  return Buffer.concat(blocks);
}
const jsonBody = () =>
  Buffer.from(JSON.stringify({ sku: SKU, lotCode: 'L-LOOP-JSON-1', lotSize: 5_000_000, testing: 'non-destructive', measurementUnit: 'g', measurementBasis: 'net', measurements: values }));
// a lot is judged once (issue 16): each attempt of a probe sends its own lot code, "…-<attempt>"
const csvPath = (attempt: number) => `/v1/lots?sku=${SKU}&lotCode=L-LOOP-CSV-${attempt}&lotSize=5000000&testing=non-destructive&measurementUnit=g&measurementBasis=net&column=net_g`;

/**
 * The stored record of a verdict, checked against the outside world: its bytes are the RFC 8785
 * canonical form of themselves (the reference package), its seal is their SHA-256 (FIPS 180-4,
 * node:crypto), its input holds the lot's values, and its result is what the engine gives for that
 * input when run here, on this test's main thread.
 */
async function checkRecord(answer: Answer): Promise<void> {
  const [rows] = await t.ctx.db.sequelize.query('SELECT record, seal FROM verdicts WHERE id = $1', { bind: [answer.body.id] });
  const { record, seal } = (rows as { record: string; seal: string }[])[0]!;
  expect(createHash('sha256').update(record).digest('hex')).toBe(seal);
  const parsed = JSON.parse(record) as { input: LotInput; result: unknown };
  expect(canonicalize(parsed) === record, 'the stored record is its own RFC 8785 canonical form').toBe(true);
  expect(parsed.input.lot.measurements.length).toBe(ROWS);
  expect(parsed.input.lot.measurements.every((v, i) => v === values[i]), 'the measurements as sent').toBe(true);
  const judgedHere = evaluateLot(parsed.input);
  if (!judgedHere.ok) throw new Error(judgedHere.error.message);
  expect(canonicalize(parsed.result)).toBe(canonicalize(judgedHere.verdict));
  expect(canonicalize(answer.body.result)).toBe(canonicalize(judgedHere.verdict));
}

describe('a 1 000 000-measurement lot leaves /healthz answering within 100 ms', () => {
  // the answers, checked after both lots were sent (the checks' garbage would otherwise be collected while the next lot is probed)
  let jsonAnswer: Answer | undefined;
  let csvAnswer: Answer | undefined;

  it('as JSON (6.6 MiB): 201, /healthz at most 100 ms over idle', async () => {
    const json = jsonBody();
    const digit = json.indexOf('L-LOOP-JSON-1') + 'L-LOOP-JSON-'.length;
    const { answer, addedMs, health } = await probed(`${ROWS} measurements as JSON (${(json.length / 2 ** 20).toFixed(1)} MiB)`, 100, (attempt) => {
      json[digit] = 0x30 + attempt; // the lot code's last digit, in place: no second copy of the body
      return send('POST', '/v1/lots', { Authorization: `Bearer ${key}`, 'Content-Type': 'application/json' }, json);
    });
    expect(answer.status, answer.text.slice(0, 300)).toBe(201);
    expect(answer.body.lot.measurementCount).toBe(ROWS);
    jsonAnswer = answer;
    console.log(`JSON lot: best attempt added ${addedMs.toFixed(0)} ms; ${fmt(health)}`);
    expect(addedMs).toBeLessThan(100);
  }, 180_000);

  it('as a 1 000 000-row CSV (27.6 MiB): 201, /healthz at most 100 ms over idle', async () => {
    const csv = csvBody();
    const { answer, addedMs, health } = await probed(`${ROWS}-row CSV (${(csv.length / 2 ** 20).toFixed(1)} MiB)`, 100, (attempt) =>
      send('POST', csvPath(attempt), { Authorization: `Bearer ${key}`, 'Content-Type': 'text/csv' }, csv),
    );
    expect(answer.status, answer.text.slice(0, 300)).toBe(201);
    expect(answer.body.lot.measurementCount).toBe(ROWS);
    csvAnswer = answer;
    console.log(`CSV lot: best attempt added ${addedMs.toFixed(0)} ms; ${fmt(health)}`);
    expect(addedMs).toBeLessThan(100);
  }, 240_000);

  it('both verdicts are the main thread\'s: the records are canonical, sealed, hold the lot as sent, and judge as the engine judges here; JSON and CSV agree', async () => {
    expect(jsonAnswer && csvAnswer, 'both lots were accepted').toBeTruthy();
    await checkRecord(jsonAnswer!);
    await checkRecord(csvAnswer!);
    expect(canonicalize(csvAnswer!.body.result)).toBe(canonicalize(jsonAnswer!.body.result));
  }, 120_000);

});

describe('a big JSON lot is held to every rule of the schema, with the same problems as a small one', () => {
  // 40 000 measurements (about 290 KiB) go to the aside thread; 50 stay on the main thread. Each
  // fault is put in both, and the big lot's problem must be the small one's, at its own index.
  const lot = (n: number, change: (body: Record<string, any>) => void) => {
    const body: Record<string, any> = { sku: SKU, lotCode: 'L-RULES', lotSize: 5_000_000, testing: 'non-destructive', measurementUnit: 'g', measurementBasis: 'net', measurements: values.slice(0, n) };
    change(body);
    return JSON.stringify(body);
  };
  const post = (body: string) => send('POST', '/v1/lots', { Authorization: `Bearer ${key}`, 'Content-Type': 'application/json' }, body);
  const faults: [string, (b: Record<string, any>, at: number) => void][] = [
    ['a negative measurement', (b, at) => (b.measurements[at] = -1)],
    ['a measurement above 1e12', (b, at) => (b.measurements[at] = 2e12)],
    ['a measurement as a string', (b, at) => (b.measurements[at] = '497.5')],
    ['a null measurement', (b, at) => (b.measurements[at] = null)],
    ['a tare out of range', (b, at) => (b.tares = b.measurements.map((_: number, i: number) => (i === at ? -0.5 : 12)))],
    ['tareSample not an array', (b) => (b.tareSample = 12)],
    ['a field the schema does not know', (b) => (b.colour = 'red')],
    ['a lotSize of 0', (b) => (b.lotSize = 0)],
  ];
  for (const [what, change] of faults) {
    it(`${what}`, async () => {
      const small = await post(lot(50, (b) => change(b, 17)));
      const big = await post(lot(40_000, (b) => change(b, 31_234)));
      expect(Buffer.byteLength(lot(40_000, (b) => change(b, 31_234)))).toBeGreaterThan(256 * 1024);
      expect(small.status, small.text.slice(0, 300)).toBe(400);
      expect(big.status, big.text.slice(0, 300)).toBe(400);
      const at = (text: string) => text.replaceAll('31234', 'N').replaceAll('/17', '/N').replaceAll('[17]', '[N]');
      expect(at(JSON.stringify(big.body.errors))).toBe(at(JSON.stringify(small.body.errors)));
      expect(at(big.body.detail ?? '')).toBe(at(small.body.detail ?? ''));
    }, 30_000);
  }

  it('a big lot that keeps every rule is judged like the same values sent as a small one would be', async () => {
    const big = await post(lot(40_000, () => {}));
    expect(big.status, big.text.slice(0, 300)).toBe(201);
    const judgedHere = evaluateLot({ product: big.body.product.spec, lot: { lotSize: 5_000_000, testing: 'non-destructive', measurementUnit: 'g', measurementBasis: 'net', measurements: values.slice(0, 40_000) } } as LotInput);
    if (!judgedHere.ok) throw new Error(judgedHere.error.message);
    expect(canonicalize(big.body.result)).toBe(canonicalize(judgedHere.verdict));
  }, 30_000);
});
