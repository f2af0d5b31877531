// Issue 17, stage 1: the market rulebooks through the API. A product names a rulebook by its id;
// a unit its market does not allow, a quantity outside its scope or a value it cannot use is a 422
// naming the field, and nothing is stored; an unknown id or a parameter the rulebook does not take
// is refused by the schema (400, naming the field; RulebookChoice in openapi/parts/rulebooks.yaml).
// Numbers: ../shared/reference/markets.md (section beside each).
import { randomUUID } from 'node:crypto';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildTestApp, createTestKey, createTestOrganisation, type TestApp } from '../support/app';

let t: TestApp;
let key: string;
let keysOnly: string;
let orgId: string;

beforeAll(async () => {
  t = buildTestApp();
  const org = await createTestOrganisation('Market rulebooks packer (test)');
  orgId = org.id;
  key = await createTestKey(org.id, ['lots:submit', 'verdicts:read', 'products:write']);
  keysOnly = await createTestKey(org.id, ['keys:manage']);
}, 60_000);
afterAll(() => t.close());

const auth = (k = key) => ({ Authorization: `Bearer ${k}` });
const sku = () => `T-MK-${randomUUID().slice(0, 8)}`;
const product = (extra: Record<string, unknown>) => ({ sku: sku(), name: 'Test market product', nominalQuantity: 500, unit: 'g', tareMode: 'none', rulebook: { id: 'eu-76-211' }, ...extra });

function expectProblem(res: request.Response, status: number, pointer: string): void {
  expect(res.status, res.text.slice(0, 400)).toBe(status);
  expect(res.headers['content-type']).toMatch(/^application\/problem\+json/);
  const pointers = ((res.body?.errors ?? []) as { pointer: string }[]).map((e) => e.pointer);
  expect(pointers, res.text.slice(0, 400)).toContain(pointer);
}

async function count(table: 'products' | 'verdicts'): Promise<number> {
  const [rows] = await t.ctx.db.sequelize.query(`SELECT count(*)::int AS n FROM ${table} WHERE organisation_id = $1`, { bind: [orgId] });
  return (rows as { n: number }[])[0]!.n;
}

async function created(extra: Record<string, unknown>): Promise<{ id: string; sku: string }> {
  const res = await request(t.app).post('/v1/products').set(auth()).send(product(extra));
  expect(res.status, res.text.slice(0, 400)).toBe(201);
  return res.body;
}

/** n values around `centre`, a symmetric ramp of half-width 1.5 (no randomness). */
const ramp = (n: number, centre: number) => Array.from({ length: n }, (_, i) => centre + 1.5 * ((2 * i) / (n - 1) - 1));

describe('POST /v1/products with a market rulebook', () => {
  it.each(['uk-2006-659', 'ca-wm-regs', 'au-ntmr-2009', 'nz-wm-regs-1999', 'cn-jjf-1070', 'us-nist-hb133'])('takes %s by its id', async (id) => {
    const p = await created({ rulebook: { id } });
    const got = await request(t.app).get(`/v1/products/${p.id}`).set(auth());
    expect(got.body.rulebook).toEqual({ id });
  });

  it.each([
    ['ca-wm-regs', 'US gal', 1], // Canada declares volume in imperial measure (Sch. II Part VII)
    ['us-nist-hb133', 'imp fl oz', 10], // HB 133: SI or US customary
    ['uk-2006-659', 'oz', 16], // the UK reference test: metric
    ['cn-jjf-1070', 'count', 10],
  ])('%s refuses a declaration in %s: 422 naming /body/unit, nothing stored', async (id, unit, qn) => {
    const before = await count('products');
    const res = await request(t.app).post('/v1/products').set(auth()).send(product({ rulebook: { id }, unit, nominalQuantity: qn }));
    expectProblem(res, 422, '/body/unit');
    expect(await count('products')).toBe(before);
  });

  it.each([
    ['uk-2006-659', 30000], // scope to 25 kg (gov.uk guidance on SI 2006/659; markets.md §1.9)
    ['eu-76-211', 20000], // Directive 76/211/EEC Annex I 2.4: to 10 kg
    ['oiml-r87-2016', 60000], // R 87 table to 50 kg (markets.md §1.2)
  ])('%s refuses %d g, outside its scope: 422 naming /body/nominalQuantity, nothing stored', async (id, qn) => {
    const before = await count('products');
    expectProblem(await request(t.app).post('/v1/products').set(auth()).send(product({ rulebook: { id }, nominalQuantity: qn })), 422, '/body/nominalQuantity');
    expect(await count('products')).toBe(before);
  });

  it('refuses what a rulebook cannot use: a US volume without its MAV, a Canadian count over 100 without the article mass (422, the parameter named)', async () => {
    const before = await count('products');
    expectProblem(await request(t.app).post('/v1/products').set(auth()).send(product({ rulebook: { id: 'us-nist-hb133' }, unit: 'fl oz', nominalQuantity: 16 })), 422, '/body/rulebook/params/mav');
    expectProblem(await request(t.app).post('/v1/products').set(auth()).send(product({ rulebook: { id: 'ca-wm-regs' }, unit: 'count', nominalQuantity: 200 })), 422, '/body/rulebook/params/articleMass');
    expectProblem(await request(t.app).post('/v1/products').set(auth()).send(product({ rulebook: { id: 'us-nist-hb133', params: { category: 'C' } } })), 422, '/body/rulebook/params/category');
    expect(await count('products')).toBe(before);
  });

  it('refuses an unknown rulebook id and a parameter the rulebook does not take by the schema (400 naming the field), nothing stored', async () => {
    const before = await count('products');
    expectProblem(await request(t.app).post('/v1/products').set(auth()).send(product({ rulebook: { id: 'mx-nom-002' } })), 400, '/body/rulebook/id');
    expectProblem(await request(t.app).post('/v1/products').set(auth()).send(product({ rulebook: { id: 'ca-wm-regs', params: { nonDestructivePlan: 'single' } } })), 400, '/body/rulebook/params/nonDestructivePlan');
    expectProblem(await request(t.app).post('/v1/products').set(auth()).send(product({ rulebook: { id: 'cn-jjf-1070', params: { mav: 5 } } })), 400, '/body/rulebook/params/mav');
    expect(await count('products')).toBe(before);
  });

  it('refuses a change to a unit the market does not allow: 422, the product unchanged', async () => {
    const p = await created({ rulebook: { id: 'ca-wm-regs' } });
    expectProblem(await request(t.app).patch(`/v1/products/${p.id}`).set(auth()).send({ unit: 'fl oz', nominalQuantity: 16 }), 422, '/body/unit');
    expect((await request(t.app).get(`/v1/products/${p.id}`).set(auth())).body).toMatchObject({ unit: 'g', nominalQuantity: 500 });
  });
});

