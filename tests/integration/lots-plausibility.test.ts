// Issue 16, "Plausibility before sealing": a pack whose net quantity is far outside what the product
// can hold (by default below 0.5 × or above 2 × the nominal quantity, in the product's unit after
// conversion) is refused with a 422 naming the pack, unless the submitter confirms it; the
// confirmation is sealed in the record. The bounds are the product's own when it sets them.
import request from 'supertest';
import { QueryTypes } from 'sequelize';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildTestApp, createTestKey, createTestOrganisation, type TestApp } from '../support/app';
import { createProduct, lotBody, measurements } from '../support/lots';

let t: TestApp;
let key: string;
let orgId: string;
let product: { id: string; sku: string };

beforeAll(async () => {
  t = buildTestApp();
  const org = await createTestOrganisation('Plausibility packer (test)');
  orgId = org.id;
  key = await createTestKey(org.id, ['lots:submit', 'verdicts:read', 'products:write', 'audit:read']);
  product = await createProduct(t.app, key, { sku: 'T-PLAUS-500' });
});
afterAll(() => t.close());

const auth = () => ({ Authorization: `Bearer ${key}` });
const post = (body: object) => request(t.app).post('/v1/lots').set(auth()).send(body);
const verdictCount = async () =>
  (await t.ctx.db.sequelize.query<{ n: number }>('SELECT count(*)::int AS n FROM verdicts WHERE organisation_id = $1', { bind: [orgId], type: QueryTypes.SELECT }))[0]!.n;

function expectImplausible(res: request.Response, pointer: string) {
  expect(res.status, JSON.stringify(res.body)).toBe(422);
  expect(res.headers['content-type']).toMatch(/^application\/problem\+json/);
  expect(res.body.type).toBe('https://lotproof.dev/problems/implausible-measurement');
  expect(res.body.errors.map((e: { pointer: string }) => e.pointer), JSON.stringify(res.body)).toContain(pointer);
}

/** 50 packs around 503 g with one value replaced. */
function withPack(seed: number, index: number, value: number): number[] {
  const values = measurements(seed, 50, 503, 2);
  values[index] = value;
  return values;
}

const csvQuery = (lotCode: string, extra = '') =>
  `/v1/lots?sku=${product.sku}&lotCode=${lotCode}&lotSize=2000&testing=non-destructive&measurementUnit=g&measurementBasis=net&column=net_g${extra}`;
const csvOf = (values: number[]) => `net_g\n${values.join('\n')}\n`;

describe('a pack of 1e12 g in a lot of a 500 g product', () => {
  it('is refused with a 422 naming the pack (JSON), and nothing is stored', async () => {
    const before = await verdictCount();
    const res = await post({ ...lotBody(product.sku, 1), lotCode: 'PL-1', measurements: withPack(1, 17, 1e12) });
    expectImplausible(res, '/body/measurements/17');
    expect(res.body.errors).toHaveLength(1);
    expect(res.body.detail).toMatch(/confirmImplausible/);
    // the band it was held to: 0.5 × and 2 × 500 g (the defaults)
    expect(res.body.plausibility).toMatchObject({ lower: 250, upper: 1000, unit: 'g', minFraction: 0.5, maxFraction: 2 });
    expect(await verdictCount()).toBe(before);
  });

  it('is refused naming its CSV line (header on line 1, pack 17 on line 19)', async () => {
    const res = await request(t.app).post(csvQuery('PL-2')).set(auth()).set('Content-Type', 'text/csv').send(csvOf(withPack(2, 17, 1e12)));
    expectImplausible(res, '/body');
    expect(res.body.errors[0].detail).toMatch(/CSV line 19/);
    expect(res.body.detail).toMatch(/CSV line 19/);
  });

  it('is sealed when the submitter confirms it, with the confirmation in the record (JSON and CSV)', async () => {
    const res = await post({ ...lotBody(product.sku, 3), lotCode: 'PL-3', measurements: withPack(3, 17, 1e12), confirmImplausible: true });
    expect(res.status, JSON.stringify(res.body)).toBe(201);
    const sealed = await request(t.app).get(`/v1/seals/${res.body.seal.value}`).set(auth());
    expect(sealed.body.document.record.plausibility).toEqual({
      minFraction: 0.5,
      maxFraction: 2,
      lower: 250,
      upper: 1000,
      unit: 'g',
      implausiblePacks: [17],
      implausibleCount: 1,
      confirmed: true,
    });
    const csv = await request(t.app).post(csvQuery('PL-4', '&confirmImplausible=true')).set(auth()).set('Content-Type', 'text/csv').send(csvOf(withPack(4, 17, 1e12)));
    expect(csv.status, JSON.stringify(csv.body)).toBe(201);
  });

  it('records an ordinary lot as checked, with nothing to confirm', async () => {
    const res = await post({ ...lotBody(product.sku, 5), lotCode: 'PL-5' });
    expect(res.status).toBe(201);
    const sealed = await request(t.app).get(`/v1/seals/${res.body.seal.value}`).set(auth());
    expect(sealed.body.document.record.plausibility).toMatchObject({ implausiblePacks: [], implausibleCount: 0, confirmed: false });
  });
});

