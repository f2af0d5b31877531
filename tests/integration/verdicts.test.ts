// The verdict API: products, lots in (JSON and CSV), sealed verdicts out, reading, idempotency,
// bad lots as problem details, tenant isolation.
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildTestApp, createTestKey, createTestOrganisation, type TestApp } from '../support/app';
import { createProduct, lotBody, measurements } from '../support/lots';

let t: TestApp;
let key: string;
let orgId: string;
let product: { id: string; sku: string };

beforeAll(async () => {
  t = buildTestApp();
  const org = await createTestOrganisation('Verdict test packer');
  orgId = org.id;
  key = await createTestKey(org.id, ['lots:submit', 'verdicts:read', 'products:write', 'audit:read']);
  product = await createProduct(t.app, key);
});
afterAll(() => t.close());

const auth = () => ({ Authorization: `Bearer ${key}` });

describe('submitting a lot', () => {
  it('returns 201 with a sealed verdict that carries the caution, found again by id and by seal', async () => {
    const res = await request(t.app).post('/v1/lots').set(auth()).send(lotBody(product.sku, 1));
    expect(res.status, JSON.stringify(res.body)).toBe(201);
    const v = res.body;
    expect(v.decision).toBe('conforming');
    expect(v.seal.value).toMatch(/^[0-9a-f]{64}$/);
    expect(v.seal.signatureAlgorithm).toBe('Ed25519');
    expect(v.caution).toMatch(/responsible person/);
    expect(v.caution).toMatch(/competent authority/);
    expect(res.headers.location).toBe(`/v1/verdicts/${v.id}`);

    const byId = await request(t.app).get(`/v1/verdicts/${v.id}`).set(auth());
    expect(byId.status).toBe(200);
    expect(byId.body.seal).toEqual(v.seal);
    expect(byId.body.result).toEqual(v.result);

    const bySeal = await request(t.app).get(`/v1/seals/${v.seal.value}`).set(auth());
    expect(bySeal.status).toBe(200);
    expect(bySeal.body.verdict.id).toBe(v.id);
    expect(bySeal.body.document.record.input.lot.measurements).toEqual(lotBody(product.sku, 1).measurements);
    expect(bySeal.body.document.seal).toBe(v.seal.value);
  });
});