describe('POST /v1/lots under a market rulebook', () => {
  it('ca-wm-regs: a lot of 2 000 with one pack short by more than twice the limit is conforming (s. 52(4)(c)), sealed with its clauses', async () => {
    const p = await created({ rulebook: { id: 'ca-wm-regs' } });
    const xs = ramp(32, 503);
    xs[5] = 469; // Qn 500 g: limit of error 15 g (Sch. II Part V); twice it below 470 g
    const res = await request(t.app).post('/v1/lots').set(auth()).send({ productId: p.id, lotCode: `L-${randomUUID().slice(0, 6)}`, lotSize: 2000, testing: 'non-destructive', measurementUnit: 'g', measurements: xs });
    expect(res.status, res.text.slice(0, 400)).toBe(201);
    expect(res.body.decision).toBe('conforming');
    const t2 = res.body.result.criteria.find((c: { id: string }) => c.id === 't2');
    expect(t2).toMatchObject({ observed: 1, limit: 1, passed: true });
    expect(t2.clause).toMatch(/C\.R\.C\. c\. 1605 s\. 52\(4\)\(c\)/);
    expect(res.body.result.rulebook).toMatchObject({ id: 'ca-wm-regs', market: 'Canada' });
  });

  it('uk-2006-659: destructive testing of a lot of 50 is a 422 naming /body/testing; nothing stored', async () => {
    const p = await created({ rulebook: { id: 'uk-2006-659' } });
    const before = await count('verdicts');
    const res = await request(t.app).post('/v1/lots').set(auth()).send({ productId: p.id, lotCode: 'L-UK-50', lotSize: 50, testing: 'destructive', measurementUnit: 'g', measurements: ramp(20, 503) });
    expectProblem(res, 422, '/body/testing');
    expect(await count('verdicts')).toBe(before);
  });

  it('us-nist-hb133: a lot judged with the remembered plan says so in its criteria', async () => {
    const p = await created({ rulebook: { id: 'us-nist-hb133' }, nominalQuantity: 907 });
    const res = await request(t.app).post('/v1/lots').set(auth()).send({ productId: p.id, lotCode: 'L-US-1', lotSize: 100, testing: 'non-destructive', measurementUnit: 'g', measurements: ramp(12, 910) });
    expect(res.status, res.text.slice(0, 400)).toBe(201);
    expect(res.body.result.net.tolerableNegativeError).toBe(31.7); // HB 133 Chapter 2: 907 g → 31.7 g
    expect(res.body.result.criteria.some((c: { fromMemory?: boolean }) => c.fromMemory === true)).toBe(true);
  });
});

describe('GET /v1/rulebooks', () => {
  it('lists each rulebook with its edition, scope, source, verified and from-memory numbers, to any signed-in key', async () => {
    const res = await request(t.app).get('/v1/rulebooks').set(auth(keysOnly));
    expect(res.status).toBe(200);
    const ids = res.body.items.map((r: { id: string }) => r.id);
    expect(ids).toEqual(['eu-76-211', 'oiml-r87-2016', 'uk-2006-659', 'ca-wm-regs', 'au-ntmr-2009', 'nz-wm-regs-1999', 'cn-jjf-1070', 'us-nist-hb133', 'custom']);
    const us = res.body.items.find((r: { id: string }) => r.id === 'us-nist-hb133');
    expect(us).toMatchObject({ market: 'United States', edition: expect.stringMatching(/Handbook 133/), scope: { units: expect.arrayContaining(['oz', 'lb', 'fl oz', 'US gal']) } });
    expect(us.fromMemory.length).toBeGreaterThan(0);
    expect(res.body.items.find((r: { id: string }) => r.id === 'ca-wm-regs').fromMemory).toEqual([]);
    expect((await request(t.app).get('/v1/rulebooks')).status).toBe(401);
  });
});