describe('the band', () => {
  it('is checked on the net quantity in the product\'s unit: kg measurements converted, tare taken off, low packs too', async () => {
    // 1 kg = 1000 g (units.ts, SI): 1.2 kg is 1200 g, above 2 × 500 g
    const kg = measurements(11, 50, 503, 2).map((g) => g / 1000);
    expect((await post({ ...lotBody(product.sku, 11), lotCode: 'PL-11', measurementUnit: 'kg', measurements: kg })).status).toBe(201);
    kg[3] = 1.2;
    expectImplausible(await post({ ...lotBody(product.sku, 12), lotCode: 'PL-12', measurementUnit: 'kg', measurements: kg }), '/body/measurements/3');
    // 240 g is below 0.5 × 500 g
    expectImplausible(await post({ ...lotBody(product.sku, 13), lotCode: 'PL-13', measurements: withPack(13, 0, 240) }), '/body/measurements/0');
    // gross 1010 g with a fixed tare of 20 g is 990 g net: inside the band, though the gross value is not
    const tared = await createProduct(t.app, key, { sku: 'T-PLAUS-TARE', tareMode: 'fixed', fixedTare: 20, tareUnit: 'g' });
    const gross = measurements(14, 50, 523, 2);
    gross[5] = 1010;
    expect((await post({ ...lotBody(tared.sku, 14), lotCode: 'PL-14', measurementBasis: 'gross', measurements: gross })).status).toBe(201);
  });

  it('is the product\'s own when it sets one, shown on the product, and checked when set', async () => {
    const tight = await createProduct(t.app, key, { sku: 'T-PLAUS-TIGHT', plausibility: { minFraction: 0.9, maxFraction: 1.1 } });
    expect((tight as unknown as { plausibility: unknown }).plausibility).toEqual({ minFraction: 0.9, maxFraction: 1.1 });
    // 560 g: inside the default band, above 1.1 × 500 g = 550 g
    expectImplausible(await post({ ...lotBody(tight.sku, 21), lotCode: 'PL-21', measurements: withPack(21, 9, 560) }), '/body/measurements/9');
    expect((await post({ ...lotBody(product.sku, 22), lotCode: 'PL-22', measurements: withPack(22, 9, 560) })).status).toBe(201);

    const plain = await request(t.app).get(`/v1/products/${product.id}`).set(auth());
    expect(plain.body.plausibility).toEqual({ minFraction: 0.5, maxFraction: 2 });

    const bad = await request(t.app).post('/v1/products').set(auth()).send({ sku: 'T-PLAUS-BAD', name: 'x', nominalQuantity: 500, unit: 'g', tareMode: 'none', rulebook: { id: 'eu-76-211' }, plausibility: { minFraction: 1.5, maxFraction: 1.2 } });
    expect(bad.status, JSON.stringify(bad.body)).toBeGreaterThanOrEqual(400);
    expect(bad.status).toBeLessThan(500);
    expect(bad.body.errors.map((e: { pointer: string }) => e.pointer)).toContain('/body/plausibility/maxFraction');

    const patched = await request(t.app).patch(`/v1/products/${tight.id}`).set(auth()).send({ plausibility: null });
    expect(patched.status, JSON.stringify(patched.body)).toBe(200);
    expect(patched.body.plausibility).toEqual({ minFraction: 0.5, maxFraction: 2 });
    expect((await post({ ...lotBody(tight.sku, 23), lotCode: 'PL-23', measurements: withPack(23, 9, 560) })).status).toBe(201);
  });

  it('holds a second sample\'s packs too', async () => {
    // Directive 76/211/EEC Annex II 2.2.1, lot 100–500: first sample 30, 2 defectives → second sample.
    const first = await post({ ...lotBody(product.sku, 31), lotCode: 'PL-31', lotSize: 400, measurements: [...measurements(31, 28, 504, 1.5), 480, 481] });
    expect(first.body.decision).toBe('second-sample-required');
    const second = measurements(32, 30, 504, 1.5);
    second[4] = 5000;
    expectImplausible(await post({ firstSampleVerdictId: first.body.id, measurementUnit: 'g', measurements: second }), '/body/measurements/4');
  });
});
