// The demo packer's lots: seeded from a fixed generator, mostly conforming, some nonconforming,
// one waiting for a second sample, all sealed in an intact chain; seeding twice adds nothing.
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import request from 'supertest';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import '../../server/demo/lots';
import { seedDemo } from '../../server/demo/seed';
import { buildTestApp, type TestApp } from '../support/app';

let t: TestApp;
const dataDir = mkdtempSync(join(tmpdir(), 'lotproof-demo-'));
beforeAll(() => {
  t = buildTestApp({ dataDir });
});
afterAll(async () => {
  await t.close();
  rmSync(dataDir, { recursive: true, force: true });
});

describe('demo lots', () => {
  it('seeds the invented packer with sealed lots of every kind, once', async () => {
    const first = await seedDemo(t.ctx);
    expect(first.banner).toMatch(/demo lots: /);
    const again = await seedDemo(t.ctx);
    const auth = { Authorization: `Bearer ${again.credentials.apiKey}` };
    const list = await request(t.app).get('/v1/verdicts?limit=200').set(auth);
    const decisions = list.body.items.map((v: { decision: string }) => v.decision);
    expect(decisions.length).toBe(36);
    const count = (d: string) => decisions.filter((x: string) => x === d).length;
    expect(count('conforming')).toBeGreaterThan(25);
    expect(count('nonconforming')).toBeGreaterThanOrEqual(2);
    expect(count('second-sample-required')).toBe(1);
    expect(list.body.items.every((v: { product: { name: string } }) => /\(demo\)/.test(v.product.name))).toBe(true);
    const products = await request(t.app).get('/v1/products').set(auth);
    expect(products.body.items.map((p: { sku: string }) => p.sku).sort()).toEqual(['DEMO-APPLE-1L', 'DEMO-HONEY-340G', 'DEMO-OATS-500G']);
    const lines = new Set(list.body.items.map((v: { lot: { line: string } }) => v.lot.line));
    expect(lines.size).toBe(3);
    const chain = await request(t.app).get('/v1/ledger/verify').set(auth);
    expect(chain.body).toMatchObject({ intact: true, verdictsChecked: 36 });
  }, 60_000);
});
